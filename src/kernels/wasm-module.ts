// defines: the bridge between tfjs's wasm backend and our SIMD module (kernels.c):
// fastModuleFor, heapOffset, relaxedSimdSupported, setKernelOptions
//
// The module is instantiated once per backend against the backend's OWN linear
// memory (it imports it), so kernels read and write tensors in place by their heap
// offset: no copies in or out. Scratch space (the GEMM packing buffers, the job area
// of kernels.c's job_run) comes from the backend's malloc and is kept for the backend's
// lifetime. The thread pool (threads.ts) builds on this module.
//
// Four builds of kernels.c (build.sh): for an ordinary or a shared heap (tfjs's
// threaded-simd build shares its memory), each with or without relaxed SIMD. Relaxed
// SIMD is used where the runtime validates it (Chromium does; Node 20's V8 only behind
// --experimental-wasm-relaxed-simd, so Node runs the plain build unless so started).
//
// Compilation is synchronous (`new WebAssembly.Module`), which Node and Web
// Workers allow; the training engine runs in a Worker. The binaries are embedded as
// base64 (wasm-binary.ts) so nothing is fetched at run time.

import type * as tf from '@tensorflow/tfjs';
import { POOL_BYTES, POOL_WS } from './pool-layout.js';
import {
  KERNELS_RELAXED_WASM_BASE64,
  KERNELS_SHARED_RELAXED_WASM_BASE64,
  KERNELS_SHARED_WASM_BASE64,
  KERNELS_WASM_BASE64,
} from './wasm-binary.js';

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

/** Exports of kernels.c; every pointer is a byte offset into the imported memory. */
export interface KernelExports {
  gemm_workspace_floats(): number;
  /** Runs every task of the job written at `pool` (a pool_t, jobs.ts) on this thread. */
  job_run(pool: number): void;
  /** Shared builds only: the same job shared with the helper threads (threads.ts). */
  pool_run?(pool: number): void;
  /** Shared builds only: a helper thread's loop; returns when the pool is told to quit. */
  pool_helper?(pool: number, self: number): void;
}

export interface KernelBuild {
  /** for a shared memory (threads) */
  shared: boolean;
  /** with f32x4.relaxed_madd in the GEMM */
  relaxed: boolean;
}

export interface FastModule {
  readonly exports: KernelExports;
  /** the compiled module (the pool's threads instantiate the same one) */
  readonly module: WebAssembly.Module;
  readonly build: KernelBuild;
  /** the tfjs heap this instance works in */
  readonly memory: WebAssembly.Memory;
  /** Byte offset of a pool_t (jobs.ts) in the tfjs heap for job_run on this thread. */
  readonly jobArea: number;
  /** Byte offset of this thread's GEMM scratch (16-byte aligned) inside the tfjs heap. */
  readonly gemmWorkspace: number;
}

const modules = new WeakMap<object, FastModule>();
const compiled = new Map<string, WebAssembly.Module>();

export interface KernelOptions {
  /** 'auto' (default): relaxed SIMD where the runtime validates it; 'off': never */
  relaxedSimd: 'auto' | 'off';
}

const options: KernelOptions = { relaxedSimd: 'auto' };

/**
 * Chooses among the builds; takes effect for backends whose kernels are not yet
 * instantiated (call before the first fast kernel runs, as tests do).
 */
export function setKernelOptions(next: Partial<KernelOptions>): void {
  Object.assign(options, next);
}

function decodeBase64(text: string): Uint8Array<ArrayBuffer> {
  const bin = atob(text);
  const bytes = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) bytes[i] = bin.charCodeAt(i);
  return bytes;
}

// The smallest module using relaxed SIMD: one function () → v128 returning
// f32x4.relaxed_madd of three v128.const zeros. Opcodes from the WebAssembly relaxed-SIMD
// proposal (Overview.md): v128.const 0xfd 0x0c + 16 bytes, f32x4.relaxed_madd 0xfd 0x105
// (LEB128 0x85 0x02).
function relaxedProbe(): Uint8Array<ArrayBuffer> {
  const zeros = (): number[] => [0xfd, 0x0c, ...new Array<number>(16).fill(0)];
  const body = [0x00, ...zeros(), ...zeros(), ...zeros(), 0xfd, 0x85, 0x02, 0x0b]; // no locals; 3 consts; madd; end
  return new Uint8Array([
    ...[0x00, 0x61, 0x73, 0x6d, 0x01, 0x00, 0x00, 0x00], // "\0asm", version 1
    ...[0x01, 0x05, 0x01, 0x60, 0x00, 0x01, 0x7b], // type section: [func () → (v128)]
    ...[0x03, 0x02, 0x01, 0x00], // function section: one function of type 0
    ...[0x0a, body.length + 2, 0x01, body.length, ...body], // code section
  ]);
}

