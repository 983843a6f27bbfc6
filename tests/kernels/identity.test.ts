// Identity and same-dtype Cast on wasm share their input's data (src/kernels/identity.ts)
// instead of copying it. Checked here: the values are the input's, each tensor lives
// on after the other is disposed (reference counting as the cpu backend does it),
// a real conversion still converts as the cpu backend does (the reference library),
// and the engine's saved-for-backward clones no longer copy (the wasm heap does not grow
// by a copy per saved tensor).

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { readyBoth, runOn } from './backends.js';

beforeAll(readyBoth);

describe('Identity and Cast without copies on wasm', () => {
  it('a clone shares the data, and either side survives disposing the other', () => {
    void tf.setBackend('wasm');
    const x = tf.tensor2d([
      [1, 2, 3],
      [4, 5, 6],
    ]);
    const y = tf.clone(x);
    const z = tf.cast(x, 'float32');
    const backend = tf.backend() as unknown as { refCount(id: object): number };
    expect(backend.refCount(x.dataId)).toBe(3);
    x.dispose();
    expect(Array.from(y.dataSync())).toEqual([1, 2, 3, 4, 5, 6]);
    y.dispose();
    expect(Array.from(z.dataSync())).toEqual([1, 2, 3, 4, 5, 6]);
    expect(backend.refCount(z.dataId)).toBe(1);
    z.dispose();
  });

  it('casts to another dtype still convert, as on the cpu backend (bool: 1 for every non-zero, NaN included)', () => {
    for (const [values, from, to] of [
      [[1.7, -2.2, 0], 'float32', 'int32'],
      [[3, 0, -1], 'int32', 'float32'],
      [[3, 0, -1], 'int32', 'bool'],
      [[0.5, 0, -1, NaN], 'float32', 'bool'],
    ] as const) {
      const f = () => tf.cast(tf.tensor1d(values.slice(), from), to);
      const got = runOn('wasm', f);
      expect(Array.from(got.values)).toEqual(Array.from(runOn('cpu', f).values));
    }
  });

  it('string tensors keep the stock Identity', () => {
    void tf.setBackend('wasm');
    const s = tf.tensor1d(['a', 'bc'], 'string');
    const c = tf.clone(s);
    expect(c.dataSync()).toEqual(['a', 'bc']);
    tf.dispose([s, c]);
  });
});

describe('Transpose without moving data', () => {
  it('permutations that keep the axes of size > 1 in order share the data; others transpose as on cpu', () => {
    const values = Array.from({ length: 24 }, (_, i) => i);
    for (const [shape, perm] of [
      [
        [4, 6],
        [0, 1],
      ],
      [
        [1, 4, 6],
        [1, 0, 2],
      ],
      [
        [4, 1, 6],
        [0, 2, 1],
      ],
      [
        [4, 6],
        [1, 0],
      ],
      [
        [2, 3, 4],
        [2, 0, 1],
      ],
      [
        [2, 1, 12],
        [2, 1, 0],
      ],
    ] as const) {
      const f = () => tf.transpose(tf.tensor(values, [...shape]), [...perm]);
      const got = runOn('wasm', f);
      const want = runOn('cpu', f);
      expect(got.shape).toEqual(want.shape);
      expect(Array.from(got.values)).toEqual(Array.from(want.values));
    }
    void tf.setBackend('wasm');
    const x = tf.tensor(values, [1, 4, 6]);
    const y = tf.transpose(x, [1, 0, 2]);
    expect((tf.backend() as unknown as { refCount(id: object): number }).refCount(x.dataId)).toBe(2);
    tf.dispose([x, y]);
  });
});
