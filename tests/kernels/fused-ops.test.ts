// The fused bias+GELU and LayerNorm ops (src/kernels/gelu.ts, layer-norm.ts): their
// wasm kernels (kernels.c) against the same ops' plain-tfjs paths run on tfjs's stock
// 'cpu' backend (the reference library), values and the gradients for every input,
// over widths with SIMD tails and the bench's shapes; the inference path (no tape)
// against the recorded one; no tensor left behind. And the seeded dropout op
// (src/kernels/dropout.ts), whose two paths must agree exactly (the same mask).
//
// Tolerances (common practice bounds for float32 with different summation orders):
//   biasGelu   |wasm − cpu| ≤ 2e-6 + 2e-6·|cpu| elementwise: erf differs by ≤ 1e-7
//              (tests/kernels/erf.test.ts) and exp by ~1e-7 relative; db sums R rows,
//              so it gets 1e-5 + 1e-6·R·max|dx|
//   layerNorm  ≤ 2e-5 + 1e-5·|cpu| for y, for dx the 2e-5 scaled by max|dx| when above 1;
//              dγ, dβ sum R rows: 3e-5·R·max|dy|

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { DROPOUT, dropout } from '../../src/kernels/dropout.js';
import { BIAS_GELU, biasGelu } from '../../src/kernels/gelu.js';
import { LAYER_NORM, layerNorm } from '../../src/kernels/layer-norm.js';
import { maxAbsDiff, readyBoth, runOn, uniform } from './backends.js';

beforeAll(readyBoth);

function expectClose(got: ArrayLike<number>, want: ArrayLike<number>, abs: number, rel: number, what: string): void {
  expect(got.length, what).toBe(want.length);
  for (let i = 0; i < want.length; i++) {
    const tol = abs + rel * Math.abs(want[i]);
    if (!(Math.abs(got[i] - want[i]) <= tol)) throw new Error(`${what}[${i}]: wasm ${got[i]}, cpu ${want[i]} (tolerance ${tol})`);
  }
}

function maxAbs(a: ArrayLike<number>): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i]));
  return m;
}

describe('biasGelu: wasm kernels vs the plain-tfjs op on cpu', () => {
  it('reaches the kernel on wasm only', () => {
    expect(tf.getKernel(BIAS_GELU, 'wasm')).toBeDefined();
    expect(tf.getKernel(BIAS_GELU, 'cpu')).toBeUndefined();
  });

  for (const [R, I] of [
    [3, 1],
    [5, 7],
    [17, 33],
    [64, 512],
  ] as const) {
    it(`[${R}, ${I}]: y, dx and db`, () => {
      const x = uniform(R * I, R + I).map((v) => 4 * v); // u across ±5: both erf branches
      const b = uniform(I, 3 * I);
      const dy = uniform(R * I, 7 + R);
      const fwd = () => biasGelu(tf.tensor2d(x, [R, I]), tf.tensor1d(b));
      expectClose(runOn('wasm', fwd).values, runOn('cpu', fwd).values, 2e-6, 2e-6, 'y');
      for (const which of [0, 1]) {
        const g = () =>
          tf.grads((xs: tf.Tensor, bs: tf.Tensor) =>
            tf.sum(tf.mul(biasGelu(xs as tf.Tensor2D, bs as tf.Tensor1D), tf.tensor2d(dy, [R, I]))),
          )([tf.tensor2d(x, [R, I]), tf.tensor1d(b)])[which];
        const want = runOn('cpu', g).values;
        const got = runOn('wasm', g).values;
        if (which === 0) expectClose(got, want, 2e-6, 2e-6, 'dx');
        else expectClose(got, want, 1e-5 + 1e-6 * R * 1.2, 0, 'db');
      }
    });
  }

  it('names a bias that does not fit', () => {
    const x = tf.zeros([2, 3]) as tf.Tensor2D;
    const b = tf.zeros([4]) as tf.Tensor1D;
    expect(() => biasGelu(x, b)).toThrow('biasGelu: bias [4] does not fit x [2,3] (expected [3])');
    tf.dispose([x, b]);
  });
});

