// defines: the workbench's engine worker — the only place in the browser where tensors
// live. It starts tfjs on wasm with the project's fast kernels, then maps each request of
// the page (workers/protocol.ts) to the ReaderSession method of the same use-case
// (src/session/reader-session.ts), with checkpoints in IndexedDB (src/io/idb-store.ts).
// Progress callbacks become `run-event` and `curve-event` messages.
//
// Why a worker: the fast kernels compile their WebAssembly synchronously
// (src/kernels/wasm-module.ts), which Chrome allows only off the main thread, and a
// training step blocks for seconds; the page stays responsive and only renders messages.
// The kernels' helper threads (src/kernels/threads.ts) are workers nested in this one,
// sharing tfjs's heap.
import * as tf from '@tensorflow/tfjs';
import { setWasmPaths } from '@tensorflow/tfjs-backend-wasm';
import { IdbCheckpointStore } from '../src/io/idb-store.js';
import { fastKernelsActive, registerFastKernels } from '../src/kernels/register.js';
import { kernelThreadsReady, useKernelThreads } from '../src/kernels/threads.js';
import { fastModuleFor, type WasmBackendLike } from '../src/kernels/wasm-module.js';
import { ReaderSession } from '../src/session/reader-session.js';
import { jobProgram } from './job-program.js';
import type { RunMeta } from '../src/train/finetune.js';
import {
  SESSION_METHODS,
  type EngineReady,
  type EngineRequest,
  type EngineResults,
  type RequestKind,
  type RequestMessage,
  type WorkerMessage,
} from './protocol.js';

const scope = self as unknown as {
  postMessage(message: WorkerMessage, transfer?: Transferable[]): void;
  onmessage: ((e: MessageEvent<RequestMessage>) => void) | null;
};

const session = new ReaderSession(new IdbCheckpointStore<RunMeta>({ dbName: 'spanwright-checkpoints' }), { jobProgram });

function post(message: WorkerMessage, transfer: Transferable[] = []): void {
  scope.postMessage(message, transfer);
}

/** A helper thread of the fast kernels: a nested worker from this app's own origin (workers/kernel-thread.ts). */
function spawnKernelThread(index: number): Worker {
  return new Worker(new URL('./kernel-thread.ts', import.meta.url), { type: 'module', name: `spanwright-kernels-${index}` });
}

async function init(wasmBase: string, threads: number | undefined): Promise<EngineReady> {
  setWasmPaths(wasmBase);
  if (!(await tf.setBackend('wasm'))) throw new Error('tfjs could not start its wasm backend');
  await tf.ready();
  registerFastKernels();
  // every core unless the page asks for fewer; shared memory needs cross-origin isolation
  const cores = navigator.hardwareConcurrency || 1;
  const backend = tf.backend() as unknown as WasmBackendLike;
  useKernelThreads(spawnKernelThread, threads ?? cores);
  return {
    backend: tf.getBackend(),
    threads: await kernelThreadsReady(backend),
    cores,
    crossOriginIsolated: (self as unknown as { crossOriginIsolated?: boolean }).crossOriginIsolated === true,
    fastKernels: fastKernelsActive(),
    relaxedSimd: fastModuleFor(backend).build.relaxed,
  };
}

/** The request's argument with the callbacks its use-case reports through. */
function withCallbacks(request: Exclude<EngineRequest, { kind: 'init' }>): object {
  const { kind: _kind, ...args } = request;
  if (request.kind === 'train' || request.kind === 'practice' || request.kind === 'domain-pretrain') {
    const runId = request.runId;
    return { ...args, onEvent: (event: import('../src/train/loop.js').LoopEvent) => post({ type: 'run-event', runId, event }) };
  }
  if (request.kind === 'evaluate-in-steps') {
    const evaluationId = request.evaluationId;
    return { ...args, onProgress: (done: number, total: number) => post({ type: 'evaluation-progress', evaluationId, done, total }) };
  }
  if (request.kind === 'learning-curve') {
    const curveId = request.curveId;
    return { ...args, onEvent: (event: import('./protocol.js').CurveEvent) => post({ type: 'curve-event', curveId, event }) };
  }
  return args;
}

async function handle(request: EngineRequest): Promise<{ result: EngineResults[RequestKind]; transfer: Transferable[] }> {
  if (request.kind === 'init') return { result: await init(request.wasmBase, request.threads), transfer: [] };
  const method = session[SESSION_METHODS[request.kind]] as (arg: object) => unknown;
  const result = (await method.call(session, withCallbacks(request))) as EngineResults[RequestKind];
  // each buffer once: two files may be views of one buffer
  const transfer: Transferable[] =
    request.kind === 'export' || request.kind === 'export-checkpoint' || request.kind === 'torch-job'
      ? [...new Set((result as EngineResults['export']).files.map((f) => f.bytes.buffer as ArrayBuffer))]
      : [];
  return { result, transfer };
}

scope.onmessage = (e: MessageEvent<RequestMessage>) => {
  const { requestId, request } = e.data;
  handle(request).then(
    ({ result, transfer }) => post({ type: 'reply', requestId, ok: true, result }, transfer),
    (err: unknown) => post({ type: 'reply', requestId, ok: false, error: err instanceof Error ? err.message : String(err) }),
  );
};
