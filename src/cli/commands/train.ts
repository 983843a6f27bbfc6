// defines: the `train` command, and trainReader — fine-tune a base reader on a question
// file, evaluate it, and write the trained model directory with its card. `demo` runs the
// same function on the shipped base and demo data.
//
//   1. load      the base model directory and the question files
//   2. train     src/train/finetune.ts (the loop the browser worker runs too), with
//                checkpoints on disk under <out>/checkpoints
//   3. measure   SQuAD 2.0 EM/F1 on the eval file, with the tuned no-answer threshold
//   4. write     <out>/config.json, model.safetensors, vocabulary, MODEL_CARD.md
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { Command } from 'commander';
import { UserError, printJson, runCommand } from '../common.js';
import { loadRecords, readModelDir, startEngine, writeFilesAtomically } from '../../node/model-dir.js';
import { countProgress, trainingProgress } from '../progress.js';
import { readerWarnings } from '../../eval/reader-warnings.js';
import { scoresObject, scoresTable } from '../scores.js';
import { hashDataset } from '../../data/hash.js';
import type { QARecord } from '../../data/record.js';
import { DEFAULT_TRAIN_CONFIG, suggestedLearningRate, trainConfig, type TrainConfig } from '../../train/config.js';
import { configFromHf, type QuestionMatch } from '../../model/config.js';
import type { PracticeOptions, PracticePassage } from '../../practice/generate.js';
import type { EvaluationResult } from '../../session/types.js';
import { domainTrainSettings, practiceTrainSettings, resolveWindows } from '../../session/windows.js';
import type { SquadScores } from '../../eval/squad-metric.js';
import type { RunMeta } from '../../train/finetune.js';

export const DEFAULT_BASE = 'tiny-models/base';

export interface TrainOptions {
  train: string;
  eval?: string;
  base: string;
  out: string;
  epochs?: string;
  lr?: string;
  batch?: string;
  accumulate?: string;
  maxLen?: string;
  stride?: string;
  maxQuery?: string;
  seed?: string;
  resume?: boolean;
  json?: boolean;
  /** practice stage: passages (a JSONL of {id, text}, a folder of .txt, or "train") */
  practiceFrom?: string;
  practiceEpochs?: string;
  practicePerPassage?: string;
  practiceMaxLen?: string;
  /** the practice questions join the fine-tuning questions instead of a stage of their own */
  practiceMixed?: boolean;
  questionMatch?: string | boolean;
  /** masked-LM on the same passages first, for about this many minutes */
  domainMinutes?: string;
}

function int(name: string, v: string | undefined): number | undefined {
  if (v === undefined) return undefined;
  const n = Number(v);
  if (!Number.isInteger(n) || n < 0) throw new UserError(`--${name} must be a whole number, not "${v}"`);
  return n;
}

function num(name: string, v: string | undefined): number | undefined {
  if (v === undefined) return undefined;
  const n = Number(v);
  if (!Number.isFinite(n) || n <= 0) throw new UserError(`--${name} must be a positive number, not "${v}"`);
  return n;
}

/**
 * The hidden size of the base directory's config.json, or null when it cannot be read
 * (loading the base later reports the problem with its file and field).
 */
export function baseHiddenSize(dir: string): number | null {
  try {
    const path = join(dir, 'config.json');
    return configFromHf(JSON.parse(readFileSync(path, 'utf8')) as Record<string, unknown>, path).hiddenSize;
  } catch {
    return null;
  }
}

/**
 * The train config from the command's options over the defaults; without --lr, the rate
 * suggested for the base's width (src/train/config.ts, suggestedLearningRate).
 */
