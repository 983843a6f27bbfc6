// defines: IdbCheckpointStore — checkpoints in the browser's IndexedDB (via `idb`).
//
// Layout: one database (default "spanwright-checkpoints", version 1) with two object
// stores, both keyed by checkpoint id:
//   summaries — CheckpointSummary {id, meta, bytes, sha256, tensorCount}
//   blobs     — the checkpoint blob (safetensors bytes, see checkpoint-store.ts) as a Uint8Array
// A save writes both in ONE readwrite transaction, so a failure (quota, a closed tab)
// aborts it whole and the checkpoints saved before stay as they were.

import { openDB, type DBSchema, type IDBPDatabase } from 'idb';
import {
  CheckpointError,
  checkId,
  choosePrunable,
  compareRecency,
  decodeCheckpoint,
  encodeCheckpoint,
  newCheckpointId,
  type Checkpoint,
  type CheckpointMeta,
  type CheckpointStore,
  type CheckpointSummary,
  type PruneOptions,
  type StoreUsage,
} from './checkpoint-store.js';

interface CheckpointDb extends DBSchema {
  summaries: { key: string; value: CheckpointSummary };
  blobs: { key: string; value: Uint8Array };
}

export interface IdbStoreOptions {
  /** database name (default "spanwright-checkpoints"); one per project keeps runs apart */
  dbName?: string;
  /** the origin's storage estimate; defaults to navigator.storage.estimate when present */
  estimate?: () => Promise<{ usage?: number; quota?: number }>;
}

const DB_VERSION = 1;

/** Room left beyond the blob itself before a save is refused: IndexedDB stores some overhead (common practice). */
const QUOTA_HEADROOM = 1.1;

const MB = 1024 * 1024;
const mb = (bytes: number): string => `${(bytes / MB).toFixed(1)} MB`;

export class IdbCheckpointStore<M extends CheckpointMeta = CheckpointMeta> implements CheckpointStore<M> {
  readonly dbName: string;
  private readonly estimate: (() => Promise<{ usage?: number; quota?: number }>) | null;
  private db: Promise<IDBPDatabase<CheckpointDb>> | null = null;

  constructor(options: IdbStoreOptions = {}) {
    this.dbName = options.dbName ?? 'spanwright-checkpoints';
    const storage = (globalThis as { navigator?: { storage?: { estimate?: () => Promise<StorageEstimate> } } }).navigator?.storage;
    this.estimate = options.estimate ?? (storage?.estimate ? () => storage.estimate!() : null);
  }

  private open(): Promise<IDBPDatabase<CheckpointDb>> {
    this.db ??= openDB<CheckpointDb>(this.dbName, DB_VERSION, {
      upgrade(db) {
        if (!db.objectStoreNames.contains('summaries')) db.createObjectStore('summaries');
        if (!db.objectStoreNames.contains('blobs')) db.createObjectStore('blobs');
      },
    });
    return this.db;
  }

  async save(ckpt: Checkpoint<M>, opts: { id?: string } = {}): Promise<CheckpointSummary<M>> {
    const id = opts.id ?? newCheckpointId(ckpt.meta.step);
    const { blob, summary } = await encodeCheckpoint(id, ckpt);

    // 1. refuse early when the origin's quota visibly cannot hold the blob
    if (this.estimate) {
      const { usage, quota } = await this.estimate();
      if (usage !== undefined && quota !== undefined && quota - usage < blob.length * QUOTA_HEADROOM) {
        throw new CheckpointError(
          id,
          `not enough browser storage: the checkpoint needs ${mb(blob.length)}, ${mb(Math.max(0, quota - usage))} of the ${mb(quota)} quota is free; ` +
            'delete older checkpoints (or keep fewer) and try again; the checkpoints already saved are intact',
        );
      }
    }

    // 2. both records in one transaction
    const db = await this.open();
    const tx = db.transaction(['summaries', 'blobs'], 'readwrite');
    try {
      await Promise.all([tx.objectStore('blobs').put(blob, id), tx.objectStore('summaries').put(summary, id), tx.done]);
    } catch (err) {
      try {
        tx.abort();
      } catch {
        // already aborted by the failure itself
      }
      await tx.done.catch(() => undefined);
      if (isQuotaError(err)) {
        throw new CheckpointError(
          id,
          `the browser's storage quota is full (QuotaExceededError) while saving ${mb(blob.length)}; nothing was written and the checkpoints already saved are intact; ` +
            'delete older checkpoints (or keep fewer) and try again',
        );
      }
      throw err;
    }
    return summary as CheckpointSummary<M>;
  }

  async list(): Promise<CheckpointSummary<M>[]> {
    const db = await this.open();
    const all = (await db.getAll('summaries')) as CheckpointSummary<M>[];
    return all.sort(compareRecency);
  }

  async load(id: string): Promise<Checkpoint<M>> {
    checkId(id);
    const db = await this.open();
    const tx = db.transaction(['summaries', 'blobs'], 'readonly');
    const [summary, blob] = await Promise.all([tx.objectStore('summaries').get(id), tx.objectStore('blobs').get(id), tx.done]);
    if (summary === undefined) throw new CheckpointError(id, `no such checkpoint in IndexedDB database "${this.dbName}"`);
    if (blob === undefined) throw new CheckpointError(id, 'its summary is stored but its data is missing; the checkpoint is incomplete');
    return decodeCheckpoint<M>(id, blob, summary.sha256);
  }

  async delete(id: string): Promise<void> {
    checkId(id);
    const db = await this.open();
    const tx = db.transaction(['summaries', 'blobs'], 'readwrite');
    await Promise.all([tx.objectStore('summaries').delete(id), tx.objectStore('blobs').delete(id), tx.done]);
  }

  async prune(opts: PruneOptions): Promise<string[]> {
    const doomed = choosePrunable(await this.list(), opts);
    for (const id of doomed) await this.delete(id);
    return doomed;
  }

  async usage(): Promise<StoreUsage> {
    const bytes = (await this.list()).reduce((sum, s) => sum + s.bytes, 0);
    if (!this.estimate) return { bytes };
    const { usage, quota } = await this.estimate();
    return { bytes, originUsage: usage, originQuota: quota };
  }

  /** Closes the connection (tests, or before deleting the database). */
  async close(): Promise<void> {
    if (this.db) (await this.db).close();
    this.db = null;
  }
}

function isQuotaError(err: unknown): boolean {
  return typeof err === 'object' && err !== null && (err as { name?: unknown }).name === 'QuotaExceededError';
}