describe('layerNorm: wasm kernels vs the plain-tfjs op on cpu', () => {
  it('reaches the kernel on wasm only', () => {
    expect(tf.getKernel(LAYER_NORM, 'wasm')).toBeDefined();
    expect(tf.getKernel(LAYER_NORM, 'cpu')).toBeUndefined();
  });

  for (const [R, H, eps] of [
    [4, 1, 1e-5],
    [6, 5, 1e-12],
    [33, 36, 1e-12],
    [128, 128, 1e-12],
  ] as const) {
    it(`[${R}, ${H}], eps ${eps}: y, dx, dγ and dβ`, () => {
      const x = uniform(R * H, R * H).map((v, i) => 3 * v + (i % 7) * 0.5); // offset rows: centring matters
      const gamma = uniform(H, 5).map((v) => 1 + 0.5 * v);
      const beta = uniform(H, 6);
      const dy = uniform(R * H, 8);
      const args = () => [tf.tensor2d(x, [R, H]), tf.tensor1d(gamma), tf.tensor1d(beta)] as const;
      const fwd = () => {
        const [a, g, b] = args();
        return layerNorm(a, g, b, eps);
      };
      expectClose(runOn('wasm', fwd).values, runOn('cpu', fwd).values, 2e-5, 1e-5, 'y');
      const dyMax = maxAbs(dy);
      for (const which of [0, 1, 2]) {
        const g = () =>
          tf.grads((a: tf.Tensor, gg: tf.Tensor, bb: tf.Tensor) =>
            tf.sum(tf.mul(layerNorm(a as tf.Tensor2D, gg as tf.Tensor1D, bb as tf.Tensor1D, eps), tf.tensor2d(dy, [R, H]))),
          )([...args()])[which];
        const want = runOn('cpu', g).values;
        const got = runOn('wasm', g).values;
        if (which === 0) expectClose(got, want, 2e-5 * (H === 1 ? 1 : Math.max(1, maxAbs(want))), 1e-5, 'dx');
        else expectClose(got, want, 1e-5 * R * dyMax * 3, 0, which === 1 ? 'dγ' : 'dβ');
      }
    });
  }

  it('inference (no tape) equals the recorded path, and nothing leaks', () => {
    void tf.setBackend('wasm');
    const x = tf.tensor2d(uniform(40 * 24, 2), [40, 24]);
    const w = tf.tidy(() => tf.variable(tf.ones([24]), true, 'fused-ops-test-gamma')) as unknown as tf.Tensor1D;
    const beta = tf.zeros([24]) as tf.Tensor1D;
    const b = tf.tensor1d(uniform(24, 3));
    const before = tf.memory().numTensors;
    const plain = tf.tidy(() =>
      biasGelu(layerNorm(x, w, beta, 1e-12), b)
        .dataSync()
        .slice(),
    );
    let recorded: ArrayLike<number> = [];
    const { value, grads } = tf.variableGrads(() => {
      const y = biasGelu(layerNorm(x, w, beta, 1e-12), b);
      recorded = y.dataSync().slice();
      return tf.sum(y) as tf.Scalar;
    });
    expect(Array.from(recorded)).toEqual(Array.from(plain));
    tf.dispose([value, ...Object.values(grads)]);
    expect(tf.memory().numTensors).toBe(before);
    tf.dispose([x, w, beta, b]);
  });
});

describe('dropout: the wasm kernel vs the plain-tfjs op on cpu', () => {
  it('reaches the kernel on wasm only', () => {
    expect(tf.getKernel(DROPOUT, 'wasm')).toBeDefined();
    expect(tf.getKernel(DROPOUT, 'cpu')).toBeUndefined();
  });

  for (const [shape, rate] of [
    [[7], 0.5],
    [[33, 5], 0.1],
    [[4, 3, 129], 0.3],
  ] as const) {
    it(`shape [${shape}], rate ${rate}: the same values and gradient (the same mask), exactly`, () => {
      const n = shape.reduce((p: number, d: number) => p * d, 1);
      const x = uniform(n, n).map((v) => v + 2); // never 0: a dropped value shows as 0
      const dy = uniform(n, n + 1);
      const fwd = () => dropout(tf.tensor(x, [...shape]), rate, 99);
      const want = runOn('cpu', fwd).values;
      const got = runOn('wasm', fwd).values;
      expect(maxAbsDiff(got, want).max).toBe(0);
      const dropped = Array.from(got).filter((v) => v === 0).length;
      expect(dropped).toBeGreaterThan(0);
      const g = () => tf.grad((t: tf.Tensor) => tf.sum(tf.mul(dropout(t, rate, 99), tf.tensor(dy, [...shape]))))(tf.tensor(x, [...shape]));
      expect(maxAbsDiff(runOn('wasm', g).values, runOn('cpu', g).values).max).toBe(0);
      // the gradient is zero exactly where the value was dropped
      const gw = runOn('wasm', g).values;
      for (let i = 0; i < n; i++) expect(gw[i] === 0).toBe(got[i] === 0);
    });
  }

  it('rate 0 is the identity; another seed gives another mask', () => {
    void tf.setBackend('wasm');
    const x = tf.ones([1000]);
    expect(dropout(x, 0, 5)).toBe(x);
    const a = dropout(x, 0.5, 5).dataSync();
    const b = dropout(x, 0.5, 6).dataSync();
    expect(maxAbsDiff(a, b).max).toBeGreaterThan(1);
    expect(() => dropout(x, 1, 5)).toThrow('dropout rate must be in [0, 1)');
    x.dispose();
  });
});
