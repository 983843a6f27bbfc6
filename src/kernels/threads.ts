// defines: the kernel thread pool — useKernelThreads, setKernelThreads, kernelThreadCount,
// kernelThreadsReady, stopKernelThreads, kernelPoolFor, runKernelThread
//
// The fast kernels' jobs (kernels.c, pool_run) run on the calling thread and N − 1
// helper threads that share one WebAssembly.Memory. Each helper instantiates the same
// shared-memory build of kernels.c on it and sleeps inside pool_helper until a job is
// published; the caller takes tasks too, then sleeps until the last is done
// (memory.atomic.wait — allowed in a Web Worker and in Node's main thread, never on a
// page's main thread, which is one more reason the engine lives in a worker).
//
// Two ways to share the memory:
//   in place  the tfjs heap is shared (tfjs's threaded-simd build, on a cross-origin
//             isolated page): the helpers work on tensors where they are
//   copies    the tfjs heap is an ordinary memory (Node, whose tfjs has no threaded
//             build): the pool owns a shared memory; jobs.ts copies a job's operands in
//             and its outputs back (an 8 MB copy takes ~0.3 ms here, a GEMM of that
//             size tens of ms), and small jobs stay on the tfjs heap, on one thread
//
// This module is isomorphic: the host starts the threads. useKernelThreads takes a
// function that starts helper number i — a nested Web Worker running
// workers/kernel-thread.ts in the browser, a worker_threads Worker in Node
// (src/node/kernel-threads.ts) — and posts it a KernelThreadStart, which it passes to
// runKernelThread. Helpers come up asynchronously; until they do, jobs run on fewer
// threads (a task nobody else claims is done by the caller), never wrongly.

import {
  MAX_THREADS,
  POOL_ACTIVE,
  POOL_ALIVE,
  POOL_BYTES,
  POOL_DONE,
  POOL_FAILED,
  POOL_GEN,
  POOL_QUIT,
  POOL_SPIN,
  POOL_TAKEN,
  POOL_WS,
} from './pool-layout.js';
import { OperandCache } from './operand-cache.js';
import { compiledKernels, fastModuleFor, heapMemory, isShared, type KernelExports, type WasmBackendLike } from './wasm-module.js';

/** What a helper thread is sent, once, to start. */
export interface KernelThreadStart {
  module: WebAssembly.Module;
  memory: WebAssembly.Memory;
  /** byte address of the pool_t in `memory` */
  pool: number;
  /** this helper's thread number, 1 … threads − 1 (the caller is 0) */
  index: number;
}

/** A started helper, as the host's Worker offers it. */
export interface KernelThreadHandle {
  postMessage(message: KernelThreadStart): void;
  terminate(): unknown;
}

/** Starts helper number `index` (a Worker that calls runKernelThread on its first message). */
export type SpawnKernelThread = (index: number) => KernelThreadHandle;

/** Polls of the job counter before a helper sleeps (~1 ns each): bridges the gap between back-to-back jobs. */
const HELPER_SPIN = 20000;

/**
 * A copies pool's operand cache (operand-cache.ts): 128 MiB, taken as it fills. Measured
 * on one L2-H128-T256-B16 step, a ring this size would hold 191 of the 239 MB of inputs
 * shared jobs read (64 MiB: 171; 256 MiB: 210); for L4-H256-T384-B8, 471 of 756.
 */
const CACHE_BYTES = 128 * 2 ** 20;

/** Pages (64 KiB) of a copies pool's shared memory at the start; it grows as the cache fills and for larger jobs. */
const INITIAL_PAGES = 256;
const MAX_PAGES = 65536; // 4 GiB, the maximum kernels-shared.wasm declares for its import

interface Config {
  spawn: SpawnKernelThread;
  threads: number;
}

let config: Config | null = null;
let pool: KernelPool | null = null;

function clampThreads(n: number): number {
  if (!Number.isFinite(n) || n < 1) return 1;
  return Math.min(MAX_THREADS, Math.floor(n));
}

/**
 * Lets the fast kernels use `threads` threads (the caller and threads − 1 helpers
 * started by `spawn`). Nothing starts until the first job that is worth sharing, or
 * kernelThreadsReady. Replaces an earlier pool.
 */
