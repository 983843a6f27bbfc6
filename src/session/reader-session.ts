// defines: ReaderSession — the use-cases of Spanwright in one isomorphic object, shared by
// the command line (src/cli/commands) and the workbench's engine worker
// (workers/engine-worker.ts), so that neither grows its own copy of a rule.
//
// It owns the readers of one session:
//   base     the reader as loaded (a model directory's files)
//   start    the reader fine-tuning starts from: the base after the practice stage
//            (practice questions from the user's passages), or the base itself
//   tuned    the reader of the last fine-tuning run, or a restored checkpoint
// and offers: loadBase, measure, timeSteps, previewPractice, practice, fineTune, halt,
// the checkpoint use-cases, learningCurve, cancelCurve, evaluate, ask, exportReader,
// torchJob (a job folder for PyTorch's distributed training).
// Each takes one plain-data argument (plus callbacks for progress) and returns plain
// data (types.ts), so the worker maps messages to methods one to one.
//
// Window settings are resolved against the reader in one place (windows.ts); a training
// config's own three window fields are resolved the same way before a run.
import { hashDataset } from '../data/hash.js';
import { mulberry32, shuffleInPlace } from '../data/random.js';
import type { QARecord } from '../data/record.js';
import { evaluateRecords, predictRecords, readerDecoding, readerLogits, readerWindows } from '../eval/evaluate.js';
import { KIND_BONUS_GRID, predictAll, type SpanChoiceOptions } from '../eval/span-choice.js';
import { buildReport, questionsFromRecords, type EvaluationReport } from '../eval/report.js';
import { lexicalBaselineScores } from '../eval/lexical-baseline.js';
import { applyNoAnswerThreshold, evaluate, findBestThresholds, goldFromRecords, type SquadScores } from '../eval/squad-metric.js';
import { loadCheckpointDir } from '../io/checkpoint-dir.js';
import type { CheckpointStore, CheckpointSummary, StoreUsage } from '../io/checkpoint-store.js';
import { exportModel, type ExportFile } from '../io/export.js';
import { quantizeModel } from '../io/int8.js';
import { int8AccuracyCost, measureInt8Drift } from '../io/int8-check.js';
import type { ModelCardInfo } from '../io/model-card.js';
import { namedToSafetensors } from '../io/safetensors.js';
import { baseWeightsAsIs, howToRun, JOB_PATHS, torchJobFiles } from '../io/torch-job.js';
import {
  configToHf,
  paramCount,
  validateConfig,
  withoutDecoding,
  type DecodingChoice,
  type QuestionMatch,
  type ReaderConfig,
} from '../model/config.js';
import { ReaderParams } from '../model/params.js';
import { withQuestionMatch } from '../model/question-match.js';
import { DEFAULT_PRACTICE_OPTIONS, makePracticeQuestions, type PracticeOptions, type PracticePassage } from '../practice/generate.js';
import { Bm25Index } from '../retrieve/bm25.js';
import { combineScores } from '../retrieve/combine.js';
import { FeatureBuilder } from '../text/features.js';
import type { WordPieceTokenizer } from '../text/wordpiece.js';
import { trainConfig, type TrainConfig } from '../train/config.js';
import { fineTune, type RunMeta, type RunStage } from '../train/finetune.js';
import type { LoopEvent } from '../train/loop.js';
import type {
  AnswerView,
  AskResult,
  BaseInfo,
  CurveEvent,
  CurvePoint,
  EvaluationResult,
  EvaluationSummaryPair,
  ExportCardInput,
  ExportResult,
  FineTuneEnded,
  LearningCurve,
  ModelChoice,
  ModelFiles,
  PracticePreview,
  QuestionView,
  RecordLength,
  StepTiming,
  TorchJobFolder,
  TrainEnded,
} from './types.js';
import { checkpointLabel, stageLabel } from './labels.js';
import { keepsTunedReader, tunedReaderName } from './runs.js';
import { resolveWindows, type WindowSettings } from './windows.js';

/** A reader the session holds: weights, their config and tokenizer, and a name for people. */
export interface SessionReader {
  name: string;
  config: ReaderConfig;
  params: ReaderParams;
  tokenizer: WordPieceTokenizer;
}

interface BaseReader extends SessionReader {
  vocab: { file: 'vocab.txt' | 'tokenizer.json'; text: string };
  /** parameters the checkpoint lacked (initialised afresh); left out of exports when MLM */
  missing: string[];
  /** the base directory's files as they were given, for job folders (torchJob) */
  directory: ExportFile[];
  /** why its model.safetensors cannot go into a job folder as it is (baseWeightsAsIs); null when it can */
  weightsNotAsIs: string | null;
}

/** What a session is given besides its store. */
export interface SessionOptions {
  /**
   * The job program's files (jobs/torch/, JOB_PROGRAM_FILES in src/io/torch-job.ts) for
   * torchJob: the CLI reads them from the installation, the workbench's worker has them
   * in its bundle (workers/job-program.ts). Without it the session writes no job folder.
   */
  jobProgram?: () => ExportFile[] | Promise<ExportFile[]>;
}

/** Progress hooks of a training use-case; the worker posts them, the CLI prints them. */
export interface RunHooks {
  onEvent?: (event: LoopEvent) => void;
  /** polled between updates; true stops the run after a checkpoint */
  shouldStop?: () => boolean;
  signal?: AbortSignal;
}

export interface FineTuneArgs extends RunHooks {
  runId: string;
  /** the run's name for people (src/session/runs.ts), kept in its checkpoints' meta; default "run <runId>" */
  runName?: string;
  train: QARecord[];
  validation: QARecord[];
  config: TrainConfig;
  /** src/data/hash.ts hashDataset of `train` */
  datasetHash: string;
  /** continue this checkpoint of the session's store */
  resumeFrom?: string;
  /** also measure at every evaluation (default true when there are validation questions) */
  evalBatchSize?: number;
  /**
   * Practice questions (src/practice) written from these passages join the training
   * questions, so the reader keeps practising reading while it learns the labels, instead
   * of a practice stage of its own before (`practice`). Never the validation passages.
   * `datasetHash` should cover them (the CLI adds the passages and options). Every epoch
   * gets practice questions of its own (`mixedTrainingSet`): `questions.perPassage` is per
   * passage and epoch.
   */
  practiceMix?: { passages: PracticePassage[]; questions?: Partial<PracticeOptions> };
  /**
   * Choose the no-answer cut and kind bonus on `train` (the labelled questions, not the
   * practice ones) once the run ends, and keep them with the fine-tuned reader
   * (ReaderConfig.decoding). Default true; false leaves the neutral decoding.
   */
  chooseDecoding?: boolean;
}

export interface PracticeArgs extends RunHooks {
  runId: string;
  /** the run's name for people, kept in its checkpoints' meta */
  runName?: string;
  /** the passages to write questions from: never the validation passages */
  passages: PracticePassage[];
  questions?: Partial<PracticeOptions>;
  config: TrainConfig;
  /** turn on these word-match token types (src/model/config.ts) for the start reader if it lacks them */
  questionMatch?: QuestionMatch;
}

/**
 * The practice options of a mixed run (FineTuneArgs.practiceMix) for all its epochs at
 * once: `perPassage` (default DEFAULT_PRACTICE_OPTIONS.perPassage / 2) times the epochs.
 * The generator runs out of new questions on a short passage, so fewer may come.
 */
