// defines: Trainer (one optimizer update at a time: span fine-tuning `step`, MLM
// pretraining `mlmStep` and its held-out `mlmEvaluate`, eval-mode `evalLogits`),
// StepResult, TrainerState, MlmEvaluation, NonFiniteError.
//
// The step function the CLI and the Web Worker both drive (through loop.ts). One update:
//
//   1. for each of the A_k micro-batches (A_k = A, or fewer in an epoch's last update):
//      forward with this micro-batch's dropout seed, loss / A_k, backward, add the
//      gradients to the running sum — so the update's gradient is the mean of the
//      micro-batch gradients (DEVELOPERS.md, gradient accumulation)
//   2. refuse the update if the loss or any gradient is not finite (NonFiniteError),
//      before anything is written: weights and moments stay as they were
//   3. clip: c = maxNorm / (‖g‖₂ + 1e-6), applied when c < 1 (clip.ts)
//   4. AdamW with the scheduled learning rate (adamw.ts, schedule.ts)
//
// Dropout masks are a function of (run seed, update, micro-batch) only, so the same
// seed gives the same losses and a resumed run repeats an uninterrupted one exactly.
//
// Letters: B features in a micro-batch, T tokens per row.
//
// Memory: the trainer owns the optimizer (and so the moments); the weights belong to
// the ReaderParams passed in. Everything a step creates is freed before it returns.

import * as tf from '@tensorflow/tfjs';
import type { ReaderConfig } from '../model/config.js';
import { mlmLogitsAt, spanLogits, type ReaderInputs } from '../model/encoder.js';
import { maskedPositions } from './mlm-data.js';
import type { ReaderParams } from '../model/params.js';
import { AdamW, type AdamWState } from './adamw.js';
import type { MlmBatch, SpanBatch } from './batches.js';
import { clipScale, firstNonFinite, globalNorm } from './clip.js';
import type { TrainConfig } from './config.js';
import { mlmLoss, spanLoss } from './losses.js';
import { seedAt } from './random.js';
import { learningRateAt, type TrainPlan } from './schedule.js';

/** What one update did; plain data for progress messages. */
export interface StepResult {
  /** 0-based index of the update just taken */
  update: number;
  /** mean loss over the update's micro-batches */
  loss: number;
  /** ‖g‖₂ before clipping, as torch's clip_grad_norm_ returns it */
  gradNorm: number;
  /** the factor the gradients were multiplied by (1 = not clipped) */
  clipScale: number;
  lr: number;
  /** features in this update */
  features: number;
  /** real (unpadded) tokens in this update */
  tokens: number;
  /** token positions computed, padding kept after any trim: B·T summed over micro-batches */
  positions: number;
}

/** The trainer's own progress, plain data for checkpoints. Moments travel as tensors. */
export interface TrainerState {
  /** optimizer updates taken so far (= index of the next update) */
  update: number;
  /** the run seed the dropout masks derive from */
  seed: number;
}

/** A step refused because the loss or a gradient was NaN or infinite; nothing was changed. */
export class NonFiniteError extends Error {
  /** the update that was refused */
  readonly update: number;
  /**
   * 'loss'; a parameter name (the first, in parameter order, whose gradient holds a NaN
   * or ±∞); or 'gradient norm' when every gradient is finite but the sum of their
   * squares overflows float32
   */
  readonly culprit: string;
  /** the loss, or the global gradient norm */
  readonly value: number;

  constructor(update: number, culprit: string, value: number) {
    const what =
      culprit === 'loss'
        ? `the loss is ${value}`
        : culprit === 'gradient norm'
          ? `the gradients are finite but their global norm overflows float32 (${value})`
          : `the gradient of ${culprit} is not finite (global norm ${value})`;
    super(`update ${update}: ${what}; the step was not applied (weights and optimizer state unchanged)`);
    this.name = 'NonFiniteError';
    this.update = update;
    this.culprit = culprit;
    this.value = value;
  }
}

/** A held-out masked-LM measurement (Trainer.mlmEvaluate). */
export interface MlmEvaluation {
  /** mean cross-entropy over the masked positions */
  loss: number;
  /** share of masked positions whose arg-max prediction is the original token */
  accuracy: number;
  /** masked positions scored */
  predicted: number;
}

/** Span logits of one batch in eval mode, read back: row-major [B, T]. */
export interface EvalLogits {
  size: number;
  seqLen: number;
  start: Float32Array;
  end: Float32Array;
}

export class Trainer {
  readonly params: ReaderParams;
  /** the model config with the train config's dropout override applied */
  readonly modelConfig: Readonly<ReaderConfig>;
  readonly config: Readonly<TrainConfig>;
  readonly plan: Readonly<TrainPlan>;
  private readonly optimizer: AdamW;
  private update = 0;

