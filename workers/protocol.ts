// defines: the typed messages between the workbench page and its engine worker.
//
// Page → worker: an EngineRequest, wrapped as {requestId, request}. The worker answers
// every request exactly once with a `reply` (its result, or an error message), and
// while a training run goes it also sends `run-event` messages (the training loop's own
// LoopEvent, src/train/loop.ts), and while a learning curve is drawn, `curve-event`
// messages (CurveEvent). Everything here is plain data — records, configs,
// numbers, strings, Uint8Array — so it crosses postMessage and lands in IndexedDB
// unchanged. No tensors ever reach the page.
import type { QARecord } from '../src/data/record.js';
import type { EvaluationReport } from '../src/eval/report.js';
import type { CheckpointSummary, StoreUsage } from '../src/io/checkpoint-store.js';
import type { ReaderConfig } from '../src/model/config.js';
import type { LoopEvent, Metrics } from '../src/train/loop.js';
import type { RunMeta } from '../src/train/finetune.js';
import type { TrainConfig } from '../src/train/config.js';

/** The files of a model directory (contract: src/io/checkpoint-dir.ts). */
export interface ModelFiles {
  configJson: string;
  safetensors: Uint8Array;
  vocab: { file: 'vocab.txt' | 'tokenizer.json'; text: string };
}

/** Which weights a request means: the base reader, or the fine-tuned one in the worker. */
export type ModelChoice = 'base' | 'tuned';

/** What the page sends. */
export type EngineRequest =
  /** start tfjs on wasm, the wasm files served from `wasmBase` (a URL ending in /) */
  | { kind: 'init'; wasmBase: string }
  /** make these files the base reader */
  | { kind: 'load-base'; name: string; files: ModelFiles }
  /** token counts of each record under the base's tokenizer, for the statistics */
  | { kind: 'measure'; records: QARecord[]; maxLength: number; stride: number; maxQueryLength: number }
  /** time `steps` real training updates to estimate an epoch (weights are not kept) */
  | { kind: 'time-steps'; train: QARecord[]; config: TrainConfig; steps: number }
  /** fine-tune the base (or continue a run from a checkpoint) */
  | {
      kind: 'train';
      runId: string;
      train: QARecord[];
      validation: QARecord[];
      config: TrainConfig;
      datasetHash: string;
      resumeFrom?: string;
    }
  /** ask a running `train` to save a checkpoint and return ('pause' and 'stop' differ only for the page) */
  | { kind: 'halt'; runId: string }
  | { kind: 'list-checkpoints' }
  | { kind: 'delete-checkpoint'; id: string }
  | { kind: 'prune-checkpoints'; keepBest: number; keepLast: number }
  /** load a checkpoint's weights as the fine-tuned reader */
  | { kind: 'restore-checkpoint'; id: string }
  /**
   * a learning curve: fresh copies of the base trained with `config` on nested shares of
   * `train` (whole passages, picked in an order shuffled by `seed`, so each smaller share
   * lies inside the larger), each scored on `validation`; nothing goes to the checkpoint store
   */
  | { kind: 'learning-curve'; curveId: string; train: QARecord[]; validation: QARecord[]; config: TrainConfig; shares: number[]; seed: number }
  /** ask a running learning curve to stop after its current update; the points done so far come back */
  | { kind: 'cancel-curve'; curveId: string }
  | { kind: 'evaluate'; model: ModelChoice; records: QARecord[]; maxLength: number; stride: number; maxQueryLength: number }
  | { kind: 'ask'; model: ModelChoice; question: string; passages: Array<{ id: string; text: string }>; topPassages: number; topAnswers: number; maxLength: number; stride: number; maxQueryLength: number }
  | { kind: 'export'; model: ModelChoice; fp16: boolean; int8: boolean; onnx: boolean; card: ExportCardInput };

/** The facts a model card needs that only the page knows. */
export interface ExportCardInput {
  dataset?: { hash: string; records: number; train: number; validation: number };
  settings?: TrainConfig;
  metrics?: EvaluationSummaryPair;
}

export interface EngineReady {
  backend: string;
  /** tfjs-wasm's worker threads (1 = none) */
  threads: number;
  crossOriginIsolated: boolean;
  /** the project's SIMD kernels (src/kernels) are registered */
  fastKernels: boolean;
}

export interface BaseInfo {
  name: string;
  config: ReaderConfig;
  params: { encoder: number; spanHead: number; mlmHead: number; total: number };
  vocabSize: number;
  notices: string[];
  missing: string[];
  unexpected: string[];
}

export interface RecordLength {
  id: string;
  /** question + context tokens + 3 special tokens, before windowing */
  tokens: number;
  windows: number;
}

