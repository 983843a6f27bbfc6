// UnsortedSegmentSum for wasm (src/kernels/segment-sum.ts) against the stock tfjs
// 'cpu' backend (the reference library), and gather's gradient, which needs it.

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { maxAbsDiff, readyBoth, runOn, uniform } from './backends.js';

beforeAll(readyBoth);

describe('UnsortedSegmentSum fast path vs tfjs cpu', () => {
  it('sums duplicate ids, leaves unused segments zero (1-D ids, 2-D x)', () => {
    const ids = [3, 0, 3, 3, 1, 0, 6];
    const x = uniform(7 * 5, 4);
    const f = () => tf.unsortedSegmentSum(tf.tensor(x, [7, 5]), tf.tensor1d(ids, 'int32'), 8);
    const got = runOn('wasm', f);
    const want = runOn('cpu', f);
    expect(got.shape).toEqual([8, 5]);
    expect(got.shape).toEqual(want.shape);
    expect(maxAbsDiff(got.values, want.values).max).toBeLessThan(1e-6);
    // segment 3 got three rows: one entry by hand from the input
    expect(got.values[3 * 5 + 2]).toBeCloseTo(x[0 * 5 + 2] + x[2 * 5 + 2] + x[3 * 5 + 2], 6);
    expect(Array.from(got.values.slice(2 * 5, 3 * 5))).toEqual([0, 0, 0, 0, 0]);
  });

  it('drops ids outside [0, numSegments) as the cpu backend does', () => {
    const f = () => tf.unsortedSegmentSum(tf.tensor([1, 2, 3, 4]), tf.tensor1d([0, -1, 5, 1], 'int32'), 2);
    expect(Array.from(runOn('wasm', f).values)).toEqual(Array.from(runOn('cpu', f).values));
  });

  it('2-D ids over 3-D x (TensorFlow semantics), and int32 x', () => {
    // tfjs cpu 4.22 takes only 1-D ids, so its reference gets the flattened operands
    const ids = [0, 2, 2, 1, 0, 2];
    const x = uniform(2 * 3 * 4, 8);
    const got = runOn('wasm', () =>
      tf.unsortedSegmentSum(tf.tensor(x, [2, 3, 4]), tf.tensor2d(ids, [2, 3], 'int32') as unknown as tf.Tensor1D, 3),
    ); // the op's type says 1-D; the kernel takes any prefix rank
    const want = runOn('cpu', () => tf.unsortedSegmentSum(tf.tensor(x, [6, 4]), tf.tensor1d(ids, 'int32'), 3));
    expect(got.shape).toEqual([3, 4]);
    expect(maxAbsDiff(got.values, want.values).max).toBeLessThan(1e-6);
    const g = () => tf.unsortedSegmentSum(tf.tensor([5, 6, 7], [3], 'int32'), tf.tensor1d([1, 1, 0], 'int32'), 2);
    const gi = runOn('wasm', g);
    expect(gi.values).toBeInstanceOf(Int32Array);
    expect(Array.from(gi.values)).toEqual([7, 11]);
  });

  it('makes the gradient of gather (an embedding lookup) work on wasm and match cpu', () => {
    const table = uniform(11 * 6, 2);
    const ids = [4, 4, 0, 10, 4, 7, 0, 1];
    const dy = uniform(2 * 4 * 6, 3);
    const f = () =>
      tf.grad((t: tf.Tensor) =>
        tf
          .gather(t, tf.tensor2d(ids, [2, 4], 'int32'))
          .mul(tf.tensor(dy, [2, 4, 6]))
          .sum(),
      )(tf.tensor(table, [11, 6]));
    const got = runOn('wasm', f);
    expect(got.shape).toEqual([11, 6]);
    expect(maxAbsDiff(got.values, runOn('cpu', f).values).max).toBeLessThan(1e-6);
  });
});
