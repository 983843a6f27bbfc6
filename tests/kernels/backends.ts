// Test helper: runs the same computation on the stock tfjs 'cpu' backend (the
// reference library) and on 'wasm' with the fast kernels registered.

import * as tf from '@tensorflow/tfjs';
import '@tensorflow/tfjs-backend-wasm';
import { fastKernelsActive, registerFastKernels } from '../../src/kernels/register.js';

export async function readyBoth(): Promise<void> {
  await tf.setBackend('cpu');
  await tf.ready();
  await tf.setBackend('wasm');
  await tf.ready();
  registerFastKernels();
  // the fast paths under test must be the ones the ops reach
  for (const name of [tf.BatchMatMul, tf.Erf, tf.UnsortedSegmentSum]) {
    if (tf.getKernel(name, 'wasm')?.kernelFunc.name === undefined) throw new Error(`no wasm kernel ${name}`);
  }
  if (!fastKernelsActive()) throw new Error('fast kernels not registered');
}

/** Runs `f` on `backend` and returns its result's values and shape. */
export function runOn(backend: 'cpu' | 'wasm', f: () => tf.Tensor): { values: Float32Array | Int32Array; shape: number[] } {
  const previous = tf.getBackend();
  void tf.setBackend(backend);
  try {
    return tf.tidy(() => {
      const t = f();
      return { values: t.dataSync() as Float32Array | Int32Array, shape: t.shape };
    });
  } finally {
    void tf.setBackend(previous);
  }
}

/** Seeded uniform values in [−1, 1) (a 32-bit LCG; deterministic across runs). */
export function uniform(n: number, seed: number): Float32Array {
  const out = new Float32Array(n);
  let s = seed >>> 0;
  for (let i = 0; i < n; i++) {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    out[i] = s / 2 ** 31 - 1;
  }
  return out;
}

/** Largest |a − b| and where it is, for a readable failure message. */
export function maxAbsDiff(a: ArrayLike<number>, b: ArrayLike<number>): { max: number; at: number; got: number; want: number } {
  if (a.length !== b.length) throw new Error(`length ${a.length} vs ${b.length}`);
  let max = 0;
  let at = -1;
  for (let i = 0; i < a.length; i++) {
    const d = Math.abs(a[i] - b[i]);
    if (d > max || Number.isNaN(d)) {
      max = Number.isNaN(d) ? Infinity : d;
      at = i;
    }
  }
  return { max, at, got: at < 0 ? 0 : a[at], want: at < 0 ? 0 : b[at] };
}
