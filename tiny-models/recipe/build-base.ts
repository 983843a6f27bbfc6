// defines: the recipe that builds the shipped base reader, `tiny-models/base/`.
//
//   npm run build:base -- [--minutes N] [--preset NAME] [--max-len T] [--out DIR] [--finish]
//
// Re-runnable: every stage keeps its result under the work folder (default
// runs/base-build/, git-ignored) and the next run picks up from there.
//
//   1. corpus      open English text from npm packages, cleaned, split into documents,
//                  ≈ 1% of them held out (corpus.ts)
//   2. vocabulary  uncased WordPiece trained with `tokenizers`, cut to --vocab-size
//                  tokens by frequency (vocab.ts)
//   3. tokens      every document tokenized once with the project's WordPieceTokenizer,
//                  cached as int32 files (train.ids, heldout.ids + their .starts)
//   4. pretrain    masked-LM only (no next-sentence task) through the core's own loop
//                  (src/train/loop.ts trainLoop with Trainer.mlmStep, the head scoring
//                  only the masked positions): rows packed to T (src/train/mlm-data.ts),
//                  BERT's 15% / 80-10-10 masking, AdamW, clipping. The last --long-share
//                  of the time budget is a second phase at 512 tokens, so every position
//                  embedding a 384-token fine-tuning window reads has been trained (BERT
//                  did the same with its last 10% of steps, Devlin et al. 2019 appendix
//                  A.2); the optimizer's moments carry over. Held-out MLM loss and
//                  accuracy (Trainer.mlmEvaluate) every --eval-minutes, a checkpoint every
//                  --checkpoint-minutes and on SIGINT/SIGTERM, and a rerun resumes from
//                  the newest checkpoint. --documents N keeps N documents per source, for
//                  a short check (tests/recipe/build-base.test.ts).
//   --job DIR      instead of 4 and 5: the main phase written as a masked-LM job folder
//                  for torch.distributed (writeMaskedLmJob below; --job-epochs,
//                  --job-accumulate, --job-checkpoint-every)
//   5. finish      at the end of the budget (or at once with --finish): the newest
//                  checkpoint becomes `--out`: config.json, model.safetensors (fp16),
//                  vocab.txt, MODEL_CARD.md, pretraining.json.
//
// Learning rate: linear warmup over the first --warmup-share of the *time budget*, then
// linear decay to 0 at its end: the core loop's TimeBudget (src/train/loop.ts says why a
// run is then not repeatable update for update). The training time spent is saved with
// each checkpoint.

