// defines: TrainPlan (the numbers a run derives once from its config and data size),
// planTraining, learningRateAt.
//
// Counting. An *update* is one optimizer step. It consumes up to A micro-batches of up
// to b features each (A = gradAccumulation, b = batchSize). Every epoch starts afresh
// on a new order, so an epoch of N features takes U = ⌈N / (A·b)⌉ updates and its last
// update may be short. S = epochs · U updates in all, W = round(warmupRatio · S) of
// them warming up.

import type { TrainConfig } from './config.js';

/** Derived once per run (docs/STYLE.md §3), logged, and stored with checkpoints. */
export interface TrainPlan {
  /** N: training features (windows) per epoch. */
  features: number;
  epochs: number;
  /** b: features per micro-batch. */
  batchSize: number;
  /** A: micro-batches per update. */
  gradAccumulation: number;
  /** A·b: features per full update. */
  featuresPerUpdate: number;
  /** U = ⌈N / (A·b)⌉. */
  updatesPerEpoch: number;
  /** S = epochs · U. */
  totalUpdates: number;
  /** W = round(warmupRatio · S). */
  warmupUpdates: number;
  /** Peak learning rate (`base`). */
  baseLearningRate: number;
  /** Tokens per window (T before any padding trim). */
  maxLength: number;
  /** A·b·T: tokens per full update, padding included — the upper bound the UI quotes. */
  tokensPerUpdate: number;
}

export function planTraining(
  config: Pick<TrainConfig, 'batchSize' | 'gradAccumulation' | 'epochs' | 'warmupRatio' | 'learningRate' | 'maxLength'>,
  features: number,
): TrainPlan {
  if (!Number.isInteger(features) || features <= 0) {
    throw new RangeError(`planTraining: the training set must hold at least one feature, got ${features}`);
  }
  const featuresPerUpdate = config.batchSize * config.gradAccumulation;
  const updatesPerEpoch = Math.ceil(features / featuresPerUpdate);
  const totalUpdates = config.epochs * updatesPerEpoch;
  return {
    features,
    epochs: config.epochs,
    batchSize: config.batchSize,
    gradAccumulation: config.gradAccumulation,
    featuresPerUpdate,
    updatesPerEpoch,
    totalUpdates,
    warmupUpdates: Math.round(config.warmupRatio * totalUpdates),
    baseLearningRate: config.learningRate,
    maxLength: config.maxLength,
    tokensPerUpdate: featuresPerUpdate * config.maxLength,
  };
}

/**
 * The learning rate for update k = 0, 1, …, S − 1 (DEVELOPERS.md, mirrored by the
 * PyTorch reference as `LambdaLR` stepped once after every update):
 *
 *   1. warmup, k < W:   lr = base · k / W        (update 0 runs at lr 0, as LambdaLR does)
 *   2. decay,  k ≥ W:   lr = base · max(0, (S − k) / (S − W))
 */
export function learningRateAt(plan: Pick<TrainPlan, 'totalUpdates' | 'warmupUpdates' | 'baseLearningRate'>, k: number): number {
  const { totalUpdates: S, warmupUpdates: W, baseLearningRate: base } = plan;
  if (k < W) return base * (k / W);
  // S = W only when warmupRatio = 1, and then k < S = W always took the branch above.
  if (S === W) return 0;
  return base * Math.max(0, (S - k) / (S - W));
}
