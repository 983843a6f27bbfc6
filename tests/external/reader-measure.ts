// defines: BASE_DIR, loadBaseReader, scoreReader, scoreReaderTuned, fineTuneReader, lexicalBaselineScores,
// StageChoice, measureStages —
// the measuring steps that the outside check (factbook.test.ts) and the quality bench
// (tests/bench/quality.ts) share: load the shipped base reader from disk, score a reader
// on records with the project's SQuAD 2.0 evaluation, fine-tune a copy briefly, and score
// the lexical baseline with its no-answer cut tuned on the training records.
// Node-only (reads files), so it lives in tests/.

import { existsSync, readFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { QARecord } from '../../src/data/record.js';
import { evaluateRecords, predictRecords } from '../../src/eval/evaluate.js';
import { KIND_BONUS_GRID } from '../../src/eval/span-choice.js';
import { applyNoAnswerThreshold, evaluate, findBestThresholds, goldFromRecords, type SquadScores } from '../../src/eval/squad-metric.js';
import { loadCheckpointDir } from '../../src/io/checkpoint-dir.js';
import type { ReaderConfig } from '../../src/model/config.js';
import type { ReaderParams } from '../../src/model/params.js';
import type { WordPieceTokenizer } from '../../src/text/wordpiece.js';
import { trainConfig, type TrainConfig } from '../../src/train/config.js';
import { fineTune } from '../../src/train/finetune.js';
import type { LoopEvent } from '../../src/train/loop.js';

const here = dirname(fileURLToPath(import.meta.url));
export const BASE_DIR = resolve(here, '..', '..', 'tiny-models', 'base');

export interface Reader {
  params: ReaderParams;
  config: ReaderConfig;
  tokenizer: WordPieceTokenizer;
  name: string;
}

/** The shipped base reader (or another model folder); throws "tiny-models/base is missing" when its files are not there. */
export function loadBaseReader(dir = BASE_DIR): Reader {
  const files = ['config.json', 'model.safetensors', 'vocab.txt'];
  const name = dir === BASE_DIR ? 'tiny-models/base' : dir;
  const absent = files.filter((f) => !existsSync(join(dir, f)));
  if (absent.length > 0) {
    throw new Error(
      `${name} is missing (${absent.join(', ')} not found in ${dir}); build it with the recipe in tiny-models/recipe/build-base.ts`,
    );
  }
  const { params, config, tokenizer } = loadCheckpointDir(
    {
      configJson: readFileSync(join(dir, 'config.json'), 'utf8'),
      safetensors: new Uint8Array(readFileSync(join(dir, 'model.safetensors'))),
      vocab: { file: 'vocab.txt', text: readFileSync(join(dir, 'vocab.txt'), 'utf8') },
      names: { config: join(dir, 'config.json'), weights: join(dir, 'model.safetensors'), vocab: join(dir, 'vocab.txt') },
    },
    { seed: 1 },
  );
  return { params, config, tokenizer, name };
}

/** Window settings of every measurement here: short, so a CPU run stays brief. */
export interface WindowSettings {
  maxLength: number;
  stride: number;
  maxQueryLength: number;
}

/** SQuAD 2.0 scores of a reader on records, predictions as decoded (no-answer threshold 0). */
export function scoreReader(reader: Reader, records: readonly QARecord[], windows: WindowSettings): SquadScores {
  const { report } = evaluateRecords(reader, records, {
    features: { maxLength: windows.maxLength, stride: windows.stride, maxQueryLength: windows.maxQueryLength },
    batchSize: 32,
  });
  return report.summary;
}

/**
 * SQuAD 2.0 scores on `heldOut` with the no-answer threshold chosen on `tuneOn` (training
 * questions) by the metric's best-threshold search — the same treatment the lexical
 * baseline gets, so neither side's cut is tuned on the questions it is scored on.
 */
export function scoreReaderTuned(
  reader: Reader,
  tuneOn: readonly QARecord[],
  heldOut: readonly QARecord[],
  windows: WindowSettings,
): { scores: SquadScores; threshold: number } {
  const features = { maxLength: windows.maxLength, stride: windows.stride, maxQueryLength: windows.maxQueryLength };
  const tune = predictRecords(reader, tuneOn, { features, batchSize: 32 });
  const threshold = findBestThresholds(goldFromRecords(tuneOn), tune.bestSpans, tune.scoreDiffs).bestF1Threshold;
  const held = predictRecords(reader, heldOut, { features, batchSize: 32 });
  const predictions = applyNoAnswerThreshold(held.bestSpans, held.scoreDiffs, threshold);
  return { scores: evaluate(goldFromRecords(heldOut), predictions), threshold };
}

/** A fine-tuned copy of `base` (the caller disposes its params), with the run's size. */
export async function fineTuneReader(
  base: Reader,
  train: readonly QARecord[],
  overrides: Partial<TrainConfig>,
  onEvent?: (event: LoopEvent) => void,
): Promise<{ reader: Reader; updates: number; windows: number; config: TrainConfig }> {
  const config = trainConfig(overrides);
  const result = await fineTune({
    base: { params: base.params, config: base.config, name: base.name },
    tokenizer: base.tokenizer,
    train,
    config,
    datasetHash: 'not-stored', // no checkpoint store: the hash is only compared on resume
    hooks: onEvent ? { onEvent } : undefined,
  });
  return {
    reader: { params: result.params, config: base.config, tokenizer: base.tokenizer, name: `${base.name} fine-tuned` },
    updates: result.plan.totalUpdates,
    windows: result.windows,
    config,
  };
}

export { lexicalBaselineScores } from '../../src/eval/lexical-baseline.js';

/** Which stages a measured run takes before fine-tuning (tests/bench/ablation.ts names them). */
export interface StageChoice {
  /** model folder */
  baseDir: string;
  /** word-match token types on (for a base that lacks them) */
  match: boolean;
  /** practice questions from the training questions' passages first */
  practice: boolean;
  /** masked-LM on those passages first, for about this many minutes; 0: none */
  domainMinutes: number;
  /**
   * the practice questions join the fine-tuning questions (20 per passage and epoch, new ones each
   * epoch: ReaderSession.fineTune's practiceMix, as `npm run demo` does) instead of a stage of their
   * own before it (40 per passage)
   */
  mixed?: boolean;
  /** the cut chosen together with the kind bonus (KIND_BONUS_GRID, src/eval/span-choice.ts), as a fine-tuned reader saves them */
  kindBonus?: boolean;
}

export interface StageScores {
  /** SQuAD 2.0 scores on the held-out questions, no-answer cut chosen on `tuneOn` */
  scores: SquadScores;
  threshold: number;
  updates: { domain: number; practice: number; fineTune: number };
  minutes: number;
}

/**
 * The main job through the session use-cases, as `npm run demo` runs it: load the base,
 * the chosen stages on the training questions' passages, fine-tuning on the training
 * questions, then the held-out questions scored with the no-answer cut chosen on (400 of)
 * the training questions.
 */
export async function measureStages(
  choice: StageChoice,
  data: { train: readonly QARecord[]; heldOut: readonly QARecord[] },
  settings: { windows: WindowSettings; fineTune: Partial<TrainConfig>; practiceMaxLength: number; seed: number },
): Promise<StageScores> {
  const { ReaderSession, passagesOf } = await import('../../src/session/reader-session.js');
  const { domainTrainSettings, practiceTrainSettings } = await import('../../src/session/windows.js');
  const { suggestedLearningRate } = await import('../../src/train/config.js');
  const started = performance.now();
  const session = new ReaderSession();
  const file = (f: string) => join(choice.baseDir, f);
  try {
    const info = session.loadBase({
      name: choice.baseDir,
      files: {
        configJson: readFileSync(file('config.json'), 'utf8'),
        safetensors: new Uint8Array(readFileSync(file('model.safetensors'))),
        vocab: { file: 'vocab.txt', text: readFileSync(file('vocab.txt'), 'utf8') },
      },
    });
    const config = trainConfig({
      ...settings.windows,
      learningRate: suggestedLearningRate(info.config.hiddenSize),
      ...settings.fineTune,
      seed: settings.seed,
    });
    const passages = passagesOf([...data.train]);
    const updates = { domain: 0, practice: 0, fineTune: 0 };
    // a base that reads match types already keeps its level; one without them gets 'words+sentence'
    if (choice.match) session.setQuestionMatch({ level: info.config.questionMatch ?? 'words+sentence' });
    if (choice.domainMinutes > 0) {
      updates.domain = (
        await session.domainPretrain({
          runId: 'domain',
          passages,
          config: trainConfig(domainTrainSettings(config)),
          minutes: choice.domainMinutes,
        })
      ).totalUpdates;
    }
    if (choice.practice && !choice.mixed) {
      const practice = trainConfig(practiceTrainSettings(config, { epochs: 1, maxLength: settings.practiceMaxLength }));
      updates.practice = (
        await session.practice({ runId: 'practice', passages, questions: { perPassage: 40, seed: settings.seed }, config: practice })
      ).totalUpdates;
    }
    updates.fineTune = (
      await session.fineTune({
        runId: 'fine-tune',
        train: [...data.train],
        validation: [],
        config,
        datasetHash: 'not-stored',
        practiceMix: choice.practice && choice.mixed ? { passages, questions: { perPassage: 20, seed: settings.seed } } : undefined,
        // chosen below, on the same 400 questions for every row
        chooseDecoding: false,
      })
    ).totalUpdates;
    const { summary, threshold } = session.scoreWithTrainedCut({
      model: 'tuned',
      tuneOn: data.train.slice(0, 400),
      records: [...data.heldOut],
      kindBonuses: choice.kindBonus ? KIND_BONUS_GRID : [0],
      ...settings.windows,
    });
    return { scores: summary, threshold, updates, minutes: (performance.now() - started) / 60000 };
  } finally {
    session.dispose();
  }
}