let relaxedKnown: boolean | null = null;

/** True when this runtime validates relaxed-SIMD code (a tiny probe module). */
export function relaxedSimdSupported(): boolean {
  if (relaxedKnown === null) {
    try {
      relaxedKnown = WebAssembly.validate(relaxedProbe());
    } catch {
      relaxedKnown = false;
    }
  }
  return relaxedKnown;
}

/** The relaxed-SIMD probe's bytes (tests check it against the real relaxed build). */
export const RELAXED_SIMD_PROBE: Uint8Array<ArrayBuffer> = relaxedProbe();

/** The build the options and the runtime call for, for a heap shared or not. */
export function chooseBuild(shared: boolean): KernelBuild {
  return { shared, relaxed: options.relaxedSimd === 'auto' && relaxedSimdSupported() };
}

/** The compiled module of one build (compiled once per process or worker). */
export function compiledKernels(build: KernelBuild): WebAssembly.Module {
  const key = `${build.shared ? 'shared' : 'plain'}-${build.relaxed ? 'relaxed' : 'simd128'}`;
  let module = compiled.get(key);
  if (!module) {
    const base64 = build.shared
      ? build.relaxed
        ? KERNELS_SHARED_RELAXED_WASM_BASE64
        : KERNELS_SHARED_WASM_BASE64
      : build.relaxed
        ? KERNELS_RELAXED_WASM_BASE64
        : KERNELS_WASM_BASE64;
    module = new WebAssembly.Module(decodeBase64(base64));
    compiled.set(key, module);
  }
  return module;
}

/** The backend's WebAssembly.Memory (the one its HEAPU8 views). */
export function heapMemory(backend: WasmBackendLike): WebAssembly.Memory {
  const buffer = backend.wasm.HEAPU8.buffer;
  for (const candidate of [backend.wasm.asm?.memory, backend.wasm.wasmMemory]) {
    if (candidate instanceof WebAssembly.Memory && candidate.buffer === buffer) return candidate;
  }
  throw new Error(
    "src/kernels: cannot reach the tfjs wasm backend's WebAssembly.Memory " +
      '(looked at Module.asm.memory and Module.wasmMemory); is this tfjs-backend-wasm 4.22?',
  );
}

/** True when `memory` is a shared WebAssembly.Memory. */
export function isShared(memory: WebAssembly.Memory): boolean {
  return typeof SharedArrayBuffer !== 'undefined' && memory.buffer instanceof SharedArrayBuffer;
}

/** The SIMD module bound to `backend`'s heap, instantiated on first use. */
export function fastModuleFor(backend: WasmBackendLike): FastModule {
  const known = modules.get(backend);
  if (known) return known;
  const memory = heapMemory(backend);
  const build = chooseBuild(isShared(memory));
  const module = compiledKernels(build);
  const instance = new WebAssembly.Instance(module, { env: { memory } });
  const exports = instance.exports as unknown as KernelExports;
  const wsBytes = exports.gemm_workspace_floats() * 4;
  const raw = backend.wasm._malloc(wsBytes + POOL_BYTES + 32) >>> 0;
  const gemmWorkspace = (raw + 15) & ~15;
  const jobArea = gemmWorkspace + wsBytes;
  // job_run uses thread 0's workspace
  new Int32Array(backend.wasm.HEAPU8.buffer, jobArea, POOL_BYTES / 4).fill(0);
  new Int32Array(backend.wasm.HEAPU8.buffer, jobArea + POOL_WS * 4, 1)[0] = gemmWorkspace;
  const fast: FastModule = { exports, module, build, memory, jobArea, gemmWorkspace };
  modules.set(backend, fast);
  return fast;
}

/** Byte offset of a tensor's data inside the tfjs heap. */
export function heapOffset(backend: WasmBackendLike, info: tf.TensorInfo): number {
  const data = backend.dataIdMap.get(info.dataId);
  if (!data) throw new Error('src/kernels: tensor data is not on the wasm backend');
  return data.memoryOffset >>> 0;
}