export function mixedPracticeOptions(questions: Partial<PracticeOptions> | undefined, epochs: number): Partial<PracticeOptions> {
  const perEpoch = questions?.perPassage ?? DEFAULT_PRACTICE_OPTIONS.perPassage / 2;
  return { ...questions, perPassage: perEpoch * epochs };
}

/**
 * Labelled questions with practice questions mixed in, new practice questions for every
 * epoch: the practice questions of all `config.epochs` epochs are written at once
 * (mixedPracticeOptions), the labelled questions repeated once per epoch (ids after the
 * first copy get "#2", "#3", …, so every window keeps a distinct record), and the whole
 * set trained in one pass (epochs 1, the updates of `config.epochs` epochs). Seen twice, a
 * practice question teaches little the first time did not: on the demo, 4 epochs with new
 * ones gave mean F1 41.8 (3 seeds) against 38.9 for 2 epochs over one set, and 4 epochs
 * over one set 37.9 (seed 1; DEVELOPERS.md, "Facts found while building").
 */
export function mixedTrainingSet(
  labelled: readonly QARecord[],
  mix: NonNullable<FineTuneArgs['practiceMix']>,
  config: TrainConfig,
): { train: QARecord[]; config: TrainConfig } {
  const made = makePracticeQuestions(mix.passages, mixedPracticeOptions(mix.questions, config.epochs)).records;
  if (made.length === 0)
    throw new Error('the passages gave no practice question: they need sentences with names, numbers, dates or phrases to ask about');
  const repeated: QARecord[] = [];
  for (let epoch = 1; epoch <= config.epochs; epoch++) {
    for (const r of labelled) repeated.push(epoch === 1 ? r : { ...r, id: `${r.id}#${epoch}` });
  }
  return { train: [...repeated, ...made], config: { ...config, epochs: 1 } };
}

/** Window settings as flat optional fields, the way the page and the CLI pass them. */
export type WindowArgs = Partial<WindowSettings>;

/** Questions per window when a use-case has no reason to choose. */
const PRACTICE_NO_ANSWER_WINDOWS = 0.1;

/**
 * Nested shares of the training questions, by whole passages so no passage is split:
 * 1. passage ids sorted (UTF-16 code-unit order), so the shares depend on the set of
 *    records and not on their order (as src/data/split.ts does);
 * 2. shuffled with mulberry32(seed);
 * 3. each share takes passages from the front of that order until it holds at least
 *    round(share × all) questions (one passage at the least).
 * Every share is a prefix of one order, so each smaller share lies inside each larger
 * one. Records keep their input order.
 */
export function nestedShares(
  records: readonly QARecord[],
  shares: readonly number[],
  seed: number,
): Array<{ share: number; records: QARecord[]; passages: number }> {
  for (const share of shares) {
    if (!(share > 0 && share <= 1)) throw new RangeError(`learning curve: a share must be in (0, 1], got ${share}`);
  }
  if (!Number.isInteger(seed)) throw new RangeError(`learning curve: seed must be a whole number, got ${seed}`);
  // 1. passages and their sizes, in a fixed order
  const size = new Map<string, number>();
  for (const r of records) size.set(r.passageId, (size.get(r.passageId) ?? 0) + 1);
  const passages = [...size.keys()].sort((a, b) => (a < b ? -1 : a > b ? 1 : 0));
  // 2. shuffled by the seed
  shuffleInPlace(passages, mulberry32(seed));
  // 3. a prefix of that order per share
  return shares.map((share) => {
    const target = Math.round(share * records.length);
    const taken = new Set<string>();
    let questions = 0;
    for (const p of passages) {
      if (taken.size > 0 && questions >= target) break;
      taken.add(p);
      questions += size.get(p)!;
    }
    return { share, records: records.filter((r) => taken.has(r.passageId)), passages: taken.size };
  });
}

/** The passages of records, each once, in first-seen order. */
export function passagesOf(records: readonly QARecord[]): PracticePassage[] {
  const seen = new Map<string, string>();
  for (const r of records) if (!seen.has(r.passageId)) seen.set(r.passageId, r.context);
  return [...seen].map(([id, text]) => ({ id, text }));
}

/** What a model card says about word-match token types, for whoever feeds the exported model. */
function matchNote(level: QuestionMatch): string {
  const words =
    'token_type_ids: 0 for [CLS] question [SEP]; for context tokens and the last [SEP] 1, or 2 for a word the question also holds';
  const sentence = "; 3 and 4 likewise inside the sentence that holds the largest rarity-weighted share of the question's words";
  const kind = '; 4 more (5–8) for tokens in a span of the kind the question asks for (src/text/answer-kinds.ts)';
  return `${words}${level !== 'words' ? sentence : ''}${level === 'words+sentence+kind' ? kind : ''} (config.json "spanwright_question_match": "${level}"; src/text/features.ts computes them)`;
}

export class ReaderSession {
  private baseReader: BaseReader | null = null;
  private startReader: SessionReader | null = null;
  private tunedReader: SessionReader | null = null;
  /** the training run in progress (fine-tuning or practice) and whether it was asked to halt */
  private running: { runId: string; halt: boolean } | null = null;
  /** the evaluation in steps in progress, and whether it was asked to stop */
  private evaluation: { evaluationId: string; cancel: boolean } | null = null;
  /** the learning curve being drawn, whether it was asked to stop, and its end */
  private curve: { curveId: string; cancel: boolean; ended: Promise<void> } | null = null;

  /** `store` keeps checkpoints (IndexedDB in the browser, a folder for the CLI); none = no checkpoints */
  constructor(
    private readonly store: CheckpointStore<RunMeta> | null = null,
    private readonly options: SessionOptions = {},
  ) {}

  // ---- readers --------------------------------------------------------------------

  /** The base reader; throws a message for people when none is loaded. */
  get base(): BaseReader {
    if (!this.baseReader) throw new Error('no base reader is loaded: choose one on the Base reader screen first');
    return this.baseReader;
  }

  /** The reader a choice names. */
  reader(choice: ModelChoice): SessionReader {
    const b = this.base;
    if (choice === 'base') return b;
    if (choice === 'start') return this.startReader ?? b;
    if (!this.tunedReader)
      throw new Error('there is no fine-tuned reader yet: train one, or restore a checkpoint on the Checkpoints screen');
    return this.tunedReader;
  }

  /**
   * Word-match token types (src/model/config.ts, questionMatch) for the start reader, so
   * the stages after this read them: its token-type table grows, the new rows copies of
   * the ones they refine (src/model/question-match.ts). A reader that has them already
   * is left alone.
   */
  setQuestionMatch(args: { level: QuestionMatch }): { start: string; questionMatch: QuestionMatch } {
    const start = this.reader('start');
    if (start.config.questionMatch !== args.level) {
      const m = withQuestionMatch(start.config, start.params.toNamed(), args.level);
      const params = ReaderParams.fromNamed(m.config, m.named, { source: start.name }).params;
      if (this.startReader) this.startReader.params.dispose();
      this.startReader = { name: `${start.name} + word-match types`, config: m.config, params, tokenizer: start.tokenizer };
    }
    return { start: this.reader('start').name, questionMatch: args.level };
  }

  /** Fine-tuning starts from the base reader again; the practised start reader goes. */
  resetStart(): { start: string } {
    if (this.startReader) this.startReader.params.dispose();
    this.startReader = null;
    return { start: this.base.name };
  }