export interface StepTiming {
  /** milliseconds of each timed update, in order (the first includes warm-up) */
  stepMs: number[];
  updatesPerEpoch: number;
  windows: number;
  /** estimated epoch time from the updates after the first */
  epochMs: number;
}

export interface TrainEnded {
  runId: string;
  status: 'finished' | 'stopped';
  update: number;
  totalUpdates: number;
  metrics: Metrics | null;
}

/** One point of a learning curve: a reader trained on `questions` training questions. */
export interface CurvePoint {
  /** the share of the training questions asked for, in (0, 1] */
  share: number;
  /** training questions and passages the share took (whole passages, so near share × all) */
  questions: number;
  passages: number;
  /** optimizer updates the run took */
  updates: number;
  /** validation scores by the SQuAD 2.0 rules, in percent; null when no question of that kind */
  em: number | null;
  f1: number | null;
}

/** Progress of a learning curve, as it goes. `index` counts shares from 0 of `of`. */
export type CurveEvent =
  /** training on a share begins */
  | { type: 'share'; index: number; of: number; share: number; questions: number; passages: number }
  /** update `update` of `totalUpdates` of this share's run is done */
  | { type: 'update'; index: number; of: number; update: number; totalUpdates: number }
  /** this share's reader is being scored on the validation questions */
  | { type: 'scoring'; index: number; of: number }
  /** this share's point is done */
  | { type: 'point'; index: number; of: number; point: CurvePoint };

export interface LearningCurve {
  curveId: string;
  /** 'cancelled': asked to stop; `points` holds the shares finished before */
  status: 'finished' | 'cancelled';
  /** training questions in all (the 100% share) */
  trainQuestions: number;
  validationQuestions: number;
  points: CurvePoint[];
}

/** One question of an evaluation, with character spans for highlighting. */
export interface QuestionView {
  id: string;
  passageId: string;
  question: string;
  context: string;
  gold: Array<{ start: number; end: number; text: string }>;
  unanswerable: boolean;
  prediction: string;
  /** where the prediction sits in the context; null for no answer */
  predictedSpan: { start: number; end: number } | null;
  exact: number;
  f1: number;
  outcome: string;
}

export interface EvaluationSummaryPair {
  base?: EvaluationReport['summary'];
  tuned?: EvaluationReport['summary'];
  threshold?: number;
}

export interface EvaluationResult {
  model: ModelChoice;
  summary: EvaluationReport['summary'];
  counts: EvaluationReport['counts'];
  tuned: { threshold: number; summary: EvaluationReport['summary'] } | null;
  questions: QuestionView[];
}

export interface AnswerView {
  passageId: string;
  text: string;
  start: number;
  end: number;
  /** the reader's start + end logit */
  readerScore: number;
  /** BM25 score of the passage (0 when one passage was asked) */
  retrieverScore: number;
  /** min–max combination of the two (src/retrieve/combine.ts) */
  combinedScore: number;
  /** a stretch of the passage around the answer, with the answer's offsets in it */
  context: string;
  contextStart: number;
}

export interface AskResult {
  answers: AnswerView[];
  /** passages the retriever picked, best first */
  retrieved: Array<{ passageId: string; score: number }>;
  /** the null score beat every span in every passage read */
  noAnswer: boolean;
}

export interface ExportResult {
  files: Array<{ name: string; bytes: Uint8Array }>;
  notes: string[];
}

/** The result type of each request kind. */
export interface EngineResults {
  init: EngineReady;
  'load-base': BaseInfo;
  measure: RecordLength[];
  'time-steps': StepTiming;
  train: TrainEnded;
  halt: { accepted: boolean };
  'list-checkpoints': { checkpoints: CheckpointSummary<RunMeta>[]; usage: StoreUsage };
  'delete-checkpoint': { deleted: string };
  'prune-checkpoints': { deleted: string[] };
  'restore-checkpoint': { id: string; step: number };
  'learning-curve': LearningCurve;
  'cancel-curve': { accepted: boolean };
  evaluate: EvaluationResult;
  ask: AskResult;
  export: ExportResult;
}

export type RequestKind = EngineRequest['kind'];
export type RequestOf<K extends RequestKind> = Extract<EngineRequest, { kind: K }>;

/** The envelope of a request. */
export interface RequestMessage {
  requestId: number;
  request: EngineRequest;
}

/** What the worker sends. */
export type WorkerMessage =
  | { type: 'reply'; requestId: number; ok: true; result: EngineResults[RequestKind] }
  | { type: 'reply'; requestId: number; ok: false; error: string }
  | { type: 'run-event'; runId: string; event: LoopEvent }
  | { type: 'curve-event'; curveId: string; event: CurveEvent };

