// defines: the workbench's engine worker — the only place in the browser where tensors
// live. It answers the page's EngineRequests (workers/protocol.ts) by calling the core
// (src/): loading a reader, fine-tuning it (src/train/finetune.ts), checkpoints in
// IndexedDB (src/io/idb-store.ts), evaluation, learning curves, questions over passages
// and exports.
//
// Why a worker: the fast kernels compile their WebAssembly synchronously
// (src/kernels/wasm-module.ts), which Chrome allows only off the main thread, and a
// training step blocks for seconds; the page stays responsive and only renders messages.
//
// State held here: the base reader (weights, config, tokenizer, vocabulary files), the
// fine-tuned reader (the last finished run, or a restored checkpoint), the halt flag
// of the running training run and the cancel flag of the running learning curve.
import * as tf from '@tensorflow/tfjs';
import { getThreadsCount, setWasmPaths } from '@tensorflow/tfjs-backend-wasm';
import { mulberry32, shuffleInPlace } from '../src/data/random.js';
import type { QARecord } from '../src/data/record.js';
import { buildWindows, evaluateRecords, predictRecords } from '../src/eval/evaluate.js';
import { loadCheckpointDir } from '../src/io/checkpoint-dir.js';
import { IdbCheckpointStore } from '../src/io/idb-store.js';
import { exportModel } from '../src/io/export.js';
import { quantizeModel } from '../src/io/int8.js';
import { measureInt8Drift } from '../src/io/int8-check.js';
import type { ModelCardInfo } from '../src/io/model-card.js';
import { paramCount, type ReaderConfig } from '../src/model/config.js';
import { ReaderParams } from '../src/model/params.js';
import { fastKernelsActive, registerFastKernels } from '../src/kernels/register.js';
import { Bm25Index } from '../src/retrieve/bm25.js';
import { combineScores } from '../src/retrieve/combine.js';
import { FeatureBuilder } from '../src/text/features.js';
import type { WordPieceTokenizer } from '../src/text/wordpiece.js';
import { fineTune, weightsOf, type RunMeta } from '../src/train/finetune.js';
import type { TrainConfig } from '../src/train/config.js';
import type {
  AnswerView,
  AskResult,
  BaseInfo,
  CurveEvent,
  CurvePoint,
  EngineRequest,
  EngineResults,
  EvaluationResult,
  LearningCurve,
  ModelChoice,
  QuestionView,
  RecordLength,
  RequestKind,
  RequestMessage,
  RequestOf,
  StepTiming,
  TrainEnded,
  WorkerMessage,
} from './protocol.js';

interface BaseReader {
  name: string;
  config: ReaderConfig;
  params: ReaderParams;
  tokenizer: WordPieceTokenizer;
  vocab: { file: 'vocab.txt' | 'tokenizer.json'; text: string };
  /** parameters the checkpoint lacked (initialised afresh); left out of exports when MLM */
  missing: string[];
}

const scope = self as unknown as { postMessage(message: WorkerMessage, transfer?: Transferable[]): void; onmessage: ((e: MessageEvent<RequestMessage>) => void) | null };

const store = new IdbCheckpointStore<RunMeta>({ dbName: 'spanwright-checkpoints' });
let base: BaseReader | null = null;
let tuned: { params: ReaderParams; name: string } | null = null;
/** the run being trained and whether it was asked to halt */
let running: { runId: string; halt: boolean } | null = null;
/** the learning curve being drawn, whether it was asked to stop, and its end */
let curve: { curveId: string; cancel: boolean; ended: Promise<void> } | null = null;

function post(message: WorkerMessage, transfer: Transferable[] = []): void {
  scope.postMessage(message, transfer);
}

function needBase(): BaseReader {
  if (!base) throw new Error('no base reader is loaded: choose one on the Base reader screen first');
  return base;
}