  /** Whether a fine-tuned reader is held. */
  get hasTuned(): boolean {
    return this.tunedReader !== null;
  }

  /**
   * Makes these files the base reader; the start and fine-tuned readers go. `directory`
   * is every file of the base's folder as bytes, which job folders copy (the CLI's); by
   * default the three of `files`.
   */
  loadBase(args: {
    name: string;
    files: ModelFiles;
    names?: { config: string; weights: string; vocab: string };
    directory?: ExportFile[];
  }): BaseInfo {
    const names = args.names ?? {
      config: `${args.name}/config.json`,
      weights: `${args.name}/model.safetensors`,
      vocab: `${args.name}/${args.files.vocab.file}`,
    };
    const loaded = loadCheckpointDir({ ...args.files, names });
    this.disposeReaders();
    this.baseReader = {
      name: args.name,
      config: loaded.config,
      params: loaded.params,
      tokenizer: loaded.tokenizer,
      vocab: loaded.vocab,
      missing: loaded.report.missing,
      directory: args.directory ?? [
        { name: 'config.json', bytes: new TextEncoder().encode(args.files.configJson) },
        { name: 'model.safetensors', bytes: args.files.safetensors },
        { name: args.files.vocab.file, bytes: new TextEncoder().encode(args.files.vocab.text) },
      ],
      weightsNotAsIs: baseWeightsAsIs(loaded.config, loaded),
    };
    return {
      name: args.name,
      config: loaded.config,
      params: paramCount(loaded.config),
      vocabSize: loaded.tokenizer.vocabSize,
      notices: loaded.report.notices,
      missing: loaded.report.missing,
      unexpected: loaded.report.unexpected,
    };
  }

  /** The window settings `args` asks for, resolved against a reader (notes go to `onNote`). */
  windows(args: WindowArgs, reader: Pick<SessionReader, 'config'> = this.base, onNote?: (note: string) => void) {
    const resolved = resolveWindows(args, reader.config);
    for (const n of resolved.notes) onNote?.(n);
    return resolved;
  }

  /** A training config with its window fields resolved against the reader it trains. */
  private trainSettings(config: TrainConfig, reader: SessionReader): TrainConfig {
    const { settings } = resolveWindows(
      { maxLength: config.maxLength, stride: config.stride, maxQueryLength: config.maxQueryLength },
      reader.config,
    );
    return { ...config, ...settings };
  }

  // ---- data -----------------------------------------------------------------------

  /** Token counts of each record under the base's tokenizer, for the statistics. */
  measure(args: { records: QARecord[] } & WindowArgs): RecordLength[] {
    const b = this.base;
    const builder = new FeatureBuilder(b.tokenizer, this.windows(args).features);
    return args.records.map((r) => ({
      id: r.id,
      tokens: b.tokenizer.encodeFlat(r.question).ids.length + builder.contextEncoding(r.context).ids.length + 3,
      windows: builder.build(r).features.length,
    }));
  }

  /** Practice questions for passages, with a seeded sample to read, without training. */
  previewPractice(args: { passages: PracticePassage[]; questions?: Partial<PracticeOptions>; sample?: number }): PracticePreview {
    const made = makePracticeQuestions(args.passages, args.questions);
    const byKind: PracticePreview['byKind'] = {};
    for (const k of made.kinds.values()) byKind[k] = (byKind[k] ?? 0) + 1;
    const order = shuffleInPlace([...made.records.keys()], mulberry32(args.questions?.seed ?? 1));
    const sample = order
      .slice(0, args.sample ?? 20)
      .sort((a, b) => a - b)
      .map((i) => {
        const r = made.records[i]!;
        const a = r.answers[0];
        return {
          id: r.id,
          passageId: r.passageId,
          question: r.question,
          answer: a?.text ?? '',
          kind: made.kinds.get(r.id)!,
          span: a ? { start: a.start, end: a.start + a.text.length } : null,
          context: r.context,
        };
      });
    return {
      questions: made.records.length,
      unanswerable: made.records.filter((r) => r.unanswerable).length,
      passages: made.passages,
      emptyPassages: made.emptyPassages,
      byKind,
      byAnswerKind: made.byAnswerKind,
      sample,
    };
  }

  // ---- training -------------------------------------------------------------------

  private beginRun(runId: string): { runId: string; halt: boolean } {
    if (this.running) throw new Error(`run ${this.running.runId} is still training; pause or stop it first`);
    if (this.curve) throw new Error('a learning curve is being drawn; wait for it or cancel it on the Evaluation screen first');
    const run = { runId, halt: false };
    this.running = run;
    return run;
  }

  /** Asks the running training run to save a checkpoint and return. */
  halt(args: { runId: string }): { accepted: boolean } {
    if (!this.running || this.running.runId !== args.runId) return { accepted: false };
    this.running.halt = true;
    return { accepted: true };
  }

  /** Times `steps` real training updates to estimate an epoch; the weights are not kept. */
  async timeSteps(args: { train: QARecord[]; config: TrainConfig; steps: number }): Promise<StepTiming> {
    const start = this.reader('start');
    const stepMs: number[] = [];
    let updatesPerEpoch = 0;
    let windows = 0;
    const result = await fineTune({
      base: start,
      tokenizer: start.tokenizer,
      train: args.train,
      config: this.trainSettings(args.config, start),
      datasetHash: 'timing',
      hooks: {
        onEvent: (e) => {
          if (e.type === 'start') [updatesPerEpoch, windows] = [e.plan.updatesPerEpoch, e.plan.features];
          if (e.type === 'progress') stepMs.push(e.stepMs);
        },
        shouldStop: () => stepMs.length >= args.steps,
      },
    });
    result.params.dispose();
    const later = stepMs.length > 1 ? stepMs.slice(1) : stepMs;
    const mean = later.reduce((a, x) => a + x, 0) / Math.max(1, later.length);
    return { stepMs, updatesPerEpoch, windows, epochMs: mean * updatesPerEpoch };
  }

  /**
   * The practice stage: questions written from the user's passages (src/practice), and
   * the start reader trained on them — every window holding an answer, a tenth of the
   * others. Afterwards fine-tuning starts from this reader. Checkpoints go to the store
   * like a fine-tuning run's, so a stopped stage continues with `resumeFrom`.
   */
  async practice(args: PracticeArgs & { resumeFrom?: string; datasetHash?: string }): Promise<TrainEnded & { questions: number }> {
    if (this.curve?.cancel) await this.curve.ended;
    const start = this.reader('start');
    const run = this.beginRun(args.runId);
    // a reader with the question-match token type turned on is a temporary copy, let go below
    let from = start;
    let made: QARecord[];
    try {
      made = makePracticeQuestions(args.passages, args.questions).records;
      if (made.length === 0)
        throw new Error('the passages gave no practice question: they need sentences with names, numbers, dates or phrases to ask about');
      if (args.questionMatch && start.config.questionMatch !== args.questionMatch) {
        const m = withQuestionMatch(start.config, start.params.toNamed(), args.questionMatch);
        from = { ...start, config: m.config, params: ReaderParams.fromNamed(m.config, m.named, { source: start.name }).params };
      }
    } catch (err) {
      this.running = null;
      throw err;
    }
    try {
      const ended = await this.train(
        run,
        from,
        {
          runId: args.runId,
          runName: args.runName,
          train: made,
          validation: [],
          config: args.config,
          datasetHash: args.datasetHash ?? `practice:${made.length}:${args.questions?.seed ?? 0}`,
          resumeFrom: args.resumeFrom,
          onEvent: args.onEvent,
          shouldStop: args.shouldStop,
          signal: args.signal,
        },
        'practice',
        PRACTICE_NO_ANSWER_WINDOWS,
      );
      if (this.startReader) this.startReader.params.dispose();
      this.startReader = {
        name: `${start.name} + practice (run ${args.runId})`,
        config: from.config,
        params: ended.params,
        tokenizer: from.tokenizer,
      };
      return { ...ended.result, questions: made.length };
    } finally {
      if (from !== start) from.params.dispose();
    }
  }

