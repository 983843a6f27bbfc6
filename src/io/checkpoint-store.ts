// defines: Checkpoint, CheckpointMeta, CheckpointSummary, CheckpointStore (the one storage
// interface the training loop writes through), CheckpointError, encodeCheckpoint /
// decodeCheckpoint (the byte layout both stores share), sha256Hex, choosePrunable,
// newCheckpointId.
//
// A checkpoint is {meta, weights, optimizer: {m, v, step} | null}. It is stored as ONE
// blob: a safetensors file (src/io/safetensors.ts), all F32, whose tensors are the
// weights under their own names and the moments under `adam.m.<name>` / `adam.v.<name>`
// (the only place that prefix exists: encodeCheckpoint and decodeCheckpoint), and whose
// `__metadata__` holds the meta as JSON under "spanwright.checkpoint" and the moments'
// step counts under "spanwright.optimizer-step". Beside the blob each store keeps
// a small summary (id, meta, byte size, SHA-256 of the blob) for listing without reading
// tensors. On load the blob's SHA-256 is recomputed and must equal the summary's; the
// meta is then read from the blob itself, so a damaged summary cannot mislead a resume.

import { SafetensorsError, namedToSafetensors, readSafetensors } from './safetensors.js';
import type { NamedTensors } from './tensors.js';

/** An optimizer's state, keyed by parameter name (AdamW's, src/train/adamw.ts). */
export interface OptimizerState {
  /** first moments */
  m: NamedTensors;
  /** second moments */
  v: NamedTensors;
  /** updates each parameter has had */
  step: Record<string, number>;
}

/** Where the training loop was, in plain data. The trainer may extend it (see Checkpoint<M>). */
export interface CheckpointMeta {
  /** optimizer updates completed (a trainer's own run state, in its meta, says where its data and schedule stand) */
  step: number;
  /** the run's settings as plain data (TrainConfig, ReaderConfig, …) */
  runConfig: object;
  /** hash of the training data (src/data hashing), to refuse a resume on other data */
  datasetHash: string;
  /** measurements at this step; `validationF1` (0–100) ranks checkpoints for keepBest */
  metrics: { validationF1?: number; validationEM?: number; loss?: number; [name: string]: number | undefined };
  /** ISO 8601 time of saving; filled by encodeCheckpoint when absent */
  savedAt?: string;
  /** a short human label ("best", "end of epoch 2") */
  label?: string;
}

/** What a store saves: plain-data meta, the weights, and the optimizer's state (null when none is kept). */
export interface Checkpoint<M extends CheckpointMeta = CheckpointMeta> {
  meta: M;
  weights: NamedTensors;
  optimizer: OptimizerState | null;
}

const M_PREFIX = 'adam.m.';
const V_PREFIX = 'adam.v.';
/** The metadata key of the moments' step counts. */
export const OPTIMIZER_STEP_KEY = 'spanwright.optimizer-step';

/** A listed checkpoint: enough to choose one without reading its tensors. */
export interface CheckpointSummary<M extends CheckpointMeta = CheckpointMeta> {
  id: string;
  meta: M;
  /** size of the stored blob */
  bytes: number;
  /** SHA-256 of the blob, lowercase hex */
  sha256: string;
  /** number of tensors in the blob (weights and moments) */
  tensorCount: number;
}

export interface PruneOptions {
  /** keep this many checkpoints with the highest metrics.validationF1 (none when absent) */
  keepBest?: number;
  /** keep this many most recent checkpoints by step (none when absent) */
  keepLast?: number;
  /** prune only among the checkpoints of this dataset hash; the others are left alone */
  datasetHash?: string;
  /** prune only among the checkpoints whose meta carries this `runId` (a trainer's field, e.g. RunMeta's) */
  runId?: string;
}

export interface StoreUsage {
  /** bytes this store's checkpoints take */
  bytes: number;
  /** what the browser reports for the whole origin (navigator.storage.estimate), when known */
  originUsage?: number;
  originQuota?: number;
}

export interface CheckpointStore<M extends CheckpointMeta = CheckpointMeta> {
  /** Saves atomically: either the whole checkpoint is stored, or nothing changes. */
  save(ckpt: Checkpoint<M>, opts?: { id?: string }): Promise<CheckpointSummary<M>>;
  /** Every complete checkpoint, oldest step first. */
  list(): Promise<CheckpointSummary<M>[]>;
  /** Reads and verifies one checkpoint; throws CheckpointError on a missing id or a bad checksum. */
  load(id: string): Promise<Checkpoint<M>>;
  /** Removes one checkpoint; removing an absent id is not an error. */
  delete(id: string): Promise<void>;
  /** Deletes all but the kept checkpoints; returns the ids deleted. */
  prune(opts: PruneOptions): Promise<string[]>;
  usage?(): Promise<StoreUsage>;
}

