// defines: the second stage of the base recipe (`npm run build:base:span`) — the span stage:
// the masked-LM base and a fresh span head fine-tuned on extractive questions made
// mechanically from WordNet (lexicon-qa.ts), so the shipped base already reads a passage
// about one thing and marks the part a question asks for. Uses the project's own
// fine-tuning run (src/train/finetune.ts) with checkpoints on disk, so an interrupted
// stage resumes where it stopped.
//
//   npm run build:base:span -- [--from DIR] [--out DIR] [--questions N] [--lr X] [--seed N]
//
//   1. load      the masked-LM base folder written by build-base.ts
//   2. questions from the training entries; a held-out set from the held-out entries
//   3. train     one pass, windows of 128 tokens, checkpoints under runs/base-build/span/
//   4. write     the folder: config.json, fp16 model.safetensors with the span head,
//                vocab.txt, pretraining.json, span-pretraining.json, MODEL_CARD.md
//                (rendered again from pretraining.json's facts, with this stage)
//
// Measured (DEVELOPERS.md, facts): from the L2-H128 masked-LM base, a stage like this made
// fine-tuning on the factbook and demo questions a little faster to learn; a cloze stage
// (Glass et al. 2020) and word-lookup stages were not learnt in the time they were given.
import { copyFileSync, existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { FsCheckpointStore } from '../../src/node/fs-store.js';
import { loadReader, startEngine } from '../../src/node/model-dir.js';
import { hashDataset } from '../../src/data/hash.js';
import { evaluateRecords } from '../../src/eval/evaluate.js';
import { namedToSafetensors } from '../../src/io/safetensors.js';
import { configToHf } from '../../src/model/config.js';
import { trainConfig } from '../../src/train/config.js';
import { fineTune, type RunMeta } from '../../src/train/finetune.js';
import { renderBaseCard, type CardFacts, type SpanStageFacts } from './card.js';
import { isHeldOut, lexiconQuestions, readLexicon } from './lexicon-qa.js';

const args = new Map<string, string>();
for (let i = 2; i < process.argv.length; i += 2) {
  const flag = process.argv[i]!;
  const known = ['--from', '--out', '--questions', '--lr', '--seed', '--work'];
  if (!known.includes(flag)) throw new Error(`unknown flag ${flag} (known: ${known.join(', ')})`);
  if (process.argv[i + 1] === undefined) throw new Error(`${flag} needs a value`);
  args.set(flag.slice(2), process.argv[i + 1]!);
}
const from = args.get('from') ?? 'tiny-models/base';
const out = args.get('out') ?? 'tiny-models/base';
const questions = Number(args.get('questions') ?? 32000);
const lr = Number(args.get('lr') ?? 1e-3);
const seed = Number(args.get('seed') ?? 2024);
const work = args.get('work') ?? 'runs/base-build/span';
const log = (line: string) => process.stdout.write(`${new Date().toISOString().slice(0, 19)}Z ${line}\n`);
for (const [name, v] of [
  ['questions', questions],
  ['lr', lr],
  ['seed', seed],
] as const) {
  if (!Number.isFinite(v) || v <= 0) throw new Error(`--${name}: expected a positive number, got "${args.get(name)}"`);
}

await startEngine();
// 1. load
const base = await loadReader(from);
const prior = JSON.parse(readFileSync(join(from, 'pretraining.json'), 'utf8')) as { card?: Omit<CardFacts, 'weightsBytes'> };
if (prior.card === undefined)
  throw new Error(`${from}/pretraining.json has no "card" facts; write the folder again with \`npm run build:base -- --finish\``);
// 2. questions
const entries = readLexicon();
const train = lexiconQuestions(
  entries.filter((e) => !isHeldOut(e)),
  questions,
  seed,
);
const heldOut = lexiconQuestions(entries.filter(isHeldOut), 600, seed + 1);
log(
  `span stage: ${train.length} questions (${train.filter((q) => q.unanswerable).length} unanswerable) from ${entries.length} entries, ${heldOut.length} held out; from ${from}`,
);
// 3. train
const config = trainConfig({
  maxLength: 128,
  stride: 64,
  maxQueryLength: 32,
  epochs: 1,
  batchSize: 16,
  gradAccumulation: 1,
  learningRate: lr,
  seed,
  evalEvery: 500,
  checkpointEvery: 250,
});
mkdirSync(work, { recursive: true });
const store = new FsCheckpointStore<RunMeta>(join(work, 'checkpoints'));
const datasetHash = await hashDataset(train);
const saved = (await store.list()).filter((c) => c.meta.datasetHash === datasetHash);
const resumeFrom = saved.length > 0 ? saved[saved.length - 1]!.id : undefined;
if (resumeFrom) log(`resuming from ${resumeFrom}`);
let lastLog = 0;
const started = performance.now();
const result = await fineTune({
  base: { params: base.params, config: base.config, name: from },
  tokenizer: base.tokenizer,
  train,
  validation: heldOut,
  config,
  datasetHash,
  store,
  resumeFrom,
  hooks: {
    onEvent: (e) => {
      if (e.type === 'progress' && (performance.now() - lastLog > 30_000 || e.update === e.totalUpdates)) {
        lastLog = performance.now();
        log(
          `update ${e.update}/${e.totalUpdates} loss ${e.loss.toFixed(3)} lr ${e.lr.toExponential(2)} ${Math.round(e.tokensPerSecond)} tok/s ETA ${Math.round(e.etaMs / 60000)} min`,
        );
      }
      if (e.type === 'evaluated')
        log(`held-out at update ${e.update}: EM ${e.metrics.validationEM?.toFixed(1)} F1 ${e.metrics.validationF1?.toFixed(1)}`);
    },
  },
});
const minutes = (performance.now() - started) / 60000;
const final = evaluateRecords({ params: result.params, config: base.config, tokenizer: base.tokenizer }, heldOut, {
  features: { maxLength: config.maxLength, stride: config.stride, maxQueryLength: config.maxQueryLength },
}).report.summary;
log(
  `held-out at the end: EM ${final.em?.toFixed(1)} F1 ${final.f1?.toFixed(1)} (answerable ${final.answerable.f1?.toFixed(1)}, unanswerable ${final.unanswerable.f1?.toFixed(1)})`,
);
// 4. write
mkdirSync(out, { recursive: true });
const weights = result.params.toNamed();
writeFileSync(
  join(out, 'config.json'),
  `${JSON.stringify({ ...configToHf(base.config), architectures: ['BertForQuestionAnswering'] }, null, 2)}\n`,
);
const bytes = namedToSafetensors(weights, {
  dtype: 'F16',
  metadata: { format: 'pt', 'spanwright.recipe': 'tiny-models/recipe/build-base.ts + span-pretrain.ts' },
});
writeFileSync(join(out, 'model.safetensors'), bytes);
for (const f of ['vocab.txt', 'pretraining.json'])
  if (join(from, f) !== join(out, f) && existsSync(join(from, f))) copyFileSync(join(from, f), join(out, f));
const stage: SpanStageFacts = {
  method:
    'extractive questions about WordNet entries (`tiny-models/recipe/lexicon-qa.ts`): a context states up to six facts of one entry (its definition, other names, ' +
    "broader and narrower terms, parts, opposite, field, an example), each as a sentence from a frame of our own, half the time beside the broader term's definition; " +
    'questions from templates of our own ask for a stated fact, or for one the context leaves out (unanswerable).',
  questions: train.length,
  unanswerable: train.filter((q) => q.unanswerable).length,
  updates: result.plan.totalUpdates,
  windows: result.windows,
  minutes,
  settings: { learningRate: lr, batchSize: config.batchSize, maxLength: config.maxLength, stride: config.stride, epochs: config.epochs },
  heldOut: {
    questions: heldOut.length,
    em: final.em,
    f1: final.f1,
    answerableF1: final.answerable.f1,
    unanswerableF1: final.unanswerable.f1,
  },
};
writeFileSync(join(out, 'span-pretraining.json'), `${JSON.stringify({ ...stage, seed, from }, null, 2)}\n`);
writeFileSync(join(out, 'MODEL_CARD.md'), renderBaseCard({ ...(prior.card as CardFacts), weightsBytes: bytes.length }, stage));
log(`wrote ${out}`);
result.params.dispose();
base.params.dispose();