  /**
   * Masked-LM on the user's own passages (domain- and task-adaptive pretraining,
   * Gururangan et al. 2020, "Don't Stop Pretraining"): the start reader's encoder trained
   * with BERT's masking on the passages packed into full rows, for a time budget — a few
   * timed updates give the step time, and the run takes as many whole passes as fit
   * (at least one). The result is the new start reader; its span head is untouched.
   */
  async domainPretrain(
    args: RunHooks & {
      runId: string;
      runName?: string;
      passages: PracticePassage[];
      config: TrainConfig;
      minutes: number;
      resumeFrom?: string;
      datasetHash?: string;
    },
  ): Promise<TrainEnded & { passes: number; rows: number }> {
    if (this.curve?.cancel) await this.curve.ended;
    if (!(args.minutes > 0)) throw new RangeError(`domainPretrain: minutes must be above 0, got ${args.minutes}`);
    const from = this.reader('start');
    if (!from.params.variables.has('cls.predictions.bias'))
      throw new Error(`${from.name} has no MLM head, so it cannot be trained with masked-LM`);
    const texts = args.passages.map((p) => p.text);
    // rows no longer than the reader's position table
    const config = this.trainSettings(args.config, from);
    const datasetHash = args.datasetHash ?? `domain:${texts.length}:${texts.reduce((a, t) => a + t.length, 0)}`;
    const run = this.beginRun(args.runId);
    let passes: number;
    let rows = 0;
    try {
      if (args.resumeFrom !== undefined) {
        // a continued run keeps the passes its first session chose
        const saved = (await this.needStore().list()).find((c) => c.id === args.resumeFrom);
        if (!saved) throw new Error(`no checkpoint ${args.resumeFrom} to continue from`);
        passes = saved.meta.runConfig.train.epochs;
      } else {
        // the step time, from three updates of one pass (weights not kept)
        const stepMs: number[] = [];
        const probe = await fineTune({
          base: from,
          tokenizer: from.tokenizer,
          train: [],
          maskedLm: { texts },
          config: { ...config, epochs: 1 },
          datasetHash: 'timing',
          hooks: { onEvent: (e) => e.type === 'progress' && stepMs.push(e.stepMs), shouldStop: () => stepMs.length >= 3 },
        });
        probe.params.dispose();
        const per = stepMs.slice(1).reduce((a, x) => a + x, 0) / Math.max(1, stepMs.length - 1);
        passes = Math.max(1, Math.floor((args.minutes * 60_000) / (per * probe.plan.updatesPerEpoch)));
      }
    } catch (err) {
      this.running = null;
      throw err;
    }
    const ended = await this.train(
      run,
      from,
      {
        runId: args.runId,
        runName: args.runName,
        train: [],
        validation: [],
        config: { ...config, epochs: passes },
        datasetHash,
        resumeFrom: args.resumeFrom,
        onEvent: (e) => {
          if (e.type === 'start') rows = e.plan.features;
          args.onEvent?.(e);
        },
        shouldStop: args.shouldStop,
        signal: args.signal,
      },
      'domain',
      undefined,
      { texts },
    );
    if (this.startReader) this.startReader.params.dispose();
    this.startReader = {
      name: `${from.name} + masked-LM on ${texts.length} passages (run ${args.runId})`,
      config: from.config,
      params: ended.params,
      tokenizer: from.tokenizer,
    };
    return { ...ended.result, passes, rows };
  }

  /** Fine-tunes the start reader on labelled questions (or continues a run from a checkpoint). */
  async fineTune(args: FineTuneArgs): Promise<FineTuneEnded> {
    // leaving the Evaluation screen cancels its curve: a run started right after waits for the update in hand
    if (this.curve?.cancel) await this.curve.ended;
    const from = this.reader('start');
    const mixed = args.practiceMix
      ? mixedTrainingSet(args.train, args.practiceMix, args.config)
      : { train: args.train, config: args.config };
    const run = this.beginRun(args.runId);
    const ended = await this.train(run, from, { ...args, ...mixed }, 'fine-tune');
    // src/session/runs.ts: a run with nothing saved leaves the reader in use as it was
    if (!keepsTunedReader(ended.result)) {
      ended.params.dispose();
      return { ...ended.result, tunedReader: this.tunedReader?.name ?? null, replacedTuned: false };
    }
    this.tunedReader?.params.dispose();
    const name = tunedReaderName(
      { name: args.runName ?? `run ${args.runId}` },
      ended.result.update,
      ended.result.status === 'finished' ? 'finished' : 'stopped',
    );
    const tuned: SessionReader = { name, config: withoutDecoding(from.config), params: ended.params, tokenizer: from.tokenizer };
    // the no-answer cut and the kind bonus that suit this reader, chosen on its labelled
    // training questions (never on the questions it is scored on), so evaluation, questions
    // and the exported config.json use them
    const decoding =
      args.chooseDecoding === false
        ? null
        : this.chooseDecoding(tuned, args.train, {
            maxLength: args.config.maxLength,
            stride: args.config.stride,
            maxQueryLength: args.config.maxQueryLength,
          });
    if (decoding) tuned.config = { ...tuned.config, decoding };
    this.tunedReader = tuned;
    return { ...ended.result, tunedReader: name, replacedTuned: true, decoding };
  }

  /** One training run from a copy of `from`; the caller takes the trained weights. */
  private async train(
    run: { runId: string; halt: boolean },
    from: SessionReader,
    args: FineTuneArgs,
    stage: RunStage,
    noAnswerWindowShare?: number,
    maskedLm?: { texts: readonly string[] },
  ): Promise<{ result: TrainEnded; params: ReaderParams }> {
    let totalUpdates = 0;
    let checkpointId: string | null = null;
    const store = this.store ?? undefined;
    try {
      const result = await fineTune({
        // a reader trained further has not been measured with the decoding settings it came with
        base: { ...from, config: withoutDecoding(from.config) },
        tokenizer: from.tokenizer,
        train: args.train,
        validation: args.validation.length > 0 ? args.validation : undefined,
        config: this.trainSettings(args.config, from),
        datasetHash: args.datasetHash,
        store,
        stage,
        run: { id: args.runId, name: args.runName ?? `run ${args.runId}` },
        resumeFrom: args.resumeFrom,
        noAnswerWindowShare,
        maskedLm,
        evalBatchSize: args.evalBatchSize,
        onCheckpoint: (id) => (checkpointId = id),
        hooks: {
          onEvent: (event) => {
            if (event.type === 'start') totalUpdates = event.plan.totalUpdates;
            args.onEvent?.(event);
          },
          shouldStop: () => run.halt || (args.shouldStop?.() ?? false),
          signal: args.signal,
        },
      });
      return {
        result: {
          runId: args.runId,
          status: result.outcome.status,
          update: result.outcome.state.trainer.update,
          totalUpdates: totalUpdates || result.plan.totalUpdates,
          metrics: result.metrics,
          checkpointId,
        },
        params: result.params,
      };
    } finally {
      this.running = null;
    }
  }

