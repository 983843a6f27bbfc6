// GatherV2 fast path (src/kernels/gather.ts) against the stock tfjs 'cpu' backend
// (the reference library): row lookups as the embeddings do them, int32 tables,
// repeated and 2-D indices, the out-of-range error, and the cases handed back to the
// stock wasm kernel (another axis, batchDims). Row copies are exact: equality.

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { readyBoth, runOn, uniform } from './backends.js';

beforeAll(readyBoth);

function same(f: () => tf.Tensor): void {
  const want = runOn('cpu', f);
  const got = runOn('wasm', f);
  expect(got.shape).toEqual(want.shape);
  expect(Array.from(got.values)).toEqual(Array.from(want.values));
}

describe('GatherV2 fast path vs tfjs cpu', () => {
  const table = uniform(50 * 6, 3);
  it('rows of a float32 table by 1-D and 2-D indices, repeats included', () => {
    same(() => tf.gather(tf.tensor2d(table, [50, 6]), tf.tensor1d([3, 0, 49, 3, 3, 7], 'int32')));
    same(() =>
      tf.gather(
        tf.tensor2d(table, [50, 6]),
        tf.tensor2d(
          [
            [1, 2],
            [2, 1],
            [0, 0],
          ],
          undefined,
          'int32',
        ),
      ),
    );
    same(() => tf.gather(tf.tensor3d(table, [50, 2, 3]), tf.tensor1d([4, 9], 'int32')));
    same(() => tf.gather(tf.tensor1d(table.subarray(0, 50)), tf.tensor1d([5, 1, 5], 'int32')));
  });

  it('int32 tables and empty index lists', () => {
    same(() =>
      tf.gather(
        tf.tensor2d(
          [
            [1, 2],
            [3, 4],
            [5, 6],
          ],
          undefined,
          'int32',
        ),
        tf.tensor1d([2, 0], 'int32'),
      ),
    );
    same(() => tf.gather(tf.tensor2d(table, [50, 6]), tf.tensor1d([], 'int32')));
  });

  it('another axis gives the stock result', () => {
    // (batchDims > 0 also goes to the stock wasm kernel, which 4.22 gets wrong for the
    // second batch onwards — seen here against cpu — so it is not compared)
    same(() => tf.gather(tf.tensor2d(table, [50, 6]), tf.tensor1d([5, 0, 2], 'int32'), 1));
  });

  it('an index outside the table is an error naming it', () => {
    void tf.setBackend('wasm');
    const t = tf.tensor2d(table, [50, 6]);
    const ids = tf.tensor1d([1, 50], 'int32');
    expect(() => tf.gather(t, ids)).toThrow('GatherV2: the index value 50 is not in [0, 49]');
    tf.dispose([t, ids]);
  });
});
