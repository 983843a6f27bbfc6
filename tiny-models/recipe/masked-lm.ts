// defines: MaskedLmTrainer — masked-language-model updates that score only the masked
// positions, and their held-out evaluation (loss and accuracy).
//
// The head scores only the masked positions (the core's mlmLogitsAt, src/model/encoder.ts,
// which says why); the update is built from the core's parts (ReaderParams.variableGrads,
// globalNorm / clipScale, AdamW) with the recipe's time-budget schedule around it.
//
// Letters: B rows, T tokens per row, H hidden, V vocabulary, M masked positions.

import * as tf from '@tensorflow/tfjs';
import { parameterShapes, type ReaderConfig } from '../../src/model/config.js';
import { mlmLogitsAt, type ReaderInputs } from '../../src/model/encoder.js';
import type { ReaderParams } from '../../src/model/params.js';
import { AdamW, type AdamWState } from '../../src/train/adamw.js';
import type { MlmBatch } from '../../src/train/batches.js';
import { clipScale, globalNorm } from '../../src/train/clip.js';
import { mlmLoss } from '../../src/train/losses.js';
import { swapLinearAxes } from '../../src/train/trainer.js';
import { maskedPositions } from '../../src/train/mlm-data.js';

export interface MaskedLmOptions {
  weightDecay: number;
  maxGradNorm: number;
}

export interface MaskedLmStep {
  loss: number;
  gradNorm: number;
  /** masked positions scored */
  predicted: number;
}

export interface MaskedLmEval {
  /** mean cross-entropy over the masked positions */
  loss: number;
  /** share of masked positions whose arg-max prediction is the original token */
  accuracy: number;
  predicted: number;
}

export class MaskedLmTrainer {
  readonly params: ReaderParams;
  readonly config: Readonly<ReaderConfig>;
  private readonly optimizer: AdamW;
  private readonly options: MaskedLmOptions;
  /** engine name → Linear weight kept [in, out] (moments are saved [out, in] like weights) */
  private readonly linear: Map<string, boolean>;

  constructor(params: ReaderParams, config: ReaderConfig, options: MaskedLmOptions) {
    this.params = params;
    this.config = Object.freeze({ ...config });
    this.options = options;
    this.linear = new Map([...parameterShapes(config)].map(([name, spec]) => [name, spec.linear]));
    // torch.optim.AdamW's betas, BERT's ε (DEVELOPERS.md)
    this.optimizer = new AdamW(params.variables, { beta1: 0.9, beta2: 0.999, epsilon: 1e-6, weightDecay: options.weightDecay });
  }

  /** One update on one masked batch; `dropoutSeed` fixes this step's dropout masks. */
  step(batch: MlmBatch, lr: number, dropoutSeed: number): MaskedLmStep {
    const positions = maskedPositions(batch);
    const { value, grads } = this.params.variableGrads(() => this.lossOf(batch, positions, true, dropoutSeed));
    try {
      const loss = value.dataSync()[0];
      const normTensor = globalNorm(grads.values());
      const gradNorm = normTensor.dataSync()[0];
      normTensor.dispose();
      if (!Number.isFinite(loss) || !Number.isFinite(gradNorm)) {
        throw new Error(`masked-LM update refused: loss ${loss}, gradient norm ${gradNorm} (weights unchanged)`);
      }
      this.optimizer.apply(grads, lr, clipScale(gradNorm, this.options.maxGradNorm));
      return { loss, gradNorm, predicted: positions.length };
    } finally {
      value.dispose();
      for (const g of grads.values()) g.dispose();
    }
  }

  /** Loss and accuracy over the masked positions of the batches, in eval mode (no dropout). */
  evaluate(batches: readonly MlmBatch[]): MaskedLmEval {
    let lossSum = 0;
    let correct = 0;
    let predicted = 0;
    for (const batch of batches) {
      const positions = maskedPositions(batch);
      if (positions.length === 0) continue;
      const [loss, hits] = tf.tidy(() => {
        const logits = this.logitsAt(batch, positions, false, 0); // [M, V]
        const labels = tf.tensor1d(gatherLabels(batch, positions), 'int32'); // [M]
        const ce = mlmLoss(tf.expandDims(logits, 0) as tf.Tensor3D, tf.expandDims(labels, 0) as tf.Tensor2D);
        const right = tf.sum(tf.cast(tf.equal(tf.argMax(logits, -1), labels), 'int32'));
        return [ce.dataSync()[0], right.dataSync()[0]];
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

  /** Moments in checkpoint layout (Linear weights [out, in]) with step counts. */
  optimizerState(): AdamWState {
    const { steps, tensors } = this.optimizer.exportState();
    return { steps, tensors: swapLinearAxes(tensors, this.linear) };
  }

  restoreOptimizer(state: AdamWState): void {
    this.optimizer.importState({ steps: state.steps, tensors: swapLinearAxes(state.tensors, this.linear) });
  }

  dispose(): void {
    this.optimizer.dispose();
  }

  // ---- the head over gathered positions --------------------------------------------

  private lossOf(batch: MlmBatch, positions: Int32Array, training: boolean, dropoutSeed: number): tf.Scalar {
    const logits = this.logitsAt(batch, positions, training, dropoutSeed); // [M, V]
    const labels = tf.tensor2d(gatherLabels(batch, positions), [1, positions.length], 'int32'); // [1, M]
    return mlmLoss(tf.expandDims(logits, 0) as tf.Tensor3D, labels);
  }

  /** The core's head at `positions` (flat b·T + t indices). [M, V] */
  private logitsAt(batch: MlmBatch, positions: Int32Array, training: boolean, dropoutSeed: number): tf.Tensor2D {
    const inputs: ReaderInputs = {
      inputIds: tf.tensor2d(batch.inputIds, [batch.size, batch.seqLen], 'int32'),
      tokenTypeIds: tf.tensor2d(batch.tokenTypeIds, [batch.size, batch.seqLen], 'int32'),
      attentionMask: tf.tensor2d(batch.attentionMask, [batch.size, batch.seqLen], 'int32'),
    };
    return mlmLogitsAt(this.params, this.config, inputs, tf.tensor1d(positions, 'int32'), { training, dropoutSeed });
  }
}

function gatherLabels(batch: MlmBatch, positions: Int32Array): Int32Array {
  const out = new Int32Array(positions.length);
  positions.forEach((at, k) => (out[k] = batch.labels[at]));
  return out;
}
