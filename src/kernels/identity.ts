// defines: identityConfig, castConfig, transposeConfig — Identity, Cast to the same
// dtype and Transpose by a permutation that moves no data, for 'wasm' without a copy
// (and Cast to bool done right)
//
// tfjs's engine clones every tensor it saves for the backward pass (engine.ts,
// saveTensorsForBackwardMode → clone → the Identity kernel). The cpu backend's
// Identity shares the data (a reference count); stock tfjs-backend-wasm 4.22 copies
// it, so training copied ~280 activations per L2-H128-T256-B16 step (120 ms) and
// held each twice. Tensors are immutable in tfjs (a Variable's assign swaps its
// data id, it never writes in place), so sharing is safe, as Reshape already does
// on wasm. Cast to the dtype a tensor already has (tfjs-core's Multiply gradient
// casts its saved input to float32) is the same identity. Strings and other
// conversions go to the stock kernels, except a cast to bool: stock wasm 4.22 copies
// the values into the 1-byte output unconverted (int32 3 became 3, −1 became 255;
// tfjs's cpu backend gives 1 for every non-zero), so that one is done here.
// Transpose: tfjs-core's gather gradient transposes by the identity permutation, and
// stock wasm then copies (for the word embeddings, the whole [V, H] gradient); a
// permutation that keeps every axis of size > 1 in order moves no data, so the
// output shares the input's. Other permutations go to the stock kernel.

import * as tf from '@tensorflow/tfjs';
import { runStock } from './stock.js';
import { heapOffset, type WasmBackendLike } from './wasm-module.js';

interface IdentityArgs {
  inputs: { x: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs?: { dtype?: tf.DataType };
}

function shared(x: tf.TensorInfo, backend: WasmBackendLike): tf.TensorInfo {
  backend.incRef(x.dataId);
  return { dataId: x.dataId, shape: x.shape.slice(), dtype: x.dtype };
}

function identity(args: IdentityArgs): tf.TensorInfo | tf.TensorInfo[] {
  if (args.inputs.x.dtype === 'string') return runStock(tf.Identity, args);
  return shared(args.inputs.x, args.backend);
}

function cast(args: IdentityArgs): tf.TensorInfo | tf.TensorInfo[] {
  const {
    inputs: { x },
    backend,
  } = args;
  const dtype = args.attrs?.dtype;
  if (x.dtype !== 'string' && dtype === x.dtype) return shared(x, backend);
  if (dtype === 'bool' && (x.dtype === 'float32' || x.dtype === 'int32')) {
    const out = backend.makeOutput(x.shape.slice(), 'bool');
    const n = x.shape.reduce((p, d) => p * d, 1);
    // views only after makeOutput: its malloc may grow (and so replace) the heap buffer
    const buffer = backend.wasm.HEAPU8.buffer as ArrayBuffer;
    const src =
      x.dtype === 'float32' ? new Float32Array(buffer, heapOffset(backend, x), n) : new Int32Array(buffer, heapOffset(backend, x), n);
    const dst = new Uint8Array(buffer, heapOffset(backend, out), n);
    for (let i = 0; i < n; i++) dst[i] = src[i] !== 0 ? 1 : 0;
    return out;
  }
  return runStock(tf.Cast, args);
}

export const identityConfig: tf.KernelConfig = {
  kernelName: tf.Identity,
  backendName: 'wasm',
  kernelFunc: identity as unknown as tf.KernelFunc,
};

export const castConfig: tf.KernelConfig = {
  kernelName: tf.Cast,
  backendName: 'wasm',
  kernelFunc: cast as unknown as tf.KernelFunc,
};

interface TransposeArgs {
  inputs: { x: tf.TensorInfo };
  backend: WasmBackendLike;
  attrs: { perm: number[] };
}

function transpose(args: TransposeArgs): tf.TensorInfo | tf.TensorInfo[] {
  const {
    inputs: { x },
    backend,
    attrs: { perm },
  } = args;
  const moved = perm.filter((axis) => x.shape[axis] !== 1);
  const inOrder = moved.every((axis, i) => i === 0 || axis > moved[i - 1]);
  if (x.dtype === 'string' || perm.length !== x.shape.length || !inOrder) return runStock(tf.Transpose, args);
  backend.incRef(x.dataId);
  return { dataId: x.dataId, shape: perm.map((axis) => x.shape[axis]), dtype: x.dtype };
}

export const transposeConfig: tf.KernelConfig = {
  kernelName: tf.Transpose,
  backendName: 'wasm',
  kernelFunc: transpose as unknown as tf.KernelFunc,
};
