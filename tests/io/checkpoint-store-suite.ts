// One behaviour suite for every CheckpointStore (IndexedDB, file system): run by
// checkpoint-store.test.ts against each store. Checks round trips, the SHA-256 check on
// load (SHA-256 as FIPS 180-4 defines it, computed by Web Crypto), deletion and pruning.
import { describe, expect, it } from 'vitest';
import { CheckpointError, type Checkpoint, type CheckpointMeta, type CheckpointStore } from '../../src/io/checkpoint-store.js';
import type { NamedTensors } from '../../src/io/tensors.js';

export interface StoreHarness {
  store: CheckpointStore;
  /** flips one byte of the stored blob of `id`, behind the store's back */
  corrupt(id: string): Promise<void>;
  cleanup(): Promise<void>;
}

export function sampleCheckpoint(step: number, validationF1?: number): Checkpoint {
  const weights: NamedTensors = new Map([
    ['qa_outputs.weight', { shape: [2, 3], data: Float32Array.from([1, -2, 3.5, 0.25, -0.125, step]) }],
  ]);
  const optimizer = {
    m: new Map([['qa_outputs.weight', { shape: [2, 3], data: new Float32Array(6).fill(step * 0.001) }]]),
    v: new Map([['qa_outputs.weight', { shape: [2, 3], data: new Float32Array(6).fill(1e-8) }]]),
    step: { 'qa_outputs.weight': step },
  };
  const meta: CheckpointMeta = {
    step,
    runConfig: { learningRate: 5e-5, batchSize: 16, seed: 7 },
    datasetHash: 'sha256:0123abcd',
    metrics: validationF1 === undefined ? { loss: 1.5 } : { loss: 1.5, validationF1, validationEM: validationF1 - 5 },
    label: `step ${step}`,
  };
  return { meta, weights, optimizer };
}

export function checkpointStoreSuite(name: string, makeHarness: () => Promise<StoreHarness>): void {
  describe(`${name}: CheckpointStore behaviour`, () => {
    const withStore = (body: (h: StoreHarness) => Promise<void>) => async () => {
      const h = await makeHarness();
      try {
        await body(h);
      } finally {
        await h.cleanup();
      }
    };

    it(
      'saves, lists and loads a checkpoint unchanged',
      withStore(async ({ store }) => {
        const ckpt = sampleCheckpoint(12, 61.5);
        const summary = await store.save(ckpt);
        expect(summary.id).toMatch(/^step-00000012-/);
        expect(summary.sha256).toMatch(/^[0-9a-f]{64}$/);
        expect(summary.tensorCount).toBe(3);
        const listed = await store.list();
        expect(listed.map((s) => s.id)).toEqual([summary.id]);
        expect(listed[0]!.meta.metrics.validationF1).toBe(61.5);
        const back = await store.load(summary.id);
        expect(back.meta).toEqual({ ...ckpt.meta, savedAt: summary.meta.savedAt });
        const same = (a: NamedTensors, b: NamedTensors) => {
          expect([...a.keys()]).toEqual([...b.keys()]);
          for (const [k, t] of b) {
            expect(a.get(k)!.shape).toEqual(t.shape);
            expect(Array.from(a.get(k)!.data)).toEqual(Array.from(t.data));
          }
        };
        same(back.weights, ckpt.weights);
        same(back.optimizer!.m, ckpt.optimizer!.m);
        same(back.optimizer!.v, ckpt.optimizer!.v);
        expect(back.optimizer!.step).toEqual({ 'qa_outputs.weight': 12 });
      }),
    );

    it(
      'refuses a damaged checkpoint with a checksum error',
      withStore(async (h) => {
        const { id } = await h.store.save(sampleCheckpoint(3));
        await h.corrupt(id);
        await expect(h.store.load(id)).rejects.toThrow(CheckpointError);
        await expect(h.store.load(id)).rejects.toThrow(
          new RegExp(`checkpoint "${id}": checksum mismatch: stored SHA-256 [0-9a-f]{64}, the data now hashes to [0-9a-f]{64}`),
        );
      }),
    );

    it(
      'names a missing checkpoint and rejects unsafe ids and bad meta',
      withStore(async ({ store }) => {
        await expect(store.load('step-404')).rejects.toThrow(/checkpoint "step-404": no such checkpoint/);
        await expect(store.save(sampleCheckpoint(1), { id: '../escape' })).rejects.toThrow(/an id may hold only letters/);
        const bad = sampleCheckpoint(1);
        (bad.meta as { step: number }).step = -1;
        await expect(store.save(bad)).rejects.toThrow(/meta field step: must be a non-negative integer, got -1/);
        const nan = sampleCheckpoint(1);
        nan.meta.metrics.loss = Number.NaN;
        await expect(store.save(nan)).rejects.toThrow(/meta field metrics.loss: must be a finite number/);
        expect(await store.list()).toEqual([]);
      }),
    );

    it(
      'overwrites under the same id and deletes',
      withStore(async ({ store }) => {
        await store.save(sampleCheckpoint(1), { id: 'latest' });
        await store.save(sampleCheckpoint(2), { id: 'latest' });
        expect((await store.list()).map((s) => s.meta.step)).toEqual([2]);
        expect((await store.load('latest')).meta.step).toBe(2);
        await store.delete('latest');
        await store.delete('latest'); // absent: not an error
        expect(await store.list()).toEqual([]);
      }),
    );

    it(
      'prunes to the best by validation F1 and the most recent',
      withStore(async ({ store }) => {
        const f1s = [40, 70, 55, 65, undefined, 50];
        for (let i = 0; i < f1s.length; i++) await store.save(sampleCheckpoint((i + 1) * 10, f1s[i]), { id: `c${i + 1}` });
        expect((await store.list()).map((s) => s.id)).toEqual(['c1', 'c2', 'c3', 'c4', 'c5', 'c6']);
        const deleted = await store.prune({ keepBest: 2, keepLast: 1 });
        // best two: c2 (70), c4 (65); last: c6
        expect(deleted.sort()).toEqual(['c1', 'c3', 'c5']);
        expect((await store.list()).map((s) => s.id)).toEqual(['c2', 'c4', 'c6']);
        expect(await store.prune({ keepLast: 1 })).toEqual(['c2', 'c4']);
        await expect(store.prune({})).rejects.toThrow(/give keepBest, keepLast or both/);
        expect((await store.load('c6')).meta.step).toBe(60);
      }),
    );

    it(
      'reports the bytes it uses',
      withStore(async ({ store }) => {
        expect(store.usage).toBeTypeOf('function'); // both stores implement it
        const a = await store.save(sampleCheckpoint(1));
        const used = await store.usage!();
        expect(used.bytes).toBeGreaterThanOrEqual(a.bytes);
        await store.delete(a.id);
        expect((await store.usage!()).bytes).toBe(0);
      }),
    );
  });
}
