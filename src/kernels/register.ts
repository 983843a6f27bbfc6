// defines: registerFastKernels, restoreStockKernels, registerKernelFixes — the ONE
// place that swaps tfjs kernels (docs/STYLE.md §6). Application code calls ordinary tfjs
// ops; after registerFastKernels() those ops on the 'wasm' backend run these paths.
//
// Fast paths (replace a slow stock kernel; restoreStockKernels puts the stock back):
//   BatchMatMul          strided SIMD GEMM for every transpose and batch (matmul.ts)
//   Erf                  SIMD polynomial, exact-GELU semantics kept (erf.ts)
//   Sum                  SIMD over leading axes (bias gradients); the rest stock (sum.ts)
//   GatherV2             whole-row copies for axis 0 (embedding lookups) (gather.ts)
//   Identity, Cast, Transpose   share the data when nothing moves (identity.ts)
// The fused ops' kernels (no stock kernel exists; without them each op composes
// stock tfjs ops, so restoreStockKernels gives the stock step):
//   SpanwrightFusedAttention, …Grad   attention() (attention.ts)
//   SpanwrightBiasGelu, …Grad         biasGelu(), exact GELU (gelu.ts)
//   SpanwrightLayerNorm, …Grad        layerNorm() (layer-norm.ts)
//   SpanwrightDropout                 dropout(), its own backward (dropout.ts)
//   SpanwrightAdamW                   adamwUpdate(), one AdamW step (adamw-update.ts)
// Fixes (stock wasm lacks or breaks these; they stay registered, so the benchmark's
// stock row differs from stock tfjs only where stock tfjs cannot train at all):
//   UnsortedSegmentSum   missing on stock wasm; gather's gradient needs it (segment-sum.ts)
//   OneHot               stock wasm overruns its buffer for bool/1-byte dtypes (one-hot.ts)
//
// All functions are idempotent. The displaced stock configs are kept for restoring.

import * as tf from '@tensorflow/tfjs';
import { adamwConfig } from './adamw-update.js';
import { fusedAttentionConfig, fusedAttentionGradConfig } from './attention.js';
import { dropoutConfig } from './dropout.js';
import { erfConfig } from './erf.js';
import { gatherConfig } from './gather.js';
import { biasGeluConfig, biasGeluGradConfig } from './gelu.js';
import { layerNormConfig, layerNormGradConfig } from './layer-norm.js';
import { castConfig, identityConfig, transposeConfig } from './identity.js';
import { batchMatMulConfig } from './matmul.js';
import { oneHotConfig } from './one-hot.js';
import { unsortedSegmentSumConfig } from './segment-sum.js';
import { rememberStock } from './stock.js';
import { sumConfig } from './sum.js';

const FAST_KERNELS: readonly tf.KernelConfig[] = [
  batchMatMulConfig,
  erfConfig,
  sumConfig,
  gatherConfig,
  identityConfig,
  castConfig,
  transposeConfig,
  fusedAttentionConfig,
  fusedAttentionGradConfig,
  biasGeluConfig,
  biasGeluGradConfig,
  layerNormConfig,
  layerNormGradConfig,
  dropoutConfig,
  adamwConfig,
];
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
    const stock = tf.getKernel(config.kernelName, 'wasm');
    saved.set(config.kernelName, stock);
    if (stock) rememberStock(stock); // the fast path hands uncovered cases back to it
    // the stock setupFunc binds the C++ entry points runStock needs; keep it running
    swapIn(stock?.setupFunc ? { ...config, setupFunc: stock.setupFunc } : config);
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
