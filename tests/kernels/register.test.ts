// registerFastKernels / restoreStockKernels (src/kernels/register.ts): idempotent,
// restoring puts back exactly the stock tfjs-backend-wasm 4.22 configs of the fast
// paths, and the kernel fixes (UnsortedSegmentSum, OneHot) stay registered.

import * as tf from '@tensorflow/tfjs';
import '@tensorflow/tfjs-backend-wasm';
import { beforeAll, describe, expect, it } from 'vitest';
import { fastKernelsActive, registerFastKernels, restoreStockKernels } from '../../src/kernels/register.js';
import { batchMatMulConfig } from '../../src/kernels/matmul.js';
import { erfConfig } from '../../src/kernels/erf.js';
import { oneHotConfig } from '../../src/kernels/one-hot.js';
import { sumConfig } from '../../src/kernels/sum.js';
import { FUSED_ATTENTION, FUSED_ATTENTION_GRAD } from '../../src/kernels/attention.js';
import { BIAS_GELU, BIAS_GELU_GRAD } from '../../src/kernels/gelu.js';
import { LAYER_NORM, LAYER_NORM_GRAD } from '../../src/kernels/layer-norm.js';
import { DROPOUT } from '../../src/kernels/dropout.js';
import { ADAMW_UPDATE } from '../../src/kernels/adamw-update.js';

const FUSED = [FUSED_ATTENTION, FUSED_ATTENTION_GRAD, BIAS_GELU, BIAS_GELU_GRAD, LAYER_NORM, LAYER_NORM_GRAD, DROPOUT, ADAMW_UPDATE];

beforeAll(async () => {
  await tf.setBackend('wasm');
  await tf.ready();
});

describe('fast kernel registration', () => {
  it('swaps in and restores, idempotently', () => {
    const stockMatMul = tf.getKernel(tf.BatchMatMul, 'wasm');
    const stockErf = tf.getKernel(tf.Erf, 'wasm');
    expect(stockMatMul).toBeDefined();
    expect(tf.getKernel(tf.UnsortedSegmentSum, 'wasm')).toBeUndefined(); // stock wasm has none

    registerFastKernels();
    registerFastKernels();
    expect(fastKernelsActive()).toBe(true);
    expect(tf.getKernel(tf.BatchMatMul, 'wasm')?.kernelFunc).toBe(batchMatMulConfig.kernelFunc);
    expect(tf.getKernel(tf.Erf, 'wasm')?.kernelFunc).toBe(erfConfig.kernelFunc);
    expect(tf.getKernel(tf.UnsortedSegmentSum, 'wasm')).toBeDefined();
    // the other backends are untouched
    expect(tf.getKernel(tf.BatchMatMul, 'cpu')?.kernelFunc).not.toBe(batchMatMulConfig.kernelFunc);

    restoreStockKernels();
    restoreStockKernels();
    expect(fastKernelsActive()).toBe(false);
    expect(tf.getKernel(tf.BatchMatMul, 'wasm')).toBe(stockMatMul);
    expect(tf.getKernel(tf.Erf, 'wasm')).toBe(stockErf);
    expect(tf.getKernel(tf.UnsortedSegmentSum, 'wasm')).toBeDefined();
    expect(tf.getKernel(tf.OneHot, 'wasm')?.kernelFunc).toBe(oneHotConfig.kernelFunc);

    // and the stock kernel still computes after the round trip
    expect(Array.from(tf.matMul(tf.tensor2d([[1, 2]]), tf.tensor2d([[3], [4]])).dataSync())).toEqual([11]);
  });

  it("the fused ops' kernels come and go with the fast paths; stock Sum, GatherV2, Identity, Cast, Transpose come back", () => {
    const stock = [tf.Sum, tf.GatherV2, tf.Identity, tf.Cast, tf.Transpose].map((name) => tf.getKernel(name, 'wasm'));
    for (const name of FUSED) expect(tf.getKernel(name, 'wasm'), name).toBeUndefined();
    registerFastKernels();
    for (const name of FUSED) expect(tf.getKernel(name, 'wasm'), name).toBeDefined();
    expect(tf.getKernel(tf.Sum, 'wasm')?.kernelFunc).toBe(sumConfig.kernelFunc);
    // the stock setupFunc still travels with the fast config (it binds the C++ entry points the stock fallback calls)
    expect(tf.getKernel(tf.Sum, 'wasm')?.setupFunc).toBe(stock[0]?.setupFunc);
    restoreStockKernels();
    for (const name of FUSED) expect(tf.getKernel(name, 'wasm'), name).toBeUndefined();
    [tf.Sum, tf.GatherV2, tf.Identity, tf.Cast, tf.Transpose].forEach((name, i) => expect(tf.getKernel(name, 'wasm')).toBe(stock[i]));
  });

  it('fast results keep flowing after many calls (no heap views go stale)', () => {
    registerFastKernels();
    // allocate enough to make the heap grow between calls
    for (let i = 0; i < 3; i++) {
      const big = tf.zeros([1024, 1024 * (i + 1)]);
      const y = tf.matMul(tf.ones([2, 3]), tf.ones([3, 2]));
      expect(Array.from(y.dataSync())).toEqual([3, 3, 3, 3]);
      tf.dispose([big, y]);
    }
    restoreStockKernels();
  });
});
