// defines: FsCheckpointStore — checkpoints as files in one folder, for the CLI and the recipe.
//
// Layout of the folder (one pair of files per checkpoint id):
//   <id>.safetensors   the blob: weights and optimizer moments, meta in __metadata__
//                      (see src/io/checkpoint-store.ts)
//   <id>.json          its CheckpointSummary {id, meta, bytes, sha256, tensorCount}
// Each file is written to a hidden temporary file in the same folder, flushed to disk and
// renamed over its final name (a rename within one file system is atomic on POSIX). The
// blob goes first and the summary last, so a listed checkpoint always has its whole blob;
// a crash in between leaves a blob without a summary, which `list` ignores.

import { mkdir, readFile, readdir, rm, stat } from 'node:fs/promises';
import { join } from 'node:path';
import { writeFileAtomically as writeAtomically } from './write-files.js';
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
} from '../io/checkpoint-store.js';

export class FsCheckpointStore<M extends CheckpointMeta = CheckpointMeta> implements CheckpointStore<M> {
  constructor(readonly folder: string) {}

  private blobPath(id: string): string {
    return join(this.folder, `${id}.safetensors`);
  }

  private summaryPath(id: string): string {
    return join(this.folder, `${id}.json`);
  }

  async save(ckpt: Checkpoint<M>, opts: { id?: string } = {}): Promise<CheckpointSummary<M>> {
    const id = opts.id ?? newCheckpointId(ckpt.meta.step);
    const { blob, summary } = await encodeCheckpoint(id, ckpt);
    await mkdir(this.folder, { recursive: true });
    await writeAtomically(this.blobPath(id), blob);
    await writeAtomically(this.summaryPath(id), new TextEncoder().encode(`${JSON.stringify(summary, null, 2)}\n`));
    return summary;
  }

  async list(): Promise<CheckpointSummary<M>[]> {
    let names: string[];
    try {
      names = await readdir(this.folder);
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code === 'ENOENT') return [];
      throw err;
    }
    const blobs = new Set(names.filter((n) => n.endsWith('.safetensors')).map((n) => n.slice(0, -'.safetensors'.length)));
    const out: CheckpointSummary<M>[] = [];
    for (const name of names) {
      if (!name.endsWith('.json') || name.startsWith('.')) continue;
      const id = name.slice(0, -'.json'.length);
      if (!blobs.has(id)) continue; // a summary whose blob was removed by hand
      out.push(await this.readSummary(id));
    }
    return out.sort(compareRecency);
  }

  async load(id: string): Promise<Checkpoint<M>> {
    checkId(id);
    const summary = await this.readSummary(id);
    let blob: Uint8Array;
    try {
      blob = new Uint8Array(await readFile(this.blobPath(id)));
    } catch (err) {
      throw new CheckpointError(id, `${this.blobPath(id)}: cannot read (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})`);
    }
    return decodeCheckpoint<M>(id, blob, summary.sha256);
  }

  async delete(id: string): Promise<void> {
    checkId(id);
    // the summary first: once it is gone the checkpoint is no longer listed
    await rm(this.summaryPath(id), { force: true });
    await rm(this.blobPath(id), { force: true });
  }

  /**
   * Removes what an interrupted save left (a killed process never reaches its cleanup):
   * hidden temporary files, and blobs without their summary. Call it only while this run
   * holds the folder (src/cli/out-lock.ts), so no save of another process is in flight.
   * Returns the names removed.
   */
  async sweepOrphans(): Promise<string[]> {
    let names: string[];
    try {
      names = await readdir(this.folder);
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code === 'ENOENT') return [];
      throw err;
    }
    const summaries = new Set(names.filter((n) => n.endsWith('.json') && !n.startsWith('.')).map((n) => n.slice(0, -'.json'.length)));
    const orphans = names.filter(
      (n) =>
        (n.startsWith('.') && n.includes('.tmp-')) || (n.endsWith('.safetensors') && !summaries.has(n.slice(0, -'.safetensors'.length))),
    );
    for (const n of orphans) await rm(join(this.folder, n), { force: true });
    return orphans;
  }

  async prune(opts: PruneOptions): Promise<string[]> {
    const doomed = choosePrunable(await this.list(), opts);
    for (const id of doomed) await this.delete(id);
    return doomed;
  }

  async usage(): Promise<StoreUsage> {
    let bytes = 0;
    for (const s of await this.list()) {
      bytes += (await stat(this.blobPath(s.id))).size + (await stat(this.summaryPath(s.id))).size;
    }
    return { bytes };
  }

  private async readSummary(id: string): Promise<CheckpointSummary<M>> {
    const path = this.summaryPath(id);
    let text: string;
    try {
      text = await readFile(path, 'utf8');
    } catch (err) {
      const code = (err as NodeJS.ErrnoException).code;
      if (code === 'ENOENT') throw new CheckpointError(id, `no such checkpoint in ${this.folder}`);
      throw new CheckpointError(id, `${path}: cannot read (${code ?? (err as Error).message})`);
    }
    let summary: CheckpointSummary<M>;
    try {
      summary = JSON.parse(text) as CheckpointSummary<M>;
    } catch (err) {
      throw new CheckpointError(id, `${path}: not valid JSON (${(err as Error).message})`);
    }
    if (typeof summary !== 'object' || summary === null || typeof summary.sha256 !== 'string' || !/^[0-9a-f]{64}$/.test(summary.sha256)) {
      throw new CheckpointError(id, `${path}: field sha256 is missing or not a SHA-256 hex digest`);
    }
    if (summary.id !== id) throw new CheckpointError(id, `${path}: field id is "${String(summary.id)}", the file name says "${id}"`);
    return summary;
  }
}

/** Write to a temporary file beside `path`, flush it, then rename it over `path`. */
