// defines: the second stage of the base recipe (`npm run build:base:span`) — span-selection
// pretraining of the MLM-pretrained encoder on cloze questions made from the same open
// corpus (cloze.ts), meant to give the base a span head that already finds the sentence a
// question restates. Measured on the shipped L2-H128 base (DEVELOPERS.md, facts): it did
// not get there, so the shipped base is the masked-LM stage alone; the stage stays
// runnable for larger or longer-pretrained encoders. Uses the project's own fine-tuning run (src/train/finetune.ts)
// with checkpoints on disk, so an interrupted stage resumes where it stopped.
//
//   npx tsx tiny-models/recipe/span-pretrain.ts --from DIR --out DIR [--questions N] [--lr X] [--seed N]
//
//   1. load      the MLM base folder written by build-base.ts (--finish)
//   2. questions cloze questions from the training documents; a held-out set from the
//                documents build-base.ts held out, for the log
//   3. train     one pass, windows of 256 tokens, checkpoints under runs/base-build/span/
//   4. write     the folder: config.json, fp16 model.safetensors with the span head,
//                vocab.txt, MODEL_CARD.md (the MLM card plus this stage), span-pretraining.json
import { copyFileSync, existsSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { FsCheckpointStore } from '../../src/cli/fs-store.js';
import { loadReader, startEngine } from '../../src/cli/model-dir.js';
import { hashDataset } from '../../src/data/hash.js';
import { evaluateRecords } from '../../src/eval/evaluate.js';
import { namedToSafetensors } from '../../src/io/safetensors.js';
import { configToHf } from '../../src/model/config.js';
import { trainConfig } from '../../src/train/config.js';
import { fineTune, type RunMeta } from '../../src/train/finetune.js';
import { clozeQuestions } from './cloze.js';
import { heldOutIds, readCorpus } from './corpus.js';

const args = new Map<string, string>();
for (let i = 2; i < process.argv.length; i += 2) args.set(process.argv[i]!.replace(/^--/, ''), process.argv[i + 1] ?? '');
const from = args.get('from') ?? 'runs/base-build/mlm-base';
const out = args.get('out') ?? 'tiny-models/base';
const questions = Number(args.get('questions') ?? 16000);
const lr = Number(args.get('lr') ?? 5e-4);
const seed = Number(args.get('seed') ?? 2024);
const work = args.get('work') ?? 'runs/base-build/span';
const log = (line: string) => process.stdout.write(`${new Date().toISOString().slice(0, 19)}Z ${line}\n`);

await startEngine();
// 1. load
const base = await loadReader(from);
// 2. questions
const docs = readCorpus();
const held = heldOutIds(docs);
const train = clozeQuestions(docs.filter((d) => !held.has(d.id)), questions, seed);
const heldOut = clozeQuestions(docs.filter((d) => held.has(d.id)), 400, seed + 1);
log(`span stage: ${train.length} cloze questions (${train.filter((q) => q.unanswerable).length} unanswerable), ${heldOut.length} held out; from ${from}`);
// 3. train
const config = trainConfig({ maxLength: 256, stride: 64, maxQueryLength: 48, epochs: 1, batchSize: 16, gradAccumulation: 1, learningRate: lr, seed, evalEvery: 250, checkpointEvery: 250 });
const store = new FsCheckpointStore<RunMeta>(join(work, 'checkpoints'));
const datasetHash = await hashDataset(train);
const saved = (await store.list()).filter((c) => c.meta.datasetHash === datasetHash);
const resumeFrom = saved.length > 0 ? saved[saved.length - 1]!.id : undefined;
if (resumeFrom) log(`resuming from ${resumeFrom}`);
let lastLog = 0;
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
        log(`update ${e.update}/${e.totalUpdates} loss ${e.loss.toFixed(3)} lr ${e.lr.toExponential(2)} ${Math.round(e.tokensPerSecond)} tok/s ETA ${Math.round(e.etaMs / 60000)} min`);
      }
      if (e.type === 'evaluated') log(`held-out cloze at update ${e.update}: EM ${e.metrics.validationEM?.toFixed(1)} F1 ${e.metrics.validationF1?.toFixed(1)}`);
    },
  },
});
const final = evaluateRecords({ params: result.params, config: base.config, tokenizer: base.tokenizer }, heldOut, {
  features: { maxLen: 256, stride: 64, maxQueryTokens: 48 },
}).report;
log(`held-out cloze at the end: EM ${final.summary.em?.toFixed(1)} F1 ${final.summary.f1?.toFixed(1)}`);
// 4. write
const weights = result.params.toNamed();
writeFileSync(join(out, 'config.json'), `${JSON.stringify({ ...configToHf(base.config), architectures: ['BertForQuestionAnswering'] }, null, 2)}\n`);
writeFileSync(
  join(out, 'model.safetensors'),
  namedToSafetensors(weights, { dtype: 'F16', metadata: { format: 'pt', 'spanwright.recipe': 'tiny-models/recipe/build-base.ts + span-pretrain.ts' } }),
);
copyFileSync(join(from, 'vocab.txt'), join(out, 'vocab.txt'));
if (existsSync(join(from, 'pretraining.json'))) copyFileSync(join(from, 'pretraining.json'), join(out, 'pretraining.json'));
const stage = {
  method: 'span-selection pretraining on cloze questions (Glass et al. 2020), tiny-models/recipe/cloze.ts',
  questions: train.length,
  unanswerable: train.filter((q) => q.unanswerable).length,
  updates: result.plan.totalUpdates,
  windows: result.windows,
  settings: config,
  heldOut: { questions: heldOut.length, em: final.summary.em, f1: final.summary.f1 },
};
writeFileSync(join(out, 'span-pretraining.json'), `${JSON.stringify(stage, null, 2)}\n`);
const card = readFileSync(join(from, 'MODEL_CARD.md'), 'utf8');
const section = [
  '',
  '## Second stage: span-selection pretraining',
  '',
  `After masked-LM pretraining the encoder and its span head were trained for one pass (${stage.updates} updates of 16 windows of 256 tokens,`,
  `learning rate ${lr}, warmup then linear decay) on ${stage.questions} cloze questions made mechanically from the same open corpus`,
  `(\`tiny-models/recipe/cloze.ts\`): a sentence of a passage restated with a 1–3 word span replaced by "what" and a sixth of its other`,
  `words dropped, the span as the answer; ${stage.unanswerable} questions restate a sentence of another document and have no answer.`,
  'This follows span-selection pretraining (Glass et al. 2020). Its aim is a reader that finds the sentence a question restates;',
  'whether it got there is the held-out figure below (the share of unanswerable questions, 16.7%, is what answering nothing scores).',
  '',
  `Held-out cloze questions (from the held-out documents, ${heldOut.length}): EM ${final.summary.em?.toFixed(1)}, F1 ${final.summary.f1?.toFixed(1)}.`,
  '',
  'Because of this stage the folder includes a trained span head (`qa_outputs.*`); fine-tuning continues from it.',
  '',
].join('\n');
writeFileSync(join(out, 'MODEL_CARD.md'), card.replace(/\n*$/, '\n') + section);
log(`wrote ${out}`);
result.params.dispose();
