// defines: jobRunner — how a fast kernel runs its job (kernels.c): on this thread in
// place, or shared with the kernel threads (threads.ts); and split, the task sizes
//
// A kernel asks for a runner with its estimated one-thread time and the bytes its
// operands take, then names its tensors through the runner (input, output, scratch)
// and runs one or more jobs on those addresses:
//
//   const run = jobRunner(backend, { ns, bytes });
//   try { run.run(JOB.erf, tasks, [run.input(x), run.output(y), n, per]); } finally { run.finish(); }
//
// The runner shares the job when that saves time: the time the other threads take off
// (ns · (1 − 1/threads)) must exceed 1.5 times the cost of sharing — waking the helpers
// and, when the pool works in its own memory, copying the operands in and the outputs
// back. Otherwise, and without a pool, the job runs on this thread on the tfjs heap.
// Either way the outputs are the same bits (kernels.c, "Jobs").

import * as tf from '@tensorflow/tfjs';
import { JOB_ARGS, MAX_TASKS, POOL_ACTIVE, POOL_ARGS, POOL_FAILED, POOL_KIND, POOL_TASKS, type JobKind } from './pool-layout.js';
import { kernelPoolFor, type KernelPool } from './threads.js';
import { fastModuleFor, heapOffset, type WasmBackendLike } from './wasm-module.js';

/**
 * Publishing a job, waking the helpers and waiting for the last task: 10–15 µs measured
 * here for a 64³ product (tests/bench/engine.ts prints it), 20 µs assumed.
 */
const SHARE_NS = 20_000;
/** Copying into and out of the pool's memory: ~30 bytes/ns measured for 8 MB in cache, less from DRAM; 12 assumed. */
const COPY_BYTES_PER_NS = 12;
/** Share when the time saved exceeds the cost of sharing by this factor (estimates are rough). */
const MARGIN = 1.5;
/** A copies pool never takes jobs with operands larger than this (the memory would double); they stay on one thread. */
const COPY_LIMIT_BYTES = 512 * 2 ** 20;

/** One-thread speeds measured here (tests/bench/profile.ts, 2026-12 figures; only the order of magnitude matters). */
export const RATE = {
  /** GEMM FLOP per ns (~28 GFLOP/s) */
  gemmFlops: 28,
  /** erf-based elementwise work: ns per element of GELU (6 ms for 4096 × 512) */
  geluNs: 2.8,
  /** … and of its gradient with the bias gradient (8 ms for 4096 × 512) */
  geluGradNs: 4,
  /** memory-bound elementwise work (LayerNorm, dropout, AdamW, sums): ns per element */
  streamNs: 0.4,
} as const;

export interface JobCost {
  /** estimated one-thread time of the whole kernel */
  ns: number;
  /** bytes of every operand the kernel reads or writes */
  bytes: number;
}

export interface JobRunner {
  /** threads taking part (1: this thread only) */
  readonly threads: number;
  /** the address of `info`'s data while the jobs run (copied in first when the pool has its own memory) */
  input(info: tf.TensorInfo): number;
  /** the address the jobs write `info`'s data to (copied back by finish when it is not the tensor itself) */
  output(info: tf.TensorInfo): number;
  /** scratch of `bytes` for each thread; returns its address and the distance between threads' scratch in floats */
  scratch(bytes: number): { addr: number; strideFloats: number };
  /** runs one job: `args` are ints (addresses, sizes, f32() bits), in kernels.c's order for `kind` */
  run(kind: JobKind, tasks: number, args: number[]): void;
  /** copies outputs back and frees scratch; call once, also after an error */
  finish(): void;
}

function bytesOf(info: tf.TensorInfo): number {
  const per = info.dtype === 'bool' ? 1 : 4;
  return tf.util.sizeFromShape(info.shape) * per;
}

/** Bytes of all these tensors (a JobCost's `bytes`). */
export function tensorBytes(...infos: (tf.TensorInfo | null | undefined)[]): number {
  return infos.reduce((s, t) => s + (t ? bytesOf(t) : 0), 0);
}

/**
 * `count` items in tasks of `per` (a multiple of `align`): one task for one thread,
 * else about `perThread` tasks for each thread (more tasks even out threads slowed by
 * other work on the machine; fewer repeat less per-task work).
 */
export function split(count: number, threads: number, align = 1, perThread = 4): { tasks: number; per: number } {
  if (count <= 0) return { tasks: 0, per: align };
  const wanted = threads <= 1 ? 1 : threads * perThread;
  let per = Math.ceil(count / wanted / align) * align;
  per = Math.max(per, Math.ceil(count / MAX_TASKS / align) * align, align);
  return { tasks: Math.ceil(count / per), per };
}

function checkTasks(kind: JobKind, tasks: number, args: number[]): void {
  if (args.length > JOB_ARGS) throw new Error(`src/kernels: job ${kind} has ${args.length} arguments (at most ${JOB_ARGS})`);
  if (!Number.isInteger(tasks) || tasks < 0 || tasks > MAX_TASKS) throw new Error(`src/kernels: job ${kind} has ${tasks} tasks`);
}

/** This thread, on the tfjs heap, through kernels.c's job_run. */
class DirectRunner implements JobRunner {
  readonly threads = 1;
  private readonly scratches: number[] = [];
  constructor(private readonly backend: WasmBackendLike) {}

  input(info: tf.TensorInfo): number {
    return heapOffset(this.backend, info);
  }

