// defines: startKernelThreads, defaultKernelThreads — the fast kernels' helper threads
// in Node (worker_threads), for the CLI, the recipe, the benchmarks and the tests.
//
// Each helper is a worker_threads Worker running the few lines of HELPER below (the
// Node twin of workers/kernel-thread.ts): it instantiates the shared-memory kernels on
// the pool's memory and serves jobs until the pool stops (src/kernels/threads.ts). The
// workers are unref'd, so a process whose work is done exits without stopping them.
//
// The thread count: every core by default (os.availableParallelism()); the
// SPANWRIGHT_THREADS environment variable or a command's --threads lowers (or names) it.

import { availableParallelism } from 'node:os';
import { Worker } from 'node:worker_threads';
import { POOL_BYTES, POOL_DONE, POOL_FAILED } from '../kernels/pool-layout.js';
import { kernelThreadsReady, useKernelThreads } from '../kernels/threads.js';
import type { WasmBackendLike } from '../kernels/wasm-module.js';

// CommonJS, evaluated by worker_threads (eval: true); mirrors runKernelThread
const HELPER = `
const { parentPort } = require('node:worker_threads');
parentPort.once('message', (start) => {
  try {
    const instance = new WebAssembly.Instance(start.module, { env: { memory: start.memory } });
    instance.exports.pool_helper(start.pool, start.index);
  } catch (err) {
    const words = new Int32Array(start.memory.buffer, start.pool, ${POOL_BYTES / 4});
    Atomics.store(words, ${POOL_FAILED}, 1);
    Atomics.notify(words, ${POOL_DONE});
    throw err;
  }
});
`;

let option: number | null = null;

/** The command line's --threads (src/cli/main.ts), ahead of SPANWRIGHT_THREADS. */
export function setThreadsOption(threads: number | null): void {
  option = threads;
}

/** Threads to use: --threads, else SPANWRIGHT_THREADS when a positive integer, else every core. */
export function defaultKernelThreads(): number {
  if (option !== null) return option;
  const env = Number(process.env.SPANWRIGHT_THREADS);
  return Number.isInteger(env) && env > 0 ? env : availableParallelism();
}

/**
 * Gives the fast kernels `threads` threads (this one and threads − 1 workers) and, when
 * `backend` is given, waits until the workers are up. Returns the thread count in use.
 */
export async function startKernelThreads(threads = defaultKernelThreads(), backend?: WasmBackendLike): Promise<number> {
  useKernelThreads((index) => {
    const worker = new Worker(HELPER, { eval: true, name: `spanwright-kernels-${index}` });
    worker.unref();
    return worker;
  }, threads);
  return backend ? kernelThreadsReady(backend) : threads;
}