export function configFromOptions(o: TrainOptions): TrainConfig {
  const overrides: Partial<TrainConfig> = {};
  const set = <K extends keyof TrainConfig>(k: K, v: TrainConfig[K] | undefined) => {
    if (v !== undefined) overrides[k] = v;
  };
  set('epochs', int('epochs', o.epochs));
  const hidden = o.lr === undefined ? baseHiddenSize(o.base) : null;
  set('learningRate', num('lr', o.lr) ?? (hidden === null ? undefined : suggestedLearningRate(hidden)));
  set('batchSize', int('batch', o.batch));
  set('gradAccumulation', int('accumulate', o.accumulate));
  set('maxLength', int('max-len', o.maxLen));
  set('stride', int('stride', o.stride));
  set('maxQueryLength', int('max-query', o.maxQuery));
  set('seed', int('seed', o.seed));
  // a short window keeps at most a third of itself for the question, unless told otherwise
  if (overrides.maxLength !== undefined) {
    // the question length and stride a window of this length gets by the one rule (src/session/windows.ts)
    let fitted;
    try {
      fitted = resolveWindows(
        { maxLength: overrides.maxLength, stride: overrides.stride, maxQueryLength: overrides.maxQueryLength },
        { maxPositions: Number.MAX_SAFE_INTEGER },
      );
    } catch (err) {
      throw new UserError(
        `--${(err as Error).message
          .replace(/^maxLength/, 'max-len')
          .replace(/^stride/, 'stride')
          .replace(/^maxQueryLength/, 'max-query')}`,
      );
    }
    overrides.maxQueryLength ??= fitted.settings.maxQueryLength;
    overrides.stride ??= fitted.settings.stride;
  }
  const c = { ...DEFAULT_TRAIN_CONFIG, ...overrides };
  if (c.stride >= c.maxLength - c.maxQueryLength - 3) {
    throw new UserError(
      `--stride ${c.stride} must be below the context tokens a window holds: max length ${c.maxLength} − question tokens ${c.maxQueryLength} − 3`,
    );
  }
  try {
    return trainConfig(overrides);
  } catch (err) {
    throw new UserError((err as Error).message);
  }
}

/** The --question-match level: absent → none; given without a level → "words+sentence". */
function matchLevel(v: string | boolean | undefined): QuestionMatch | undefined {
  if (v === undefined || v === false) return undefined;
  if (v === true || v === 'words+sentence') return 'words+sentence';
  if (v === 'words' || v === 'words+sentence+kind') return v;
  throw new UserError(`--question-match must be "words", "words+sentence" or "words+sentence+kind", not "${v}"`);
}

/** Practice-stage defaults: measured on the demo handbook (DEVELOPERS.md, "Facts"). */
export const PRACTICE_DEFAULTS = {
  /** one pass: the questions are many and cheap, and a second pass gave no more */
  epochs: 1,
  /** questions per passage (src/practice/generate.ts) */
  perPassage: 40,
  /**
   * questions per passage and epoch when they join the fine-tuning questions
   * (--practice-mixed): every epoch gets new ones (ReaderSession's mixedTrainingSet), half a
   * stage's 40 each time
   */
  mixedPerPassage: 20,
  /** windows of 256 tokens: passages of a few hundred words in two or three windows */
  maxLength: 256,
} as const;

/**
 * The practice stage a command's options ask for, or undefined: passages from a file or
 * folder (`readPassages`, ask.ts), or the training questions' own passages for "train".
 */
