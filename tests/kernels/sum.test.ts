// Sum fast path (src/kernels/sum.ts, kernels.c sum_cols) against the stock
// tfjs 'cpu' backend (the reference library): reductions over leading axes of
// widths around the 32- and 4-column blocks, keepDims, and the cases handed back to
// the stock wasm kernel (trailing or scattered axes, full reductions, int32, bool).
//
// Tolerance: |fast − cpu| ≤ 1e-6·m + 1e-6 for m summed values in [−1, 1): both add in
// row order, so they normally agree exactly; the bound is the common-practice m·2⁻²⁰.

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { maxAbsDiff, readyBoth, runOn, uniform } from './backends.js';

beforeAll(readyBoth);

function check(shape: number[], axis: number | number[] | null, keepDims = false): void {
  const values = uniform(
    shape.reduce((p, d) => p * d, 1),
    17 + shape.length,
  );
  const f = () => tf.sum(tf.tensor(values, shape), axis ?? undefined, keepDims);
  const want = runOn('cpu', f);
  const got = runOn('wasm', f);
  expect(got.shape, `shape of sum over ${axis} of [${shape}]`).toEqual(want.shape);
  const axes = axis === null ? shape.map((_, i) => i) : [axis].flat().map((a) => (a < 0 ? a + shape.length : a));
  const m = axes.reduce((p, a) => p * shape[a], 1);
  const d = maxAbsDiff(got.values, want.values);
  expect(d.max, `sum over ${axis} of [${shape}]: at ${d.at} wasm ${d.got}, cpu ${d.want}`).toBeLessThanOrEqual(1e-6 * m + 1e-6);
}

describe('Sum over leading axes vs tfjs cpu', () => {
  it('axis 0 of matrices around the 32- and 4-column blocks (bias-gradient shapes)', () => {
    for (const n of [1, 3, 4, 5, 31, 32, 33, 36, 64, 128, 130]) check([57, n], 0);
    check([4096, 128], [0]);
    check([1, 7], 0);
  });

  it('several leading axes, negative axes, keepDims', () => {
    check([3, 5, 7], [0, 1]);
    check([3, 5, 7], [1, 0]);
    check([4, 6, 9], [-3], true);
    check([2, 3, 4, 5], [0, 1, 2], true);
  });

  it('other cases give the stock results: trailing, scattered and all axes, int32 and bool', () => {
    check([6, 9], 1);
    check([6, 9], -1, true);
    check([3, 4, 5], [0, 2]);
    check([5, 8], null);
    check([5, 8], [0, 1]);
    const ints = () =>
      tf.sum(
        tf.tensor2d(
          [
            [1, 2, 3],
            [4, 5, 6],
          ],
          undefined,
          'int32',
        ),
        0,
      );
    expect(Array.from(runOn('wasm', ints).values)).toEqual([5, 7, 9]);
    const bools = () =>
      tf.sum(
        tf.tensor2d(
          [
            [true, false],
            [true, true],
          ],
          undefined,
          'bool',
        ),
        0,
      );
    expect(Array.from(runOn('wasm', bools).values)).toEqual(Array.from(runOn('cpu', bools).values));
  });

  it('an empty leading axis sums to zeros; an empty kept axis gives an empty tensor', () => {
    const zeroRows = runOn('wasm', () => tf.sum(tf.zeros([0, 5]), 0));
    expect(zeroRows.shape).toEqual([5]);
    expect(Array.from(zeroRows.values)).toEqual([0, 0, 0, 0, 0]);
    expect(runOn('wasm', () => tf.sum(tf.zeros([4, 0]), 0)).shape).toEqual([0]);
  });

  it('bias gradients (the reason for the kernel) match the cpu backend', () => {
    const x = uniform(300 * 40, 5);
    const b = uniform(40, 6);
    const f = () => tf.grad((bias: tf.Tensor) => tf.sum(tf.square(tf.add(tf.tensor2d(x, [300, 40]), bias))))(tf.tensor1d(b));
    expect(maxAbsDiff(runOn('wasm', f).values, runOn('cpu', f).values).max).toBeLessThan(1e-3);
  });
});
