// The shared CheckpointStore suite against both stores, plus what only one store does:
// IndexedDB (on fake-indexeddb, an implementation of the W3C Indexed Database API in
// Node) refusing a save on a full quota without harming earlier checkpoints, and the
// file store's atomic writes.
import 'fake-indexeddb/auto';
import { mkdtemp, readFile, readdir, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { deleteDB, openDB } from 'idb';
import { afterEach, describe, expect, it } from 'vitest';
import { FsCheckpointStore } from '../../src/node/fs-store.js';
import { CheckpointError, choosePrunable, decodeCheckpoint, encodeCheckpoint, META_KEY, sha256Hex } from '../../src/io/checkpoint-store.js';
import { namedToSafetensors } from '../../src/io/safetensors.js';
import { IdbCheckpointStore } from '../../src/io/idb-store.js';
import { checkpointStoreSuite, sampleCheckpoint } from './checkpoint-store-suite.js';

let dbCount = 0;

checkpointStoreSuite('IndexedDB store', async () => {
  const dbName = `test-ckpt-${dbCount++}`;
  const store = new IdbCheckpointStore({ dbName });
  return {
    store,
    async corrupt(id) {
      const db = await openDB(dbName, 1);
      const blob = (await db.get('blobs', id)) as Uint8Array;
      blob[blob.length - 1] ^= 0x01;
      await db.put('blobs', blob, id);
      db.close();
    },
    async cleanup() {
      await store.close();
      await deleteDB(dbName);
    },
  };
});

checkpointStoreSuite('file-system store', async () => {
  const folder = await mkdtemp(join(tmpdir(), 'spanwright-ckpt-'));
  const store = new FsCheckpointStore(join(folder, 'checkpoints'));
  return {
    store,
    async corrupt(id) {
      const path = join(folder, 'checkpoints', `${id}.safetensors`);
      const bytes = new Uint8Array(await readFile(path));
      bytes[bytes.length - 1] ^= 0x01;
      await writeFile(path, bytes);
    },
    cleanup: () => rm(folder, { recursive: true, force: true }),
  };
});

describe('SHA-256', () => {
  it('matches the FIPS 180-4 example for "abc"', async () => {
    // FIPS 180-4 / NIST example "abc" (from memory)
    expect(await sha256Hex(new TextEncoder().encode('abc'))).toBe('ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad');
  });

  it('a checkpoint blob decodes only with its own checksum', async () => {
    const { blob, summary } = await encodeCheckpoint('x', sampleCheckpoint(5, 10));
    expect((await decodeCheckpoint('x', blob, summary.sha256)).meta.step).toBe(5);
    await expect(decodeCheckpoint('x', blob, '0'.repeat(64))).rejects.toThrow(/checksum mismatch/);
  });

  it('prune choices: ties in F1 keep the later step; unranked checkpoints rank last', async () => {
    const summaries = await Promise.all(
      [
        [1, 50],
        [2, 50],
        [3, undefined],
      ].map(async ([step, f1], i) => (await encodeCheckpoint(`s${i}`, sampleCheckpoint(step!, f1))).summary),
    );
    expect(choosePrunable(summaries, { keepBest: 1 })).toEqual(['s0', 's2']);
    expect(() => choosePrunable(summaries, { keepLast: -1 })).toThrow(/keepLast must be a non-negative integer/);
  });

  it('prunes only among one dataset hash when asked, leaving the others', async () => {
    const summaries = await Promise.all(
      [1, 2, 3, 4].map(async (step, i) => {
        const ckpt = sampleCheckpoint(step, undefined);
        ckpt.meta.datasetHash = i < 2 ? 'practice' : 'labelled';
        return (await encodeCheckpoint(`s${i}`, ckpt)).summary;
      }),
    );
    expect(choosePrunable(summaries, { keepLast: 1, datasetHash: 'labelled' })).toEqual(['s2']);
    expect(choosePrunable(summaries, { keepLast: 1 })).toEqual(['s0', 's1', 's2']);
  });
});

describe('the checkpoint layout', () => {
  it('keeps weights and the optimizer apart: {weights, optimizer: {m, v, step}}', async () => {
    const ckpt = sampleCheckpoint(4);
    const { blob, summary } = await encodeCheckpoint('layout', ckpt);
    const back = await decodeCheckpoint('layout', blob, summary.sha256);
    expect([...back.weights.keys()]).toEqual(['qa_outputs.weight']);
    expect([...back.optimizer!.m.keys()]).toEqual(['qa_outputs.weight']);
    expect(back.optimizer!.step).toEqual({ 'qa_outputs.weight': 4 });
    // no optimizer: a checkpoint of weights only
    const bare = await encodeCheckpoint('bare', { ...ckpt, optimizer: null });
    expect((await decodeCheckpoint('bare', bare.blob, bare.summary.sha256)).optimizer).toBeNull();
    // a weight may not take the moments' names
    const clash = { ...ckpt, weights: new Map([['adam.m.x', { shape: [1], data: new Float32Array(1) }]]) };
    await expect(encodeCheckpoint('clash', clash)).rejects.toThrow(/"adam\.m\.x": names starting with "adam\." are kept/);
  });

  it('reads a checkpoint saved before the layout: moments by prefix, step counts in the meta', async () => {
    // the earlier layout, written as the stores wrote it: one flat name map and meta.optimizerSteps
    const meta = {
      step: 2,
      schedulePosition: 2,
      dataPosition: { epoch: 0, index: 4 },
      rngState: { seed: 1 },
      runConfig: {},
      datasetHash: 'h',
      metrics: {},
      optimizerSteps: { w: 2 },
    };
    const t = (x: number) => ({ shape: [1], data: Float32Array.of(x) });
    const blob = namedToSafetensors(
      new Map([
        ['w', t(1)],
        ['adam.m.w', t(0.1)],
        ['adam.v.w', t(0.01)],
      ]),
      { dtype: 'F32', metadata: { [META_KEY]: JSON.stringify(meta) } },
    );
    const back = await decodeCheckpoint('old', blob, await sha256Hex(blob));
    expect([...back.weights.keys()]).toEqual(['w']);
    expect(back.optimizer!.m.get('w')!.data[0]).toBeCloseTo(0.1, 7);
    expect(back.optimizer!.v.get('w')!.data[0]).toBeCloseTo(0.01, 7);
    expect(back.optimizer!.step).toEqual({ w: 2 });
  });
});

describe('IndexedDB store: quota', () => {
  const realPut = IDBObjectStore.prototype.put;
  afterEach(() => {
    IDBObjectStore.prototype.put = realPut;
  });

  it('QuotaExceededError gives a clear message and leaves earlier checkpoints intact', async () => {
    const store = new IdbCheckpointStore({ dbName: 'test-quota' });
    const first = await store.save(sampleCheckpoint(1, 30));
    // simulate a full quota: the blob store's put throws as a browser does (a DOMException named QuotaExceededError)
    IDBObjectStore.prototype.put = function (this: IDBObjectStore, ...args: Parameters<IDBObjectStore['put']>) {
      if (this.name === 'blobs') throw new DOMException('The quota has been exceeded.', 'QuotaExceededError');
      return realPut.apply(this, args);
    };
    const failed = store.save(sampleCheckpoint(2, 40), { id: 'second' });
    await expect(failed).rejects.toThrow(CheckpointError);
    await expect(store.save(sampleCheckpoint(2, 40), { id: 'second' })).rejects.toThrow(
      /checkpoint "second": the browser's storage quota is full \(QuotaExceededError\).*the checkpoints already saved are intact/,
    );
    IDBObjectStore.prototype.put = realPut;
    expect((await store.list()).map((s) => s.id)).toEqual([first.id]); // no half-written summary
    expect((await store.load(first.id)).meta.metrics.validationF1).toBe(30);
    await store.close();
    await deleteDB('test-quota');
  });

  it('a transaction aborted mid-save leaves earlier checkpoints intact', async () => {
    const store = new IdbCheckpointStore({ dbName: 'test-quota-abort' });
    const first = await store.save(sampleCheckpoint(1));
    // the request fails asynchronously, as when the browser aborts the commit
    IDBObjectStore.prototype.put = function (this: IDBObjectStore, ...args: Parameters<IDBObjectStore['put']>) {
      const request = realPut.apply(this, args);
      if (this.name === 'summaries') this.transaction.abort();
      return request;
    };
    await expect(store.save(sampleCheckpoint(2), { id: 'second' })).rejects.toThrow();
    IDBObjectStore.prototype.put = realPut;
    expect((await store.list()).map((s) => s.id)).toEqual([first.id]);
    await store.close();
    await deleteDB('test-quota-abort');
  });

  it('refuses before writing when the storage estimate shows too little room', async () => {
    const store = new IdbCheckpointStore({ dbName: 'test-estimate', estimate: async () => ({ usage: 1000, quota: 1200 }) });
    await expect(store.save(sampleCheckpoint(1))).rejects.toThrow(
      /not enough browser storage: the checkpoint needs .* MB, 0\.0 MB of the 0\.0 MB quota is free/,
    );
    expect(await store.list()).toEqual([]);
    const roomy = new IdbCheckpointStore({ dbName: 'test-estimate', estimate: async () => ({ usage: 0, quota: 1e9 }) });
    await roomy.save(sampleCheckpoint(1));
    expect(await roomy.usage()).toMatchObject({ originUsage: 0, originQuota: 1e9 });
    await store.close();
    await roomy.close();
    await deleteDB('test-estimate');
  });
});

describe('file-system store: atomic files', () => {
  it('leaves no temporary files and ignores a blob whose summary never landed', async () => {
    const folder = await mkdtemp(join(tmpdir(), 'spanwright-ckpt-'));
    try {
      const store = new FsCheckpointStore(folder);
      const saved = await store.save(sampleCheckpoint(4));
      expect((await readdir(folder)).sort()).toEqual([`${saved.id}.json`, `${saved.id}.safetensors`]);
      // a crash after the blob's rename and before the summary's: the blob alone is not listed
      await writeFile(join(folder, 'orphan.safetensors'), new Uint8Array(16));
      await writeFile(join(folder, '.x.json.tmp-abc'), 'partial');
      expect((await store.list()).map((s) => s.id)).toEqual([saved.id]);
      // a summary damaged by hand is named in the error
      await writeFile(join(folder, `${saved.id}.json`), '{"id": ');
      await expect(store.load(saved.id)).rejects.toThrow(new RegExp(`${saved.id}\\.json: not valid JSON`));
    } finally {
      await rm(folder, { recursive: true, force: true });
    }
  });
});
