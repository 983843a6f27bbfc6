// defines: fineTune, FineTuneRequest, RunMeta, RunStage — one training run of a
// reader, with evaluation and checkpoints, shared by every stage the session runs
// (fine-tuning on labelled questions, the practice stage, masked-LM on the user's
// passages). The loop itself is loop.ts; this file wires its callbacks:
//
//   1. windows      records → features (src/text/features.ts), once; for masked-LM,
//                   passages → packed rows (src/train/mlm-data.ts)
//   2. plan         updates, warmup, tokens per update (schedule.ts), logged via 'start'
//   3. resume       weights, moments and the data position from a checkpoint, if asked
//   4. loop         trainLoop with `evaluate` = SQuAD 2.0 EM/F1 on the validation
//                   records (src/eval/evaluate.ts) and `saveCheckpoint` = the store
//   5. prune        keep the best checkpoint by validation F1 and the last two, among
//                   this dataset's checkpoints (a practice stage's stay)

import { mulberry32 } from '../data/random.js';
import type { QARecord } from '../data/record.js';
import { evaluateRecords } from '../eval/evaluate.js';
import type { Checkpoint, CheckpointMeta, CheckpointStore } from '../io/checkpoint-store.js';
import type { ReaderConfig } from '../model/config.js';
import { ReaderParams } from '../model/params.js';
import { FeatureBuilder, type Feature, type FeatureTokenizer } from '../text/features.js';
import { packDocuments, packedExample } from './mlm-data.js';
import type { AdamWState } from './adamw.js';
import type { TrainConfig } from './config.js';
import { trainLoop, type LoopHooks, type LoopOutcome, type Metrics, type RunState } from './loop.js';
import { planTraining, type TrainPlan } from './schedule.js';
import { Trainer } from './trainer.js';

/** What a fine-tuning checkpoint carries beyond the store's common fields. */
export interface RunMeta extends CheckpointMeta {
  /** where the run stands: update count, data position, plan size (the one copy of each) */
  run: RunState;
  runConfig: { train: TrainConfig; model: ReaderConfig; base: string };
  /** which stage saved it: fine-tuning on labelled questions (absent in older checkpoints), the practice stage, or masked-LM on the user's passages */
  stage?: RunStage;
  /** the run that saved it: its id and its name for people (src/session/runs.ts); absent in older checkpoints */
  runId?: string;
  runName?: string;
}

/** The stages a run can be (RunMeta.stage). */
export type RunStage = 'fine-tune' | 'practice' | 'domain';

export interface FineTuneRequest {
  /** the starting weights; fineTune trains a copy and leaves these untouched */
  base: { params: ReaderParams; config: ReaderConfig; name: string };
  tokenizer: FeatureTokenizer;
  train: readonly QARecord[];
  /** scored at every evaluation; none → no evaluation, checkpoints by interval only */
  validation?: readonly QARecord[];
  config: TrainConfig;
  /** src/data/hash.ts hashDataset of the training records */
  datasetHash: string;
  store?: CheckpointStore<RunMeta>;
  /** continue from this checkpoint of `store` */
  resumeFrom?: string;
  hooks?: Pick<LoopHooks, 'onEvent' | 'signal' | 'shouldStop' | 'yieldToEvents'>;
  /** windows per forward pass when evaluating */
  evalBatchSize?: number;
  /**
   * Train on every window that holds an answer but only this share of the others
   * (seeded by the run seed); unset keeps every window. For practice questions over long
   * passages, whose windows without the answer would otherwise be most of the work.
   */
  noAnswerWindowShare?: number;
  /** which stage this run is, for its checkpoints' meta (default 'fine-tune') */
  stage?: RunStage;
  /** the run's id and name, for its checkpoints' meta; with an id, pruning keeps to this run's checkpoints */
  run?: { id: string; name: string };
  /**
   * Train the encoder with masked-LM on these texts instead (domain- and task-adaptive
   * pretraining, Gururangan et al. 2020): packed into full `[CLS] … [SEP]` rows of
   * `config.maxLength` tokens (src/train/mlm-data.ts), BERT's 15% masking with
   * `config.mlmProbability`. `train` and `validation` are then not used.
   */
  maskedLm?: { texts: readonly string[] };
  /** told the id of every checkpoint saved */
  onCheckpoint?: (id: string) => void;
}