export class CheckpointError extends Error {
  constructor(
    readonly checkpointId: string,
    detail: string,
  ) {
    super(`checkpoint "${checkpointId}": ${detail}`);
    this.name = 'CheckpointError';
  }
}

/** The metadata key the meta JSON travels under inside the blob. */
export const META_KEY = 'spanwright.checkpoint';

/** SHA-256 of bytes as lowercase hex (Web Crypto; present in browsers and Node ≥ 19). */
export async function sha256Hex(bytes: Uint8Array): Promise<string> {
  const digest = await crypto.subtle.digest('SHA-256', bytes as Uint8Array<ArrayBuffer>);
  return Array.from(new Uint8Array(digest), (b) => b.toString(16).padStart(2, '0')).join('');
}

/** An id that sorts by step: `step-00000120-<time>` (time in base 36 keeps two saves of one step apart). */
export function newCheckpointId(step: number, now = Date.now()): string {
  return `step-${String(step).padStart(8, '0')}-${now.toString(36)}`;
}

/** Ids are used as file names and keys: letters, digits, `.`, `_`, `-` only. */
export function checkId(id: string): void {
  if (!/^[A-Za-z0-9._-]{1,128}$/.test(id) || id.startsWith('.')) {
    throw new CheckpointError(id, 'an id may hold only letters, digits, ".", "_" and "-" (at most 128, not starting with ".")');
  }
}

/** Checkpoint → one blob plus its summary. The meta must survive JSON unchanged. */
export async function encodeCheckpoint<M extends CheckpointMeta>(
  id: string,
  ckpt: Checkpoint<M>,
): Promise<{ blob: Uint8Array; summary: CheckpointSummary<M> }> {
  checkId(id);
  const meta = { ...ckpt.meta, savedAt: ckpt.meta.savedAt ?? new Date().toISOString() } as M;
  checkMeta(id, meta);
  let json: string;
  try {
    json = JSON.stringify(meta);
  } catch (err) {
    throw new CheckpointError(id, `meta is not plain data (${(err as Error).message})`);
  }
  const tensors: NamedTensors = new Map(ckpt.weights);
  for (const name of ckpt.weights.keys()) {
    if (name.startsWith(M_PREFIX) || name.startsWith(V_PREFIX))
      throw new CheckpointError(id, `weight "${name}": names starting with "adam." are kept for the optimizer's moments`);
  }
  const metadata: Record<string, string> = { [META_KEY]: json };
  if (ckpt.optimizer !== null) {
    for (const [name, t] of ckpt.optimizer.m) tensors.set(M_PREFIX + name, t);
    for (const [name, t] of ckpt.optimizer.v) tensors.set(V_PREFIX + name, t);
    metadata[OPTIMIZER_STEP_KEY] = JSON.stringify(ckpt.optimizer.step);
  }
  const blob = namedToSafetensors(tensors, { dtype: 'F32', metadata });
  const summary: CheckpointSummary<M> = {
    id,
    meta: JSON.parse(json) as M,
    bytes: blob.length,
    sha256: await sha256Hex(blob),
    tensorCount: tensors.size,
  };
  return { blob, summary };
}

/** Blob → checkpoint, after checking its SHA-256 against the one stored at save time. */
export async function decodeCheckpoint<M extends CheckpointMeta>(
  id: string,
  blob: Uint8Array,
  expectedSha256: string,
): Promise<Checkpoint<M>> {
  const actual = await sha256Hex(blob);
  if (actual !== expectedSha256) {
    throw new CheckpointError(
      id,
      `checksum mismatch: stored SHA-256 ${expectedSha256}, the data now hashes to ${actual}; the checkpoint is damaged (pick another one to resume from)`,
    );
  }
  let read: ReturnType<typeof readSafetensors>;
  try {
    read = readSafetensors(blob, `checkpoint "${id}"`);
  } catch (err) {
    if (err instanceof SafetensorsError) throw new CheckpointError(id, err.message);
    throw err;
  }
  const json = read.metadata[META_KEY];
  if (json === undefined) throw new CheckpointError(id, `the blob has no "${META_KEY}" metadata; it was not written by a checkpoint store`);
  let meta: M;
  try {
    meta = JSON.parse(json) as M;
  } catch (err) {
    throw new CheckpointError(id, `the stored meta is not valid JSON (${(err as Error).message})`);
  }
  return { meta, ...splitTensors(id, read.tensors, read.metadata[OPTIMIZER_STEP_KEY], meta) };
}

