// defines: gatherConfig — GatherV2 for 'wasm', fast for whole rows
//
// The embedding lookups gather rows of a [V, H] table: tf.gather(table, ids) with
// axis 0. Stock tfjs-backend-wasm 4.22 reads the indices back through a JS closure
// per index and then copies element by element with stride arithmetic: 90–144 ms
// for the two lookups of one L2-H128-T256-B16 step here. Here each row is one
// memmove inside the heap (TypedArray.copyWithin). Other axes, batchDims > 0 and
// other dtypes go to the stock kernel.
//
// Semantics as tf.gather with axis 0: out[p, ...] = x[indices[p], ...], shape
// [...indices.shape, ...x.shape[1:]]; an index outside [0, rows) is an error with
// the stock kernel's message.

import * as tf from '@tensorflow/tfjs';
import { runStock } from './stock.js';
import { heapOffset, type WasmBackendLike } from './wasm-module.js';

interface GatherArgs {
  inputs: { x: tf.TensorInfo; indices: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: { axis: number; batchDims: number };
}

function gatherV2(args: GatherArgs): tf.TensorInfo | tf.TensorInfo[] {
  const {
    inputs: { x, indices },
    backend,
    attrs: { axis, batchDims },
  } = args;
  const rowsAxis = x.shape.length > 0 ? tf.util.parseAxisParam(axis, x.shape)[0] : -1;
  const fourBytes = x.dtype === 'float32' || x.dtype === 'int32';
  if (rowsAxis !== 0 || (batchDims ?? 0) !== 0 || !fourBytes || indices.dtype !== 'int32') {
    return runStock(tf.GatherV2, args);
  }
  const rows = x.shape[0];
  const inner = x.shape.slice(1).reduce((p, d) => p * d, 1);
  const count = indices.shape.reduce((p, d) => p * d, 1);
  const out = backend.makeOutput([...indices.shape, ...x.shape.slice(1)], x.dtype);
  if (count * inner === 0) return out;
  // views only after makeOutput: its malloc may grow (and so replace) the heap buffer
  const heap = new Uint32Array(backend.wasm.HEAPU8.buffer as ArrayBuffer);
  const ids = new Int32Array(heap.buffer, heapOffset(backend, indices), count);
  const src = heapOffset(backend, x) / 4;
  const dst = heapOffset(backend, out) / 4;
  for (let p = 0; p < count; p++) {
    const row = ids[p];
    if (!(row >= 0 && row < rows)) throw new Error(`GatherV2: the index value ${row} is not in [0, ${rows - 1}]`);
    heap.copyWithin(dst + p * inner, src + row * inner, src + (row + 1) * inner);
  }
  return out;
}

export const gatherConfig: tf.KernelConfig = {
  kernelName: tf.GatherV2,
  backendName: 'wasm',
  kernelFunc: gatherV2 as unknown as tf.KernelFunc,
};