export interface FineTuneResult {
  outcome: LoopOutcome;
  /** the trained weights; the caller owns and disposes them */
  params: ReaderParams;
  plan: TrainPlan;
  windows: number;
  /** the last evaluation's metrics, if any */
  metrics: Metrics | null;
}

export async function fineTune(req: FineTuneRequest): Promise<FineTuneResult> {
  const { config } = req;
  if (req.maskedLm) return maskedLmRun(req, req.maskedLm.texts);
  // 1. windows
  const { features, builder } = trainingWindows(req);
  const validationWindows = req.validation
    ? req.validation.flatMap((r) => new FeatureBuilder(req.tokenizer, builder.options).build(r).features)
    : [];

  // 2. plan
  const plan = planTraining(config, features.length);
  const { params, trainer, resume } = await startRun(req, plan);

  // 4. loop
  let lastMetrics: Metrics | null = null;
  const evaluate = req.validation?.length
    ? (): Metrics => {
        const { report } = evaluateRecords({ params, config: req.base.config, tokenizer: req.tokenizer }, req.validation!, {
          windows: validationWindows,
          batchSize: req.evalBatchSize,
        });
        const m: Metrics = {
          validationEM: report.summary.em ?? 0,
          validationF1: report.summary.f1 ?? 0,
          answerableF1: report.summary.answerable.f1 ?? 0,
          unanswerableF1: report.summary.unanswerable.f1 ?? 0,
        };
        if (report.bestCut) {
          m.bestCutF1 = report.bestCut.summary.f1 ?? 0;
          m.bestCutEM = report.bestCut.summary.em ?? 0;
          m.threshold = report.bestCut.threshold;
        }
        lastMetrics = m;
        return m;
      }
    : undefined;
  try {
    const outcome = await trainLoop(
      trainer,
      { kind: 'span', features },
      { ...req.hooks, evaluate, saveCheckpoint: checkpointSaver(req) },
      resume,
    );
    return { outcome, params, plan, windows: features.length, metrics: lastMetrics };
  } catch (err) {
    params.dispose();
    throw err;
  } finally {
    trainer.dispose();
  }
}

/**
 * Step 1 of a span run: the windows it trains on, in the order the data order indexes
 * them. Exported so a job for another trainer (src/io/torch-job.ts) carries exactly
 * these windows.
 */
export function trainingWindows(
  req: Pick<FineTuneRequest, 'tokenizer' | 'train' | 'config' | 'noAnswerWindowShare'> & {
    base: { config: Pick<ReaderConfig, 'questionMatch'> };
  },
): { features: Feature[]; builder: FeatureBuilder } {
  const { config } = req;
  const builder = new FeatureBuilder(req.tokenizer, {
    maxLength: config.maxLength,
    stride: config.stride,
    maxQueryLength: config.maxQueryLength,
    questionMatch: req.base.config.questionMatch,
  });
  let features = req.train.flatMap((r) => builder.build(r).features);
  builder.clearCache();
  if (req.noAnswerWindowShare !== undefined) {
    const keep = mulberry32(config.seed ^ 0x5a17);
    const share = req.noAnswerWindowShare;
    features = features.filter((f) => f.startPosition > 0 || keep() < share);
  }
  if (features.length === 0) throw new Error('fine-tuning needs at least one training question');
  return { features, builder };
}