/**
 * The blob's tensors → weights and moments. Checkpoints saved before the moments' step
 * counts moved into the blob's metadata carried them in the meta (`optimizerSteps` of a
 * fine-tuning run, `adamSteps` of the base recipe); those are read too.
 */
function splitTensors(
  id: string,
  tensors: NamedTensors,
  stepJson: string | undefined,
  meta: CheckpointMeta,
): { weights: NamedTensors; optimizer: OptimizerState | null } {
  const weights: NamedTensors = new Map();
  const m: NamedTensors = new Map();
  const v: NamedTensors = new Map();
  for (const [name, t] of tensors) {
    if (name.startsWith(M_PREFIX)) m.set(name.slice(M_PREFIX.length), t);
    else if (name.startsWith(V_PREFIX)) v.set(name.slice(V_PREFIX.length), t);
    else weights.set(name, t);
  }
  if (m.size === 0 && v.size === 0) return { weights, optimizer: null };
  let step: unknown;
  const legacy = meta as { optimizerSteps?: unknown; adamSteps?: unknown };
  if (stepJson !== undefined) {
    try {
      step = JSON.parse(stepJson);
    } catch (err) {
      throw new CheckpointError(id, `the stored "${OPTIMIZER_STEP_KEY}" is not valid JSON (${(err as Error).message})`);
    }
  } else step = legacy.optimizerSteps ?? legacy.adamSteps;
  if (step === null || typeof step !== 'object')
    throw new CheckpointError(id, "the optimizer's moments are stored without their step counts");
  return { weights, optimizer: { m, v, step: step as Record<string, number> } };
}

function checkMeta(id: string, meta: CheckpointMeta): void {
  const fail = (field: string, detail: string): never => {
    throw new CheckpointError(id, `meta field ${field}: ${detail}`);
  };
  const nonNegativeInteger = (field: string, v: unknown): void => {
    if (typeof v !== 'number' || !Number.isSafeInteger(v) || v < 0) fail(field, `must be a non-negative integer, got ${JSON.stringify(v)}`);
  };
  nonNegativeInteger('step', meta.step);
  if (typeof meta.datasetHash !== 'string') fail('datasetHash', 'must be a string');
  if (meta.runConfig === null || typeof meta.runConfig !== 'object') fail('runConfig', 'must be an object');
  if (meta.metrics === null || typeof meta.metrics !== 'object') fail('metrics', 'must be an object');
  for (const [k, v] of Object.entries(meta.metrics)) {
    if (v !== undefined && (typeof v !== 'number' || !Number.isFinite(v)))
      fail(`metrics.${k}`, `must be a finite number, got ${JSON.stringify(v)}`);
  }
}

/**
 * The ids `prune` deletes: all but the `keepBest` highest validation F1 (a checkpoint
 * without one ranks lowest; ties go to the later step) and the `keepLast` latest steps —
 * among the checkpoints of `datasetHash` and of `runId` when given, the others never deleted.
 */
export function choosePrunable(all: readonly CheckpointSummary[], opts: PruneOptions): string[] {
  const count = (v: number | undefined, field: string): number => {
    if (v === undefined) return 0;
    if (!Number.isSafeInteger(v) || v < 0) throw new Error(`prune: ${field} must be a non-negative integer, got ${v}`);
    return v;
  };
  const keepBest = count(opts.keepBest, 'keepBest');
  const keepLast = count(opts.keepLast, 'keepLast');
  if (opts.keepBest === undefined && opts.keepLast === undefined) {
    throw new Error('prune: give keepBest, keepLast or both (pruning with neither would delete every checkpoint)');
  }
  const summaries = all.filter(
    (s) =>
      (opts.datasetHash === undefined || s.meta.datasetHash === opts.datasetHash) &&
      (opts.runId === undefined || (s.meta as { runId?: unknown }).runId === opts.runId),
  );
  const byRecency = [...summaries].sort(compareRecency).reverse();
  const f1 = (s: CheckpointSummary): number => s.meta.metrics.validationF1 ?? -Infinity;
  const byF1 = [...summaries].sort((a, b) => f1(b) - f1(a) || compareRecency(b, a));
  const kept = new Set<string>([...byRecency.slice(0, keepLast), ...byF1.slice(0, keepBest)].map((s) => s.id));
  return summaries.filter((s) => !kept.has(s.id)).map((s) => s.id);
}

/** Older first: by step, then by save time, then by id. */
export function compareRecency(a: CheckpointSummary, b: CheckpointSummary): number {
  return a.meta.step - b.meta.step || (a.meta.savedAt ?? '').localeCompare(b.meta.savedAt ?? '') || a.id.localeCompare(b.id);
}