  constructor(params: ReaderParams, modelConfig: ReaderConfig, trainConfig: TrainConfig, plan: TrainPlan) {
    this.params = params;
    this.modelConfig = Object.freeze(
      trainConfig.dropout === null
        ? { ...modelConfig }
        : { ...modelConfig, hiddenDropout: trainConfig.dropout, attentionDropout: trainConfig.dropout },
    );
    this.config = Object.freeze({ ...trainConfig });
    this.plan = Object.freeze({ ...plan });
    this.optimizer = new AdamW(params.variables, {
      beta1: trainConfig.beta1,
      beta2: trainConfig.beta2,
      epsilon: trainConfig.epsilon,
      weightDecay: trainConfig.weightDecay,
    });
  }

  /** Updates taken so far. */
  get updatesDone(): number {
    return this.update;
  }

  /** The scheduled learning rate of update `update` (default: the next one). */
  learningRate(update = this.update): number {
    return learningRateAt(this.plan, update);
  }

  /** One span-extraction update over `microBatches` (start/end cross-entropy). */
  step(microBatches: readonly SpanBatch[], lr = this.learningRate()): StepResult {
    return this.applyUpdate(microBatches, lr, (batch, seed) => {
      const inputs = readerInputs(batch);
      const { start, end } = spanLogits(this.params, this.modelConfig, inputs, { training: true, dropoutSeed: seed });
      const startPositions = tf.tensor1d(batch.startPositions, 'int32');
      const endPositions = tf.tensor1d(batch.endPositions, 'int32');
      // padding is left out of the softmax (it is never an answer), which makes padding trim exact; question tokens stay in, as in BERT (losses.ts has the measurement)
      return spanLoss(start, end, startPositions, endPositions, inputs.attentionMask);
    });
  }

  /**
   * One masked-language-model update (pretraining / domain adaptation of the encoder),
   * the head scoring only the masked positions (mlmLogitsAt); the loss is the same mean
   * over them as mlmLoss over every position with −100 elsewhere.
   */
  mlmStep(microBatches: readonly MlmBatch[], lr = this.learningRate()): StepResult {
    return this.applyUpdate(microBatches, lr, (batch, seed) => {
      const positions = maskedPositions(batch);
      const labels = new Int32Array(positions.length);
      positions.forEach((at, k) => (labels[k] = batch.labels[at]!));
      const logits = mlmLogitsAt(this.params, this.modelConfig, readerInputs(batch), tf.tensor1d(positions, 'int32'), {
        training: true,
        dropoutSeed: seed,
      }); // [M, V]
      return mlmLoss(tf.expandDims(logits, 0) as tf.Tensor3D, tf.tensor2d(labels, [1, positions.length], 'int32'));
    });
  }

  /**
   * Masked-LM loss and accuracy over the masked positions of `batches`, in eval mode (no
   * dropout): the held-out measure of a pretraining run. Batches with no masked position
   * are skipped; NaN when none has one.
   */
  mlmEvaluate(batches: readonly MlmBatch[]): MlmEvaluation {
    let lossSum = 0;
    let correct = 0;
    let predicted = 0;
    for (const batch of batches) {
      const positions = maskedPositions(batch);
      if (positions.length === 0) continue;
      const [loss, hits] = tf.tidy(() => {
        const labels = new Int32Array(positions.length);
        positions.forEach((at, k) => (labels[k] = batch.labels[at]!));
        const logits = mlmLogitsAt(this.params, this.modelConfig, readerInputs(batch), tf.tensor1d(positions, 'int32'), {
          training: false,
        }); // [M, V]
        const gold = tf.tensor1d(labels, 'int32');
        const ce = mlmLoss(tf.expandDims(logits, 0) as tf.Tensor3D, tf.expandDims(gold, 0) as tf.Tensor2D);
        const right = tf.sum(tf.cast(tf.equal(tf.argMax(logits, -1), gold), 'int32'));
        return [ce.dataSync()[0]!, right.dataSync()[0]!];
      });
      lossSum += loss * positions.length;
      correct += hits;
      predicted += positions.length;
    }
    return {
      loss: predicted > 0 ? lossSum / predicted : Number.NaN,
      accuracy: predicted > 0 ? correct / predicted : Number.NaN,
      predicted,
    };
  }

  /** Start/end logits in eval mode (no dropout), read back to the CPU. */
  evalLogits(batch: SpanBatch): EvalLogits {
    const [start, end] = tf.tidy(() => {
      const logits = spanLogits(this.params, this.modelConfig, readerInputs(batch), { training: false });
      return [logits.start, logits.end];
    });
    try {
      // copies: a backend may hand out a view of memory it reuses once the tensor is freed
      return { size: batch.size, seqLen: batch.seqLen, start: Float32Array.from(start.dataSync()), end: Float32Array.from(end.dataSync()) };
    } finally {
      start.dispose();
      end.dispose();
    }
  }

