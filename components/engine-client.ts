// defines: EngineClient — the page's typed handle on the engine worker
// (workers/engine-worker.ts): `call(request)` resolves with that request kind's result
// (workers/protocol.ts), `onRunEvent` hears the training loop's events and
// `onCurveEvent` a learning curve's progress, `onEvaluationProgress` an evaluation's. The page never
// imports tfjs; everything it knows about the model arrives through here.
import type { LoopEvent } from '../src/train/loop.js';
import type { CurveEvent, EngineResults, RequestKind, RequestMessage, RequestOf, WorkerMessage } from '../workers/protocol.js';

export type RunEventListener = (runId: string, event: LoopEvent) => void;
export type CurveEventListener = (curveId: string, event: CurveEvent) => void;
export type EvaluationProgressListener = (evaluationId: string, done: number, total: number) => void;

export class EngineClient {
  private readonly worker: Worker;
  private nextId = 1;
  private readonly pending = new Map<number, { resolve(v: unknown): void; reject(e: Error): void }>();
  private readonly listeners = new Set<RunEventListener>();
  private readonly curveListeners = new Set<CurveEventListener>();
  private readonly evaluationListeners = new Set<EvaluationProgressListener>();

  constructor() {
    this.worker = new Worker(new URL('../workers/engine-worker.ts', import.meta.url), { type: 'module', name: 'spanwright-engine' });
    this.worker.onmessage = (e: MessageEvent<WorkerMessage>) => this.receive(e.data);
    // A reload or navigation away ends the worker at once rather than leaving the browser
    // to tear it down: a checkpoint save it had in flight then aborts promptly instead of
    // holding up the next page's checkpoint load (DEVELOPERS.md, "Known problems").
    // A page kept in the back/forward cache (persisted) keeps its engine.
    window.addEventListener('pagehide', (e: PageTransitionEvent) => {
      if (!e.persisted) this.worker.terminate();
    });
    this.worker.onerror = (e: ErrorEvent) => {
      const error = new Error(`the engine worker failed: ${e.message || 'it could not start'}`);
      for (const p of this.pending.values()) p.reject(error);
      this.pending.clear();
    };
  }

  call<K extends RequestKind>(request: RequestOf<K>, transfer: Transferable[] = []): Promise<EngineResults[K]> {
    const requestId = this.nextId++;
    const message: RequestMessage = { requestId, request };
    return new Promise<EngineResults[K]>((resolve, reject) => {
      this.pending.set(requestId, { resolve: resolve as (v: unknown) => void, reject });
      this.worker.postMessage(message, transfer);
    });
  }

  onRunEvent(listener: RunEventListener): () => void {
    this.listeners.add(listener);
    return () => this.listeners.delete(listener);
  }

  onCurveEvent(listener: CurveEventListener): () => void {
    this.curveListeners.add(listener);
    return () => this.curveListeners.delete(listener);
  }

  onEvaluationProgress(listener: EvaluationProgressListener): () => void {
    this.evaluationListeners.add(listener);
    return () => this.evaluationListeners.delete(listener);
  }

  private receive(message: WorkerMessage): void {
    if (message.type === 'evaluation-progress') {
      for (const l of this.evaluationListeners) l(message.evaluationId, message.done, message.total);
      return;
    }
    if (message.type === 'run-event') {
      for (const l of this.listeners) l(message.runId, message.event);
      return;
    }
    if (message.type === 'curve-event') {
      for (const l of this.curveListeners) l(message.curveId, message.event);
      return;
    }
    const p = this.pending.get(message.requestId);
    if (!p) return;
    this.pending.delete(message.requestId);
    if (message.ok) p.resolve(message.result);
    else p.reject(new Error(message.error));
  }
}
