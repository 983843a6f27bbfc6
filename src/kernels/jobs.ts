// defines: jobRunner — how a fast kernel runs its job (kernels.c): on this thread in
// place, or shared with the kernel threads (threads.ts); and split, the task sizes
//
// A kernel asks for a runner with its estimated one-thread time and the tensors it
// reads and writes (and the scratch each thread needs), then runs one or more jobs on
// the addresses the runner gives those tensors:
//
//   const run = jobRunner(backend, { ns, inputs: [x], outputs: [y] });
//   try { run.run(JOB.erf, tasks, [run.input(x), run.output(y), n, per]); } finally { run.finish(); }
//
// The runner shares the job when that saves time: the time the other threads take off
// (ns · (1 − 1/threads)) must exceed 1.5 times the cost of sharing — waking the helpers
// and, when the pool works in its own memory, copying in the inputs it does not hold
// already (operand-cache.ts) and the outputs back. Otherwise, and without a pool, the
// job runs on this thread on the tfjs heap. Either way the outputs are the same bits
// (kernels.c, "Jobs").

import * as tf from '@tensorflow/tfjs';
import type { Operand, Placement } from './operand-cache.js';
import { JOB_ARGS, MAX_TASKS, POOL_ACTIVE, POOL_ARGS, POOL_FAILED, POOL_KIND, POOL_TASKS, type JobKind } from './pool-layout.js';
import { kernelPoolFor, type KernelPool } from './threads.js';
import { fastModuleFor, heapOffset, type WasmBackendLike } from './wasm-module.js';

/**
 * Publishing a job, waking the helpers and waiting for the last task: 10–30 µs measured
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

export interface JobSpec {
  /** estimated one-thread time of the whole kernel */
  ns: number;
  /** every tensor the jobs read */
  inputs: (tf.TensorInfo | null)[];
  /** every tensor the jobs write (each fully) */
  outputs: (tf.TensorInfo | null)[];
  /** scratch bytes each thread needs (default none) */
  scratch?: number;
}

export interface JobRunner {
  /** threads taking part (1: this thread only) */
  readonly threads: number;
  /** the address of an input's data while the jobs run */
  input(info: tf.TensorInfo): number;
  /** the address the jobs write an output's data to (copied back by finish when it is not the tensor itself) */
  output(info: tf.TensorInfo): number;
  /** the scratch the spec asked for: its address and the distance between threads' scratch in floats */
  scratch(): { addr: number; strideFloats: number };
  /** runs one job: `args` are ints (addresses, sizes, f32() bits), in kernels.c's order for `kind` */
  run(kind: JobKind, tasks: number, args: number[]): void;
  /** copies outputs back and frees scratch; call once, also after an error */
  finish(): void;
}

function bytesOf(info: tf.TensorInfo): number {
  const per = info.dtype === 'bool' ? 1 : 4;
  return tf.util.sizeFromShape(info.shape) * per;
}

