// defines: globalNorm, clipScale, scaleGradients — global-norm gradient clipping with
// the semantics of torch.nn.utils.clip_grad_norm_ (norm_type 2):
//
//   1. ‖g‖₂ over all parameters together: √(Σᵢ ‖gᵢ‖₂²)
//   2. c = maxNorm / (‖g‖₂ + 1e-6)
//   3. when c < 1, every gᵢ ← c · gᵢ; otherwise the gradients are left alone
//
// The norm is reported before clipping, as torch returns it. The caller reads the norm
// back (it needs it anyway, to refuse a non-finite step), so the scale is a plain number
// that AdamW folds into its update (`AdamW.apply(grads, lr, scale)`): no clipped copy
// of the gradients is ever made.

import * as tf from '@tensorflow/tfjs';

/** The ε torch adds to the norm before dividing (clip_grad_norm_, `total_norm + 1e-6`). */
export const CLIP_EPSILON = 1e-6;

/** √(Σᵢ Σ gᵢ²) over every tensor, as a scalar tensor (the caller owns it). */
export function globalNorm(grads: Iterable<tf.Tensor>): tf.Scalar {
  return tf.tidy(() => {
    const squares: tf.Scalar[] = [];
    for (const g of grads) squares.push(tf.sum(tf.square(g)));
    if (squares.length === 0) return tf.scalar(0);
    return tf.sqrt(tf.addN(squares));
  });
}

/** The factor to multiply gradients by, or 1 when no clipping is due (or maxNorm = 0 turns it off). */
export function clipScale(norm: number, maxNorm: number): number {
  if (maxNorm <= 0) return 1;
  const c = maxNorm / (norm + CLIP_EPSILON);
  return c < 1 ? c : 1;
}

/**
 * The first name, in `order`, whose gradient holds a NaN or ±∞; null when all are
 * finite (a non-finite norm then means the sum of squares overflowed float32).
 */
export function firstNonFinite(grads: Map<string, tf.Tensor>, order: Iterable<string>): string | null {
  for (const name of order) {
    const g = grads.get(name);
    if (g === undefined) continue;
    const finite = tf.tidy(() => tf.all(tf.isFinite(g)).dataSync()[0]);
    if (finite === 0) return name;
  }
  return null;
}