/** The masked-LM run of `fineTune` (req.maskedLm): packed rows instead of windows, no evaluation. */
async function maskedLmRun(req: FineTuneRequest, texts: readonly string[]): Promise<FineTuneResult> {
  const { config } = req;
  const tok = req.tokenizer as FeatureTokenizer & { maskId?: number };
  if (tok.maskId === undefined) throw new Error('masked-LM training needs a tokenizer with a [MASK] token');
  // 1. rows: every text's tokens, [SEP] between texts, cut into full rows
  const encoded = texts.map((t) => tok.encodeFlat(t).ids);
  const starts = new Int32Array(encoded.length + 1);
  encoded.forEach((ids, d) => (starts[d + 1] = starts[d]! + ids.length));
  const ids = new Int32Array(starts[encoded.length]!);
  encoded.forEach((e, d) => ids.set(e, starts[d]!));
  if (ids.length === 0) throw new Error('masked-LM training needs passages with some text');
  const packed = packDocuments({ ids, starts }, config.maxLength, tok);
  const sequences = Array.from({ length: packed.count }, (_, r) => packedExample(packed, r));
  // 2. plan, 3. weights
  const plan = planTraining(config, sequences.length);
  const { params, trainer, resume } = await startRun(req, plan);
  const masking = { maskId: tok.maskId!, vocabSize: req.base.config.vocabSize, specialIds: [tok.clsId, tok.sepId, tok.padId] };
  try {
    const outcome = await trainLoop(
      trainer,
      { kind: 'mlm', sequences, masking },
      { ...req.hooks, saveCheckpoint: checkpointSaver(req) },
      resume,
    );
    return { outcome, params, plan, windows: sequences.length, metrics: null };
  } catch (err) {
    params.dispose();
    throw err;
  } finally {
    trainer.dispose();
  }
}

/** Step 3: the weights to train (a copy of the base, or a checkpoint's), the trainer, and the run state to continue from. */
async function startRun(
  req: FineTuneRequest,
  plan: TrainPlan,
): Promise<{ params: ReaderParams; trainer: Trainer; resume: RunState | undefined }> {
  const { config } = req;
  let resume: RunState | undefined;
  let optimizer: AdamWState | undefined;
  let params: ReaderParams;
  if (req.resumeFrom !== undefined) {
    if (!req.store) throw new Error('resuming needs a checkpoint store');
    const ckpt = await req.store.load(req.resumeFrom);
    if (ckpt.meta.datasetHash !== req.datasetHash) {
      throw new Error(
        `checkpoint "${req.resumeFrom}" was trained on other data (dataset hash ${ckpt.meta.datasetHash}, now ${req.datasetHash})`,
      );
    }
    if (ckpt.optimizer === null) throw new Error(`checkpoint "${req.resumeFrom}" holds no optimizer state to continue from`);
    params = ReaderParams.fromNamed(req.base.config, ckpt.weights, { source: `checkpoint ${req.resumeFrom}` }).params;
    resume = ckpt.meta.run;
    optimizer = ckpt.optimizer;
  } else {
    params = ReaderParams.fromNamed(req.base.config, req.base.params.toNamed(), { seed: config.seed, source: req.base.name }).params;
  }
  const trainer = new Trainer(params, req.base.config, config, plan);
  try {
    if (resume && optimizer) trainer.restore(resume.trainer, optimizer);
  } catch (err) {
    trainer.dispose();
    params.dispose();
    throw err;
  }
  return { params, trainer, resume };
}

/** The loop's checkpoint callback for the request's store (none without one), then step 5, pruning. */
function checkpointSaver(req: FineTuneRequest): LoopHooks['saveCheckpoint'] {
  const { config } = req;
  const store = req.store;
  return store
    ? async (request: Parameters<NonNullable<LoopHooks['saveCheckpoint']>>[0]) => {
        const meta: RunMeta = {
          step: request.state.trainer.update,
          runConfig: { train: config, model: req.base.config, base: req.base.name },
          datasetHash: req.datasetHash,
          metrics: { ...(request.metrics ?? {}) },
          label: request.reason,
          run: request.state,
          stage: req.stage ?? 'fine-tune',
          ...(req.run ? { runId: req.run.id, runName: req.run.name } : {}),
        };
        const ckpt: Checkpoint<RunMeta> = { meta, weights: request.weights(), optimizer: request.optimizer() };
        const saved = await store.save(ckpt);
        req.onCheckpoint?.(saved.id);
        // 5. prune
        // (among this run's own checkpoints when it has an id: a new run never prunes an earlier one's)
        await store.prune({ keepBest: 1, keepLast: 2, datasetHash: req.datasetHash, ...(req.run ? { runId: req.run.id } : {}) });
        return saved.id;
      }
    : undefined;
}
