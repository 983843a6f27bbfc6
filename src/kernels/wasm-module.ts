// defines: the bridge between tfjs's wasm backend and our SIMD module (kernels.c)
//
// The module is instantiated once per backend against the backend's OWN linear
// memory (it imports it), so kernels read and write tensors in place by their heap
// offset: no copies in or out. Scratch space (GEMM packing buffers) comes from the
// backend's malloc and is kept for the backend's lifetime.
//
// Compilation is synchronous (`new WebAssembly.Module`), which Node and Web
// Workers allow; the training engine runs in a Worker. The binary is embedded as
// base64 (wasm-binary.ts) so nothing is fetched at run time.

import type * as tf from '@tensorflow/tfjs';
import { KERNELS_SHARED_WASM_BASE64, KERNELS_WASM_BASE64 } from './wasm-binary.js';

/** The parts of tfjs-backend-wasm's BackendWasm (4.22) that the fast kernels use. */
export interface WasmBackendLike {
  wasm: {
    HEAPU8: Uint8Array;
    _malloc(bytes: number): number;
    _free(ptr: number): void;
    /** Emscripten's exports of the non-threaded builds; `memory` is the heap. */
    asm?: { memory?: WebAssembly.Memory };
    /** Set by Emscripten's threaded build, whose memory is created in JS. */
    wasmMemory?: WebAssembly.Memory;
  };
  dataIdMap: { get(dataId: object): { memoryOffset: number } | undefined };
  makeOutput(shape: number[], dtype: tf.DataType): tf.TensorInfo;
  /** One more tensor shares this data (how Reshape avoids a copy). */
  incRef(dataId: object): void;
}

/** Exports of kernels.c; every pointer is a byte offset into the tfjs heap. */
interface KernelExports {
  gemm_f32(
    m: number,
    n: number,
    k: number,
    a: number,
    rsA: number,
    csA: number,
    b: number,
    rsB: number,
    csB: number,
    c: number,
    ldc: number,
    workspace: number,
  ): void;
  gemm_workspace_floats(): number;
  erf_f32(x: number, y: number, n: number): void;
  sum_leading_f32(x: number, y: number, m: number, n: number): void;
  segment_sum_f32(x: number, ids: number, out: number, count: number, inner: number, segments: number): void;
  attention_forward(
    q: number,
    k: number,
    v: number,
    bias: number,
    ctx: number,
    probs: number,
    scratch: number,
    B: number,
    T: number,
    N: number,
    D: number,
    scale: number,
    dropout: number,
    mix: number,
    threshold: number,
    keepScale: number,
    workspace: number,
  ): void;
  dropout_f32(x: number, y: number, n: number, mix: number, threshold: number, scale: number): void;
  adamw_f32(
    p: number,
    g: number,
    m: number,
    v: number,
    pOut: number,
    mOut: number,
    vOut: number,
    n: number,
    gradScale: number,
    scaled: number,
    decay: number,
    decayed: number,
    b1: number,
    oneMinusB1: number,
    b2: number,
    oneMinusB2: number,
    negStep: number,
    c2: number,
    eps: number,
  ): void;
  bias_gelu_f32(x: number, b: number, y: number, rows: number, n: number): void;
  bias_gelu_grad_f32(x: number, b: number, dy: number, dx: number, db: number, rows: number, n: number): void;
  layer_norm_f32(x: number, gamma: number, beta: number, y: number, mean: number, rstd: number, rows: number, n: number, eps: number): void;
  layer_norm_grad_f32(
    x: number,
    gamma: number,
    mean: number,
    rstd: number,
    dy: number,
    dx: number,
    dgamma: number,
    dbeta: number,
    rows: number,
    n: number,
  ): void;
  attention_backward(
    q: number,
    k: number,
    v: number,
    probs: number,
    dctx: number,
    dq: number,
    dk: number,
    dv: number,
    scratch: number,
    B: number,
    T: number,
    N: number,
    D: number,
    scale: number,
    dropout: number,
    mix: number,
    threshold: number,
    keepScale: number,
    workspace: number,
  ): void;
}

export interface FastModule {
  readonly exports: KernelExports;
  /** Byte offset of the GEMM scratch (16-byte aligned) inside the tfjs heap. */
  readonly gemmWorkspace: number;
}

const modules = new WeakMap<object, FastModule>();

function decodeBase64(text: string): Uint8Array<ArrayBuffer> {
  const bin = atob(text);
  const bytes = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) bytes[i] = bin.charCodeAt(i);
  return bytes;
}

function heapMemory(backend: WasmBackendLike): WebAssembly.Memory {
  const buffer = backend.wasm.HEAPU8.buffer;
  for (const candidate of [backend.wasm.asm?.memory, backend.wasm.wasmMemory]) {
    if (candidate instanceof WebAssembly.Memory && candidate.buffer === buffer) return candidate;
  }
  throw new Error(
    "src/kernels: cannot reach the tfjs wasm backend's WebAssembly.Memory " +
      '(looked at Module.asm.memory and Module.wasmMemory); is this tfjs-backend-wasm 4.22?',
  );
}

/** The SIMD module bound to `backend`'s heap, instantiated on first use. */
export function fastModuleFor(backend: WasmBackendLike): FastModule {
  const known = modules.get(backend);
  if (known) return known;
  const memory = heapMemory(backend);
  const shared = typeof SharedArrayBuffer !== 'undefined' && memory.buffer instanceof SharedArrayBuffer;
  const bytes = decodeBase64(shared ? KERNELS_SHARED_WASM_BASE64 : KERNELS_WASM_BASE64);
  const instance = new WebAssembly.Instance(new WebAssembly.Module(bytes), { env: { memory } });
  const exports = instance.exports as unknown as KernelExports;
  const wsBytes = exports.gemm_workspace_floats() * 4;
  const raw = backend.wasm._malloc(wsBytes + 16) >>> 0;
  const fast: FastModule = { exports, gemmWorkspace: (raw + 15) & ~15 };
  modules.set(backend, fast);
  return fast;
}

/** Byte offset of a tensor's data inside the tfjs heap. */
export function heapOffset(backend: WasmBackendLike, info: tf.TensorInfo): number {
  const data = backend.dataIdMap.get(info.dataId);
  if (!data) throw new Error('src/kernels: tensor data is not on the wasm backend');
  return data.memoryOffset >>> 0;
}