export async function practiceFromOptions(o: TrainOptions, train: QARecord[], config: TrainConfig): Promise<PracticeStep | undefined> {
  const minutes = o.domainMinutes === undefined ? 0 : Number(o.domainMinutes);
  if (!(minutes >= 0)) throw new UserError(`--domain-minutes must be a number of minutes, not "${o.domainMinutes}"`);
  if (o.practiceFrom === undefined && minutes === 0) return undefined;
  const { readPassages } = await import('./ask.js');
  const { passagesOf } = await import('../../session/reader-session.js');
  const from = o.practiceFrom ?? 'train';
  const fromTrain = from === 'train';
  const passages = fromTrain ? passagesOf(train) : await readPassages(from);
  const maxLength = int('practice-max-len', o.practiceMaxLen) ?? PRACTICE_DEFAULTS.maxLength;
  let stage: TrainConfig;
  try {
    stage = trainConfig(
      practiceTrainSettings(config, { epochs: int('practice-epochs', o.practiceEpochs) ?? PRACTICE_DEFAULTS.epochs, maxLength }),
    );
  } catch (err) {
    throw new UserError((err as Error).message);
  }
  const perPassage =
    int('practice-per-passage', o.practicePerPassage) ??
    (o.practiceMixed ? PRACTICE_DEFAULTS.mixedPerPassage : PRACTICE_DEFAULTS.perPassage);
  return {
    passages,
    source: fromTrain ? "the training questions' passages" : from,
    practice: o.practiceFrom !== undefined,
    mixed: o.practiceFrom !== undefined && o.practiceMixed === true,
    config: stage,
    questions: { perPassage, seed: config.seed },
    questionMatch: matchLevel(o.questionMatch),
    domain: minutes > 0 ? { minutes, config: domainSettings(config) } : undefined,
    measure: true,
  };
}

/** The domain stage's settings (src/session/windows.ts), checked. */
function domainSettings(config: TrainConfig): TrainConfig {
  return trainConfig(domainTrainSettings(config));
}

export interface TrainRun {
  config: TrainConfig;
  train: QARecord[];
  evalRecords: QARecord[] | null;
  before: EvaluationResult | null;
  after: EvaluationResult | null;
  /** the same evaluation decoded as the written model decodes: with the cut and bonus saved with it */
  afterSaved: EvaluationResult | null;
  /** the fine-tuned reader with the decoding chosen on the training questions and saved with it */
  afterTrainedCut: { threshold: number; kindBonus: number; summary: SquadScores } | null;
  /** the word-overlap baseline, its cut chosen on the training questions (measureBase) */
  baseline: { minCoverage: number; summary: SquadScores } | null;
  /** the practice stage, when it ran */
  practice: { questions: number; updates: number; seconds: number; afterPractice: EvaluationResult | null } | null;
  /** practice questions mixed into fine-tuning (--practice-mixed), when there were */
  mixedPractice: { questions: number } | null;
  /** the masked-LM stage on the passages, when it ran */
  domain: { passes: number; rows: number; updates: number; seconds: number } | null;
  out: string;
  files: Array<{ name: string; bytes: number }>;
  seconds: number;
}

/** The stages before fine-tuning: where their passages come from and how long each trains. */
export interface PracticeStep {
  passages: PracticePassage[];
  /** a name for the passages in messages ("the training questions' passages", a file) */
  source: string;
  /** masked-LM on the passages first, for a time budget */
  domain?: { minutes: number; config: TrainConfig };
  /** the practice stage itself runs (false: only the domain stage) */
  practice: boolean;
  /** the practice questions join the fine-tuning questions (ReaderSession.fineTune's practiceMix) instead of a stage before it */
  mixed?: boolean;
  config: TrainConfig;
  questions?: Partial<PracticeOptions>;
  questionMatch?: QuestionMatch;
  /** also score the reader after the practice stage alone */
  measure?: boolean;
}