  // ---- checkpoints ----------------------------------------------------------------

  private needStore(): CheckpointStore<RunMeta> {
    if (!this.store) throw new Error('this session keeps no checkpoints');
    return this.store;
  }

  async listCheckpoints(): Promise<{ checkpoints: CheckpointSummary<RunMeta>[]; usage: StoreUsage }> {
    const store = this.needStore();
    return { checkpoints: await store.list(), usage: store.usage ? await store.usage() : { bytes: 0 } };
  }

  async deleteCheckpoint(args: { id: string }): Promise<{ deleted: string }> {
    await this.needStore().delete(args.id);
    return { deleted: args.id };
  }

  async pruneCheckpoints(args: { keepBest: number; keepLast: number }): Promise<{ deleted: string[] }> {
    return { deleted: await this.needStore().prune({ keepBest: args.keepBest, keepLast: args.keepLast }) };
  }

  /** The newest checkpoint of a dataset and stage, or null. */
  async latestCheckpoint(args: { datasetHash: string; stage?: RunStage }): Promise<CheckpointSummary<RunMeta> | null> {
    const saved = (await this.needStore().list()).filter(
      (c) => c.meta.datasetHash === args.datasetHash && (c.meta.stage ?? 'fine-tune') === (args.stage ?? 'fine-tune'),
    );
    return saved[saved.length - 1] ?? null;
  }

  /** Loads a checkpoint's weights as the fine-tuned reader (a practice checkpoint: as the start reader). */
  /**
   * Loads a checkpoint's weights as the fine-tuned reader (a practice checkpoint: as the
   * start reader). `name` is what the reader is called from then on: its run's name and
   * update ("run 2, update 16 (restored checkpoint)") when the checkpoint carries a run name.
   */
  async restoreCheckpoint(args: {
    id: string;
    /**
     * the decoding its run chose when it ended (FineTuneEnded.decoding, kept by the page):
     * checkpoints are written before the choice, so a fine-tuned reader restored after a
     * reload gets it back here; ignored for practice and masked-LM checkpoints
     */
    decoding?: DecodingChoice;
  }): Promise<{ id: string; step: number; stage: RunStage; label: string; run: string | null; name: string }> {
    const { reader, meta } = await this.checkpointReader(args.id);
    if (args.decoding && meta.stage !== 'practice' && meta.stage !== 'domain') {
      const config = { ...reader.config, decoding: args.decoding };
      try {
        validateConfig(config, `checkpoint ${args.id}`, { decoding: 'decoding' });
      } catch (err) {
        reader.params.dispose();
        throw err;
      }
      reader.config = config;
    }
    if (meta.stage === 'practice' || meta.stage === 'domain') {
      this.startReader?.params.dispose();
      this.startReader = reader;
    } else {
      if (meta.runName !== undefined) reader.name = tunedReaderName({ name: meta.runName }, meta.step, 'restored');
      this.tunedReader?.params.dispose();
      this.tunedReader = reader;
    }
    const label = checkpointLabel(meta);
    return { id: args.id, step: meta.step, stage: meta.stage ?? 'fine-tune', label, run: meta.runName ?? null, name: reader.name };
  }

  /** A checkpoint's weights as a reader of its own (the caller disposes it), named for people. */
  private async checkpointReader(id: string): Promise<{ reader: SessionReader; meta: RunMeta }> {
    const b = this.base;
    const ckpt = await this.needStore().load(id);
    const config = ckpt.meta.runConfig?.model ?? b.config;
    const { params } = ReaderParams.fromNamed(config, ckpt.weights, { source: `checkpoint ${id}` });
    const of = ckpt.meta.runName !== undefined ? ` of ${ckpt.meta.runName}` : '';
    return { reader: { name: `checkpoint ${checkpointLabel(ckpt.meta)}${of}`, config, params, tokenizer: b.tokenizer }, meta: ckpt.meta };
  }

  // ---- measuring ------------------------------------------------------------------

  /**
   * A learning curve: fresh copies of the start reader trained with `config` on nested
   * shares of `train` (nestedShares above), each scored on `validation`; nothing goes to
   * the checkpoint store.
   */
  async learningCurve(args: {
    curveId: string;
    train: QARecord[];
    validation: QARecord[];
    config: TrainConfig;
    shares: number[];
    seed: number;
    onEvent?: (event: CurveEvent) => void;
  }): Promise<LearningCurve> {
    const from = this.reader('start');
    if (this.running) throw new Error(`run ${this.running.runId} is training; pause or stop it before drawing a learning curve`);
    if (this.curve) throw new Error('a learning curve is already being drawn');
    if (args.train.length === 0) throw new Error('a learning curve needs training questions: add some on the Data screen');
    if (args.validation.length === 0)
      throw new Error('a learning curve needs validation questions to score: hold some out on the Data screen');
    const subsets = nestedShares(args.train, args.shares, args.seed);
    let end = () => {};
    const drawing = { curveId: args.curveId, cancel: false, ended: new Promise<void>((resolve) => (end = resolve)) };
    this.curve = drawing;
    const send = (event: CurveEvent) => args.onEvent?.(event);
    const config = this.trainSettings(args.config, from);
    try {
      // the validation windows are the same for every share: built once
      const windows = readerWindows(from, args.validation, resolveWindows(config, from.config).features);
      const points: CurvePoint[] = [];
      const of = subsets.length;
      for (const [index, subset] of subsets.entries()) {
        if (drawing.cancel) break;
        if (this.baseReader === null || this.reader('start') !== from)
          throw new Error('the base reader changed while the learning curve was drawn');
        send({ type: 'share', index, of, share: subset.share, questions: subset.records.length, passages: subset.passages });
        // a throwaway run: a fresh copy of the start reader, no store, so no checkpoint is written
        const result = await fineTune({
          base: from,
          tokenizer: from.tokenizer,
          train: subset.records,
          config,
          datasetHash: 'learning-curve',
          hooks: {
            onEvent: (e) => {
              if (e.type === 'progress') send({ type: 'update', index, of, update: e.update, totalUpdates: e.totalUpdates });
            },
            shouldStop: () => drawing.cancel,
          },
        });
        try {
          if (result.outcome.status === 'stopped') break;
          send({ type: 'scoring', index, of });
          const { report } = evaluateRecords(
            { params: result.params, config: withoutDecoding(from.config), tokenizer: from.tokenizer },
            args.validation,
            {
              windows,
            },
          );
          const point: CurvePoint = {
            share: subset.share,
            questions: subset.records.length,
            passages: subset.passages,
            updates: result.outcome.state.trainer.update,
            em: report.summary.em,
            f1: report.summary.f1,
          };
          points.push(point);
          send({ type: 'point', index, of, point });
        } finally {
          result.params.dispose();
        }
      }
      return {
        curveId: args.curveId,
        status: points.length === subsets.length ? 'finished' : 'cancelled',
        trainQuestions: args.train.length,
        validationQuestions: args.validation.length,
        points,
      };
    } finally {
      this.curve = null;
      end();
    }
  }

