// fineTune (src/train/finetune.ts) through a real checkpoint store: a run stopped at
// update k and resumed from the checkpoint it saved on disk takes the same losses, update
// for update, as a run that was never stopped, and ends with the same weights. Records are
// built mechanically from the fixture vocabulary (tests/reference/fixtures/checkpoint,
// written by the PyTorch generator); no expected value comes from them.
import { mkdtemp, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { FsCheckpointStore } from '../../src/node/fs-store.js';
import { mulberry32 } from '../../src/data/random.js';
import type { QARecord } from '../../src/data/record.js';
import { loadCheckpointDir } from '../../src/io/checkpoint-dir.js';
import { trainConfig } from '../../src/train/config.js';
import { fineTune, type RunMeta } from '../../src/train/finetune.js';
import type { LoopEvent } from '../../src/train/loop.js';
import { useBackend } from '../helpers/backend.js';

const DIR = 'tests/reference/fixtures/checkpoint';

async function base() {
  return loadCheckpointDir({
    configJson: await readFile(join(DIR, 'config.json'), 'utf8'),
    safetensors: new Uint8Array(await readFile(join(DIR, 'model.safetensors'))),
    vocab: { file: 'vocab.txt', text: await readFile(join(DIR, 'vocab.txt'), 'utf8') },
  });
}

/** Passages of random vocabulary words; each question's answer is a 1–3 word span, a fifth unanswerable. */
function records(words: string[], count: number, seed: number): QARecord[] {
  const rand = mulberry32(seed);
  const pick = () => words[Math.floor(rand() * words.length)]!;
  const out: QARecord[] = [];
  for (let i = 0; i < count; i++) {
    const ctx = Array.from({ length: 14 }, pick);
    const context = ctx.join(' ');
    const a = Math.floor(rand() * 10);
    const len = 1 + Math.floor(rand() * 3);
    const text = ctx.slice(a, a + len).join(' ');
    const start = ctx.slice(0, a).join(' ').length + (a > 0 ? 1 : 0);
    const unanswerable = i % 5 === 4;
    out.push({
      id: `q${i}`,
      passageId: `p${Math.floor(i / 2)}`,
      context,
      question: `what ${pick()} ${pick()}`,
      answers: unanswerable ? [] : [{ text, start }],
      unanswerable,
    });
  }
  return out;
}

describe('fineTune with a file checkpoint store (wasm)', () => {
  let tmp: string;
  beforeAll(async () => {
    await useBackend('wasm');
    tmp = await mkdtemp(join(tmpdir(), 'spanwright-ft-'));
  });
  afterAll(() => rm(tmp, { recursive: true, force: true }));

  it('stop at update k, resume from the saved checkpoint: the same losses and weights as an uninterrupted run', async () => {
    const b = await base();
    const words = (await readFile(join(DIR, 'vocab.txt'), 'utf8')).split('\n').filter((w) => /^[a-z]+$/.test(w));
    const train = records(words, 24, 7);
    const validation = records(words, 6, 8);
    const config = trainConfig({
      maxLength: 32,
      stride: 8,
      maxQueryLength: 8,
      batchSize: 4,
      gradAccumulation: 1,
      epochs: 2,
      dropout: 0.1,
      learningRate: 1e-3,
      evalEvery: 4,
    });
    const common = {
      base: { params: b.params, config: b.config, name: 'fixture' },
      tokenizer: b.tokenizer,
      train,
      validation,
      config,
      datasetHash: 'test-hash',
    };
    const losses = (into: number[]) => (e: LoopEvent) => {
      if (e.type === 'progress') into.push(e.loss);
    };

    const straight: number[] = [];
    const a = await fineTune({ ...common, hooks: { onEvent: losses(straight) } });
    expect(a.outcome.status).toBe('finished');
    expect(straight).toHaveLength(a.plan.totalUpdates);

    const store = new FsCheckpointStore<RunMeta>(join(tmp, 'ckpt'));
    const first: number[] = [];
    const k = 5;
    const stopped = await fineTune({ ...common, store, hooks: { onEvent: losses(first), shouldStop: () => first.length >= k } });
    expect(stopped.outcome.status).toBe('stopped');
    stopped.params.dispose();
    const saved = await store.list();
    const last = saved[saved.length - 1]!;
    expect(last.meta.step).toBe(k);
    expect(last.meta.label).toBe('stop');

    const rest: number[] = [];
    const resumed = await fineTune({ ...common, store, resumeFrom: last.id, hooks: { onEvent: losses(rest) } });
    expect(resumed.outcome.status).toBe('finished');
    expect([...first, ...rest]).toEqual(straight);

    const wa = a.params.toNamed();
    const wb = resumed.params.toNamed();
    for (const [name, t] of wa) expect(Array.from(wb.get(name)!.data), name).toEqual(Array.from(t.data));
    a.params.dispose();
    resumed.params.dispose();
    b.params.dispose();
  });

  it('refuses to resume on other data', async () => {
    const b = await base();
    const words = ['river', 'the', 'of'];
    const train = records(words, 4, 1);
    const store = new FsCheckpointStore<RunMeta>(join(tmp, 'ckpt'));
    const last = (await store.list()).pop()!;
    const config = trainConfig({ maxLength: 32, stride: 8, maxQueryLength: 8, batchSize: 4, gradAccumulation: 1, epochs: 2 });
    await expect(
      fineTune({
        base: { params: b.params, config: b.config, name: 'fixture' },
        tokenizer: b.tokenizer,
        train,
        config,
        datasetHash: 'other',
        store,
        resumeFrom: last.id,
      }),
    ).rejects.toThrow(/trained on other data/);
    b.params.dispose();
  });
});