import { mkdirSync, readFileSync, existsSync, writeFileSync, appendFileSync, statSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import * as tf from '@tensorflow/tfjs';
import { FsCheckpointStore } from '../../src/node/fs-store.js';
import { sha256Hex, type CheckpointMeta } from '../../src/io/checkpoint-store.js';
import { namedToSafetensors, readSafetensors } from '../../src/io/safetensors.js';
import type { NamedTensors } from '../../src/io/tensors.js';
import { configFromHf, configToHf, paramCount, presetConfig, type ReaderConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import type { AdamWState } from '../../src/train/adamw.js';
import type { MlmBatch, MlmMasking } from '../../src/train/batches.js';
import { trainConfig, type TrainConfig } from '../../src/train/config.js';
import { trainLoop, type CheckpointRequest, type RunState } from '../../src/train/loop.js';
import { maskedBatch, packDocuments, packedExample, type DocumentTokens, type PackedSequences } from '../../src/train/mlm-data.js';
import { seedAt } from '../../src/train/random.js';
import { planTraining } from '../../src/train/schedule.js';
import { Trainer } from '../../src/train/trainer.js';
import { WordPieceTokenizer } from '../../src/text/wordpiece.js';
import { heldOutIds, readCorpus, SOURCES } from './corpus.js';
import { renderBaseCard, type CardFacts } from './card.js';
import { CANDIDATES, type SizeMeasurement } from './measure-sizes.js';
import { buildVocabulary, type VocabReport } from './vocab.js';
import { useWasm } from './wasm.js';

const here = dirname(fileURLToPath(import.meta.url));
const repo = resolve(here, '../..');

// ---- settings ------------------------------------------------------------------------

export interface RecipeSettings {
  /** training-time budget of the whole run (all resumed sessions together) */
  minutes: number;
  /** encoder size: a name from measure-sizes.ts CANDIDATES */
  preset: string;
  /** T of the main phase; 128 as BERT's first 90% (Devlin et al. 2019, A.2) */
  maxLen: number;
  /** T of the last phase; covers the 384-token fine-tuning windows */
  longLen: number;
  /** share of the budget trained at longLen (BERT: 10% of steps) */
  longShare: number;
  /** tokens per update (rows × T); 32 × 128 — small, so many updates fit the budget */
  tokensPerUpdate: number;
  /** peak learning rate; 5e-4 is common practice for encoders this small with small batches */
  learningRate: number;
  /** share of the budget spent warming up (common practice: a few percent) */
  warmupShare: number;
  /** BERT's AdamW decay and clip (DEVELOPERS.md defaults) */
  weightDecay: number;
  maxGradNorm: number;
  /** BERT's pretraining dropout */
  dropout: number;
  /** tokens in the cut vocabulary */
  vocabSize: number;
  seed: number;
  checkpointMinutes: number;
  evalMinutes: number;
  /** held-out rows of maxLen tokens in a periodic evaluation (as many tokens at longLen; the final one reads them all) */
  evalRows: number;
  out: string;
  work: string;
  /**
   * a model folder this recipe wrote earlier (config.json, model.safetensors, vocab.txt,
   * pretraining.json) to continue from instead of a random start; null = random start
   */
  init: string | null;
  /** keep only the first N documents of each source (0 = all): for a short check of the recipe */
  documents: number;
}

const DEFAULTS: RecipeSettings = {
  minutes: 60,
  preset: 'L2-H128',
  maxLen: 128,
  longLen: 512,
  longShare: 0.1,
  tokensPerUpdate: 32 * 128,
  learningRate: 5e-4,
  warmupShare: 0.05,
  weightDecay: 0.01,
  maxGradNorm: 1.0,
  dropout: 0.1,
  vocabSize: 12000,
  seed: 42,
  checkpointMinutes: 4,
  evalMinutes: 5,
  evalRows: 64,
  out: join(repo, 'tiny-models', 'base'),
  work: join(repo, 'runs', 'base-build'),
  init: null,
  documents: 0,
};

interface Args {
  settings: RecipeSettings;
  /** flags given on the command line (a resumed run keeps its saved settings otherwise) */
  given: Set<keyof RecipeSettings>;
  finish: boolean;
  /** --job: write the masked-LM stage as a job folder for torch.distributed instead of training here */
  job: { dir: string; epochs: number; accumulate: number; checkpointEvery: number } | null;
}

function parseArgs(argv: string[]): Args {
  const settings = { ...DEFAULTS };
  const given = new Set<keyof RecipeSettings>();
  let finish = false;
  let job: Args['job'] = null;
  const jobNumbers = { epochs: 1, accumulate: 1, checkpointEvery: 1000 };
  const numeric: Record<string, keyof RecipeSettings> = {
    '--minutes': 'minutes',
    '--max-len': 'maxLen',
    '--long-len': 'longLen',
    '--long-share': 'longShare',
    '--tokens-per-update': 'tokensPerUpdate',
    '--lr': 'learningRate',
    '--vocab-size': 'vocabSize',
    '--seed': 'seed',
    '--checkpoint-minutes': 'checkpointMinutes',
    '--eval-minutes': 'evalMinutes',
    '--documents': 'documents',
    '--dropout': 'dropout',
  };
  for (let i = 0; i < argv.length; i++) {
    const flag = argv[i]!;
    if (flag === '--finish') {
      finish = true;
      continue;
    }
    const value = argv[++i];
    if (value === undefined) throw new Error(`${flag} needs a value`);
    const key = numeric[flag];
    if (key !== undefined) {
      const n = Number(value);
      if (!Number.isFinite(n) || n < 0) throw new Error(`${flag}: expected a number ≥ 0, got "${value}"`);
      (settings as unknown as Record<string, number>)[key] = n;
      given.add(key);
    } else if (flag === '--preset') {
      if (!CANDIDATES.some((c) => c.name === value))
        throw new Error(`--preset: unknown size "${value}" (known: ${CANDIDATES.map((c) => c.name).join(', ')})`);
      settings.preset = value;
      given.add('preset');
    } else if (flag === '--out') {
      settings.out = resolve(value);
      given.add('out');
    } else if (flag === '--init') {
      settings.init = resolve(value);
      given.add('init');
    } else if (flag === '--work') {
      settings.work = resolve(value);
      given.add('work');
    } else if (flag === '--job') {
      job = { dir: resolve(value), ...jobNumbers };
    } else if (flag === '--job-epochs' || flag === '--job-accumulate' || flag === '--job-checkpoint-every') {
      const n = Number(value);
      if (!Number.isInteger(n) || n < (flag === '--job-checkpoint-every' ? 0 : 1))
        throw new Error(`${flag}: expected a whole number${flag === '--job-checkpoint-every' ? '' : ' ≥ 1'}, got "${value}"`);
      jobNumbers[flag === '--job-epochs' ? 'epochs' : flag === '--job-accumulate' ? 'accumulate' : 'checkpointEvery'] = n;
    } else throw new Error(`unknown flag ${flag}`);
  }
  if (job !== null) job = { ...job, ...jobNumbers };
  if (settings.maxLen < 8 || settings.maxLen > settings.longLen)
    throw new Error(`--max-len must be in [8, ${settings.longLen}], got ${settings.maxLen}`);
  return { settings, given, finish, job };
}

function modelConfig(s: RecipeSettings, vocabSize: number): ReaderConfig {
  const candidate = CANDIDATES.find((c) => c.name === s.preset)!;
  // positions cover 512 so fine-tuning windows of 384 fit; dropout as BERT's pretraining
  return presetConfig('tiny', vocabSize, {
    ...candidate.overrides,
    maxPositions: 512,
    hiddenDropout: s.dropout,
    attentionDropout: s.dropout,
  });
}

// ---- logging -------------------------------------------------------------------------

let logFile: string | null = null;
function log(line: string): void {
  const stamped = `${new Date().toISOString().slice(0, 19)}Z ${line}`;
  process.stdout.write(`${stamped}\n`);
  if (logFile !== null) appendFileSync(logFile, `${stamped}\n`);
}

// ---- stages 1–3: corpus, vocabulary, token cache ----------------------------------

interface Prepared {
  vocab: string[];
  tokenizer: WordPieceTokenizer;
  train: DocumentTokens;
  heldout: DocumentTokens;
  manifest: Manifest;
}

interface Manifest {
  vocabSize: number;
  /** documents kept per source (0 = all) */
  perSource?: number;
  vocabReport: VocabReport;
  documents: { train: number; heldout: number; bySource: Record<string, { documents: number; heldout: number; tokens: number }> };
  tokens: { train: number; heldout: number };
  /** SHA-256 of train.ids: a resumed run must see the same data */
  datasetHash: string;
  heldoutIds: string[];
}

function writeIds(path: string, docs: DocumentTokens): void {
  writeFileSync(`${path}.ids`, new Uint8Array(docs.ids.buffer, docs.ids.byteOffset, docs.ids.byteLength));
  writeFileSync(`${path}.starts`, new Uint8Array(docs.starts.buffer, docs.starts.byteOffset, docs.starts.byteLength));
}

function readIds(path: string): DocumentTokens {
  const asInt32 = (file: string) => {
    const bytes = readFileSync(file);
    if (bytes.byteLength % 4 !== 0) throw new Error(`${file}: ${bytes.byteLength} bytes is not a whole number of int32 values`);
    return new Int32Array(bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength));
  };
  return { ids: asInt32(`${path}.ids`), starts: asInt32(`${path}.starts`) };
}

function flatten(lists: Int32Array[]): DocumentTokens {
  const starts = new Int32Array(lists.length + 1);
  lists.forEach((l, i) => (starts[i + 1] = starts[i] + l.length));
  const ids = new Int32Array(starts[lists.length]);
  lists.forEach((l, i) => ids.set(l, starts[i]));
  return { ids, starts };
}

async function prepare(s: RecipeSettings): Promise<Prepared> {
  const dir = join(s.work, 'data');
  const manifestPath = join(dir, 'manifest.json');
  if (existsSync(manifestPath)) {
    const manifest = JSON.parse(readFileSync(manifestPath, 'utf8')) as Manifest;
    const vocabText = readFileSync(join(dir, 'vocab.txt'), 'utf8');
    const initText = s.init === null ? null : readFileSync(join(s.init, 'vocab.txt'), 'utf8');
    if (manifest.vocabSize === s.vocabSize && (manifest.perSource ?? 0) === s.documents && (initText === null || initText === vocabText)) {
      log(`data: cached in ${dir} (${manifest.tokens.train} training tokens, ${manifest.tokens.heldout} held out)`);
      return {
        vocab: vocabText.trimEnd().split('\n'),
        tokenizer: WordPieceTokenizer.fromVocabTxt(vocabText),
        train: readIds(join(dir, 'train')),
        heldout: readIds(join(dir, 'heldout')),
        manifest,
      };
    }
    log(`data: cache in ${dir} was built for another vocabulary (${manifest.vocabSize} tokens), rebuilding`);
  }
  mkdirSync(dir, { recursive: true });

  // 1. corpus
  const docs = firstPerSource(readCorpus(), s.documents);
  const held = heldOutIds(docs);
  const trainDocs = docs.filter((d) => !held.has(d.id));
  const heldDocs = docs.filter((d) => held.has(d.id));
  log(`corpus: ${docs.length} documents, ${heldDocs.length} held out`);

  // 2. vocabulary
  const built = await buildVocabulary(
    trainDocs.map((d) => d.text),
    s.vocabSize,
    dir,
  );
  const report = built.report;
  let vocab = built.vocab;
  if (s.init !== null) {
    // a continued run keeps the vocabulary its weights were trained with; the tokens the
    // recipe builds today may differ at the frequency cut (ties), which the log reports
    const theirs = readFileSync(join(s.init, 'vocab.txt'), 'utf8').trimEnd().split('\n');
    const ours = new Set(vocab);
    const differ = theirs.filter((t) => !ours.has(t)).length;
    log(
      `vocabulary: ${relative(repo, s.init)}/vocab.txt kept for --init (${differ} of its ${theirs.length} tokens differ from this build's)`,
    );
    vocab = theirs;
  }
  const vocabText = `${vocab.join('\n')}\n`;
  writeFileSync(join(dir, 'vocab.txt'), vocabText);
  log(
    `vocabulary: trained ${report.trainedSize} tokens, cut to ${report.size}; tokens per word ${report.full.tokensPerWord.toFixed(3)} → ${report.cut.tokensPerWord.toFixed(3)}; [UNK] ${report.cut.unk}`,
  );

  // 3. tokens, with the runtime tokenizer
  const tokenizer = WordPieceTokenizer.fromVocabTxt(vocabText);
  const encode = (list: typeof docs) => list.map((d) => tokenizer.encodeFlat(d.text).ids);
  const trainLists = encode(trainDocs);
  const heldLists = encode(heldDocs);
  const train = flatten(trainLists);
  const heldout = flatten(heldLists);
  writeIds(join(dir, 'train'), train);
  writeIds(join(dir, 'heldout'), heldout);
  const bySource: Manifest['documents']['bySource'] = {};
  docs.forEach((d) => {
    const entry = (bySource[d.source] ??= { documents: 0, heldout: 0, tokens: 0 });
    entry.documents++;
    if (held.has(d.id)) entry.heldout++;
  });
  trainDocs.forEach((d, i) => (bySource[d.source]!.tokens += trainLists[i]!.length));
  heldDocs.forEach((d, i) => (bySource[d.source]!.tokens += heldLists[i]!.length));
  const manifest: Manifest = {
    vocabSize: s.vocabSize,
    perSource: s.documents,
    vocabReport: report,
    documents: { train: trainDocs.length, heldout: heldDocs.length, bySource },
    tokens: { train: train.ids.length, heldout: heldout.ids.length },
    datasetHash: await sha256Hex(new Uint8Array(train.ids.buffer)),
    heldoutIds: heldDocs.map((d) => d.id),
  };
  writeFileSync(manifestPath, `${JSON.stringify(manifest, null, 2)}\n`);
  log(`tokens: ${manifest.tokens.train} training, ${manifest.tokens.heldout} held out, cached in ${dir}`);
  return { vocab, tokenizer, train, heldout, manifest };
}

// ---- stage 4: pretraining ----------------------------------------------------------

/** What a checkpoint remembers beyond the store's common fields. */
interface PretrainMeta extends CheckpointMeta {
  settings: RecipeSettings;
  /** which phase the run state belongs to: the main one at maxLen or the last one at longLen */
  phase: 'main' | 'long';
  /** the core loop's run state within that phase (trainingMs is the whole budget's clock) */
  run: RunState;
  /** updates taken by the phases before this one */
  updatesBefore: number;
  /** real tokens (padding excluded) fed to the encoder so far, all phases */
  tokensSeen: number;
  /** the latest held-out measurement */
  heldout: { loss: number; accuracy: number; predicted: number; atStep: number } | null;
  /** the earlier run this one continued from (--init), as its pretraining.json tells */
  initFrom: InitFrom | null;
}

/** What a finished pretraining hands to stage 5. */
interface Pretrained {
  meta: PretrainMeta;
  params: ReaderParams;
  config: ReaderConfig;
}

/** What a continued run inherited: the earlier run's own counts and settings. */
export interface InitFrom {
  /** the folder, relative to the repository */
  dir: string;
  steps: number;
  tokensSeen: number;
  trainingMinutes: number;
  learningRate: number;
  heldoutAccuracy: number | null;
}

/**
 * Weights to continue from (--init): the folder must have been written by this recipe
 * with the same vocabulary and size, so that only the optimizer's state starts afresh.
 */
function readInit(dir: string, config: ReaderConfig, vocab: readonly string[]): { weights: NamedTensors; from: InitFrom } {
  const need = ['config.json', 'model.safetensors', 'vocab.txt', 'pretraining.json'];
  const absent = need.filter((f) => !existsSync(join(dir, f)));
  if (absent.length > 0) throw new Error(`--init ${dir}: ${absent.join(', ')} not found; it must be a folder this recipe wrote`);
  const theirs = readFileSync(join(dir, 'vocab.txt'), 'utf8').trimEnd().split('\n');
  if (theirs.length !== vocab.length || theirs.some((t, i) => t !== vocab[i])) {
    throw new Error(
      `--init ${dir}: vocab.txt differs from the recipe's vocabulary (${theirs.length} vs ${vocab.length} tokens); the weights would not line up`,
    );
  }
  const theirConfig = configFromHf(JSON.parse(readFileSync(join(dir, 'config.json'), 'utf8')), join(dir, 'config.json'));
  for (const key of ['hiddenSize', 'numLayers', 'numHeads', 'intermediateSize', 'maxPositions', 'vocabSize'] as const) {
    if (theirConfig[key] !== config[key])
      throw new Error(`--init ${dir}: config.json ${key} is ${theirConfig[key]}, this run's size needs ${config[key]}`);
  }
  const prior = JSON.parse(readFileSync(join(dir, 'pretraining.json'), 'utf8')) as {
    steps: number;
    tokensSeen: number;
    trainingMinutes: number;
    settings: { learningRate: number };
    heldout: { accuracy: number } | null;
    initFrom?: InitFrom | null;
  };
  // a chain of continued runs reports its totals: add what the earlier run itself inherited
  const before = prior.initFrom ?? { steps: 0, tokensSeen: 0, trainingMinutes: 0 };
  const { tensors } = readSafetensors(new Uint8Array(readFileSync(join(dir, 'model.safetensors'))), join(dir, 'model.safetensors'));
  return {
    weights: tensors,
    from: {
      dir: relative(repo, dir) || '.',
      steps: prior.steps + before.steps,
      tokensSeen: prior.tokensSeen + before.tokensSeen,
      trainingMinutes: prior.trainingMinutes + before.trainingMinutes,
      learningRate: prior.settings.learningRate,
      heldoutAccuracy: prior.heldout?.accuracy ?? null,
    },
  };
}

/** Rows per update and the phase's packed rows, by sequence length. */
class Phases {
  private readonly cache = new Map<number, { train: PackedSequences; heldout: PackedSequences }>();
  constructor(private readonly data: Prepared) {}
  at(T: number): { train: PackedSequences; heldout: PackedSequences } {
    let hit = this.cache.get(T);
    if (hit === undefined) {
      const ids = { clsId: this.data.tokenizer.clsId, sepId: this.data.tokenizer.sepId, padId: this.data.tokenizer.padId };
      hit = { train: packDocuments(this.data.train, T, ids), heldout: packDocuments(this.data.heldout, T, ids) };
      this.cache.set(T, hit);
    }
    return hit;
  }
}

/** The first `n` documents of each source, in corpus order (all of them for n = 0). */
function firstPerSource<D extends { source: string }>(docs: readonly D[], n: number): D[] {
  if (n === 0) return [...docs];
  const seen = new Map<string, number>();
  return docs.filter((d) => {
    const k = seen.get(d.source) ?? 0;
    seen.set(d.source, k + 1);
    return k < n;
  });
}

/** The held-out evaluation's batches: the first `rows` packed rows, masks fixed by (seed, T, row). */
export function heldoutBatches(packed: PackedSequences, rows: number, masking: MlmMasking, seed: number, batchRows: number): MlmBatch[] {
  const n = Math.min(rows, packed.count);
  const out: MlmBatch[] = [];
  for (let start = 0; start < n; start += batchRows) {
    const picked: number[] = [];
    for (let r = start; r < Math.min(n, start + batchRows); r++) picked.push(r);
    out.push(maskedBatch(packed, picked, masking, seedAt(seed, 'heldout-mask', packed.maxLength, start)));
  }
  return out;
}

/** The phases of a budget: T and where each trains on the budget's clock. */
function phasesOf(s: RecipeSettings): { phase: PretrainMeta['phase']; T: number; fromMs: number; untilMs: number }[] {
  const totalMs = s.minutes * 60_000;
  const boundary = (1 - s.longShare) * totalMs;
  return [
    { phase: 'main', T: s.maxLen, fromMs: 0, untilMs: boundary },
    { phase: 'long', T: s.longLen, fromMs: boundary, untilMs: totalMs },
  ];
}

/**
 * The core's TrainConfig for one phase: the recipe is a configuration of the core loop.
 * Epochs only bound the plan (the budget ends the phase first); warmup and decay run on
 * the budget's clock (TimeBudget), so `warmupRatio` is not used.
 */
function phaseConfig(s: RecipeSettings, T: number): TrainConfig {
  return trainConfig({
    learningRate: s.learningRate,
    batchSize: Math.max(1, Math.round(s.tokensPerUpdate / T)),
    gradAccumulation: 1,
    epochs: 1000,
    weightDecay: s.weightDecay,
    maxGradNorm: s.maxGradNorm,
    seed: s.seed,
    maxLength: T,
    stride: Math.floor(T / 4),
    maxQueryLength: Math.floor(T / 4),
    dropout: s.dropout,
    trimPadding: true,
    mlmProbability: 0.15,
  });
}

async function pretrain(args: Args, data: Prepared): Promise<Pretrained | null> {
  const store = new FsCheckpointStore<PretrainMeta>(join(args.settings.work, 'checkpoints'));
  const saved = (await store.list()).at(-1);
  let s = args.settings;
  let meta: PretrainMeta;
  let params: ReaderParams;
  let optimizer: AdamWState | null = null;

  // 1. start afresh, or continue from the newest checkpoint with its own settings
  if (saved !== undefined) {
    const ckpt = await store.load(saved.id);
    meta = ckpt.meta;
    if (meta.run === undefined)
      throw new Error(
        `checkpoint ${saved.id}: written by an earlier version of this recipe (no run state); pass a new --work, or --init a finished folder`,
      );
    if (meta.datasetHash !== data.manifest.datasetHash)
      throw new Error(`checkpoint ${saved.id}: made on other training data (hash ${meta.datasetHash}, now ${data.manifest.datasetHash})`);
    const overridden = [...args.given].filter((k) => k !== 'out' && k !== 'work' && k !== 'minutes' && meta.settings[k] !== s[k]);
    // the output folder may change on a rerun; the budget too, but only before the last phase began
    const minutes = args.given.has('minutes') && meta.phase === 'main' ? s.minutes : meta.settings.minutes;
    s = { ...meta.settings, minutes, out: s.out, work: s.work };
    meta.settings = s;
    if (overridden.length > 0) log(`resume: keeping the saved ${overridden.join(', ')} (a run's settings cannot change midway)`);
    const config = modelConfig(s, data.vocab.length);
    params = ReaderParams.fromNamed(config, ckpt.weights, { source: saved.id }).params;
    optimizer = ckpt.optimizer;
    log(
      `resume: ${saved.id} — update ${meta.step}, ${((meta.run.trainingMs ?? 0) / 60000).toFixed(1)} of ${s.minutes} min, ` +
        `${meta.tokensSeen} tokens seen`,
    );
  } else {
    const config = modelConfig(s, data.vocab.length);
    let initFrom: InitFrom | null = null;
    if (s.init !== null) {
      const init = readInit(s.init, config, data.vocab);
      params = ReaderParams.fromNamed(config, init.weights, { seed: s.seed, source: s.init }).params;
      initFrom = init.from;
      log(
        `start: continuing from ${init.from.dir} (${init.from.steps} updates, ${init.from.tokensSeen} tokens seen there); the optimizer starts afresh`,
      );
    } else {
      params = ReaderParams.init(config, s.seed);
    }
    meta = {
      step: 0,
      runConfig: { model: config },
      datasetHash: data.manifest.datasetHash,
      metrics: {},
      settings: s,
      phase: 'main',
      run: { trainer: { update: 0, seed: s.seed }, order: { epoch: 0, index: 0 }, totalUpdates: 0, features: 0, trainingMs: 0 },
      updatesBefore: 0,
      tokensSeen: 0,
      heldout: null,
      initFrom,
    };
    log(
      `start: ${s.preset}, ${paramCount(config).total} parameters, budget ${s.minutes} min, T ${s.maxLen} then ${s.longLen} for the last ${s.longShare * 100}%`,
    );
  }
  const config = modelConfig(s, data.vocab.length);
  if (args.finish && saved === undefined)
    throw new Error(`--finish: no checkpoint in ${join(s.work, 'checkpoints')} to finish from; run without --finish first`);

  const tok = data.tokenizer;
  const masking = {
    maskId: tok.maskId,
    vocabSize: data.vocab.length,
    specialIds: [tok.padId, tok.unkId, tok.clsId, tok.sepId, tok.maskId],
  };
  const phases = new Phases(data);
  const budget = { totalMs: s.minutes * 60_000, warmupShare: s.warmupShare };

  const evaluateWith = (trainer: Trainer, T: number, rows: number) => {
    const batchRows = Math.max(1, Math.round(s.tokensPerUpdate / T));
    const result = trainer.mlmEvaluate(heldoutBatches(phases.at(T).heldout, rows, { ...masking, probability: 0.15 }, s.seed, batchRows));
    meta.heldout = { ...result, atStep: meta.step };
    meta.metrics = { ...meta.metrics, heldoutLoss: result.loss, heldoutAccuracy: result.accuracy };
    log(
      `held-out (T ${T}, ${result.predicted} masked tokens): MLM loss ${result.loss.toFixed(4)}, accuracy ${(100 * result.accuracy).toFixed(2)}%`,
    );
    return { heldoutLoss: result.loss, heldoutAccuracy: result.accuracy };
  };
  const save = async (request: CheckpointRequest): Promise<string> => {
    meta.run = request.state;
    meta.step = meta.updatesBefore + request.state.trainer.update;
    meta.label = request.reason === 'interval' ? 'interval' : request.reason === 'stop' ? 'stopped' : `end of ${meta.phase} phase`;
    const summary = await store.save({
      meta: { ...meta, savedAt: undefined },
      weights: request.weights(),
      optimizer: request.optimizer(),
    });
    await store.prune({ keepLast: 2 });
    log(`checkpoint: ${summary.id} (${meta.label}, ${(summary.bytes / 1e6).toFixed(1)} MB)`);
    return summary.id;
  };

  const abort = new AbortController();
  const onSignal = (name: string) => () => {
    if (!abort.signal.aborted) log(`${name}: stopping after this update`);
    abort.abort();
  };
  process.on('SIGINT', onSignal('SIGINT'));
  process.on('SIGTERM', onSignal('SIGTERM'));

  // 2. each phase through the core loop, the optimizer's moments carried from one to the next
  let lastTrainer: Trainer | null = null;
  for (const phase of phasesOf(s)) {
    if (args.finish) break;
    if (phase.phase === 'main' && meta.phase === 'long') continue;
    if ((meta.run.trainingMs ?? 0) >= phase.untilMs && meta.phase === phase.phase) {
      // this phase's budget was spent before the last save: the next one starts from its end
      continue;
    }
    const { train } = phases.at(phase.T);
    const sequences = Array.from({ length: train.count }, (_, r) => packedExample(train, r));
    const cfg = phaseConfig(s, phase.T);
    const plan = planTraining(cfg, sequences.length);
    const trainer = new Trainer(params, config, cfg, plan);
    const continuing = meta.phase === phase.phase && meta.run.totalUpdates === plan.totalUpdates;
    if (meta.phase !== phase.phase) {
      log(`phase: T ${meta.phase === 'main' ? s.maxLen : s.longLen} → ${phase.T}`);
      meta.updatesBefore = meta.step;
      meta.phase = phase.phase;
    }
    const resume = continuing && meta.run.trainer.update > 0 ? meta.run : undefined;
    if (optimizer !== null) trainer.restore({ update: resume?.trainer.update ?? 0, seed: s.seed }, optimizer);
    let windowLoss = 0;
    let windowSteps = 0;
    let windowTokens = 0;
    let windowStart = performance.now();
    const outcome = await trainLoop(
      trainer,
      { kind: 'mlm', sequences, masking },
      {
        evaluate: () => evaluateWith(trainer, phase.T, Math.ceil((s.evalRows * s.maxLen) / phase.T)),
        saveCheckpoint: save,
        signal: abort.signal,
        yieldToEvents: () => new Promise<void>((r) => setImmediate(r)), // lets a signal be seen
        onEvent: (event) => {
          if (event.type !== 'progress') return;
          meta.tokensSeen += event.tokens;
          meta.metrics = { ...meta.metrics, loss: event.loss };
          windowLoss += event.loss;
          windowSteps++;
          windowTokens += event.tokens;
          const now = performance.now();
          if (now - windowStart < 30_000) return;
          const tps = (windowTokens * 1000) / (now - windowStart);
          log(
            `update ${meta.updatesBefore + event.update} T ${phase.T} loss ${(windowLoss / windowSteps).toFixed(4)} lr ${event.lr.toExponential(2)} ` +
              `|g| ${event.gradNorm.toFixed(2)} ${tps.toFixed(0)} tok/s; ${(meta.tokensSeen / 1e6).toFixed(2)} M tokens; ` +
              `${((event.trainingMs ?? 0) / 60000).toFixed(1)}/${s.minutes} min; epoch ${event.epoch}; tensors ${tf.memory().numTensors}`,
          );
          meta.metrics = { ...meta.metrics, tokensPerSecond: tps };
          windowLoss = 0;
          windowSteps = 0;
          windowTokens = 0;
          windowStart = now;
        },
      },
      resume,
      {
        ...budget,
        fromMs: phase.fromMs,
        untilMs: phase.untilMs,
        evalEveryMs: s.evalMinutes * 60_000,
        checkpointEveryMs: s.checkpointMinutes * 60_000,
      },
    );
    optimizer = trainer.optimizerState();
    if (outcome.status === 'stopped') {
      trainer.dispose();
      params.dispose();
      return null;
    }
    meta.run = outcome.state;
    meta.step = meta.updatesBefore + outcome.state.trainer.update;
    lastTrainer?.dispose();
    lastTrainer = trainer;
  }

  // 3. the budget is spent (or --finish): a full held-out evaluation at both lengths
  const finalTrainer = lastTrainer ?? new Trainer(params, config, phaseConfig(s, s.maxLen), planTraining(phaseConfig(s, s.maxLen), 1));
  evaluateWith(finalTrainer, s.maxLen, Number.MAX_SAFE_INTEGER);
  const short = meta.heldout!;
  evaluateWith(finalTrainer, s.longLen, Number.MAX_SAFE_INTEGER);
  meta.metrics = { ...meta.metrics, heldoutLossShort: short.loss, heldoutAccuracyShort: short.accuracy };
  finalTrainer.dispose();
  return { meta, params, config };
}

// ---- stage 5: the shipped folder ---------------------------------------------------

async function finish(s: RecipeSettings, data: Prepared, meta: PretrainMeta, params: ReaderParams, config: ReaderConfig): Promise<void> {
  mkdirSync(s.out, { recursive: true });
  // the span head was never trained: leave it out, so loading it says so (params.ts)
  const weights: NamedTensors = new Map([...params.toNamed()].filter(([k]) => !k.startsWith('qa_outputs.')));
  const hf = { ...configToHf(config), architectures: ['BertForMaskedLM'] };
  writeFileSync(join(s.out, 'config.json'), `${JSON.stringify(hf, null, 2)}\n`);
  const bytes = namedToSafetensors(weights, {
    dtype: 'F16',
    metadata: { format: 'pt', 'spanwright.recipe': 'tiny-models/recipe/build-base.ts', 'spanwright.step': String(meta.step) },
  });
  writeFileSync(join(s.out, 'model.safetensors'), bytes);
  writeFileSync(join(s.out, 'vocab.txt'), `${data.vocab.join('\n')}\n`);

  const sizesPath = join(here, 'measured-sizes.json');
  const sizes = existsSync(sizesPath)
    ? (JSON.parse(readFileSync(sizesPath, 'utf8')) as { sizes: SizeMeasurement[]; measuredAt: string; vocab: number })
    : null;
  const pretraining = {
    preset: s.preset,
    steps: meta.step,
    tokensSeen: meta.tokensSeen,
    trainingMinutes: (meta.run.trainingMs ?? 0) / 60000,
    heldout: meta.heldout,
    metrics: meta.metrics,
    initFrom: meta.initFrom ?? null,
    settings: { ...s, out: undefined, work: undefined, init: undefined },
    data: data.manifest,
  };
  const facts: CardFacts = {
    preset: s.preset,
    config,
    params: paramCount(config),
    steps: meta.step,
    tokensSeen: meta.tokensSeen,
    trainingMinutes: (meta.run.trainingMs ?? 0) / 60000,
    heldout: meta.heldout,
    heldoutShort:
      meta.metrics.heldoutLossShort === undefined
        ? null
        : { loss: meta.metrics.heldoutLossShort, accuracy: meta.metrics.heldoutAccuracyShort ?? Number.NaN, length: s.maxLen },
    settings: s,
    manifest: data.manifest,
    initFrom: meta.initFrom ?? null,
    sources: SOURCES,
    sizes,
    weightsBytes: bytes.length,
  };
  // the card's facts go along, so that a later stage (span-pretrain.ts) can render the card again
  const card = {
    ...facts,
    settings: { ...s, out: undefined, work: undefined, init: undefined },
    manifest: { ...data.manifest, heldoutIds: undefined },
  };
  writeFileSync(
    join(s.out, 'pretraining.json'),
    `${JSON.stringify({ ...pretraining, data: { ...data.manifest, heldoutIds: undefined }, card }, null, 2)}\n`,
  );
  writeFileSync(join(s.out, 'MODEL_CARD.md'), renderBaseCard(facts));
  const total = ['config.json', 'model.safetensors', 'vocab.txt', 'MODEL_CARD.md', 'pretraining.json'].reduce(
    (n, f) => n + statSync(join(s.out, f)).size,
    0,
  );
  log(
    `finish: wrote ${s.out} (model.safetensors ${(bytes.length / 1e6).toFixed(2)} MB, ${(total / 1e6).toFixed(2)} MB in all) from step ${meta.step}`,
  );
}

// ---- --job: the masked-LM stage as a job folder for torch.distributed -----------------

/**
 * Writes the main phase (rows of --max-len tokens) as a masked-LM job folder
 * (src/io/torch-job.ts maskedLmJobFiles, jobs/torch/train_reader.py): the packed rows in
 * shards, the settings on an update count instead of a time budget — --job-epochs passes
 * over the rows, warmup over the first --warmup-share of the updates, --job-accumulate
 * micro-batches per update of --tokens-per-update tokens — and the starting weights (a
 * random start from --seed, or --init). One phase per job: the recipe's last phase at 512
 * tokens is not written (a second job from the first one's weights would start its
 * optimizer's moments afresh, where the recipe here carries them over), and the job's
 * model/ has no card or pretraining.json, so --init does not take it.
 */
async function writeMaskedLmJob(args: Args, data: Prepared): Promise<void> {
  const s = args.settings;
  const job = args.job!;
  const { howToRun, maskedLmJobFiles } = await import('../../src/io/torch-job.js');
  const { jobProgramFiles, refuseFilledFolder } = await import('../../src/node/job-folder.js');
  const { writeFilesAtomically } = await import('../../src/node/write-files.js');
  await refuseFilledFolder(job.dir);
  const config = modelConfig(s, data.vocab.length);
  const params =
    s.init === null
      ? ReaderParams.init(config, s.seed)
      : ReaderParams.fromNamed(config, readInit(s.init, config, data.vocab).weights, { seed: s.seed, source: s.init }).params;
  const T = s.maxLen;
  const perUpdate = Math.max(1, Math.round(s.tokensPerUpdate / T));
  if (perUpdate % job.accumulate !== 0)
    throw new Error(
      `--job-accumulate ${job.accumulate} must divide the ${perUpdate} rows an update of --tokens-per-update ${s.tokensPerUpdate} holds`,
    );
  const train = trainConfig({
    ...phaseConfig(s, T),
    epochs: job.epochs,
    batchSize: perUpdate / job.accumulate,
    gradAccumulation: job.accumulate,
    warmupRatio: s.warmupShare,
    checkpointEvery: job.checkpointEvery,
  });
  const tok = data.tokenizer;
  const rows = new Phases(data).at(T).train;
  const built = maskedLmJobFiles({
    base: { name: s.init === null ? `random start, seed ${s.seed}` : relative(repo, s.init), config },
    rows,
    config: train,
    masking: { maskId: tok.maskId, vocabSize: data.vocab.length, specialIds: [tok.padId, tok.unkId, tok.clsId, tok.sepId, tok.maskId] },
    datasetHash: data.manifest.datasetHash,
  });
  const hf = { ...configToHf(config), architectures: ['BertForMaskedLM'] };
  const files = [
    ...built.files,
    { name: 'base/config.json', bytes: `${JSON.stringify(hf, null, 2)}\n` },
    { name: 'base/model.safetensors', bytes: namedToSafetensors(params.toNamed(), { metadata: { format: 'pt' } }) },
    { name: 'base/vocab.txt', bytes: `${data.vocab.join('\n')}\n` },
    ...(await jobProgramFiles()),
    {
      name: 'README.txt',
      bytes: howToRun([
        `  the encoder and its masked-LM head, pretrained (the span head is left out, as this recipe's`,
        `  finish step leaves it): a base for \`spanwright train --base ${join(job.dir, 'model')}\` or \`spanwright job\``,
      ]),
    },
  ];
  params.dispose();
  for (const sub of ['base', 'rows']) mkdirSync(join(job.dir, sub), { recursive: true });
  await writeFilesAtomically(job.dir, files);
  log(
    `job: wrote ${job.dir} — ${rows.count} rows of ${T} tokens in ${(built.settings.rows as { shards: unknown[] }).shards.length} shard(s), ` +
      `${built.plan.totalUpdates} updates of ${perUpdate} rows (${job.accumulate} micro-batch(es) each); run train_reader.py there with torchrun`,
  );
}

// ---- main ----------------------------------------------------------------------------

async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  mkdirSync(args.settings.work, { recursive: true });
  logFile = join(args.settings.work, 'pretrain.log');
  // the node process itself (npm and tsx in front of it do not pass SIGTERM on): `kill -TERM $(cat …)` stops it with a checkpoint
  if (!args.finish) writeFileSync(join(args.settings.work, 'pretrain.pid'), `${process.pid}\n`);
  log(`build-base ${argv.join(' ')} (pid ${process.pid})`);
  await useWasm();
  const data = await prepare(args.settings);
  if (args.job !== null) {
    await writeMaskedLmJob(args, data);
    return;
  }
  const result = await pretrain(args, data);
  if (result === null) {
    log('stopped; run the same command again to continue, or add --finish to write the folder from the newest checkpoint');
    return;
  }
  await finish(
    result.meta.settings.out === args.settings.out ? result.meta.settings : { ...result.meta.settings, out: args.settings.out },
    data,
    result.meta,
    result.params,
    result.config,
  );
  result.params.dispose();
}

if (process.argv[1] !== undefined && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  main(process.argv.slice(2)).catch((err: unknown) => {
    log(`error: ${err instanceof Error ? (err.stack ?? err.message) : String(err)}`);
    process.exitCode = 1;
  });
}