  cancelCurve(args: { curveId: string }): { accepted: boolean } {
    if (!this.curve || this.curve.curveId !== args.curveId) return { accepted: false };
    this.curve.cancel = true;
    return { accepted: true };
  }

  /** EM/F1 by the SQuAD 2.0 rules and a per-question view, for one of the readers. */
  evaluate(
    args: {
      model: ModelChoice;
      records: QARecord[];
      onProgress?: (done: number, total: number) => void;
      /** over the reader's saved decoding settings (ReaderConfig.decoding), e.g. {nullThreshold: 0, kindBonus: 0} for the neutral one */
      decode?: Pick<SpanChoiceOptions, 'nullThreshold' | 'kindBonus'>;
    } & WindowArgs,
  ): EvaluationResult {
    const r = this.reader(args.model);
    const { report, decoded } = evaluateRecords(r, args.records, {
      features: this.windows(args, r).features,
      decode: args.decode,
      onProgress: args.onProgress,
    });
    return this.evaluationView(args, r, report, decoded);
  }

  /**
   * `evaluate` in steps the worker answers messages between, for the workbench: the
   * questions are read a few at a time (each question's windows together, so decoding is
   * the same as in one go), `onProgress(done, total)` counts questions after each step,
   * and `cancelEvaluation` ends it after the step in hand. The scores are those of
   * `evaluate`: the same windows, decoding and report over all the questions.
   */
  async evaluateInSteps(
    args: {
      evaluationId: string;
      model: ModelChoice;
      records: QARecord[];
      /** questions per step (default 8) */
      step?: number;
      onProgress?: (done: number, total: number) => void;
    } & WindowArgs,
  ): Promise<{ status: 'finished'; result: EvaluationResult } | { status: 'cancelled'; done: number; total: number }> {
    if (this.evaluation) throw new Error('an evaluation is already running; cancel it or wait for it');
    const r = this.reader(args.model);
    const evaluation = { evaluationId: args.evaluationId, cancel: false };
    this.evaluation = evaluation;
    try {
      const features = this.windows(args, r).features;
      const step = Math.max(1, args.step ?? 8);
      const total = args.records.length;
      const decoded: ReturnType<typeof predictRecords> = {
        predictions: {},
        bestSpans: {},
        scoreDiffs: {},
        decodings: new Map(),
        windows: 0,
      };
      args.onProgress?.(0, total);
      for (let at = 0; at < total; at += step) {
        // let a cancel request in
        await new Promise<void>((resolve) => setTimeout(resolve, 0));
        if (evaluation.cancel) return { status: 'cancelled', done: at, total };
        const part = predictRecords(r, args.records.slice(at, at + step), { features });
        Object.assign(decoded.predictions, part.predictions);
        Object.assign(decoded.bestSpans, part.bestSpans);
        Object.assign(decoded.scoreDiffs, part.scoreDiffs);
        for (const [id, d] of part.decodings) decoded.decodings.set(id, d);
        decoded.windows += part.windows;
        args.onProgress?.(Math.min(at + step, total), total);
      }
      const report = buildReport(questionsFromRecords(args.records), decoded.predictions, {
        bestSpans: decoded.bestSpans,
        scoreDiffs: decoded.scoreDiffs,
      });
      return { status: 'finished', result: this.evaluationView(args, r, report, decoded) };
    } finally {
      this.evaluation = null;
    }
  }

  cancelEvaluation(args: { evaluationId: string }): { accepted: boolean } {
    if (!this.evaluation || this.evaluation.evaluationId !== args.evaluationId) return { accepted: false };
    this.evaluation.cancel = true;
    return { accepted: true };
  }

  /** An evaluation's result as the page shows it: the scores and each question with its spans. */
  private evaluationView(
    args: { model: ModelChoice; records: QARecord[]; decode?: Pick<SpanChoiceOptions, 'nullThreshold' | 'kindBonus'> },
    r: SessionReader,
    report: EvaluationReport,
    decoded: Pick<ReturnType<typeof predictRecords>, 'decodings'>,
  ): EvaluationResult {
    const byId = new Map(args.records.map((rec) => [rec.id, rec]));
    const questions = report.questions.map((q): QuestionView => {
      const rec = byId.get(q.id)!;
      const best = decoded.decodings.get(q.id)?.best ?? null;
      return {
        id: q.id,
        passageId: rec.passageId,
        question: rec.question,
        context: rec.context,
        gold: rec.answers.map((a) => ({ start: a.start, end: a.start + a.text.length, text: a.text })),
        unanswerable: rec.unanswerable,
        prediction: q.prediction,
        predictedSpan: q.prediction !== '' && best ? { start: best.charStart, end: best.charEnd } : null,
        exact: q.exact,
        f1: q.f1,
        outcome: q.outcome,
      };
    });
    return {
      model: args.model,
      reader: r.name,
      summary: report.summary,
      counts: report.counts,
      bestCut: report.bestCut ? { threshold: report.bestCut.threshold, summary: report.bestCut.summary } : null,
      decoding: decodingUsed(r.config, args.decode),
      questions,
    };
  }

  /**
   * SQuAD 2.0 scores on `records` with the no-answer threshold chosen on `tuneOn` (the
   * training questions) by the metric's best-threshold search: the honest counterpart of
   * the threshold tuned on the scored questions themselves.
   */
  scoreWithTrainedCut(
    args: { model: ModelChoice; tuneOn: QARecord[]; records: QARecord[]; kindBonuses?: readonly number[] } & WindowArgs,
  ): {
    threshold: number;
    /** the type-aware decoding bonus chosen with the cut (src/eval/span-choice.ts), 0 when none helped */
    kindBonus: number;
    summary: SquadScores;
  } {
    const r = this.reader(args.model);
    const choice = this.chooseDecoding(r, args.tuneOn, args, args.kindBonuses ?? [0]) ?? { nullThreshold: 0, kindBonus: 0 };
    const held = predictRecords(r, args.records, { features: this.windows(args, r).features, decode: { kindBonus: choice.kindBonus } });
    return {
      threshold: choice.nullThreshold,
      kindBonus: choice.kindBonus,
      summary: evaluate(goldFromRecords(args.records), applyNoAnswerThreshold(held.bestSpans, held.scoreDiffs, choice.nullThreshold)),
    };
  }

  /**
   * The no-answer cut and kind bonus (over `kindBonuses`) with the best SQuAD 2.0 F1 on
   * `tuneOn`, by the metric's best-threshold search; null when there are no questions to
   * choose on. Each bonus only decodes the same logits again.
   */
  private chooseDecoding(
    r: SessionReader,
    tuneOn: readonly QARecord[],
    windowArgs: WindowArgs,
    kindBonuses: readonly number[] = KIND_BONUS_GRID,
  ): DecodingChoice | null {
    if (tuneOn.length === 0) return null;
    const gold = goldFromRecords([...tuneOn]);
    const windows = readerWindows(r, tuneOn, this.windows(windowArgs, r).features);
    const logits = readerLogits(r.params, r.config, windows);
    let best = { f1: -Infinity, choice: { nullThreshold: 0, kindBonus: 0 } };
    for (const kindBonus of kindBonuses) {
      const tune = predictAll(tuneOn, windows, logits, { kindBonus });
      const search = findBestThresholds(gold, tune.bestSpans, tune.scoreDiffs);
      if (search.bestF1 > best.f1) best = { f1: search.bestF1, choice: { nullThreshold: search.bestF1Threshold, kindBonus } };
    }
    return best.choice;
  }

