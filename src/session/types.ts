// defines: the plain-data results of ReaderSession's use-cases (reader-session.ts) —
// what the CLI prints and what the workbench's worker posts to the page. Everything here
// is plain data (records, configs, numbers, strings, Uint8Array), so it crosses
// postMessage and lands in IndexedDB unchanged; no tensor is ever in one of these.
import type { EvaluationReport } from '../eval/report.js';
import type { ModelCardInfo } from '../io/model-card.js';
import type { DecodingChoice, ReaderConfig } from '../model/config.js';

export type { DecodingChoice };
import type { AnswerKind } from '../practice/candidates.js';
import type { PracticeKind } from '../practice/generate.js';
import type { Metrics } from '../train/loop.js';
import type { TrainConfig } from '../train/config.js';

/** The files of a model directory (contract: src/io/checkpoint-dir.ts). */
export interface ModelFiles {
  configJson: string;
  safetensors: Uint8Array;
  vocab: { file: 'vocab.txt' | 'tokenizer.json'; text: string };
}

/**
 * Which weights a use-case means: the base reader as loaded; the starting reader after
 * the practice stages (the base when none ran); the fine-tuned reader of the last run or
 * a restored checkpoint.
 */
export type ModelChoice = 'base' | 'start' | 'tuned';

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
  /** the id of the last checkpoint the run saved, if any */
  checkpointId: string | null;
}

/** A fine-tuning run's end, and what became of the fine-tuned reader in use (src/session/runs.ts keepsTunedReader). */
export interface FineTuneEnded extends TrainEnded {
  /** the name of the fine-tuned reader in use after the run; null when there is none */
  tunedReader: string | null;
  /** whether this run's weights became it (false: the reader in use before stays) */
  replacedTuned: boolean;
  /** the decoding settings chosen for it on the training questions and saved with it; null when none were chosen */
  decoding?: DecodingChoice | null;
}

/** One practice question as the page shows it before training on them. */
export interface PracticeSampleItem {
  id: string;
  passageId: string;
  question: string;
  /** "" for a no-answer question */
  answer: string;
  kind: PracticeKind;
  /** the answer's place in its context, for highlighting; null for no answer */
  span: { start: number; end: number } | null;
  context: string;
}

export interface PracticePreview {
  /** questions in all, and how many of them have no answer */
  questions: number;
  unanswerable: number;
  passages: number;
  /** passages that gave no question (too short, or nothing to ask about) */
  emptyPassages: number;
  byKind: Partial<Record<PracticeKind, number>>;
  byAnswerKind: Partial<Record<AnswerKind, number>>;
  /** a seeded sample, for the user to read before training */
  sample: PracticeSampleItem[];
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
  /** the reader's name ("fine-tuned run r3", "checkpoint …", the base's folder) */
  reader: string;
  summary: EvaluationReport['summary'];
  counts: EvaluationReport['counts'];
  /** the scores at the no-answer cut that is best on these questions, and that cut */
  bestCut: { threshold: number; summary: EvaluationReport['summary'] } | null;
  /** the no-answer cut and kind bonus `summary` was decoded with; saved: they are the reader's own (ReaderConfig.decoding) */
  decoding: { nullThreshold: number; kindBonus: number; saved: boolean };
  questions: QuestionView[];
}

export interface AnswerView {
  passageId: string;
  text: string;
  start: number;
  end: number;
  /** the reader's start + end logit */
  readerScore: number;
  /** BM25 score of the passage; null when one passage was asked and nothing was retrieved */
  retrieverScore: number | null;
  /** min–max combination of the two (src/retrieve/combine.ts); the reader's alone for one passage */
  combinedScore: number;
  /** null score − this passage's best span score: above 0 the reader leans towards "no answer here" */
  noAnswerMargin: number;
  /** a stretch of the passage around the answer, with the answer's offsets in it */
  context: string;
  contextStart: number;
}

export interface AskResult {
  answers: AnswerView[];
  /** passages the retriever picked, best first (score null when one passage was asked) */
  retrieved: Array<{ passageId: string; score: number | null }>;
  /** the null score beat every span in every passage read */
  noAnswer: boolean;
}

/** The facts a model card needs that only the caller knows. */
export interface ExportCardInput {
  dataset?: { hash: string; records: number; train: number; validation: number };
  settings?: TrainConfig;
  metrics?: EvaluationSummaryPair;
  /** the card's scores in full (with and without the tuned threshold); wins over `metrics` */
  scores?: ModelCardInfo['metrics'];
  /** the base reader's scores on the same validation questions, for the notes */
  baseScores?: EvaluationReport['summary'];
  /** extra lines for the card's notes */
  notes?: string[];
}

export interface ExportResult {
  files: Array<{ name: string; bytes: Uint8Array }>;
  notes: string[];
}

/** A job folder for PyTorch's distributed training, as ReaderSession.torchJob gives it. */
export interface TorchJobFolder {
  /** every file by its path inside the folder (DEVELOPERS.md, "Job folders for torch.distributed") */
  files: Array<{ name: string; bytes: Uint8Array }>;
  /** the name of the reader the job trains from (the start reader) */
  startsFrom: string;
  /** base/model.safetensors: the base's own bytes, or written from the engine's weights (notes say why) */
  baseWeights: 'copied' | 'rewritten';
  /** the run's settings as job.json holds them (windows resolved against the reader) */
  config: TrainConfig;
  /** training and validation questions, the training windows and the updates the run takes */
  questions: number;
  validation: number;
  windows: number;
  updates: number;
  /** things the user should know (a window cut to the position table, weights rewritten) */
  notes: string[];
}
