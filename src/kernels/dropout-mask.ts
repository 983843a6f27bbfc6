// defines: dropoutMask, keepMultipliers — the counter-based dropout mask of the fused
// attention op, in TypeScript; kernels.c (drop4) computes the same bits in SIMD.
//
// Why not tf.dropout: its mask comes from a stateful generator filled in JavaScript,
// so a fused kernel could neither recompute it in the backward nor draw it itself.
// Here the mask is a pure function of (seed, element index):
//   keep(e) ⇔ lowbias32(e·0x9E3779B9 + mix) ≥ threshold   (unsigned 32-bit)
//   mix = lowbias32(seed), threshold = round(rate·2³²)
// so P(keep) = 1 − rate to within 2⁻³², the backward rebuilds the forward's mask from
// the seed, and the same seed gives the same mask on every run and every backend.
// Kept elements are scaled by 1/(1 − rate) (inverted dropout, as tf.dropout and
// torch.nn.Dropout). lowbias32 is Chris Wellons' integer hash (hash-prospector);
// its constants here are from memory — what matters is that both twins agree, which
// tests/kernels/attention.test.ts checks.

/** The integer hash both twins use. */
export function lowbias32(x: number): number {
  x ^= x >>> 16;
  x = Math.imul(x, 0x7feb352d);
  x ^= x >>> 15;
  x = Math.imul(x, 0x846ca68b);
  x ^= x >>> 16;
  return x >>> 0;
}

/** Everything a kernel needs to draw one site's mask. */
export interface DropoutMask {
  /** lowbias32(seed), as an unsigned 32-bit integer */
  mix: number;
  /** keep iff hash ≥ threshold; unsigned 32-bit */
  threshold: number;
  /** multiplier of kept elements: float32(1 / float32(1 − rate)) */
  scale: number;
}

/** The mask parameters of dropout `rate` ∈ [0, 1) seeded by `seed` (uint32). */
export function dropoutMask(seed: number, rate: number): DropoutMask {
  if (!(rate >= 0 && rate < 1)) throw new RangeError(`dropout rate must be in [0, 1), got ${rate}`);
  return {
    mix: lowbias32(seed >>> 0),
    threshold: Math.min(0xffffffff, Math.round(rate * 2 ** 32)),
    scale: Math.fround(1 / Math.fround(1 - rate)),
  };
}

/** scale or 0 for the `count` elements starting at index `first`. */
export function keepMultipliers(mask: DropoutMask, count: number, first = 0): Float32Array {
  const out = new Float32Array(count);
  for (let i = 0; i < count; i++) {
    const e = first + i;
    const h = lowbias32((Math.imul(e, 0x9e3779b9) + mask.mix) | 0);
    out[i] = h >= mask.threshold ? mask.scale : 0;
  }
  return out;
}