  /** The word-overlap baseline (src/eval/lexical-baseline.ts) on `records`, its no-answer cut chosen on `tuneOn`. */
  wordOverlapBaseline(args: { tuneOn: QARecord[]; records: QARecord[] }): { minCoverage: number; summary: SquadScores } {
    const { scores, minCoverage } = lexicalBaselineScores(args.tuneOn, args.records);
    return { minCoverage, summary: scores };
  }

  /** The id → answer map that `score` reads, and id → (null score − best span score), for one of the readers. */
  predict(
    args: {
      model: ModelChoice;
      records: QARecord[];
      nullThreshold?: number;
      onProgress?: (done: number, total: number) => void;
    } & WindowArgs,
  ): {
    predictions: Record<string, string>;
    scoreDiffs: Record<string, number>;
  } {
    const r = this.reader(args.model);
    const decoded = predictRecords(r, args.records, {
      features: this.windows(args, r).features,
      decode: args.nullThreshold !== undefined ? { nullThreshold: args.nullThreshold } : {},
      onProgress: args.onProgress,
    });
    return { predictions: decoded.predictions, scoreDiffs: decoded.scoreDiffs };
  }

  /**
   * A question over passages:
   *   1. retrieval  one passage is read whole; of several, BM25 picks `topPassages`
   *   2. reading    the reader's n-best spans in each retrieved passage
   *   3. ranking    `topAnswers` candidates per passage, combined with the retriever's
   *                 score by min–max normalisation (src/retrieve/combine.ts); with one
   *                 passage the reader's score alone ranks them
   */
  ask(
    args: {
      model: ModelChoice;
      question: string;
      passages: Array<{ id: string; text: string }>;
      topPassages: number;
      topAnswers: number;
      /** weight of the retriever's score in the combined score, default 0.5 */
      retrieverWeight?: number;
    } & WindowArgs,
  ): AskResult {
    const r = this.reader(args.model);
    const question = args.question.trim();
    if (question === '') throw new Error('type a question first');
    if (args.passages.length === 0) throw new Error('there are no passages to ask: add some first');
    if (!(Number.isInteger(args.topPassages) && args.topPassages >= 1))
      throw new RangeError(`topPassages must be a whole number above 0, not ${args.topPassages}`);
    if (!(Number.isInteger(args.topAnswers) && args.topAnswers >= 1))
      throw new RangeError(`topAnswers must be a whole number above 0, not ${args.topAnswers}`);
    // 1. retrieval
    const single = args.passages.length === 1;
    const retrieved: Array<{ passageId: string; score: number | null }> = single
      ? [{ passageId: args.passages[0]!.id, score: null }]
      : new Bm25Index(args.passages).search(question, args.topPassages);
    const text = new Map(args.passages.map((p) => [p.id, p.text]));
    // 2. reading (record ids are positions: passage ids may be long)
    const records: QARecord[] = retrieved.map((hit, i) => ({
      id: `ask-${i}`,
      passageId: hit.passageId,
      context: text.get(hit.passageId)!,
      question,
      answers: [],
      unanswerable: true,
    }));
    const decoded = predictRecords(r, records, {
      features: this.windows(args, r).features,
      decode: { nBest: Math.max(5, args.topAnswers) },
    });
    // 3. ranking
    const candidates: Array<Omit<AnswerView, 'combinedScore'>> = [];
    let noAnswer = true;
    records.forEach((rec, i) => {
      const d = decoded.decodings.get(rec.id);
      if (!d) return;
      if (d.prediction !== '') noAnswer = false;
      for (const c of d.nBest.slice(0, args.topAnswers)) {
        const from = Math.max(0, c.charStart - 160);
        const to = Math.min(rec.context.length, c.charEnd + 160);
        candidates.push({
          passageId: rec.passageId,
          text: c.text,
          start: c.charStart - from,
          end: c.charEnd - from,
          readerScore: c.score,
          retrieverScore: retrieved[i]!.score,
          noAnswerMargin: decoded.scoreDiffs[rec.id] ?? 0,
          context: rec.context.slice(from, to),
          contextStart: from,
        });
      }
    });
    const ranked = single
      ? combineScores(
          candidates.map((c) => ({ ...c, retrieverScore: 0 })),
          { retrieverWeight: 0 },
        ).map((c) => ({ ...c, retrieverScore: null }))
      : combineScores(
          candidates.map((c) => ({ ...c, retrieverScore: c.retrieverScore ?? 0 })),
          { retrieverWeight: args.retrieverWeight ?? 0.5 },
        );
    return { answers: ranked.slice(0, args.topAnswers), retrieved, noAnswer };
  }

  // ---- handing on -----------------------------------------------------------------

  /**
   * A model directory's files for one of the readers: config, weights (fp32 or fp16),
   * vocabulary, model card; int8 weights (with their accuracy cost on `int8Check`
   * records when given, else their logit drift on probe inputs) and ONNX on request.
   */
  exportReader(args: {
    model: ModelChoice;
    fp16: boolean;
    int8: boolean;
    onnx: boolean;
    card: ExportCardInput;
    /** base model name for the card (default: the base's name) */
    baseName?: string;
    int8Check?: { records: QARecord[] } & WindowArgs;
    date?: string;
  }): ExportResult {
    return this.exportFrom(this.reader(args.model), args.model === 'tuned' ? args.card.metrics?.tuned : args.card.metrics?.base, args);
  }

  /**
   * A model directory's files for a checkpoint in the store, whichever reader is in use:
   * its weights are loaded for the export only and let go after. The card carries the
   * checkpoint's own run settings and its validation scores when it was scored.
   */
  async exportCheckpoint(args: Omit<Parameters<ReaderSession['exportReader']>[0], 'model'> & { id: string }): Promise<ExportResult> {
    const { reader, meta } = await this.checkpointReader(args.id);
    try {
      const card: ExportCardInput = {
        ...args.card,
        // the checkpoint's own run, not the settings of the reader in use
        settings: meta.runConfig?.train ?? args.card.settings,
        notes: [
          `checkpoint saved at update ${meta.step}${meta.label ? ` (${meta.label})` : ''}${meta.savedAt ? ` on ${meta.savedAt}` : ''}`,
          ...(meta.metrics.validationEM !== undefined && meta.metrics.validationF1 !== undefined
            ? [`its validation scores when saved: EM ${meta.metrics.validationEM.toFixed(1)} / F1 ${meta.metrics.validationF1.toFixed(1)}`]
            : []),
          ...(meta.stage === 'practice' || meta.stage === 'domain'
            ? [`saved by the ${stageLabel(meta.stage)} stage, before any fine-tuning on labelled questions`]
            : []),
          ...(args.card.notes ?? []),
        ],
      };
      return this.exportFrom(reader, undefined, { ...args, baseName: args.baseName ?? meta.runConfig?.base, card });
    } finally {
      reader.params.dispose();
    }
  }