export function useKernelThreads(spawn: SpawnKernelThread, threads: number): void {
  stopKernelThreads();
  config = { spawn, threads: clampThreads(threads) };
}

/** Lowers (or raises, up to the count given to useKernelThreads) the threads jobs use; 1 = one thread. */
export function setKernelThreads(threads: number): void {
  if (!config) return;
  const n = clampThreads(threads);
  if (pool) pool.requested = Math.min(n, pool.capacity);
  else config.threads = n;
}

/** Threads the kernels use now: 1 without a pool, else the caller plus the helpers that are up (at most the setting). */
export function kernelThreadCount(): number {
  return pool ? pool.threadsNow() : 1;
}

/**
 * Starts the pool for `backend` and resolves with the thread count once every helper is
 * up. Never rejects: after `timeoutMs` it resolves with the threads that are up (later
 * ones join when they come), and if a helper failed to start the pool is stopped and it
 * resolves with 1 — the engine then runs on one thread rather than not at all.
 */
export async function kernelThreadsReady(backend: WasmBackendLike, timeoutMs = 15000): Promise<number> {
  const p = kernelPoolFor(backend);
  if (!p) return 1;
  const start = Date.now();
  while (p.alive() < p.capacity - 1 && Date.now() - start <= timeoutMs) {
    if (p.failed()) {
      stopKernelThreads();
      config = null; // and no new pool on the next job
      return 1;
    }
    await new Promise((resolve) => setTimeout(resolve, 5));
  }
  return p.threadsNow();
}

/** Ends the helper threads (they leave pool_helper and are terminated); jobs then run on one thread. */
export function stopKernelThreads(): void {
  if (pool) pool.stop();
  pool = null;
}

/**
 * The pool for `backend`, started on first use; null when no threads were asked for,
 * only one was, or this runtime has no shared WebAssembly memory.
 */
export function kernelPoolFor(backend: WasmBackendLike): KernelPool | null {
  if (pool) return pool.backend === backend ? pool : null;
  if (!config || config.threads < 2) return null;
  if (typeof SharedArrayBuffer === 'undefined' || typeof Atomics === 'undefined') return null;
  pool = new KernelPool(backend, config.spawn, config.threads);
  return pool;
}

/**
 * A helper thread's body: instantiate the kernels on the shared memory and serve jobs
 * until the pool stops. Returns only then (the thread's event loop is blocked
 * meanwhile, which is what a helper is for).
 */
export function runKernelThread(start: KernelThreadStart): void {
  const words = new Int32Array(start.memory.buffer, start.pool, POOL_BYTES / 4);
  try {
    const instance = new WebAssembly.Instance(start.module, { env: { memory: start.memory } });
    (instance.exports as unknown as KernelExports).pool_helper!(start.pool, start.index);
  } catch (err) {
    Atomics.store(words, POOL_FAILED, 1);
    Atomics.notify(words, POOL_DONE); // the caller, if it waits for a task this thread held
    throw err;
  }
}

/** The pool: its memory, the caller's instance on it, the job area, the helpers. */
export class KernelPool {
  readonly backend: WasmBackendLike;
  /** operands are copied into the pool's own memory (the tfjs heap is not shared) */
  readonly copies: boolean;
  readonly memory: WebAssembly.Memory;
  /** the calling thread's kernels on `memory` */
  readonly exports: KernelExports;
  /** byte address of the pool_t in `memory` */
  readonly ctrl: number;
  /** threads the pool was built for (workspaces and helpers) */
  readonly capacity: number;
  /** threads jobs may use (≤ capacity) */
  requested: number;
  /** copies: where operands go in `memory` (null in place) */
  readonly cache: OperandCache | null;
  /** what shared jobs have cost so far (benchmarks read and reset it) */
  readonly stats = { jobs: 0, jobMs: 0, copyBytes: 0, copyMs: 0 };
  private readonly helpers: KernelThreadHandle[] = [];
  private readonly mallocs: number[] = [];

