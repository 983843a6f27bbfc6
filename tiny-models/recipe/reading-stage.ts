// defines: the general reading stage of the base recipe (`npm run build:base:reading`) —
// the reader trained on practice questions (src/practice) written from the open corpus's
// prose, through the same session use-case the workbench and the CLI run on a user's own
// passages (ReaderSession.practice), with checkpoints on disk so a stopped stage resumes.
//
//   npm run build:base:reading -- [--from DIR] [--out DIR] [--work DIR] [--per-passage N]
//                                 [--epochs N] [--lr X] [--seed N] [--max-len N] [--match on|off|kind]
//
//   1. passages   State of the Union addresses and Moby-Dick chapters (corpus.ts) cut into
//                 runs of consecutive sentences of 80–180 words; the held-out documents of
//                 the masked-LM stage are left out
//   2. questions  practice questions per document (its passages are each other's no-answer
//                 contexts), `--per-passage` per passage
//   3. train      windows of `--max-len` tokens, every window with an answer and a tenth of
//                 the others; the question-match token type on unless `--match off`
//   4. write      config.json, fp16 model.safetensors, vocab.txt, reading-stage.json
//                 (numbers and settings); the card is rendered by card.ts from the facts
//   5. measure    held-out practice questions written the same way from the corpus
//                 documents the masked-LM stage held out (`--measure DIR` does only this,
//                 for a folder written before), SQuAD 2.0 rules, into reading-stage.json
import { mkdirSync, readFileSync, writeFileSync, existsSync, copyFileSync } from 'node:fs';
import { join } from 'node:path';
import { FsCheckpointStore } from '../../src/node/fs-store.js';
import { readModelDir, startEngine } from '../../src/node/model-dir.js';
import { namedToSafetensors } from '../../src/io/safetensors.js';
import { configToHf } from '../../src/model/config.js';
import type { PracticePassage } from '../../src/practice/generate.js';
import { splitSentences } from '../../src/practice/sentences.js';
import { ReaderSession } from '../../src/session/reader-session.js';
import { trainConfig } from '../../src/train/config.js';
import type { RunMeta } from '../../src/train/finetune.js';
import { renderBaseCard, type CardFacts, type ReadingStageFacts, type SpanStageFacts } from './card.js';
import { heldOutIds, readCorpus } from './corpus.js';

const known = ['--from', '--out', '--work', '--per-passage', '--epochs', '--lr', '--seed', '--max-len', '--match', '--measure'];
const args = new Map<string, string>();
for (let i = 2; i < process.argv.length; i += 2) {
  const flag = process.argv[i]!;
  if (!known.includes(flag)) throw new Error(`unknown flag ${flag} (known: ${known.join(', ')})`);
  if (process.argv[i + 1] === undefined) throw new Error(`${flag} needs a value`);
  args.set(flag.slice(2), process.argv[i + 1]!);
}
const from = args.get('from') ?? 'tiny-models/base';
const out = args.get('out') ?? 'runs/base-build/reading/out';
const work = args.get('work') ?? 'runs/base-build/reading';
const perPassage = Number(args.get('per-passage') ?? 12);
const epochs = Number(args.get('epochs') ?? 1);
const lr = Number(args.get('lr') ?? 1e-3);
const seed = Number(args.get('seed') ?? 2026);
const maxLength = Number(args.get('max-len') ?? 192);
const matchArg = args.get('match') ?? 'on';
if (!['on', 'off', 'kind'].includes(matchArg)) throw new Error(`--match: expected on, off or kind, got "${matchArg}"`);
const match = matchArg !== 'off';
for (const [name, v] of [
  ['per-passage', perPassage],
  ['epochs', epochs],
  ['lr', lr],
  ['seed', seed],
  ['max-len', maxLength],
] as const) {
  if (!Number.isFinite(v) || v <= 0) throw new Error(`--${name}: expected a positive number, got "${args.get(name)}"`);
}
const log = (line: string) => process.stdout.write(`${new Date().toISOString().slice(0, 19)}Z ${line}\n`);

/** What the questions were written from, for the card. */
const METHOD =
  "from State of the Union addresses and Moby-Dick chapters cut into passages of 80–180 words, each document's passages one another's no-answer contexts";

