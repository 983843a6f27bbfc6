// defines: the typed messages between the workbench page and its engine worker, derived
// from the session's use-cases (src/session/reader-session.ts) so that the two cannot
// drift apart.
//
// Page → worker: an EngineRequest, wrapped as {requestId, request}. Every request kind
// but `init` names one ReaderSession method (SESSION_METHODS); the request carries that
// method's argument without its callbacks, and the reply carries its result. The worker
// answers every request exactly once with a `reply` (the result, or an error message),
// and while a training run goes it also sends `run-event` messages (the training loop's
// own LoopEvent, src/train/loop.ts), and while a learning curve is drawn, `curve-event`
// messages (CurveEvent), and while an evaluation in steps goes, `evaluation-progress`
// messages (questions done of all). Everything here is plain data, so it crosses postMessage and
// lands in IndexedDB unchanged. No tensors ever reach the page.
import type { ReaderSession } from '../src/session/reader-session.js';
import type { CurveEvent } from '../src/session/types.js';
import type { LoopEvent } from '../src/train/loop.js';

export type * from '../src/session/types.js';

/** Request kind → the ReaderSession method that answers it. */
export const SESSION_METHODS = {
  'load-base': 'loadBase',
  measure: 'measure',
  'time-steps': 'timeSteps',
  'preview-practice': 'previewPractice',
  practice: 'practice',
  'domain-pretrain': 'domainPretrain',
  'reset-start': 'resetStart',
  train: 'fineTune',
  halt: 'halt',
  'list-checkpoints': 'listCheckpoints',
  'delete-checkpoint': 'deleteCheckpoint',
  'prune-checkpoints': 'pruneCheckpoints',
  'restore-checkpoint': 'restoreCheckpoint',
  'learning-curve': 'learningCurve',
  'cancel-curve': 'cancelCurve',
  evaluate: 'evaluate',
  'evaluate-in-steps': 'evaluateInSteps',
  'cancel-evaluation': 'cancelEvaluation',
  ask: 'ask',
  export: 'exportReader',
  'export-checkpoint': 'exportCheckpoint',
  'torch-job': 'torchJob',
} as const satisfies Record<string, keyof ReaderSession>;

type SessionKind = keyof typeof SESSION_METHODS;
type Method<K extends SessionKind> = ReaderSession[(typeof SESSION_METHODS)[K]];
/** Callbacks stay inside the worker; their calls travel as run-event and curve-event messages. */
type Callbacks = 'onEvent' | 'shouldStop' | 'signal' | 'onProgress';
type ArgsOf<K extends SessionKind> = Method<K> extends (arg: infer A) => unknown ? Omit<A, Callbacks> : Record<never, never>;

export interface EngineReady {
  backend: string;
  /** threads the fast kernels use (src/kernels/threads.ts; 1 = this worker alone) */
  threads: number;
  /** logical cores the browser reports (navigator.hardwareConcurrency) */
  cores: number;
  crossOriginIsolated: boolean;
  /** the project's SIMD kernels (src/kernels) are registered */
  fastKernels: boolean;
  /** they run their relaxed-SIMD build (fused multiply-add in the GEMM) */
  relaxedSimd: boolean;
}

/** What the page sends. */
export type EngineRequest =
  /** start tfjs on wasm, the wasm files served from `wasmBase` (a URL ending in /) */
  | { kind: 'init'; wasmBase: string; /** kernel threads wanted (default: every core) */ threads?: number }
  | { [K in SessionKind]: { kind: K } & ArgsOf<K> }[SessionKind];

/** The result type of each request kind. */
export type EngineResults = { init: EngineReady } & { [K in SessionKind]: Awaited<ReturnType<Method<K>>> };

export type RequestKind = EngineRequest['kind'];
export type RequestOf<K extends RequestKind> = Extract<EngineRequest, { kind: K }>;

/** The envelope of a request. */
export interface RequestMessage {
  requestId: number;
  request: EngineRequest;
}

/** What the worker sends. */
export type WorkerMessage =
  | { type: 'reply'; requestId: number; ok: true; result: EngineResults[RequestKind] }
  | { type: 'reply'; requestId: number; ok: false; error: string }
  | { type: 'run-event'; runId: string; event: LoopEvent }
  | { type: 'curve-event'; curveId: string; event: CurveEvent }
  /** an evaluation in steps has scored `done` of its `total` questions */
  | { type: 'evaluation-progress'; evaluationId: string; done: number; total: number };