  constructor(backend: WasmBackendLike, spawn: SpawnKernelThread, threads: number) {
    this.backend = backend;
    this.capacity = threads;
    this.requested = threads;
    const fast = fastModuleFor(backend);
    const heap = heapMemory(backend);
    const wsBytes = fast.exports.gemm_workspace_floats() * 4;
    let module: WebAssembly.Module;
    let workspaces: number[];
    if (isShared(heap)) {
      this.copies = false;
      this.memory = heap;
      module = fast.module;
      this.exports = fast.exports;
      const raw = backend.wasm._malloc(POOL_BYTES + 16) >>> 0;
      this.mallocs.push(raw);
      this.ctrl = (raw + 15) & ~15;
      workspaces = [fast.gemmWorkspace];
      for (let i = 1; i < threads; i++) {
        const w = backend.wasm._malloc(wsBytes + 16) >>> 0;
        this.mallocs.push(w);
        workspaces.push((w + 15) & ~15);
      }
      this.cache = null;
    } else {
      this.copies = true;
      // 64: the pool_t (address 0 stays unused, so a 0 argument can mean "none");
      // then one workspace per thread, then the arena
      this.ctrl = 64;
      workspaces = [];
      for (let i = 0; i < threads; i++) workspaces.push(1024 + i * wsBytes);
      const arena = 1024 + threads * wsBytes;
      this.cache = new OperandCache(arena, CACHE_BYTES);
      const pages = Math.max(INITIAL_PAGES, Math.ceil(arena / 65536) + 16);
      this.memory = new WebAssembly.Memory({ initial: pages, maximum: MAX_PAGES, shared: true });
      // the same relaxed-SIMD choice as the one-thread build, so a result never depends
      // on which path computed it
      module = compiledKernels({ shared: true, relaxed: fast.build.relaxed });
      this.exports = new WebAssembly.Instance(module, { env: { memory: this.memory } }).exports as unknown as KernelExports;
    }
    const words = this.words();
    words.fill(0, this.ctrl / 4, (this.ctrl + POOL_BYTES) / 4);
    workspaces.forEach((w, i) => (words[this.ctrl / 4 + POOL_WS + i] = w));
    Atomics.store(words, this.ctrl / 4 + POOL_SPIN, HELPER_SPIN);
    Atomics.store(words, this.ctrl / 4 + POOL_ACTIVE, threads);
    for (let index = 1; index < threads; index++) {
      const helper = spawn(index);
      helper.postMessage({ module, memory: this.memory, pool: this.ctrl, index });
      this.helpers.push(helper);
    }
  }

  /** An Int32Array over the whole pool memory (made anew: the memory may have grown). */
  words(): Int32Array {
    return new Int32Array(this.memory.buffer);
  }

  alive(): number {
    return Atomics.load(this.words(), this.ctrl / 4 + POOL_ALIVE);
  }

  failed(): boolean {
    return Atomics.load(this.words(), this.ctrl / 4 + POOL_FAILED) !== 0;
  }

  /** Tasks each thread has run in shared jobs so far (thread 0 is the caller). */
  tasksTaken(): number[] {
    const words = this.words();
    return Array.from({ length: this.capacity }, (_, i) => Atomics.load(words, this.ctrl / 4 + POOL_TAKEN + i));
  }

  /** The caller plus the helpers that are up, at most `requested`. */
  threadsNow(): number {
    return Math.min(this.requested, 1 + this.alive());
  }

  /** Grows the pool memory to at least `bytes`; false when that is past its maximum. */
  ensureBytes(bytes: number): boolean {
    const have = this.memory.buffer.byteLength;
    if (bytes <= have) return true;
    const pages = Math.ceil((bytes - have) / 65536);
    if (have / 65536 + pages > MAX_PAGES) return false;
    this.memory.grow(pages);
    return true;
  }

  stop(): void {
    const words = this.words();
    Atomics.store(words, this.ctrl / 4 + POOL_QUIT, 1);
    Atomics.add(words, this.ctrl / 4 + POOL_GEN, 1);
    Atomics.notify(words, this.ctrl / 4 + POOL_GEN);
    for (const h of this.helpers) void h.terminate();
    this.helpers.length = 0;
    if (!this.copies) for (const m of this.mallocs) this.backend.wasm._free(m);
    this.mallocs.length = 0;
  }
}