/** Runs of consecutive sentences of one document, 80–180 words, ids `<doc>#<n>`: of the training documents, or of the held-out ones. */
function corpusPassages(heldOut = false): PracticePassage[] {
  const docs = readCorpus().filter((d) => d.source !== 'wordnet');
  const held = heldOutIds(readCorpus());
  const outList: PracticePassage[] = [];
  for (const d of docs) {
    if (held.has(d.id) !== heldOut) continue;
    let start = -1;
    let words = 0;
    let n = 0;
    const target = () => 80 + ((n * 37) % 100);
    for (const s of splitSentences(d.text)) {
      if (start < 0) start = s.start;
      words += s.words.length;
      if (words >= target()) {
        outList.push({ id: `${d.id}#${n}`, text: d.text.slice(start, s.end), group: d.id });
        n++;
        start = -1;
        words = 0;
      }
    }
  }
  return outList;
}

/** Step 5: the reader in `dir` on held-out practice questions (3 per held-out passage, seed 99), windows of `maxLength`. */
async function measure(dir: string): Promise<{
  questions: number;
  unanswerable: number;
  em: number | null;
  f1: number | null;
  answerableF1: number | null;
  unanswerableF1: number | null;
}> {
  const { makePracticeQuestions } = await import('../../src/practice/generate.js');
  const records = makePracticeQuestions(corpusPassages(true), { perPassage: 3, seed: 99 }).records;
  const s = new ReaderSession();
  s.loadBase({ name: dir, files: await readModelDir(dir) });
  const r = s.evaluate({ model: 'base', records, maxLength, stride: Math.floor(maxLength / 4), maxQueryLength: 48 }).summary;
  s.dispose();
  return {
    questions: records.length,
    unanswerable: records.filter((q) => q.unanswerable).length,
    em: r.em,
    f1: r.f1,
    answerableF1: r.answerable.f1,
    unanswerableF1: r.unanswerable.f1,
  };
}

/** MODEL_CARD.md of `dir` from its pretraining.json, span-pretraining.json and reading-stage.json (card.ts). */
function writeCard(dir: string): void {
  const read = (f: string) => JSON.parse(readFileSync(join(dir, f), 'utf8')) as Record<string, unknown>;
  const prior = read('pretraining.json') as { card?: Omit<CardFacts, 'weightsBytes'> };
  if (prior.card === undefined) throw new Error(`${dir}/pretraining.json has no "card" facts`);
  const span = existsSync(join(dir, 'span-pretraining.json')) ? (read('span-pretraining.json') as unknown as SpanStageFacts) : null;
  const reading = read('reading-stage.json') as unknown as ReadingStageFacts;
  const weightsBytes = readFileSync(join(dir, 'model.safetensors')).length;
  writeFileSync(join(dir, 'MODEL_CARD.md'), renderBaseCard({ ...prior.card, weightsBytes }, span, reading));
}

