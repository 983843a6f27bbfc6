// defines: unsortedSegmentSumConfig — UnsortedSegmentSum for 'wasm'
//
// tfjs-backend-wasm 4.22 has no UnsortedSegmentSum, and tfjs-core's gradient of
// gather (the embedding lookups) is unsortedSegmentSum(dy, indices, numSegments),
// so training an embedding threw on wasm. Semantics as TensorFlow's op:
//   out[s, ...] = Σ over positions p with segmentIds[p] = s of x[p, ...]
// with out of shape [numSegments, ...x.shape[rank(segmentIds):]], duplicates
// summed, ids outside [0, numSegments) dropped.
//
// float32 runs in SIMD (kernels.c, segment_sum_range): the word-embedding gradient
// zeroes a [V, H] output and adds B·T rows into it, and the JavaScript loop took
// ~50 ms per step at V = 30522 here. int32 keeps a plain loop over the heap.

import * as tf from '@tensorflow/tfjs';
import { jobRunner, RATE, split } from './jobs.js';
import { JOB } from './pool-layout.js';
import { heapOffset, type WasmBackendLike } from './wasm-module.js';

interface SegmentSumArgs {
  inputs: { x: tf.TensorInfo; segmentIds: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: { numSegments: number };
}

function unsortedSegmentSum({ inputs, backend, attrs }: SegmentSumArgs): tf.TensorInfo {
  const { x, segmentIds } = inputs;
  const { numSegments } = attrs;
  if (x.dtype !== 'float32' && x.dtype !== 'int32') {
    throw new Error(`UnsortedSegmentSum (src/kernels/segment-sum.ts): x must be float32 or int32, got ${x.dtype}`);
  }
  if (segmentIds.dtype !== 'int32') {
    throw new Error(`UnsortedSegmentSum (src/kernels/segment-sum.ts): segmentIds must be int32, got ${segmentIds.dtype}`);
  }
  const idRank = segmentIds.shape.length;
  for (let d = 0; d < idRank; d++) {
    if (segmentIds.shape[d] !== x.shape[d]) {
      throw new Error(
        `UnsortedSegmentSum (src/kernels/segment-sum.ts): segmentIds shape [${segmentIds.shape}] ` +
          `must be a prefix of x shape [${x.shape}]`,
      );
    }
  }
  const inner = x.shape.slice(idRank).reduce((p, d) => p * d, 1);
  const count = segmentIds.shape.reduce((p, d) => p * d, 1);
  const out = backend.makeOutput([numSegments, ...x.shape.slice(idRank)], x.dtype);
  if (numSegments * inner === 0) return out;
  if (x.dtype === 'float32') {
    const run = jobRunner(backend, { ns: (numSegments + count) * inner * RATE.streamNs, inputs: [x, segmentIds], outputs: [out] });
    try {
      // by ranges of segments: each zeroes its rows and adds the rows of x that land there
      const { tasks, per } = split(numSegments, run.threads);
      run.run(JOB.segmentSum, tasks, [run.input(x), run.input(segmentIds), run.output(out), count, inner, numSegments, per]);
    } finally {
      run.finish();
    }
    return out;
  }
  // views only after makeOutput: its malloc may grow (and so replace) the heap buffer
  const buffer = backend.wasm.HEAPU8.buffer as ArrayBuffer;
  const src = new Int32Array(buffer, heapOffset(backend, x), count * inner);
  const ids = new Int32Array(buffer, heapOffset(backend, segmentIds), count);
  const dst = new Int32Array(buffer, heapOffset(backend, out), numSegments * inner);
  dst.fill(0);
  for (let p = 0; p < count; p++) {
    const s = ids[p];
    if (s < 0 || s >= numSegments) continue;
    const from = p * inner;
    const to = s * inner;
    for (let i = 0; i < inner; i++) dst[to + i] += src[from + i];
  }
  return out;
}

export const unsortedSegmentSumConfig: tf.KernelConfig = {
  kernelName: tf.UnsortedSegmentSum,
  backendName: 'wasm',
  kernelFunc: unsortedSegmentSum as unknown as tf.KernelFunc,
};