/** Steps 1–4 on one ReaderSession (src/session); `log` takes human-readable lines (stderr). */
export async function trainReader(
  o: {
    train: string;
    eval?: string;
    base: string;
    out: string;
    resume?: boolean;
    measureBase?: boolean;
    int8?: boolean;
    onnx?: boolean;
    /** the practice stage for these training questions, if any */
    practice?: (train: QARecord[]) => Promise<PracticeStep | undefined>;
  },
  config: TrainConfig,
  log: (line: string) => void,
): Promise<TrainRun> {
  const started = performance.now();
  await startEngine();
  const { ReaderSession } = await import('../../session/reader-session.js');
  const { FsCheckpointStore } = await import('../../node/fs-store.js');
  const { lockOutputFolder } = await import('../out-lock.js');
  const store = new FsCheckpointStore<RunMeta>(join(o.out, 'checkpoints'));
  const session = new ReaderSession(store);
  // 1. load
  const files = await readModelDir(o.base);
  let info;
  try {
    info = session.loadBase({ name: o.base, files, names: files.names! as { config: string; weights: string; vocab: string } });
  } catch (err) {
    throw new UserError((err as Error).message);
  }
  for (const n of info.notices) log(`note: ${n}`);
  if (config.maxLength > info.config.maxPositions) {
    throw new UserError(
      `--max-len ${config.maxLength} exceeds the ${info.config.maxPositions} positions of ${o.base} (max_position_embeddings)`,
    );
  }
  const train = await loadRecords(o.train, log);
  const evalRecords = o.eval ? await loadRecords(o.eval, log) : null;
  const datasetHash = await hashDataset(train);
  const windows = { maxLength: config.maxLength, stride: config.stride, maxQueryLength: config.maxQueryLength };
  const evaluate = (label: string, model: 'base' | 'start' | 'tuned', decode?: { nullThreshold: number; kindBonus: number }) => {
    const bar = countProgress(label);
    try {
      return session.evaluate({ model, records: evalRecords!, ...windows, decode, onProgress: bar.update });
    } finally {
      bar.stop();
    }
  };
  // one run per output folder: two would prune each other's checkpoints
  const lock = await lockOutputFolder(o.out);
  if (lock.tookOverFrom !== null) log(`note: ${o.out} held a lock of process ${lock.tookOverFrom}, which no longer runs; taken over`);
  const abort = new AbortController();
  const onSigint = () => {
    log('\nstopping after this update; the run can continue with --resume');
    abort.abort();
  };
  process.once('SIGINT', onSigint);
  try {
    // what a killed save left (a temporary blob, a blob without its summary), swept while
    // this run holds the folder, so no other process's save is in flight
    const orphans = await store.sweepOrphans();
    if (orphans.length > 0)
      log(`note: removed ${orphans.length} file(s) an interrupted checkpoint save left in ${join(o.out, 'checkpoints')}`);
    const before = evalRecords && o.measureBase ? evaluate('evaluating the base', 'base') : null;

    // 2a. the practice stage, from the user's passages
    let practice: TrainRun['practice'] = null;
    let domain: TrainRun['domain'] = null;
    const step = await o.practice?.(train);
    if (step?.domain) {
      const t0 = performance.now();
      const hash = `domain:${step.passages.length}:${step.passages.reduce((a, p) => a + p.text.length, 0)}`;
      const resumeFrom = o.resume ? (await session.latestCheckpoint({ datasetHash: hash, stage: 'domain' }))?.id : undefined;
      log(`domain stage: masked-LM on ${step.passages.length} passages of ${step.source} for about ${step.domain.minutes} min`);
      const progress = trainingProgress('masked-LM');
      let ended;
      try {
        ended = await session.domainPretrain({
          runId: 'domain',
          passages: step.passages,
          config: step.domain.config,
          minutes: step.domain.minutes,
          datasetHash: hash,
          resumeFrom,
          onEvent: progress.onEvent,
          signal: abort.signal,
        });
      } finally {
        progress.stop();
      }
      if (ended.status === 'stopped')
        throw new UserError(`stopped in the masked-LM stage at update ${ended.update}; continue with the same command and --resume`, 130);
      domain = { passes: ended.passes, rows: ended.rows, updates: ended.totalUpdates, seconds: (performance.now() - t0) / 1000 };
    }
    if (step?.practice && !step.mixed) {
      const p = step;
      const t0 = performance.now();
      const preview = session.previewPractice({ passages: p.passages, questions: p.questions, sample: 0 });
      log(
        `practice: ${preview.questions} questions (${preview.unanswerable} without an answer) written from ${preview.passages} passages of ${p.source}`,
      );
      const hash = `practice:${await hashDataset(train)}:${p.passages.length}:${JSON.stringify(p.questions ?? {})}`;
      const resumeFrom = o.resume ? (await session.latestCheckpoint({ datasetHash: hash, stage: 'practice' }))?.id : undefined;
      const progress = trainingProgress('practice');
      let ended;
      try {
        ended = await session.practice({
          runId: 'practice',
          passages: p.passages,
          questions: p.questions,
          config: p.config,
          questionMatch: p.questionMatch,
          datasetHash: hash,
          resumeFrom,
          onEvent: progress.onEvent,
          signal: abort.signal,
        });
      } finally {
        progress.stop();
      }
      if (ended.status === 'stopped')
        throw new UserError(`stopped in the practice stage at update ${ended.update}; continue with the same command and --resume`, 130);
      const afterPractice = evalRecords && p.measure ? evaluate('evaluating after practice', 'start') : null;
      practice = { questions: ended.questions, updates: ended.totalUpdates, seconds: (performance.now() - t0) / 1000, afterPractice };
    }

    // 2b. fine-tuning, resumed from the newest checkpoint of this data when asked; with
    // --practice-mixed the practice questions are part of that data
    const mix = step?.practice && step.mixed ? { passages: step.passages, questions: step.questions } : undefined;
    let mixedPractice: TrainRun['mixedPractice'] = null;
    if (mix) {
      const { mixedPracticeOptions } = await import('../../session/reader-session.js');
      const preview = session.previewPractice({ ...mix, questions: mixedPracticeOptions(mix.questions, config.epochs), sample: 0 });
      mixedPractice = { questions: preview.questions };
      log(
        `practice (mixed into fine-tuning, new ones for each of the ${config.epochs} epochs): ${preview.questions} questions (${preview.unanswerable} without an answer) written from ${preview.passages} passages of ${step!.source}; the labelled questions are repeated once per epoch and the whole set trained in one pass`,
      );
    }
    // the mixed set depends on the epochs too: every epoch has practice questions of its own
    const fineTuneHash = mix
      ? `${datasetHash}+practice:${mix.passages.length}:${JSON.stringify(mix.questions ?? {})}:epochs ${config.epochs}`
      : datasetHash;
    let resumeFrom: string | undefined;
    if (o.resume) {
      const last = await session.latestCheckpoint({ datasetHash: fineTuneHash });
      if (last === null) {
        if (!step) throw new UserError(`${join(o.out, 'checkpoints')}: no checkpoint of this training data to resume from`);
      } else {
        resumeFrom = last.id;
        log(`resuming from checkpoint ${last.id} (update ${last.meta.step})`);
      }
    }
    const progress = trainingProgress();
    let ended;
    try {
      ended = await session.fineTune({
        runId: 'train',
        train,
        validation: evalRecords ?? [],
        config,
        datasetHash: fineTuneHash,
        practiceMix: mix,
        resumeFrom,
        onEvent: progress.onEvent,
        signal: abort.signal,
      });
    } finally {
      progress.stop();
    }
    if (ended.status === 'stopped')
      throw new UserError(`stopped at update ${ended.update}; continue with the same command and --resume`, 130);

    // 3. measure
    // the neutral decoding, then the one chosen on the training questions and saved with the reader
    const after = evalRecords ? evaluate('evaluating the trained reader', 'tuned', NEUTRAL_DECODING) : null;
    const saved = ended.decoding ?? null;
    const withSaved = evalRecords && saved ? evaluate('evaluating with its saved decoding', 'tuned') : null;
    const afterTrainedCut =
      withSaved && saved ? { threshold: saved.nullThreshold, kindBonus: saved.kindBonus, summary: withSaved.summary } : null;
    const baseline = evalRecords && o.measureBase ? session.wordOverlapBaseline({ tuneOn: train, records: evalRecords }) : null;

    // 4. write
    const { files: out } = session.exportReader({
      model: 'tuned',
      fp16: false,
      int8: o.int8 === true,
      onnx: o.onnx === true,
      baseName: o.base,
      int8Check: evalRecords ? { records: evalRecords, ...windows } : undefined,
      card: {
        dataset: { hash: datasetHash, records: train.length, train: train.length, validation: evalRecords?.length ?? 0 },
        settings: config,
        scores: after
          ? {
              withoutThreshold: after.summary,
              withThreshold: after.bestCut ? { ...after.bestCut.summary, threshold: after.bestCut.threshold } : undefined,
              withSavedDecoding: withSaved && saved ? { ...withSaved.summary, ...saved } : undefined,
            }
          : undefined,
        baseScores: before?.summary,
        notes: [
          ...(domain
            ? [
                `first trained with masked-LM on ${step!.source} (${domain.passes} passes over ${domain.rows} rows of 128 tokens, ${domain.updates} updates)`,
              ]
            : []),
          ...(practice
            ? [
                `${domain ? 'then' : 'first'} trained on ${practice.questions} practice questions written from ${step!.source} (${practice.updates} updates)`,
              ]
            : []),
          `fine-tuned for ${ended.totalUpdates} updates (${config.epochs} epochs, windows of ${config.maxLength} tokens)`,
        ],
      },
    });
    await writeFilesAtomically(o.out, out);
    return {
      config,
      train,
      evalRecords,
      before,
      after,
      afterSaved: withSaved,
      afterTrainedCut,
      baseline,
      practice,
      mixedPractice,
      domain,
      out: o.out,
      files: out.map((f) => ({ name: f.name, bytes: f.bytes.length })),
      seconds: (performance.now() - started) / 1000,
    };
  } finally {
    process.off('SIGINT', onSigint);
    session.dispose();
    await lock.release();
  }
}