await startEngine();
if (args.has('measure')) {
  const dir = args.get('measure')!;
  const facts = JSON.parse(readFileSync(join(dir, 'reading-stage.json'), 'utf8')) as Record<string, unknown>;
  const heldOut = await measure(dir);
  writeFileSync(join(dir, 'reading-stage.json'), `${JSON.stringify({ ...facts, method: METHOD, heldOut }, null, 2)}\n`);
  writeCard(dir);
  log(
    `held-out practice questions (${heldOut.questions}): F1 ${heldOut.f1?.toFixed(1)} (answerable ${heldOut.answerableF1?.toFixed(1)}, unanswerable ${heldOut.unanswerableF1?.toFixed(1)})`,
  );
  process.exit(0);
}
// 1. passages
const passages = corpusPassages();
log(`reading stage: ${passages.length} passages from ${new Set(passages.map((p) => p.group)).size} documents; from ${from}`);
// 2–3. questions and training, through the session
mkdirSync(work, { recursive: true });
const store = new FsCheckpointStore<RunMeta>(join(work, 'checkpoints'));
const session = new ReaderSession(store);
session.loadBase({ name: from, files: await readModelDir(from) });
const questions = { perPassage, seed };
const datasetHash = `reading-stage:${seed}:${perPassage}:${passages.length}`;
const last = await session.latestCheckpoint({ datasetHash, stage: 'practice' });
if (last) log(`resuming from ${last.id} (update ${last.meta.step})`);
const config = trainConfig({
  maxLength,
  stride: Math.floor(maxLength / 2),
  maxQueryLength: 48,
  epochs,
  batchSize: 16,
  gradAccumulation: 1,
  learningRate: lr,
  seed,
  checkpointEvery: 500,
});
let lastLog = 0;
const started = performance.now();
const abort = new AbortController();
process.once('SIGINT', () => {
  log('stopping after this update; run the same command again to continue');
  abort.abort();
});
const ended = await session.practice({
  runId: 'reading-stage',
  passages,
  questions,
  config,
  questionMatch: matchArg === 'kind' ? 'words+sentence+kind' : match ? 'words+sentence' : undefined,
  datasetHash,
  resumeFrom: last?.id,
  signal: abort.signal,
  onEvent: (e) => {
    if (e.type === 'start') log(`plan: ${e.plan.totalUpdates} updates over ${e.plan.features} windows, from update ${e.startUpdate}`);
    if (e.type === 'progress' && (performance.now() - lastLog > 60_000 || e.update === e.totalUpdates)) {
      lastLog = performance.now();
      log(
        `update ${e.update}/${e.totalUpdates} loss ${e.loss.toFixed(3)} lr ${e.lr.toExponential(2)} ${Math.round(e.tokensPerSecond)} tok/s ETA ${Math.round(e.etaMs / 60000)} min`,
      );
    }
    if (e.type === 'checkpoint') log(`checkpoint at update ${e.update} (${e.reason})`);
  },
});
const minutes = (performance.now() - started) / 60000;
if (ended.status === 'stopped') {
  log(`stopped at update ${ended.update}; run again to continue`);
  process.exit(130);
}
// 4. write
const reader = session.reader('start');
mkdirSync(out, { recursive: true });
writeFileSync(
  join(out, 'config.json'),
  `${JSON.stringify({ ...configToHf(reader.config), architectures: ['BertForQuestionAnswering'] }, null, 2)}\n`,
);
writeFileSync(
  join(out, 'model.safetensors'),
  namedToSafetensors(reader.params.toNamed(), {
    dtype: 'F16',
    metadata: { format: 'pt', 'spanwright.recipe': 'tiny-models/recipe/build-base.ts + span-pretrain.ts + reading-stage.ts' },
  }),
);
for (const f of ['vocab.txt', 'pretraining.json', 'span-pretraining.json'])
  if (existsSync(join(from, f)) && join(from, f) !== join(out, f)) copyFileSync(join(from, f), join(out, f));
const facts = {
  method: METHOD,
  passages: passages.length,
  questions: ended.questions,
  updates: ended.totalUpdates,
  minutes,
  settings: {
    learningRate: lr,
    batchSize: config.batchSize,
    maxLength,
    stride: config.stride,
    epochs,
    perPassage,
    seed,
    questionMatch: match,
  },
  from,
  // a pass that continued an earlier one keeps that one's facts (the card lists both)
  ...(existsSync(join(from, 'reading-stage.json'))
    ? { earlier: JSON.parse(readFileSync(join(from, 'reading-stage.json'), 'utf8')) as unknown }
    : {}),
};
writeFileSync(join(out, 'reading-stage.json'), `${JSON.stringify(facts, null, 2)}\n`);
// 5. measure
session.dispose();
const heldOut = await measure(out);
writeFileSync(join(out, 'reading-stage.json'), `${JSON.stringify({ ...facts, heldOut }, null, 2)}\n`);
writeCard(out);
log(
  `held-out practice questions (${heldOut.questions}): F1 ${heldOut.f1?.toFixed(1)} (answerable ${heldOut.answerableF1?.toFixed(1)}, unanswerable ${heldOut.unanswerableF1?.toFixed(1)})`,
);
log(`wrote ${out} (word-match types: ${JSON.parse(readFileSync(join(out, 'config.json'), 'utf8')).spanwright_question_match ?? 'off'})`);
