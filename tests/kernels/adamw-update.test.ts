// The one-kernel AdamW update (src/kernels/adamw-update.ts, kernels.c adamw_range)
// against the same op's plain-tfjs path on tfjs's stock 'cpu' backend (the reference
// library), for every combination of clipping and weight decay, early and late steps,
// and lengths with a SIMD tail. Both perform the same float32 operations in the same
// order with one rounding each, so the tolerance is 2 ulp of the result (|Δ| ≤
// 2.4e-7·|x| + 1e-30); the trainer's PyTorch comparison (tests/train/reference.test.ts,
// adamw.json) covers the update rule itself.

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { ADAMW_UPDATE, adamwUpdate, type AdamWScalars } from '../../src/kernels/adamw-update.js';
import { readyBoth, runOn, uniform } from './backends.js';

beforeAll(readyBoth);

function scalars(t: number, gradScale: number, decay: boolean): AdamWScalars {
  const lr = 1e-3;
  return {
    gradScale,
    decayFactor: decay ? 1 - lr * 0.01 : null,
    beta1: 0.9,
    beta2: 0.999,
    stepSize: lr / (1 - 0.9 ** t),
    correction2Sqrt: Math.sqrt(1 - 0.999 ** t),
    epsilon: 1e-6,
  };
}

describe('adamwUpdate: wasm kernel vs the plain-tfjs op on cpu', () => {
  it('reaches the kernel on wasm only', () => {
    expect(tf.getKernel(ADAMW_UPDATE, 'wasm')).toBeDefined();
    expect(tf.getKernel(ADAMW_UPDATE, 'cpu')).toBeUndefined();
  });

  for (const n of [1, 7, 130]) {
    for (const [t, gradScale, decay] of [
      [1, 1, true],
      [1, 0.37, false],
      [50, 0.5, true],
      [1000, 1, false],
    ] as const) {
      it(`${n} values, step ${t}, gradient scale ${gradScale}, decay ${decay}: p, m, v`, () => {
        const p = uniform(n, 1 + n);
        const g = uniform(n, 2 + n).map((x) => 0.1 * x);
        const m = uniform(n, 3 + n).map((x) => 0.01 * x);
        const v = uniform(n, 4 + n).map((x) => 1e-4 * Math.abs(x));
        const s = scalars(t, gradScale, decay);
        for (const which of [0, 1, 2]) {
          const f = () => adamwUpdate(tf.tensor1d(p), tf.tensor1d(g), tf.tensor1d(m), tf.tensor1d(v), s)[which];
          const got = runOn('wasm', f).values;
          const want = runOn('cpu', f).values;
          for (let i = 0; i < n; i++) {
            const tol = 2.4e-7 * Math.abs(want[i]) + 1e-30;
            if (!(Math.abs(got[i] - want[i]) <= tol)) throw new Error(`output ${which}[${i}]: wasm ${got[i]}, cpu ${want[i]}`);
          }
        }
      });
    }
  }

  it('names a moment whose size does not fit', () => {
    const p = tf.zeros([3]);
    const m = tf.zeros([4]);
    expect(() => adamwUpdate(p, p, m, p, scalars(1, 1, false))).toThrow('adamwUpdate: m has shape [4], the parameter [3]');
    tf.dispose([p, m]);
  });
});