  output(info: tf.TensorInfo): number {
    return heapOffset(this.backend, info);
  }

  scratch(bytes: number): { addr: number; strideFloats: number } {
    const addr = this.backend.wasm._malloc(bytes) >>> 0;
    this.scratches.push(addr);
    return { addr, strideFloats: 0 };
  }

  run(kind: JobKind, tasks: number, args: number[]): void {
    checkTasks(kind, tasks, args);
    if (tasks === 0) return;
    const fast = fastModuleFor(this.backend);
    // a view made now: a malloc since the last job may have grown the heap
    const words = new Int32Array(this.backend.wasm.HEAPU8.buffer, fast.jobArea, POOL_ARGS + JOB_ARGS);
    words[POOL_KIND] = kind;
    words[POOL_TASKS] = tasks;
    words.set(args, POOL_ARGS);
    fast.exports.job_run(fast.jobArea);
  }

  finish(): void {
    for (const s of this.scratches) this.backend.wasm._free(s);
    this.scratches.length = 0;
  }
}

/** The caller and the helper threads, through kernels.c's pool_run. */
class PoolRunner implements JobRunner {
  private readonly scratches: number[] = [];
  /** copies: arena top, and the outputs to copy back (pool address, tfjs heap address, bytes) */
  private top: number;
  private readonly outputs: [number, number, number][] = [];

  constructor(
    private readonly backend: WasmBackendLike,
    private readonly pool: KernelPool,
    readonly threads: number,
  ) {
    this.top = pool.arenaBase;
  }

  private alloc(bytes: number): number {
    const addr = this.top;
    this.top = (addr + bytes + 63) & ~63; // cache-line aligned operands
    if (!this.pool.ensureBytes(this.top)) throw new Error('src/kernels: the kernel pool memory is full');
    return addr;
  }

  input(info: tf.TensorInfo): number {
    if (!this.pool.copies) return heapOffset(this.backend, info);
    const bytes = bytesOf(info);
    const addr = this.alloc(bytes);
    const from = heapOffset(this.backend, info);
    const t0 = performance.now();
    new Uint8Array(this.pool.memory.buffer, addr, bytes).set(this.backend.wasm.HEAPU8.subarray(from, from + bytes));
    this.pool.stats.copyMs += performance.now() - t0;
    this.pool.stats.copyBytes += bytes;
    return addr;
  }

  output(info: tf.TensorInfo): number {
    if (!this.pool.copies) return heapOffset(this.backend, info);
    const bytes = bytesOf(info);
    const addr = this.alloc(bytes);
    this.outputs.push([addr, heapOffset(this.backend, info), bytes]);
    return addr;
  }

  scratch(bytes: number): { addr: number; strideFloats: number } {
    const stride = (bytes + 63) & ~63;
    if (this.pool.copies) return { addr: this.alloc(stride * this.threads), strideFloats: stride / 4 };
    const raw = this.backend.wasm._malloc(stride * this.threads + 64) >>> 0;
    this.scratches.push(raw);
    return { addr: (raw + 63) & ~63, strideFloats: stride / 4 };
  }

  run(kind: JobKind, tasks: number, args: number[]): void {
    checkTasks(kind, tasks, args);
    if (tasks === 0) return;
    const { ctrl, exports } = this.pool;
    const words = this.pool.words();
    const base = ctrl / 4;
    words[base + POOL_KIND] = kind;
    words[base + POOL_TASKS] = tasks;
    words.set(args, base + POOL_ARGS);
    Atomics.store(words, base + POOL_ACTIVE, this.threads);
    const t0 = performance.now();
    exports.pool_run!(ctrl);
    this.pool.stats.jobMs += performance.now() - t0;
    this.pool.stats.jobs += 1;
    if (Atomics.load(words, base + POOL_FAILED) !== 0) throw new Error('src/kernels: a kernel thread failed; the job did not finish');
  }

  finish(): void {
    if (this.pool.copies) {
      const t0 = performance.now();
      const heap = this.backend.wasm.HEAPU8;
      const mem = new Uint8Array(this.pool.memory.buffer);
      for (const [addr, to, bytes] of this.outputs) {
        heap.set(mem.subarray(addr, addr + bytes), to);
        this.pool.stats.copyBytes += bytes;
      }
      this.pool.stats.copyMs += performance.now() - t0;
      this.outputs.length = 0;
      this.top = this.pool.arenaBase;
    }
    for (const s of this.scratches) this.backend.wasm._free(s);
    this.scratches.length = 0;
  }
}

let sharing: 'auto' | 'always' = 'auto';

/** 'always' shares every job however small (tests do, to run the threaded path on small tensors); default 'auto'. */
export function setJobSharing(mode: 'auto' | 'always'): void {
  sharing = mode;
}

/** The runner for a kernel of this cost: shared with the kernel threads when that pays, else this thread. */
export function jobRunner(backend: WasmBackendLike, cost: JobCost): JobRunner {
  const pool = kernelPoolFor(backend);
  if (pool) {
    const threads = pool.threadsNow();
    if (threads > 1 && (!pool.copies || cost.bytes <= COPY_LIMIT_BYTES)) {
      const overhead = SHARE_NS + (pool.copies ? cost.bytes / COPY_BYTES_PER_NS : 0);
      if (sharing === 'always' || cost.ns * (1 - 1 / threads) > MARGIN * overhead) return new PoolRunner(backend, pool, threads);
    }
  }
  return new DirectRunner(backend);
}
