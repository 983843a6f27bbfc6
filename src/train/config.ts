// defines: TrainConfig (plain data: the settings of one fine-tuning or pretraining run),
// DEFAULT_TRAIN_CONFIG, trainConfig (defaults + overrides, checked).
//
// Plain data so it passes through postMessage and into a checkpoint's meta unchanged.
// Values derived from it (total updates, warmup updates, tokens per update) are worked
// out once by `planTraining` in schedule.ts, not here.

export interface TrainConfig {
  /** Peak learning rate after warmup. */
  learningRate: number;
  /** Features per micro-batch (one forward/backward pass). */
  batchSize: number;
  /** Micro-batches whose gradients are averaged into one optimizer update. */
  gradAccumulation: number;
  /** Passes over the training features. */
  epochs: number;
  /** Share of all updates spent warming the learning rate up from 0. */
  warmupRatio: number;
  /** AdamW decoupled weight decay λ (not applied to biases and LayerNorm). */
  weightDecay: number;
  /** AdamW β1, β2, ε. */
  beta1: number;
  beta2: number;
  epsilon: number;
  /** Global gradient-norm clip; 0 turns clipping off. */
  maxGradNorm: number;
  /** The run seed: initialisation, data order, dropout masks and MLM masks all derive from it. */
  seed: number;
  /** Tokens per window, `[CLS] question [SEP] context [SEP]` included. */
  maxLength: number;
  /** Tokens of overlap between neighbouring windows over one long context. */
  stride: number;
  /** Question tokens kept; longer questions are cut. */
  maxQueryLength: number;
  /** Evaluate every this many updates; 0 = at the end of every epoch. */
  evalEvery: number;
  /** Save a checkpoint every this many updates; 0 = at every evaluation. */
  checkpointEvery: number;
  /** Overrides both dropout rates of the model config when set; null keeps the model's. */
  dropout: number | null;
  /** Cut each batch to its longest real sequence (exact: padding is masked everywhere). */
  trimPadding: boolean;
  /** Share of tokens an MLM step predicts (pretraining only). */
  mlmProbability: number;
}

/**
 * The peak learning rate to fine-tune a reader of this hidden size with, when the user
 * gives none. Narrow encoders want much larger steps than BERT's:
 *   hidden > 512   5e-5  BERT's fine-tuning range, 2e-5…5e-5 (Devlin et al. 2019, from memory)
 *   hidden ≤ 512   1e-4  the 2–8 layer encoders of Turc et al. 2019 ("Well-Read Students
 *                        Learn Better") did best near the top of a grid reaching 1e-4 (from memory)
 *   hidden ≤ 256   1e-3  measured on the shipped base (L2-H128) with the factbook questions of
 *                        tests/external (800 updates of 16 windows of 128 tokens, a PyTorch
 *                        mirror of the engine, held-out token-level F1 with a tuned no-answer
 *                        cut): 1e-4 still answered nothing (25.0, the unanswerable share),
 *                        1e-3 reached 46.9, 3e-3 32.4
 */
export function suggestedLearningRate(hiddenSize: number): number {
  if (hiddenSize <= 256) return 1e-3;
  if (hiddenSize <= 512) return 1e-4;
  return 5e-5;
}