function reader(choice: ModelChoice): { params: ReaderParams; config: ReaderConfig; tokenizer: WordPieceTokenizer; name: string } {
  const b = needBase();
  if (choice === 'base') return { params: b.params, config: b.config, tokenizer: b.tokenizer, name: b.name };
  if (!tuned) throw new Error('there is no fine-tuned reader yet: train one, or restore a checkpoint on the Checkpoints screen');
  return { params: tuned.params, config: b.config, tokenizer: b.tokenizer, name: tuned.name };
}

/**
 * Nested shares of the training questions, by whole passages so no passage is split:
 * 1. passage ids sorted (UTF-16 code-unit order), so the shares depend on the set of
 *    records and not on their order (as src/data/split.ts does);
 * 2. shuffled with mulberry32(seed);
 * 3. each share takes passages from the front of that order until it holds at least
 *    round(share × all) questions (one passage at the least).
 * Every share is a prefix of one order, so each smaller share lies inside each larger
 * one. Records keep their input order.
 */
function nestedShares(records: readonly QARecord[], shares: readonly number[], seed: number): Array<{ share: number; records: QARecord[]; passages: number }> {
  for (const share of shares) {
    if (!(share > 0 && share <= 1)) throw new RangeError(`learning curve: a share must be in (0, 1], got ${share}`);
  }
  if (!Number.isInteger(seed)) throw new RangeError(`learning curve: seed must be a whole number, got ${seed}`);
  // 1. passages and their sizes, in a fixed order
  const size = new Map<string, number>();
  for (const r of records) size.set(r.passageId, (size.get(r.passageId) ?? 0) + 1);
  const passages = [...size.keys()].sort((a, b) => (a < b ? -1 : a > b ? 1 : 0));
  // 2. shuffled by the seed
  shuffleInPlace(passages, mulberry32(seed));
  // 3. a prefix of that order per share
  return shares.map((share) => {
    const target = Math.round(share * records.length);
    const taken = new Set<string>();
    let questions = 0;
    for (const p of passages) {
      if (taken.size > 0 && questions >= target) break;
      taken.add(p);
      questions += size.get(p)!;
    }
    return { share, records: records.filter((r) => taken.has(r.passageId)), passages: taken.size };
  });
}

// ---------------------------------------------------------------------------
// handlers, one per request kind

type Handler<K extends RequestKind> = (req: RequestOf<K>) => Promise<EngineResults[K]> | EngineResults[K];

