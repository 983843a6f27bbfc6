// defines: oneHotConfig — OneHot for 'wasm' that honours the output dtype
//
// A correctness fix, not a speed path: stock tfjs-backend-wasm 4.22 allocates the
// output with the requested dtype but its C++ kernel always writes 4-byte values,
// so `tf.oneHot(…, 'bool')` (1 byte per element) writes past its allocation and
// corrupts the heap (seen here: later mallocs abort inside Tile). The span loss's
// [CLS] mask (src/train/losses.ts) is such a bool oneHot. Semantics as tfjs-core:
//   out[..., d] = onValue if indices[...] = d else offValue, out of shape [...indices, depth]
// (an index outside [0, depth) gives a row of offValue).

import * as tf from '@tensorflow/tfjs';
import { heapOffset, type WasmBackendLike } from './wasm-module.js';

interface OneHotArgs {
  inputs: { indices: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: { depth: number; onValue: number; offValue: number; dtype: tf.DataType };
}

function oneHot({ inputs, backend, attrs }: OneHotArgs): tf.TensorInfo {
  const { indices } = inputs;
  const { depth, onValue, offValue, dtype } = attrs;
  if (indices.dtype !== 'int32') {
    throw new Error(`OneHot (src/kernels/one-hot.ts): indices must be int32, got ${indices.dtype}`);
  }
  const out = backend.makeOutput([...indices.shape, depth], dtype);
  const count = indices.shape.reduce((p, d) => p * d, 1);
  if (count * depth === 0) return out;
  // views only after makeOutput: its malloc may grow (and so replace) the heap buffer
  const buffer = backend.wasm.HEAPU8.buffer as ArrayBuffer;
  const offset = heapOffset(backend, out);
  const size = count * depth;
  const dst =
    dtype === 'float32'
      ? new Float32Array(buffer, offset, size)
      : dtype === 'int32'
        ? new Int32Array(buffer, offset, size)
        : dtype === 'bool'
          ? new Uint8Array(buffer, offset, size)
          : null;
  if (dst === null) throw new Error(`OneHot (src/kernels/one-hot.ts): unsupported dtype ${dtype}`);
  const ids = new Int32Array(buffer, heapOffset(backend, indices), count);
  dst.fill(offValue);
  for (let p = 0; p < count; p++) {
    const d = ids[p];
    if (d >= 0 && d < depth) dst[p * depth + d] = onValue;
  }
  return out;
}

export const oneHotConfig: tf.KernelConfig = {
  kernelName: tf.OneHot,
  backendName: 'wasm',
  kernelFunc: oneHot as unknown as tf.KernelFunc,
};
