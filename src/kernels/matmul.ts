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
// which lands back here. On several threads (jobs.ts) the output is cut into tiles,
// one task each.
//
// Letters: M, N output rows and columns, K the shared dimension, batch the
// broadcast leading dimensions.

import * as tf from '@tensorflow/tfjs';
import { jobRunner, RATE } from './jobs.js';
import { JOB } from './pool-layout.js';
import { fastModuleFor, type WasmBackendLike } from './wasm-module.js';

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

  // A(i,k) = a[i*rsA + k*csA] over the stored [M,K] or, transposed, [K,M]
  const rsA = transposeA ? 1 : K;
  const csA = transposeA ? M : 1;
  const rsB = transposeB ? 1 : N;
  const csB = transposeB ? K : 1;
  const sameBatch = batchA.length === batchB.length && batchA.every((d, i) => d === batchB[i]);
  const countA = batchA.reduce((p, d) => p * d, 1);
  const countB = batchB.reduce((p, d) => p * d, 1);
  // batch strides in floats: one operand may be a single matrix for every batch
  const strides = sameBatch ? [M * K, K * N] : countA === 1 ? [0, K * N] : countB === 1 ? [M * K, 0] : null;
  fastModuleFor(backend); // first: it may malloc, which may grow the heap
  const run = jobRunner(backend, { ns: (2 * batches * M * N * K) / RATE.gemmFlops, inputs: [a, b], outputs: [out] });
  try {
    const A = run.input(a);
    const B = run.input(b);
    const C = run.output(out);
    const { tileM, tileN, tilesM, tilesN } = gemmTiles(M, N, run.threads, batches);
    const job = (batchCount: number, aAt: number, bAt: number, cAt: number, bsA: number, bsB: number): void =>
      run.run(JOB.gemm, batchCount * tilesM * tilesN, [
        ...[M, N, K, aAt, rsA, csA, bAt, rsB, csB, cAt, N],
        ...[tileM, tileN, tilesN, tilesM * tilesN, bsA, bsB, M * N],
      ]);
    if (strides) {
      job(batches, A, B, C, strides[0], strides[1]);
    } else {
      // a broadcast of both batch shapes: one job per output matrix
      const ia = broadcastBatchIndex(batchA, batchOut);
      const ib = broadcastBatchIndex(batchB, batchOut);
      for (let t = 0; t < batches; t++) job(1, A + ia[t] * M * K * 4, B + ib[t] * K * N * 4, C + t * M * N * 4, 0, 0);
    }
  } finally {
    run.finish();
  }
  return out;
}

/**
 * Output tiles, one task each: the whole product for one thread; for several, about
 * three tiles per thread along the longer side, whole multiples of the micro-kernel's
 * 6 rows or 8 columns. Cutting along rows repeats the packing of B in every task, along
 * columns that of A, so the shorter side is kept whole. (Tiles never change an
 * element's sum: kernels.c's K blocking is the same in every tile.)
 */
function gemmTiles(
  M: number,
  N: number,
  threads: number,
  batches: number,
): { tileM: number; tileN: number; tilesM: number; tilesN: number } {
  const wanted = threads <= 1 ? 1 : Math.ceil((threads * 3) / batches);
  let tileM = M;
  let tileN = N;
  if (wanted > 1 && N <= M) tileM = Math.max(6, Math.ceil(M / wanted / 6) * 6);
  else if (wanted > 1) tileN = Math.max(8, Math.ceil(N / wanted / 8) * 8);
  return { tileM, tileN, tilesM: Math.ceil(M / tileM), tilesN: Math.ceil(N / tileN) };
}

export const batchMatMulConfig: tf.KernelConfig = {
  kernelName: tf.BatchMatMul,
  backendName: 'wasm',
  kernelFunc: batchMatMul as unknown as tf.KernelFunc,
};
