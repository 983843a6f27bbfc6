// OneHot fix for wasm (src/kernels/one-hot.ts) against the stock tfjs 'cpu' backend
// (the reference library), in every dtype; bool is the case stock wasm gets wrong
// (it writes 4-byte values into a 1-byte-per-element buffer).

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { readyBoth, runOn } from './backends.js';

beforeAll(readyBoth);

describe('OneHot fix vs tfjs cpu', () => {
  for (const dtype of ['float32', 'int32', 'bool'] as const) {
    it(`dtype ${dtype}, indices in and out of range, 2-D indices`, () => {
      const f = () => tf.oneHot(tf.tensor2d([0, 3, -1, 2, 7, 1], [2, 3], 'int32'), 5, 1, 0, dtype);
      const got = runOn('wasm', f);
      const want = runOn('cpu', f);
      expect(got.shape).toEqual([2, 3, 5]);
      expect(Array.from(got.values)).toEqual(Array.from(want.values));
    });
  }

  it('custom on/off values', () => {
    const f = () => tf.oneHot(tf.tensor1d([1, 0], 'int32'), 3, 5, -2);
    expect(Array.from(runOn('wasm', f).values)).toEqual(Array.from(runOn('cpu', f).values));
  });

  it('a bool oneHot no longer corrupts the tensors allocated after it', () => {
    const got = runOn('wasm', () => {
      const mask = tf.oneHot(tf.tensor1d([0], 'int32'), 257, 1, 0, 'bool');
      const after = tf.fill([64], 3);
      return tf.add(after, tf.sum(tf.cast(mask, 'float32')));
    });
    expect(Array.from(got.values)).toEqual(new Array(64).fill(4));
  });
});
