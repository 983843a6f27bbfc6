// defines: the engine benchmark in the browser — the workbench's own setup (tfjs on its
// threaded-simd wasm build, the fast kernels, their helper threads nested in this worker
// as in workers/engine-worker.ts) timing the same training steps as the Node bench
// (../step-timing.ts) on one thread and on every core.
import * as tf from '@tensorflow/tfjs';
import { setWasmPaths } from '@tensorflow/tfjs-backend-wasm';
import { registerFastKernels } from '../../../src/kernels/register.js';
import { kernelThreadsReady, useKernelThreads } from '../../../src/kernels/threads.js';
import { fastModuleFor, isShared, heapMemory, type WasmBackendLike } from '../../../src/kernels/wasm-module.js';
import { presetConfig } from '../../../src/model/config.js';
import { CONFIGS, gemmGflops, timeSteps, VOCAB } from '../step-timing.js';

export interface BrowserBenchOptions {
  steps: number;
  only: string | null;
}

export interface BrowserBenchResult {
  userAgent: string;
  threads: number;
  relaxedSimd: boolean;
  /** the tfjs heap is shared, so the kernels work on it in place */
  inPlace: boolean;
  gemmGflops1: number;
  gemmGflopsN: number;
  configs: { name: string; stepMs1: number; stepMsN: number }[];
}

const scope = self as unknown as {
  onmessage: ((e: MessageEvent<BrowserBenchOptions>) => void) | null;
  postMessage(message: unknown): void;
};

async function run(options: BrowserBenchOptions): Promise<BrowserBenchResult> {
  setWasmPaths(new URL('tfjs-wasm/', new URL('..', self.location.href)).href);
  if (!(await tf.setBackend('wasm'))) throw new Error('tfjs could not start its wasm backend');
  await tf.ready();
  registerFastKernels();
  const backend = tf.backend() as unknown as WasmBackendLike;
  useKernelThreads(
    (index) =>
      new Worker(new URL('../../../workers/kernel-thread.ts', import.meta.url), { type: 'module', name: `spanwright-kernels-${index}` }),
    navigator.hardwareConcurrency || 1,
  );
  const threads = await kernelThreadsReady(backend);
  const gemmGflops1 = gemmGflops(1);
  const gemmGflopsN = gemmGflops(threads);
  const configs: BrowserBenchResult['configs'] = [];
  for (const bc of CONFIGS) {
    if (options.only && options.only !== bc.name) continue;
    const [stepMs1, stepMsN] = timeSteps(presetConfig(bc.preset, VOCAB), bc, 2, options.steps, [1, threads]);
    configs.push({ name: bc.name, stepMs1, stepMsN });
  }
  return {
    userAgent: navigator.userAgent,
    threads,
    relaxedSimd: fastModuleFor(backend).build.relaxed,
    inPlace: isShared(heapMemory(backend)),
    gemmGflops1,
    gemmGflopsN,
    configs,
  };
}

scope.onmessage = (e) => {
  run(e.data).then(
    (result) => scope.postMessage({ ok: true, result }),
    (err: unknown) => scope.postMessage({ ok: false, error: err instanceof Error ? err.message : String(err) }),
  );
};
