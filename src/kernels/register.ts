// defines: registerFastKernels, restoreStockKernels, registerKernelFixes — the ONE
// place that swaps tfjs kernels (STYLE.md §6). Application code calls ordinary tfjs
// ops; after registerFastKernels() those ops on the 'wasm' backend run these paths.
//
// Fast paths (replace a slow stock kernel; restoreStockKernels puts the stock back):
//   BatchMatMul          strided SIMD GEMM for every transpose and batch (matmul.ts)
//   Erf                  SIMD polynomial, exact-GELU semantics kept (erf.ts)
// Fixes (stock wasm lacks or breaks these; they stay registered, so the benchmark's
// stock row differs from stock tfjs only where stock tfjs cannot train at all):
//   UnsortedSegmentSum   missing on stock wasm; gather's gradient needs it (segment-sum.ts)
//   OneHot               stock wasm overruns its buffer for bool/1-byte dtypes (one-hot.ts)
//
// All functions are idempotent. The displaced stock configs are kept for restoring.

import * as tf from '@tensorflow/tfjs';
import { erfConfig } from './erf.js';
import { batchMatMulConfig } from './matmul.js';
import { oneHotConfig } from './one-hot.js';
import { unsortedSegmentSumConfig } from './segment-sum.js';

const FAST_KERNELS: readonly tf.KernelConfig[] = [batchMatMulConfig, erfConfig];
const KERNEL_FIXES: readonly tf.KernelConfig[] = [unsortedSegmentSumConfig, oneHotConfig];

/** Stock 'wasm' configs displaced by registerFastKernels (undefined: there was none). */
let displaced: Map<string, tf.KernelConfig | undefined> | null = null;
let fixesRegistered = false;

function swapIn(config: tf.KernelConfig): void {
  if (tf.getKernel(config.kernelName, config.backendName)) {
    tf.unregisterKernel(config.kernelName, config.backendName);
  }
  tf.registerKernel(config);
}

/** The kernels stock tfjs-backend-wasm 4.22 lacks or gets wrong for training. */
export function registerKernelFixes(): void {
  if (fixesRegistered) return;
  for (const config of KERNEL_FIXES) swapIn(config);
  fixesRegistered = true;
}

/** The fixes plus every fast path. */
export function registerFastKernels(): void {
  registerKernelFixes();
  if (displaced) return;
  const saved = new Map<string, tf.KernelConfig | undefined>();
  for (const config of FAST_KERNELS) {
    saved.set(config.kernelName, tf.getKernel(config.kernelName, 'wasm'));
    swapIn(config);
  }
  displaced = saved;
}

/** Puts the stock fast-path kernels back; the fixes stay. */
export function restoreStockKernels(): void {
  if (!displaced) return;
  for (const [name, stock] of displaced) {
    if (stock) swapIn(stock);
    else tf.unregisterKernel(name, 'wasm');
  }
  displaced = null;
}

/** True while the fast paths are registered. */
export function fastKernelsActive(): boolean {
  return displaced !== null;
}