  private exportFrom(
    r: SessionReader,
    scores: EvaluationSummaryPair['tuned'],
    args: Omit<Parameters<ReaderSession['exportReader']>[0], 'model'>,
  ): ExportResult {
    const b = this.base;
    const named = r.params.toNamed();
    // a head the base checkpoint lacked was initialised only to build the engine: it does not travel
    const freshMlm = b.missing.filter((name) => name.startsWith('cls.'));
    for (const name of freshMlm) named.delete(name);
    const quantized = args.int8 ? quantizeModel(named) : undefined;
    const int8: NonNullable<Parameters<typeof exportModel>[0]['card']['int8']> | undefined = quantized
      ? args.int8Check
        ? {
            accuracy: int8AccuracyCost(
              r.config,
              named,
              quantized,
              args.int8Check.records,
              readerWindows(r, args.int8Check.records, this.windows(args.int8Check, r).features),
            ),
          }
        : { drift: measureInt8Drift(r.config, named, quantized) }
      : undefined;
    const card: Omit<ModelCardInfo, 'config' | 'files' | 'int8'> = {
      baseModel: args.baseName ?? b.name,
      date: args.date ?? new Date().toISOString(),
      notes: [
        `exported from Spanwright: ${r.name}`,
        ...(r.config.questionMatch ? [matchNote(r.config.questionMatch)] : []),
        ...(freshMlm.length > 0 ? ['the export holds no MLM head (cls.predictions.*), as the base had none'] : []),
        ...(args.card.notes ?? []),
      ],
    };
    if (args.card.dataset) card.dataset = args.card.dataset;
    if (args.card.settings) card.settings = args.card.settings;
    if (args.card.scores) card.metrics = args.card.scores;
    // the page's scores come from `evaluate`, which decodes with the reader's saved settings
    else if (scores)
      card.metrics = r.config.decoding ? { withSavedDecoding: { ...scores, ...r.config.decoding } } : { withoutThreshold: scores };
    const base = args.card.baseScores;
    if (base)
      card.notes!.push(`the base reader scored EM ${base.em?.toFixed(1)} / F1 ${base.f1?.toFixed(1)} on the same validation questions`);
    const { files } = exportModel({
      config: r.config,
      tensors: named,
      vocab: b.vocab,
      fp16: args.fp16,
      int8: quantized,
      onnx: args.onnx,
      card: { ...card, int8 },
    });
    return { files, notes: card.notes ?? [] };
  }

  /**
   * A job folder for PyTorch's distributed training (DEVELOPERS.md, "Job folders for
   * torch.distributed"): the run `fineTune` would take from the start reader on these
   * questions and settings, as files for the caller to write (the CLI's `job`) or to zip
   * (the workbench's Export screen):
   *   1. settings  the config over its defaults, its windows resolved against the start reader
   *   2. data      questions, windows and job.json (src/io/torch-job.ts torchJobFiles)
   *   3. base      base/: the base directory's files as loaded, its model.safetensors
   *                written from the engine's weights when the program cannot read it as it
   *                is; after a stage before fine-tuning (practice questions, masked-LM,
   *                word-match types), the start reader as a model directory instead
   *   4. program   jobs/torch/*.py (SessionOptions.jobProgram), and README.txt with the
   *                commands, naming `folder`
   * The bytes returned are the caller's: the base's files are copies.
   */
  async torchJob(args: {
    train: QARecord[];
    /** copied into the folder for `spanwright eval` afterwards */
    validation?: QARecord[];
    config: TrainConfig;
    /** the folder's path as its user will have it (the CLI's --out, the zip's folder), for README.txt */
    folder: string;
    /** job.json's "written" time, ISO 8601 (default now) */
    now?: string;
  }): Promise<TorchJobFolder> {
    if (!this.options.jobProgram) throw new Error('this session has no job program (jobs/torch/) to put into a job folder');
    if (args.train.length === 0) throw new Error('a job folder needs training questions: add some on the Data screen first');
    const b = this.base;
    const from = this.reader('start');
    const notes: string[] = [];
    // 1.
    const config = trainConfig({ ...args.config, ...this.windows(args.config, from, (n) => notes.push(n)).settings });
    // 2.
    const staged = from !== b;
    const why = staged
      ? `it is ${from.name}, the base after the stages before fine-tuning; the weights the engine starts from are written instead`
      : b.weightsNotAsIs;
    const validation = args.validation ?? [];
    const job = torchJobFiles({
      base: { name: from.name, config: from.config, tokenizer: from.tokenizer },
      train: args.train,
      validation,
      config,
      datasetHash: await hashDataset(args.train),
      baseWeights: why === null ? { copied: true } : { copied: false, why },
      now: args.now,
    });
    // 3.
    const files: ExportFile[] = [...job.files];
    const inBase = (name: string) => `${JOB_PATHS.base}/${name}`;
    const weights = () => ({
      name: inBase('model.safetensors'),
      bytes: namedToSafetensors(from.params.toNamed(), { metadata: { format: 'pt' } }),
    });
    if (staged) {
      notes.push(`base/ holds ${from.name}: ${why}`);
      files.push({ name: inBase('config.json'), bytes: new TextEncoder().encode(`${JSON.stringify(configToHf(from.config), null, 2)}\n`) });
      files.push(weights());
      files.push({ name: inBase(b.vocab.file), bytes: new TextEncoder().encode(b.vocab.text) });
    } else {
      for (const f of b.directory)
        if (f.name !== 'model.safetensors' || why === null) files.push({ name: inBase(f.name), bytes: f.bytes.slice() });
      if (why !== null) {
        notes.push(`${b.name}/model.safetensors: ${why}`);
        files.push(weights());
      }
    }
    // 4.
    files.push(...(await this.options.jobProgram()));
    const at = (path: string) => `${args.folder.replace(/\/+$/, '')}/${path}`;
    const back = [
      `  spanwright eval --model ${at('model')} --data ${validation.length > 0 ? at(JOB_PATHS.validation) : 'YOUR_VALIDATION_FILE'}`,
      `  spanwright export --model ${at('model')} --out DIR --int8 --onnx`,
      '  in the workbench: on the Base reader screen, choose the folder model/',
    ];
    files.push({ name: 'README.txt', bytes: new TextEncoder().encode(howToRun(back)) });
    return {
      files,
      startsFrom: from.name,
      baseWeights: why === null ? 'copied' : 'rewritten',
      config,
      questions: job.train.length,
      validation: validation.length,
      windows: job.windows,
      updates: job.plan.totalUpdates,
      notes,
    };
  }

  private disposeReaders(): void {
    const held = new Set([this.baseReader?.params, this.startReader?.params, this.tunedReader?.params]);
    for (const p of held) p?.dispose();
    this.baseReader = this.startReader = this.tunedReader = null;
  }

  /** Lets every weight go. */
  dispose(): void {
    this.disposeReaders();
  }
}

/** The no-answer cut and kind bonus a decoding of this reader used, and whether they are the ones saved with it. */
function decodingUsed(
  config: ReaderConfig,
  over: Pick<SpanChoiceOptions, 'nullThreshold' | 'kindBonus'> = {},
): EvaluationResult['decoding'] {
  const d = readerDecoding(config, over);
  const nullThreshold = d.nullThreshold ?? 0;
  const kindBonus = d.kindBonus ?? 0;
  const saved = config.decoding !== undefined && config.decoding.nullThreshold === nullThreshold && config.decoding.kindBonus === kindBonus;
  return { nullThreshold, kindBonus, saved };
}
