// defines: BASE_DIR, loadBaseReader, scoreReader, scoreReaderTuned, fineTuneReader, lexicalBaselineScores —
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
    throw new Error(`${name} is missing (${absent.join(', ')} not found in ${dir}); build it with the recipe in tiny-models/recipe/build-base.ts`);
  }
  const { params, config, tokenizer } = loadCheckpointDir({
    configJson: readFileSync(join(dir, 'config.json'), 'utf8'),
    safetensors: new Uint8Array(readFileSync(join(dir, 'model.safetensors'))),
    vocab: { file: 'vocab.txt', text: readFileSync(join(dir, 'vocab.txt'), 'utf8') },
    names: { config: join(dir, 'config.json'), weights: join(dir, 'model.safetensors'), vocab: join(dir, 'vocab.txt') },
  }, { seed: 1 });
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
    features: { maxLen: windows.maxLength, stride: windows.stride, maxQueryTokens: windows.maxQueryLength },
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
  const features = { maxLen: windows.maxLength, stride: windows.stride, maxQueryTokens: windows.maxQueryLength };
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