  state(): TrainerState {
    return { update: this.update, seed: this.config.seed };
  }

  /**
   * The optimizer's moments, in the checkpoint layout like the weights they follow
   * (Linear weights [out, in], as `ReaderParams.toNamed`), and its per-parameter step counts.
   */
  optimizerState(): AdamWState {
    return this.optimizer.exportState();
  }

  /**
   * Continues from a saved state: the update count and the optimizer's moments (from
   * `optimizerState`). The weights are restored by loading them into the ReaderParams.
   */
  restore(state: TrainerState, optimizer: AdamWState): void {
    if (state.seed !== this.config.seed) {
      throw new Error(`Trainer.restore: the saved run used seed ${state.seed}, this trainer was configured with seed ${this.config.seed}`);
    }
    if (!Number.isInteger(state.update) || state.update < 0 || state.update > this.plan.totalUpdates) {
      throw new Error(`Trainer.restore: saved update ${state.update} is outside this plan's 0…${this.plan.totalUpdates}`);
    }
    this.optimizer.importState(optimizer);
    this.update = state.update;
  }

  /** Frees the optimizer's moments. The weights stay with their ReaderParams. */
  dispose(): void {
    this.optimizer.dispose();
  }

  // ---- the shared mechanics of one update ------------------------------------------

  private applyUpdate<B extends { size: number; seqLen: number; attentionMask: Int32Array }>(
    microBatches: readonly B[],
    lr: number,
    lossOf: (batch: B, dropoutSeed: number) => tf.Scalar,
  ): StepResult {
    const count = microBatches.length;
    if (count === 0) throw new RangeError('Trainer: an update needs at least one micro-batch');
    const update = this.update;
    let grads: Map<string, tf.Tensor> | null = null;
    let lossSum: tf.Scalar | null = null;
    try {
      // 1. accumulate: the mean of the micro-batch gradients
      for (const [micro, batch] of microBatches.entries()) {
        const seed = seedAt(this.config.seed, 'dropout', update, micro);
        const result = this.params.variableGrads(() => tf.div(lossOf(batch, seed), count) as tf.Scalar);
        lossSum = accumulate(lossSum, result.value);
        grads = grads === null ? result.grads : sumInto(grads, result.grads);
      }
      if (grads === null || lossSum === null) throw new Error('Trainer: no gradients were computed');

      // 2. refuse a non-finite update before anything is written
      const loss = lossSum.dataSync()[0];
      if (!Number.isFinite(loss)) throw new NonFiniteError(update, 'loss', loss);
      const normTensor = globalNorm(grads.values());
      const gradNorm = normTensor.dataSync()[0];
      normTensor.dispose();
      if (!Number.isFinite(gradNorm)) {
        const culprit = firstNonFinite(grads, this.params.variables.keys()) ?? 'gradient norm';
        throw new NonFiniteError(update, culprit, gradNorm);
      }

      // 3–4. clip and update
      const scale = clipScale(gradNorm, this.config.maxGradNorm);
      this.optimizer.apply(grads, lr, scale);
      this.update = update + 1;

      let tokens = 0;
      let features = 0;
      let positions = 0;
      for (const batch of microBatches) {
        for (const m of batch.attentionMask) tokens += m;
        features += batch.size;
        positions += batch.size * batch.seqLen;
      }
      return { update, loss, gradNorm, clipScale: scale, lr, features, tokens, positions };
    } finally {
      if (grads !== null) for (const g of grads.values()) g.dispose();
      lossSum?.dispose();
    }
  }
}

/** Int32 [B, T] tensors of one batch (created inside the caller's scope). */
function readerInputs(batch: {
  size: number;
  seqLen: number;
  inputIds: Int32Array;
  tokenTypeIds: Int32Array;
  attentionMask: Int32Array;
}): ReaderInputs {
  const shape: [number, number] = [batch.size, batch.seqLen];
  return {
    inputIds: tf.tensor2d(batch.inputIds, shape, 'int32'),
    tokenTypeIds: tf.tensor2d(batch.tokenTypeIds, shape, 'int32'),
    attentionMask: tf.tensor2d(batch.attentionMask, shape, 'int32'),
  };
}

function accumulate(sum: tf.Scalar | null, value: tf.Scalar): tf.Scalar {
  if (sum === null) return value;
  const next = tf.add(sum, value) as tf.Scalar;
  sum.dispose();
  value.dispose();
  return next;
}

/** acc + g per name, freeing both inputs; names only in g are taken over as they are. */
function sumInto(acc: Map<string, tf.Tensor>, g: Map<string, tf.Tensor>): Map<string, tf.Tensor> {
  for (const [name, grad] of g) {
    const held = acc.get(name);
    if (held === undefined) {
      acc.set(name, grad);
      continue;
    }
    acc.set(name, tf.add(held, grad));
    held.dispose();
    grad.dispose();
  }
  return acc;
}