const handlers: { [K in RequestKind]: Handler<K> } = {
  async init(req) {
    setWasmPaths(req.wasmBase);
    if (!(await tf.setBackend('wasm'))) throw new Error('tfjs could not start its wasm backend');
    await tf.ready();
    registerFastKernels();
    return {
      backend: tf.getBackend(),
      threads: getThreadsCount(),
      crossOriginIsolated: (self as unknown as { crossOriginIsolated?: boolean }).crossOriginIsolated === true,
      fastKernels: fastKernelsActive(),
    };
  },

  'load-base'(req): BaseInfo {
    const loaded = loadCheckpointDir({ ...req.files, names: { config: `${req.name}/config.json`, weights: `${req.name}/model.safetensors`, vocab: `${req.name}/${req.files.vocab.file}` } });
    base?.params.dispose();
    tuned?.params.dispose();
    tuned = null;
    base = { name: req.name, config: loaded.config, params: loaded.params, tokenizer: loaded.tokenizer, vocab: loaded.vocab, missing: loaded.report.missing };
    return {
      name: req.name,
      config: loaded.config,
      params: paramCount(loaded.config),
      vocabSize: loaded.tokenizer.vocabSize,
      notices: loaded.report.notices,
      missing: loaded.report.missing,
      unexpected: loaded.report.unexpected,
    };
  },

  measure(req): RecordLength[] {
    const b = needBase();
    const builder = new FeatureBuilder(b.tokenizer, { maxLen: req.maxLength, stride: req.stride, maxQueryTokens: req.maxQueryLength });
    return req.records.map((r) => ({
      id: r.id,
      tokens: b.tokenizer.encodeFlat(r.question).ids.length + builder.contextEncoding(r.context).ids.length + 3,
      windows: builder.build(r).features.length,
    }));
  },

  async 'time-steps'(req): Promise<StepTiming> {
    const b = needBase();
    const stepMs: number[] = [];
    let updatesPerEpoch = 0;
    let windows = 0;
    const result = await fineTune({
      base: { params: b.params, config: b.config, name: b.name },
      tokenizer: b.tokenizer,
      train: req.train,
      config: req.config,
      datasetHash: 'timing',
      hooks: {
        onEvent: (e) => {
          if (e.type === 'start') [updatesPerEpoch, windows] = [e.plan.updatesPerEpoch, e.plan.features];
          if (e.type === 'progress') stepMs.push(e.stepMs);
        },
        shouldStop: () => stepMs.length >= req.steps,
      },
    });
    result.params.dispose();
    const later = stepMs.length > 1 ? stepMs.slice(1) : stepMs;
    const mean = later.reduce((a, x) => a + x, 0) / Math.max(1, later.length);
    return { stepMs, updatesPerEpoch, windows, epochMs: mean * updatesPerEpoch };
  },

  async train(req): Promise<TrainEnded> {
    // leaving the Evaluation screen cancels its curve: a run started right after waits for the update in hand
    if (curve?.cancel) await curve.ended;
    const b = needBase();
    if (running) throw new Error(`run ${running.runId} is still training; pause or stop it first`);
    if (curve) throw new Error('a learning curve is being drawn; wait for it or cancel it on the Evaluation screen first');
    const run = { runId: req.runId, halt: false };
    running = run;
    let totalUpdates = 0;
    try {
      const result = await fineTune({
        base: { params: b.params, config: b.config, name: b.name },
        tokenizer: b.tokenizer,
        train: req.train,
        validation: req.validation,
        config: req.config,
        datasetHash: req.datasetHash,
        store,
        resumeFrom: req.resumeFrom,
        hooks: {
          onEvent: (event) => {
            if (event.type === 'start') totalUpdates = event.plan.totalUpdates;
            post({ type: 'run-event', runId: req.runId, event });
          },
          shouldStop: () => run.halt,
        },
      });
      tuned?.params.dispose();
      tuned = { params: result.params, name: `fine-tuned run ${req.runId}` };
      return {
        runId: req.runId,
        status: result.outcome.status,
        update: result.outcome.state.trainer.update,
        totalUpdates: totalUpdates || result.plan.totalUpdates,
        metrics: result.metrics,
      };
    } finally {
      running = null;
    }
  },

  halt(req) {
    if (!running || running.runId !== req.runId) return { accepted: false };
    running.halt = true;
    return { accepted: true };
  },

  async 'list-checkpoints'() {
    return { checkpoints: await store.list(), usage: await store.usage() };
  },

  async 'delete-checkpoint'(req) {
    await store.delete(req.id);
    return { deleted: req.id };
  },

  async 'prune-checkpoints'(req) {
    return { deleted: await store.prune({ keepBest: req.keepBest, keepLast: req.keepLast }) };
  },

  async 'restore-checkpoint'(req) {
    const b = needBase();
    const ckpt = await store.load(req.id);
    const { params } = ReaderParams.fromNamed(b.config, weightsOf(ckpt.tensors), { source: `checkpoint ${req.id}` });
    tuned?.params.dispose();
    tuned = { params, name: `checkpoint ${req.id}` };
    return { id: req.id, step: ckpt.meta.step };
  },

  async 'learning-curve'(req): Promise<LearningCurve> {
    const b = needBase();
    if (running) throw new Error(`run ${running.runId} is training; pause or stop it before drawing a learning curve`);
    if (curve) throw new Error('a learning curve is already being drawn');
    if (req.train.length === 0) throw new Error('a learning curve needs training questions: add some on the Data screen');
    if (req.validation.length === 0) throw new Error('a learning curve needs validation questions to score: hold some out on the Data screen');
    const subsets = nestedShares(req.train, req.shares, req.seed);
    let end = () => {};
    const drawing = { curveId: req.curveId, cancel: false, ended: new Promise<void>((resolve) => (end = resolve)) };
    curve = drawing;
    const send = (event: CurveEvent) => post({ type: 'curve-event', curveId: req.curveId, event });
    const features = { maxLen: req.config.maxLength, stride: req.config.stride, maxQueryTokens: req.config.maxQueryLength };
    try {
      // the validation windows are the same for every share: built once
      const windows = buildWindows(b.tokenizer, req.validation, features);
      const points: CurvePoint[] = [];
      const of = subsets.length;
      for (const [index, subset] of subsets.entries()) {
        if (drawing.cancel) break;
        if (base !== b) throw new Error('the base reader changed while the learning curve was drawn');
        send({ type: 'share', index, of, share: subset.share, questions: subset.records.length, passages: subset.passages });
        // a throwaway run: a fresh copy of the base, no store, so no checkpoint is written
        const result = await fineTune({
          base: { params: b.params, config: b.config, name: b.name },
          tokenizer: b.tokenizer,
          train: subset.records,
          config: req.config,
          datasetHash: 'learning-curve',
          hooks: {
            onEvent: (e) => {
              if (e.type === 'progress') send({ type: 'update', index, of, update: e.update, totalUpdates: e.totalUpdates });
            },
            shouldStop: () => drawing.cancel,
          },
        });
        try {
          if (result.outcome.status === 'stopped') break;
          send({ type: 'scoring', index, of });
          const { report } = evaluateRecords({ params: result.params, config: b.config, tokenizer: b.tokenizer }, req.validation, { windows });
          const point: CurvePoint = {
            share: subset.share,
            questions: subset.records.length,
            passages: subset.passages,
            updates: result.outcome.state.trainer.update,
            em: report.summary.em,
            f1: report.summary.f1,
          };
          points.push(point);
          send({ type: 'point', index, of, point });
        } finally {
          result.params.dispose();
        }
      }
      return {
        curveId: req.curveId,
        status: points.length === subsets.length ? 'finished' : 'cancelled',
        trainQuestions: req.train.length,
        validationQuestions: req.validation.length,
        points,
      };
    } finally {
      curve = null;
      end();
    }
  },

  'cancel-curve'(req) {
    if (!curve || curve.curveId !== req.curveId) return { accepted: false };
    curve.cancel = true;
    return { accepted: true };
  },

  evaluate(req): EvaluationResult {
    const r = reader(req.model);
    const { report, decoded } = evaluateRecords(r, req.records, {
      features: { maxLen: req.maxLength, stride: req.stride, maxQueryTokens: req.maxQueryLength },
    });
    const byId = new Map(req.records.map((rec) => [rec.id, rec]));
    const questions = report.questions.map((q): QuestionView => {
      const rec = byId.get(q.id)!;
      const best = decoded.decodings.get(q.id)?.best ?? null;
      return {
        id: q.id,
        passageId: rec.passageId,
        question: rec.question,
        context: rec.context,
        gold: rec.answers.map((a) => ({ start: a.start, end: a.start + a.text.length, text: a.text })),
        unanswerable: rec.unanswerable,
        prediction: q.prediction,
        predictedSpan: q.prediction !== '' && best ? { start: best.charStart, end: best.charEnd } : null,
        exact: q.exact,
        f1: q.f1,
        outcome: q.outcome,
      };
    });
    return {
      model: req.model,
      summary: report.summary,
      counts: report.counts,
      tuned: report.tuned ? { threshold: report.tuned.threshold, summary: report.tuned.summary } : null,
      questions,
    };
  },

  ask(req): AskResult {
    const r = reader(req.model);
    const question = req.question.trim();
    if (question === '') throw new Error('type a question first');
    if (req.passages.length === 0) throw new Error('there are no passages to ask: add some on the Data screen');
    // 1. retrieval: every passage when there is one, else the BM25 top passages
    const retrieved =
      req.passages.length === 1
        ? [{ passageId: req.passages[0]!.id, score: 0 }]
        : new Bm25Index(req.passages).search(question, req.topPassages);
    const text = new Map(req.passages.map((p) => [p.id, p.text]));
    // 2. the reader over each retrieved passage (ids are positions: passage ids may repeat nothing but be long)
    const records: QARecord[] = retrieved.map((hit, i) => ({
      id: `ask-${i}`,
      passageId: hit.passageId,
      context: text.get(hit.passageId)!,
      question,
      answers: [],
      unanswerable: true,
    }));
    const decoded = predictRecords(r, records, { features: { maxLen: req.maxLength, stride: req.stride, maxQueryTokens: req.maxQueryLength } });
    // 3. candidates from every passage, combined with the retriever's score
    const candidates: Array<Omit<AnswerView, 'combinedScore'>> = [];
    let noAnswer = true;
    records.forEach((rec, i) => {
      const d = decoded.decodings.get(rec.id);
      if (!d) return;
      if (d.prediction !== '') noAnswer = false;
      for (const c of d.nBest.slice(0, req.topAnswers)) {
        const from = Math.max(0, c.charStart - 160);
        const to = Math.min(rec.context.length, c.charEnd + 160);
        candidates.push({
          passageId: rec.passageId,
          text: c.text,
          start: c.charStart - from,
          end: c.charEnd - from,
          readerScore: c.score,
          retrieverScore: retrieved[i]!.score,
          context: rec.context.slice(from, to),
          contextStart: from,
        });
      }
    });
    const answers = candidates.length > 0 ? combineScores(candidates).slice(0, req.topAnswers) : [];
    return { answers, retrieved, noAnswer };
  },

  export(req) {
    const b = needBase();
    const r = reader(req.model);
    const named = r.params.toNamed();
    // a head the base checkpoint lacked was initialised only to build the engine: it does not travel
    const freshMlm = b.missing.filter((name) => name.startsWith('cls.'));
    for (const name of freshMlm) named.delete(name);
    const quantized = req.int8 ? quantizeModel(named) : undefined;
    const drift = quantized ? measureInt8Drift(b.config, named, quantized) : undefined;
    const card: Omit<ModelCardInfo, 'config' | 'files' | 'int8'> = {
      baseModel: b.name,
      date: new Date().toISOString(),
      notes: [
        `exported from the Spanwright workbench: ${r.name}`,
        ...(freshMlm.length > 0 ? ['the export holds no MLM head (cls.predictions.*), as the base had none'] : []),
      ],
    };
    if (req.card.dataset) card.dataset = req.card.dataset;
    if (req.card.settings) card.settings = req.card.settings as TrainConfig;
    const scores = req.model === 'tuned' ? req.card.metrics?.tuned : req.card.metrics?.base;
    if (scores) card.metrics = { withoutThreshold: scores };
    const { files } = exportModel({
      config: b.config,
      tensors: named,
      vocab: b.vocab,
      fp16: req.fp16,
      int8: quantized,
      onnx: req.onnx,
      card: { ...card, int8: drift ? { drift } : undefined },
    });
    return { files, notes: card.notes ?? [] };
  },
};

async function handle(request: EngineRequest): Promise<{ result: EngineResults[RequestKind]; transfer: Transferable[] }> {
  const handler = handlers[request.kind] as Handler<RequestKind>;
  const result = await handler(request as RequestOf<RequestKind>);
  // each buffer once: two files may be views of one buffer
  const transfer: Transferable[] =
    request.kind === 'export' ? [...new Set((result as EngineResults['export']).files.map((f) => f.bytes.buffer as ArrayBuffer))] : [];
  return { result, transfer };
}

scope.onmessage = (e: MessageEvent<RequestMessage>) => {
  const { requestId, request } = e.data;
  handle(request).then(
    ({ result, transfer }) => post({ type: 'reply', requestId, ok: true, result }, transfer),
    (err: unknown) => post({ type: 'reply', requestId, ok: false, error: err instanceof Error ? err.message : String(err) }),
  );
};