function present(infos: (tf.TensorInfo | null)[]): tf.TensorInfo[] {
  return infos.filter((t): t is tf.TensorInfo => t !== null);
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

function declared(map: Map<object, number>, info: tf.TensorInfo, what: string): number {
  const addr = map.get(info.dataId);
  if (addr === undefined) throw new Error(`src/kernels: ${what} [${info.shape}] was not declared in the job's spec`);
  return addr;
}

/** Tensors on the tfjs heap where they are, scratch from its malloc: this thread, or a pool sharing the heap. */
abstract class InPlaceRunner implements JobRunner {
  abstract readonly threads: number;
  private scratchAddr = 0;
  private readonly strideBytes: number;

  constructor(
    protected readonly backend: WasmBackendLike,
    private readonly spec: JobSpec,
  ) {
    this.strideBytes = ((spec.scratch ?? 0) + 63) & ~63;
  }

  input(info: tf.TensorInfo): number {
    return heapOffset(this.backend, info);
  }

  output(info: tf.TensorInfo): number {
    return heapOffset(this.backend, info);
  }

  scratch(): { addr: number; strideFloats: number } {
    if (!this.spec.scratch) throw new Error('src/kernels: the job asked for no scratch');
    if (this.scratchAddr === 0) this.scratchAddr = this.backend.wasm._malloc(this.strideBytes * this.threads + 64) >>> 0;
    return { addr: (this.scratchAddr + 63) & ~63, strideFloats: this.strideBytes / 4 };
  }

  abstract run(kind: JobKind, tasks: number, args: number[]): void;

  finish(): void {
    if (this.scratchAddr !== 0) this.backend.wasm._free(this.scratchAddr);
    this.scratchAddr = 0;
  }
}

/** This thread, on the tfjs heap, through kernels.c's job_run. */
class DirectRunner extends InPlaceRunner {
  readonly threads = 1;

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
}

/** Publishes a job in the pool's job area and runs it with the helpers (kernels.c's pool_run). */
function runShared(pool: KernelPool, threads: number, kind: JobKind, tasks: number, args: number[]): void {
  checkTasks(kind, tasks, args);
  if (tasks === 0) return;
  const words = pool.words();
  const base = pool.ctrl / 4;
  words[base + POOL_KIND] = kind;
  words[base + POOL_TASKS] = tasks;
  words.set(args, base + POOL_ARGS);
  Atomics.store(words, base + POOL_ACTIVE, threads);
  const t0 = performance.now();
  pool.exports.pool_run!(pool.ctrl);
  pool.stats.jobMs += performance.now() - t0;
  pool.stats.jobs += 1;
  if (Atomics.load(words, base + POOL_FAILED) !== 0) throw new Error('src/kernels: a kernel thread failed; the job did not finish');
}

/** The caller and the helpers on the tfjs heap itself (it is shared: the browser's threaded tfjs). */
class SharedHeapRunner extends InPlaceRunner {
  constructor(
    backend: WasmBackendLike,
    spec: JobSpec,
    private readonly pool: KernelPool,
    readonly threads: number,
  ) {
    super(backend, spec);
  }

  run(kind: JobKind, tasks: number, args: number[]): void {
    runShared(this.pool, this.threads, kind, tasks, args);
  }
}

/** The caller and the helpers in the pool's own memory: inputs copied in unless held already, outputs copied back. */
class CopiesRunner implements JobRunner {
  private readonly placement: Placement;
  private readonly outputs: Operand[];
  private readonly outputInfos: tf.TensorInfo[];
  private readonly strideBytes: number;
  private failed = false;

  constructor(
    private readonly backend: WasmBackendLike,
    spec: JobSpec,
    private readonly pool: KernelPool,
    readonly threads: number,
  ) {
    const operand = (t: tf.TensorInfo): Operand => ({ key: t.dataId, bytes: bytesOf(t) });
    this.strideBytes = ((spec.scratch ?? 0) + 63) & ~63;
    const inputs = present(spec.inputs);
    this.outputInfos = present(spec.outputs);
    this.outputs = this.outputInfos.map(operand);
    this.placement = pool.cache!.place(inputs.map(operand), this.outputs, this.strideBytes * threads);
    if (!pool.ensureBytes(this.placement.end)) {
      pool.cache!.clear();
      throw new Error('src/kernels: the kernel pool memory is full');
    }
    const t0 = performance.now();
    const heap = this.backend.wasm.HEAPU8;
    const mem = new Uint8Array(pool.memory.buffer);
    const byKey = new Map(inputs.map((t) => [t.dataId, t]));
    for (const miss of this.placement.misses) {
      const from = heapOffset(this.backend, byKey.get(miss.key)!);
      mem.set(heap.subarray(from, from + miss.bytes), this.placement.addr.get(miss.key)!);
      pool.stats.copyBytes += miss.bytes;
    }
    pool.stats.copyMs += performance.now() - t0;
  }

  input(info: tf.TensorInfo): number {
    return declared(this.placement.addr, info, 'input');
  }

  output(info: tf.TensorInfo): number {
    return declared(this.placement.addr, info, 'output');
  }

  scratch(): { addr: number; strideFloats: number } {
    if (this.placement.scratch === 0) throw new Error('src/kernels: the job asked for no scratch');
    return { addr: this.placement.scratch, strideFloats: this.strideBytes / 4 };
  }

  run(kind: JobKind, tasks: number, args: number[]): void {
    this.failed = true; // until it returns
    runShared(this.pool, this.threads, kind, tasks, args);
    this.failed = false;
  }

  finish(): void {
    if (this.failed) {
      this.pool.cache!.clear();
      return;
    }
    const t0 = performance.now();
    const heap = this.backend.wasm.HEAPU8;
    const mem = new Uint8Array(this.pool.memory.buffer);
    this.outputs.forEach((out, i) => {
      const from = this.placement.addr.get(out.key)!;
      heap.set(mem.subarray(from, from + out.bytes), heapOffset(this.backend, this.outputInfos[i]));
      this.pool.stats.copyBytes += out.bytes;
    });
    this.pool.stats.copyMs += performance.now() - t0;
    this.pool.cache!.commit(this.outputs, this.placement);
  }
}

let sharing: 'auto' | 'always' = 'auto';

/** 'always' shares every job however small (tests do, to run the threaded path on small tensors); default 'auto'. */
export function setJobSharing(mode: 'auto' | 'always'): void {
  sharing = mode;
}

/** The runner for a kernel of this cost: shared with the kernel threads when that pays, else this thread. */
export function jobRunner(backend: WasmBackendLike, spec: JobSpec): JobRunner {
  const pool = kernelPoolFor(backend);
  if (pool) {
    const threads = pool.threadsNow();
    if (threads > 1) {
      if (!pool.copies) {
        if (sharing === 'always' || spec.ns * (1 - 1 / threads) > MARGIN * SHARE_NS)
          return new SharedHeapRunner(backend, spec, pool, threads);
      } else {
        const inputs = present(spec.inputs);
        const outputs = present(spec.outputs);
        const bytes = [...inputs, ...outputs].reduce((s, t) => s + bytesOf(t), 0);
        if (bytes <= COPY_LIMIT_BYTES) {
          // inputs the pool holds already cost no copy
          const copied =
            pool.cache!.missingBytes(inputs.map((t) => ({ key: t.dataId, bytes: bytesOf(t) }))) +
            outputs.reduce((s, t) => s + bytesOf(t), 0);
          const overhead = SHARE_NS + copied / COPY_BYTES_PER_NS;
          if (sharing === 'always' || spec.ns * (1 - 1 / threads) > MARGIN * overhead)
            return new CopiesRunner(backend, spec, pool, threads);
        }
      }
    }
  }
  return new DirectRunner(backend, spec);
}
