// defines: spanLoss, spanAllowedBias, mlmLoss — the reader's training objectives.
//
// Shapes: B batch, T tokens, V vocabulary.
//
// Decision — the training objective's span softmax runs over ALL T positions (call
// spanLoss without attentionMask/tokenTypeIds), as BERT's SQuAD fine-tuning does; the
// decoder (src/eval) still picks only context positions or [CLS]. Restricting the
// softmax to context + [CLS] (−10000 on question and padding logits) stays available
// as an option, but it measured no better:
//   tests/reference/masking_experiment.py — the same reader (L2, H64) and seeds trained
//   twice in PyTorch (Debian python3-torch) on a synthetic task built to favour masking
//   (a marker token sits in every question; the answer is its copy in the context, or
//   [CLS] when absent), 100 updates, batch 32, AdamW 2e-3, mean of 3 seeds, held-out
//   loss computed as the decoder sees it (softmax over context + [CLS]) for both:
//     update   unmasked: loss / EM    masked: loss / EM
//       10        2.110 / 0.983         1.895 / 0.255
//       20        0.700 / 1.000         0.596 / 1.000
//       50        0.005 / 1.000         0.038 / 1.000
//      100        0.002 / 1.000         0.017 / 1.000
//   (a 150-update run agreed: final 0.001 vs 0.005, EM 1.0 both). Pushing down the
//   question's copy of the marker teaches the distinction the task needs sooner, and the
//   unmasked model ends more confident on the positions the decoder reads.
// The PyTorch fixtures (tests/reference/generate_fixtures.py, SPAN_MASKED = False)
// mirror this; they also hold the masked variant's value for the option.

import * as tf from '@tensorflow/tfjs';

/** Added to span logits a span may not start or end at; exp(−10000) is 0 in float32. */
export const SPAN_MASKED_LOGIT = -10000;

/**
 * [B, T] float32: 0 where a span may start or end (context tokens, i.e. token type 1
 * and not padding, and [CLS] at index 0), −10000 elsewhere. Without `tokenTypeIds`
 * only padding is excluded.
 */
export function spanAllowedBias(attentionMask: tf.Tensor2D, tokenTypeIds?: tf.Tensor2D): tf.Tensor2D {
  return tf.tidy(() => {
    const [B, T] = attentionMask.shape;
    const real = tf.equal(attentionMask, 1); // [B, T]
    const context = tokenTypeIds === undefined ? real : tf.logicalAnd(real, tf.equal(tokenTypeIds, 1)); // [B, T]
    const isCls = tf.tile(tf.reshape(tf.oneHot(tf.tensor1d([0], 'int32'), T, 1, 0, 'bool'), [1, T]), [B, 1]); // [B, T]
    const allowed = tf.logicalOr(context, isCls); // [B, T]
    return tf.where(allowed, tf.zeros([B, T]), tf.fill([B, T], SPAN_MASKED_LOGIT)) as tf.Tensor2D;
  });
}

/** Cross-entropy of logits [B, K] against class indices [B], mean over the batch. */
function crossEntropy(logits: tf.Tensor2D, targets: tf.Tensor1D): tf.Scalar {
  const K = logits.shape[1];
  const logProbs = tf.logSoftmax(logits, -1); // [B, K]
  const picked = tf.sum(tf.mul(logProbs, tf.oneHot(tf.cast(targets, 'int32'), K)), -1); // [B]
  return tf.neg(tf.mean(picked)) as tf.Scalar;
}

/**
 * (CE(start, startPositions) + CE(end, endPositions)) / 2, each a batch mean; positions
 * index 0..T−1 (0 = [CLS] = no answer in this window). With `attentionMask` and
 * `tokenTypeIds` given, the softmax is restricted to context + [CLS] (see the top);
 * with `attentionMask` alone, padding is excluded; with neither, all T positions count.
 */
export function spanLoss(
  start: tf.Tensor2D,
  end: tf.Tensor2D,
  startPositions: tf.Tensor1D,
  endPositions: tf.Tensor1D,
  attentionMask?: tf.Tensor2D,
  tokenTypeIds?: tf.Tensor2D,
): tf.Scalar {
  const [B, T] = start.shape;
  if (end.shape[0] !== B || end.shape[1] !== T)
    throw new Error(`spanLoss: end logits [${end.shape}] differ from start logits [${start.shape}]`);
  if (startPositions.shape[0] !== B || endPositions.shape[0] !== B) {
    throw new Error(`spanLoss: ${startPositions.shape[0]} start and ${endPositions.shape[0]} end positions for a batch of ${B}`);
  }
  return tf.tidy(() => {
    let s: tf.Tensor2D = start;
    let e: tf.Tensor2D = end;
    if (attentionMask !== undefined) {
      const bias = spanAllowedBias(attentionMask, tokenTypeIds); // [B, T]
      s = tf.add(start, bias);
      e = tf.add(end, bias);
    }
    return tf.div(tf.add(crossEntropy(s, startPositions), crossEntropy(e, endPositions)), 2) as tf.Scalar;
  });
}

/**
 * Mean cross-entropy over positions whose label is not −100 (PyTorch's ignore_index).
 * logits [B, T, V], labels int32 [B, T]. With no labelled position the loss is 0
 * (PyTorch gives NaN there; a batch without masked tokens should not poison a run).
 */
export function mlmLoss(logits: tf.Tensor3D, labels: tf.Tensor2D): tf.Scalar {
  const [B, T, V] = logits.shape;
  if (labels.shape[0] !== B || labels.shape[1] !== T)
    throw new Error(`mlmLoss: labels [${labels.shape}] do not match logits [${logits.shape}]`);
  return tf.tidy(() => {
    const flatLabels = tf.reshape(tf.cast(labels, 'int32'), [B * T]); // [B·T]
    const counted = tf.notEqual(flatLabels, -100); // [B·T]
    const safeLabels = tf.where(counted, flatLabels, tf.zerosLike(flatLabels)); // [B·T]
    const logProbs = tf.logSoftmax(tf.reshape(logits, [B * T, V]), -1); // [B·T, V]
    const picked = tf.sum(tf.mul(logProbs, tf.oneHot(safeLabels, V)), -1); // [B·T]
    const weights = tf.cast(counted, 'float32'); // [B·T]
    const total = tf.sub(0, tf.sum(tf.mul(picked, weights))); // 0 − x: no −0 for an empty batch
    return tf.div(total, tf.maximum(tf.sum(weights), 1)) as tf.Scalar;
  });
}
