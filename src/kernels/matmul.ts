// defines: batchMatMulConfig — BatchMatMul for 'wasm' on our SIMD GEMM
//
// Stock tfjs-backend-wasm 4.22 uses XNNPACK only for untransposed rank-2 products
// and a scalar loop for everything else (transposeA/B, rank > 2): 1-3 GFLOP/s
// measured here against ~20 for XNNPACK. Every matMul gradient is transposed and
// attention is batched, so training lived in the scalar loop. This kernel handles
// every case in one strided GEMM (kernels.c, gemm_f32); a transpose is only a
// swap of strides, done while packing.
//
// The gradient is tfjs-core's own BatchMatMul gradient (matMul with transposes),
// which lands back here.
//
// Letters: M, N output rows and columns, K the shared dimension, batch the
// broadcast leading dimensions.

import * as tf from '@tensorflow/tfjs';
import { fastModuleFor, heapOffset, type WasmBackendLike } from './wasm-module.js';

interface BatchMatMulArgs {
  inputs: { a: tf.TensorInfo; b: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: { transposeA: boolean; transposeB: boolean };
}

/** Flat batch index of one operand for every flat index of the broadcast batch. */
function broadcastBatchIndex(operand: number[], out: number[]): Int32Array {
  const total = out.reduce((p, d) => p * d, 1);
  const index = new Int32Array(total);
  const lead = out.length - operand.length; // operand dims are right-aligned
  for (let flat = 0; flat < total; flat++) {
    let rest = flat;
    let src = 0;
    let srcStride = 1;
    for (let d = out.length - 1; d >= 0; d--) {
      const coord = rest % out[d];
      rest = (rest - coord) / out[d];
      const od = d - lead;
      if (od >= 0) {
        if (operand[od] !== 1) src += coord * srcStride;
        srcStride *= operand[od];
      }
    }
    index[flat] = src;
  }
  return index;
}

function batchMatMul({ inputs, backend, attrs }: BatchMatMulArgs): tf.TensorInfo {
  const { a, b } = inputs;
  const { transposeA, transposeB } = attrs;
  if (a.dtype !== 'float32' || b.dtype !== 'float32') {
    throw new Error(`BatchMatMul (src/kernels/matmul.ts): float32 only, got ${a.dtype} × ${b.dtype}`);
  }
  const ra = a.shape.length;
  const rb = b.shape.length;
  const M = transposeA ? a.shape[ra - 1] : a.shape[ra - 2];
  const Ka = transposeA ? a.shape[ra - 2] : a.shape[ra - 1];
  const Kb = transposeB ? b.shape[rb - 1] : b.shape[rb - 2];
  const N = transposeB ? b.shape[rb - 2] : b.shape[rb - 1];
  if (Ka !== Kb) {
    throw new Error(
      `Error in matMul: inner shapes (${Ka}) and (${Kb}) of Tensors with shapes ` +
        `${a.shape} and ${b.shape} and transposeA=${transposeA} and transposeB=${transposeB} must match.`,
    );
  }
  const K = Ka;
  const batchA = a.shape.slice(0, -2);
  const batchB = b.shape.slice(0, -2);
  const batchOut = tf.broadcast_util.assertAndGetBroadcastShape(batchA, batchB);
  const out = backend.makeOutput([...batchOut, M, N], 'float32');
  const batches = batchOut.reduce((p, d) => p * d, 1);
  if (batches * M * N === 0) return out;

  // module and workspace first: they may malloc, which may grow the heap
  const { exports, gemmWorkspace } = fastModuleFor(backend);
  const aPtr = heapOffset(backend, a);
  const bPtr = heapOffset(backend, b);
  const cPtr = heapOffset(backend, out);
  // A(i,k) = a[i*rsA + k*csA] over the stored [M,K] or, transposed, [K,M]
  const rsA = transposeA ? 1 : K;
  const csA = transposeA ? M : 1;
  const rsB = transposeB ? 1 : N;
  const csB = transposeB ? K : 1;
  const aBatchBytes = M * K * 4;
  const bBatchBytes = K * N * 4;
  const cBatchBytes = M * N * 4;
  const sameBatch = batchA.length === batchB.length && batchA.every((d, i) => d === batchB[i]);
  const ia = sameBatch ? null : broadcastBatchIndex(batchA, batchOut);
  const ib = sameBatch ? null : broadcastBatchIndex(batchB, batchOut);
  for (let t = 0; t < batches; t++) {
    const ta = ia ? ia[t] : t;
    const tb = ib ? ib[t] : t;
    exports.gemm_f32(
      M,
      N,
      K,
      aPtr + ta * aBatchBytes,
      rsA,
      csA,
      bPtr + tb * bBatchBytes,
      rsB,
      csB,
      cPtr + t * cBatchBytes,
      N,
      gemmWorkspace,
    );
  }
  return out;
}

export const batchMatMulConfig: tf.KernelConfig = {
  kernelName: tf.BatchMatMul,
  backendName: 'wasm',
  kernelFunc: batchMatMul as unknown as tf.KernelFunc,
};
