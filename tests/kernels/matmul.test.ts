// BatchMatMul fast path (src/kernels/matmul.ts) against the stock tfjs 'cpu'
// backend (the reference library): every transpose combination, sizes that are 1,
// odd, below and across the 6×8 tile, across the KC = 256 slice (accumulation),
// the MC = 72 row block and the NC = 2048 column block, batches and broadcasting.
//
// Tolerance: |fast − cpu| ≤ 1e-6·K + 1e-6 with inputs in [−1, 1). Both sides
// accumulate K float32 products in different orders; each product is < 1, so the
// rounding error is bounded by about K·2⁻²⁴ per side (common practice bound).

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { maxAbsDiff, readyBoth, runOn, uniform } from './backends.js';

beforeAll(readyBoth);

function operandShape(batch: number[], rows: number, cols: number, transposed: boolean): number[] {
  return transposed ? [...batch, cols, rows] : [...batch, rows, cols];
}

function check(batchA: number[], batchB: number[], M: number, K: number, N: number, ta: boolean, tb: boolean): void {
  const sa = operandShape(batchA, M, K, ta);
  const sb = operandShape(batchB, K, N, tb);
  const va = uniform(
    sa.reduce((p, d) => p * d, 1),
    7 + M,
  );
  const vb = uniform(
    sb.reduce((p, d) => p * d, 1),
    11 + N,
  );
  const f = () => tf.matMul(tf.tensor(va, sa), tf.tensor(vb, sb), ta, tb);
  const want = runOn('cpu', f);
  const got = runOn('wasm', f);
  expect(got.shape).toEqual(want.shape);
  const d = maxAbsDiff(got.values, want.values);
  const tol = 1e-6 * K + 1e-6;
  if (d.max > tol) {
    throw new Error(`A ${sa} × B ${sb} (tA=${ta}, tB=${tb}): |diff| ${d.max} > ${tol} at ${d.at}: got ${d.got}, cpu ${d.want}`);
  }
}

const SIZES: [number, number, number][] = [
  [1, 1, 1],
  [1, 7, 1],
  [5, 3, 7],
  [6, 8, 8],
  [7, 9, 9],
  [13, 1, 17],
  [33, 31, 16],
  [75, 40, 24],
  [12, 257, 10],
  [64, 300, 33],
];

describe('BatchMatMul fast path vs tfjs cpu', () => {
  for (const ta of [false, true]) {
    for (const tb of [false, true]) {
      it(`rank 2, transposeA=${ta} transposeB=${tb}, ${SIZES.length} shapes`, () => {
        for (const [M, K, N] of SIZES) check([], [], M, K, N, ta, tb);
      });
      it(`batched rank 3 and 4, transposeA=${ta} transposeB=${tb}`, () => {
        check([3], [3], 9, 17, 11, ta, tb);
        check([2, 2], [2, 2], 6, 5, 16, ta, tb);
        check([4], [4], 40, 32, 40, ta, tb); // attention-like: small K
      });
      it(`broadcast batch, transposeA=${ta} transposeB=${tb}`, () => {
        check([1], [4], 7, 6, 13, ta, tb);
        check([3], [], 8, 10, 3, ta, tb);
        check([2, 3], [3], 5, 7, 9, ta, tb);
      });
    }
  }

  it('two-sided broadcast [2,1] × [3] matches cpu on explicitly tiled operands', () => {
    // tfjs cpu 4.22 mis-sizes a product whose batches BOTH broadcast, so the
    // reference tiles the operands to [2,3] first and multiplies equal batches.
    const va = uniform(2 * 5 * 7, 1);
    const vb = uniform(3 * 7 * 9, 2);
    const got = runOn('wasm', () => tf.matMul(tf.tensor(va, [2, 1, 5, 7]), tf.tensor(vb, [3, 7, 9])));
    const want = runOn('cpu', () =>
      tf.matMul(tf.tile(tf.tensor(va, [2, 1, 5, 7]), [1, 3, 1, 1]), tf.tile(tf.tensor(vb, [1, 3, 7, 9]), [2, 1, 1, 1])),
    );
    expect(got.shape).toEqual([2, 3, 5, 9]);
    expect(maxAbsDiff(got.values, want.values).max).toBeLessThan(1e-5);
  });

  it('wide output across the NC = 2048 column block', () => {
    check([], [], 3, 5, 2051, false, true);
    check([], [], 3, 5, 2051, true, false);
  });

  it('K = 0 gives zeros, empty outputs give empty tensors', () => {
    const z = runOn('wasm', () => tf.matMul(tf.zeros([3, 0]), tf.zeros([0, 4])));
    expect(z.shape).toEqual([3, 4]);
    expect(Array.from(z.values)).toEqual(new Array(12).fill(0));
    const e = runOn('wasm', () => tf.matMul(tf.zeros([0, 5]), tf.zeros([5, 4])));
    expect(e.shape).toEqual([0, 4]);
  });

  it('gradients (the transposed forms) match cpu', () => {
    const sa = [2, 9, 14];
    const sb = [2, 14, 6];
    const va = uniform(2 * 9 * 14, 3);
    const vb = uniform(2 * 14 * 6, 5);
    const dy = uniform(2 * 9 * 6, 9);
    for (const which of [0, 1]) {
      const f = () => {
        const g = tf.grads((a: tf.Tensor, b: tf.Tensor) =>
          tf
            .matMul(a, b)
            .mul(tf.tensor(dy, [2, 9, 6]))
            .sum(),
        );
        return g([tf.tensor(va, sa), tf.tensor(vb, sb)])[which];
      };
      const d = maxAbsDiff(runOn('wasm', f).values, runOn('cpu', f).values);
      expect(d.max).toBeLessThan(1e-5);
    }
  });

  it('rejects mismatched inner sizes with the shapes in the message', () => {
    expect(() => runOn('wasm', () => tf.matMul(tf.zeros([2, 3]), tf.zeros([4, 5])))).toThrow(/inner shapes/);
  });
});