/** No no-answer cut and no kind bonus: the reader's logits as they are. */
const NEUTRAL_DECODING = { nullThreshold: 0, kindBonus: 0 };

export function register(program: Command): void {
  const d = DEFAULT_TRAIN_CONFIG;
  program
    .command('train')
    .description('fine-tune a base reader on labelled questions, evaluate it, and write the trained model directory')
    .requiredOption('--train <file>', 'training questions (SQuAD JSON layout, JSONL or CSV)')
    .option('--eval <file>', 'validation questions, scored during and after training')
    .option('--base <dir>', 'the base model directory', DEFAULT_BASE)
    .requiredOption('--out <dir>', 'where the trained model directory (and its checkpoints/) go')
    .option('--epochs <n>', `passes over the training windows (default ${d.epochs})`)
    .option(
      '--lr <x>',
      `peak learning rate after warmup (default by the base's hidden size: ${suggestedLearningRate(256)} up to 256, ${suggestedLearningRate(512)} up to 512, ${suggestedLearningRate(768)} above)`,
    )
    .option('--batch <n>', `windows per micro-batch (default ${d.batchSize})`)
    .option('--accumulate <n>', `micro-batches per optimizer update (default ${d.gradAccumulation})`)
    .option('--max-len <n>', `tokens per window, special tokens included (default ${d.maxLength})`)
    .option('--stride <n>', `context tokens shared by neighbouring windows of a long passage (default ${d.stride})`)
    .option('--max-query <n>', `question tokens kept (default ${d.maxQueryLength}, or a third of --max-len)`)
    .option('--seed <n>', `seed for data order and dropout (default ${d.seed})`)
    .option(
      '--practice-from <path>',
      'first train on practice questions written from these passages: a JSONL of {id, text}, a folder of .txt files, or "train" for the training questions\' passages',
    )
    .option('--practice-epochs <n>', `passes over the practice questions (default ${PRACTICE_DEFAULTS.epochs})`)
    .option(
      '--practice-per-passage <n>',
      `practice questions per passage (default ${PRACTICE_DEFAULTS.perPassage}, or ${PRACTICE_DEFAULTS.mixedPerPassage} per epoch with --practice-mixed)`,
    )
    .option(
      '--practice-mixed',
      'put the practice questions among the training questions of fine-tuning instead of a stage before it, new ones for every epoch',
    )
    .option('--practice-max-len <n>', `tokens per practice window (default ${PRACTICE_DEFAULTS.maxLength})`)
    .option(
      '--domain-minutes <n>',
      'first train the encoder with masked-LM on the same passages (--practice-from, or the training passages) for about this many minutes (default 0: not at all)',
    )
    .option(
      '--question-match [level]',
      'word-match token types for the practice stage: "words" (passage words found in the question) or "words+sentence" (also the best-matching sentence, the default level); on already when the base\'s config.json says so',
    )
    .option('--resume', 'continue from the last checkpoint in <out>/checkpoints')
    .option(
      '--json',
      'print the evaluation as one JSON object on the last line: {em, f1, total, answerable, unanswerable, threshold, bestCut}',
    )
    .addHelpText(
      'after',
      `
Warmup ${d.warmupRatio * 100}% of updates then linear decay; AdamW with weight decay ${d.weightDecay}
(none on biases and LayerNorm); gradient clipping at global norm ${d.maxGradNorm}.
Ctrl-C stops after the current update and saves a checkpoint; --resume continues it.

Example:
  spanwright train --train tiny-models/demo/train.jsonl --eval tiny-models/demo/validation.jsonl --out runs/mine`,
    )
    .action((o: TrainOptions) =>
      runCommand(async () => {
        const config = configFromOptions(o);
        const log = (line: string) => process.stderr.write(`${line}\n`);
        const run = await trainReader(
          {
            train: o.train,
            eval: o.eval,
            base: o.base,
            out: o.out,
            resume: o.resume,
            practice: (train) => practiceFromOptions(o, train, config),
          },
          config,
          log,
        );
        if (o.json) {
          // as the written model decodes, so `eval` of it prints the same
          const scored = run.afterSaved ?? run.after;
          printJson(scored ? scoresObject(scored) : { em: null, f1: null, total: 0 });
          return;
        }
        const rows = [
          ...(run.practice?.afterPractice ? [{ label: 'after practice', scores: run.practice.afterPractice.summary }] : []),
          ...(run.after ? [{ label: 'trained, threshold 0', scores: run.after.summary }] : []),
          ...(run.afterTrainedCut
            ? [
                {
                  label: `trained, saved cut ${run.afterTrainedCut.threshold.toFixed(2)} and kind bonus ${run.afterTrainedCut.kindBonus}`,
                  scores: run.afterTrainedCut.summary,
                },
              ]
            : []),
        ];
        if (rows.length > 0) process.stdout.write(`${scoresTable(rows)}\n`);
        if (run.after?.bestCut)
          process.stdout.write(
            `with the tuned no-answer threshold ${run.after.bestCut.threshold.toFixed(2)}: EM ${run.after.bestCut.summary.em?.toFixed(1)} F1 ${run.after.bestCut.summary.f1?.toFixed(1)}\n`,
          );
        if (run.afterTrainedCut)
          process.stdout.write(
            'the saved cut and bonus were chosen on the training questions and are kept in config.json ("spanwright_decoding"): eval, predict and ask use them\n',
          );
        if (run.after)
          for (const w of readerWarnings(run.afterTrainedCut?.summary ?? run.after.bestCut?.summary ?? run.after.summary))
            process.stdout.write(`${w}\n`);
        process.stdout.write(`model directory: ${run.out} (${run.files.map((f) => f.name).join(', ')}) in ${run.seconds.toFixed(0)} s\n`);
      }),
    );
}