export const DEFAULT_TRAIN_CONFIG: Readonly<TrainConfig> = Object.freeze({
  // The rate for a reader as wide as BERT-small; suggestedLearningRate above gives
  // the rate by the reader's width, which the CLI and the workbench use when none is given.
  learningRate: 1e-4,
  // 16 features per update is the low end of what BERT's fine-tuning grid tried
  // (16/32, from memory), and 8 × 2 keeps a CPU micro-batch's activations small.
  batchSize: 8,
  gradAccumulation: 2,
  // A small private set needs more passes than SQuAD's 2–3 (common practice); 3 is
  // the usual starting point and the validation curve tells whether to go on.
  epochs: 3,
  // Linear warmup over the first 10% of updates: common practice since BERT.
  warmupRatio: 0.1,
  // BERT's value (Devlin et al. 2018, from memory).
  weightDecay: 0.01,
  // torch.optim.AdamW's betas and BERT's ε = 1e-6 (DEVELOPERS.md fixes these).
  beta1: 0.9,
  beta2: 0.999,
  epsilon: 1e-6,
  // Clip the global norm at 1.0: common practice for BERT fine-tuning.
  maxGradNorm: 1.0,
  // Any fixed number; it only has to be written down with the run.
  seed: 42,
  // 384 / 128 / 64: the usual SQuAD window settings (common practice since BERT's
  // reference scripts, from memory).
  maxLength: 384,
  stride: 128,
  maxQueryLength: 64,
  // Once per epoch: a small set gives few updates, and evaluation costs a full pass.
  evalEvery: 0,
  checkpointEvery: 0,
  // Keep the model config's dropout (BERT's 0.1) unless asked.
  dropout: null,
  // Exact and cheaper: work on the padding tokens is wasted on a CPU.
  trimPadding: true,
  // BERT's masked-LM rate (Devlin et al. 2018): 15% of tokens, 80/10/10 mask/random/keep.
  mlmProbability: 0.15,
});

/** Defaults with `overrides` on top, checked; throws naming the bad field. */
export function trainConfig(overrides: Partial<TrainConfig> = {}): TrainConfig {
  const config: TrainConfig = { ...DEFAULT_TRAIN_CONFIG, ...overrides };
  checkTrainConfig(config);
  return config;
}

/** Throws a RangeError naming the first field out of range. */
export function checkTrainConfig(config: TrainConfig): void {
  const positive = (field: keyof TrainConfig) => {
    const value = config[field];
    if (typeof value !== 'number' || !Number.isFinite(value) || value <= 0) {
      throw new RangeError(`train config: ${field} must be a positive number, got ${String(value)}`);
    }
  };
  const positiveInteger = (field: keyof TrainConfig) => {
    positive(field);
    if (!Number.isInteger(config[field])) {
      throw new RangeError(`train config: ${field} must be a whole number, got ${String(config[field])}`);
    }
  };
  const inRange = (field: keyof TrainConfig, low: number, high: number, closedHigh: boolean) => {
    const value = config[field];
    const ok = typeof value === 'number' && value >= low && (closedHigh ? value <= high : value < high);
    if (!ok) {
      throw new RangeError(`train config: ${field} must be in [${low}, ${high}${closedHigh ? ']' : ')'}, got ${String(value)}`);
    }
  };
  const nonNegativeInteger = (field: keyof TrainConfig) => {
    const value = config[field];
    if (typeof value !== 'number' || !Number.isInteger(value) || value < 0) {
      throw new RangeError(`train config: ${field} must be a whole number ≥ 0, got ${String(value)}`);
    }
  };

  positive('learningRate');
  positiveInteger('batchSize');
  positiveInteger('gradAccumulation');
  positiveInteger('epochs');
  inRange('warmupRatio', 0, 1, true);
  inRange('weightDecay', 0, 1, false);
  inRange('beta1', 0, 1, false);
  inRange('beta2', 0, 1, false);
  positive('epsilon');
  if (!(config.maxGradNorm >= 0)) {
    throw new RangeError(`train config: maxGradNorm must be ≥ 0 (0 = no clipping), got ${config.maxGradNorm}`);
  }
  if (!Number.isInteger(config.seed)) throw new RangeError(`train config: seed must be a whole number, got ${config.seed}`);
  positiveInteger('maxLength');
  nonNegativeInteger('stride');
  positiveInteger('maxQueryLength');
  nonNegativeInteger('evalEvery');
  nonNegativeInteger('checkpointEvery');
  if (config.dropout !== null) inRange('dropout', 0, 1, false);
  inRange('mlmProbability', 0, 1, false);
  if (config.stride >= config.maxLength) {
    throw new RangeError(`train config: stride (${config.stride}) must be less than maxLength (${config.maxLength})`);
  }
}
