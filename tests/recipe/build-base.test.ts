// The base recipe (tiny-models/recipe/build-base.ts) is a configuration of the core
// training loop: a short run over a few documents of each open source, with its two
// phases (T 64, then T 128 for the last 10% of a 0.3-minute budget), writes a folder
// whose card and pretraining.json state what the run measured. Here the held-out
// figures are measured again from the written weights, by the core's own
// Trainer.mlmEvaluate over the same held-out rows and masks, and must agree; the
// stored fp16 weights allow a small difference (tolerance below).
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, readdirSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { FsCheckpointStore } from '../../src/node/fs-store.js';
import { readSafetensors } from '../../src/io/safetensors.js';
import { configFromHf } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import { trainConfig } from '../../src/train/config.js';
import { packDocuments } from '../../src/train/mlm-data.js';
import { planTraining } from '../../src/train/schedule.js';
import { Trainer } from '../../src/train/trainer.js';
import { WordPieceTokenizer } from '../../src/text/wordpiece.js';
import { heldoutBatches } from '../../tiny-models/recipe/build-base.js';
import { useBackend } from '../helpers/backend.js';

const MINUTES = 0.3;

describe('the base recipe through the core loop', () => {
  const work = mkdtempSync(join(tmpdir(), 'spanwright-recipe-'));
  const out = join(work, 'out');
  let log = '';

  beforeAll(async () => {
    log = execFileSync(
      process.execPath,
      [
        '--import',
        'tsx',
        'tiny-models/recipe/build-base.ts',
        ...['--documents', '12', '--vocab-size', '2000', '--minutes', String(MINUTES), '--max-len', '64', '--long-len', '128'],
        ...['--eval-minutes', '0.1', '--checkpoint-minutes', '0.1', '--work', work, '--out', out],
      ],
      { encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'] },
    );
    await useBackend('wasm');
  }, 240_000);
  afterAll(() => rmSync(work, { recursive: true, force: true }));

  it('trains both phases within the budget and ends on the last phase checkpoint', async () => {
    expect(log).toMatch(/phase: T 64 → 128/);
    const facts = JSON.parse(readFileSync(join(out, 'pretraining.json'), 'utf8')) as { steps: number; trainingMinutes: number };
    expect(facts.steps).toBeGreaterThan(2);
    // the budget ends the run: at most one update past it (an update here takes well under 10 s)
    expect(facts.trainingMinutes).toBeGreaterThanOrEqual(MINUTES);
    expect(facts.trainingMinutes).toBeLessThan(MINUTES + 10 / 60);
    const store = new FsCheckpointStore(join(work, 'checkpoints'));
    const last = (await store.list()).at(-1)!;
    expect(last.meta.label).toBe('end of long phase');
    expect(last.meta.step).toBe(facts.steps);
  });

  it('states held-out figures that the written weights reproduce', async () => {
    const facts = JSON.parse(readFileSync(join(out, 'pretraining.json'), 'utf8')) as {
      heldout: { loss: number; accuracy: number; predicted: number };
      metrics: { heldoutLossShort: number; heldoutAccuracyShort: number };
      settings: { seed: number; tokensPerUpdate: number };
    };
    const config = configFromHf(JSON.parse(readFileSync(join(out, 'config.json'), 'utf8')), 'config.json');
    const weights = readSafetensors(new Uint8Array(readFileSync(join(out, 'model.safetensors'))), 'model.safetensors').tensors;
    const { params } = ReaderParams.fromNamed(config, weights, { seed: 1, source: 'recipe output' });
    const tok = WordPieceTokenizer.fromVocabTxt(readFileSync(join(out, 'vocab.txt'), 'utf8'));
    const int32 = (file: string) => {
      const b = readFileSync(join(work, 'data', file));
      return new Int32Array(b.buffer.slice(b.byteOffset, b.byteOffset + b.byteLength));
    };
    const docs = { ids: int32('heldout.ids'), starts: int32('heldout.starts') };
    const masking = {
      probability: 0.15,
      maskId: tok.maskId,
      vocabSize: config.vocabSize,
      specialIds: [tok.padId, tok.unkId, tok.clsId, tok.sepId, tok.maskId],
    };
    const cfg = trainConfig({ dropout: 0 });
    const trainer = new Trainer(params, config, cfg, planTraining(cfg, 1));
    const measure = (T: number) => {
      const packed = packDocuments(docs, T, tok);
      const rows = Math.round(facts.settings.tokensPerUpdate / T);
      return trainer.mlmEvaluate(heldoutBatches(packed, packed.count, masking, facts.settings.seed, rows));
    };
    const long = measure(128);
    const short = measure(64);
    trainer.dispose();
    params.dispose();
    // fp16 weights: the loss may move in the third decimal, an arg-max rarely
    expect(long.predicted).toBe(facts.heldout.predicted);
    expect(Math.abs(long.loss - facts.heldout.loss)).toBeLessThan(0.02);
    expect(Math.abs(long.accuracy - facts.heldout.accuracy)).toBeLessThan(0.01);
    expect(Math.abs(short.loss - facts.metrics.heldoutLossShort)).toBeLessThan(0.02);
    expect(Math.abs(short.accuracy - facts.metrics.heldoutAccuracyShort)).toBeLessThan(0.01);

    const card = readFileSync(join(out, 'MODEL_CARD.md'), 'utf8');
    expect(card).toContain(`accuracy ${(100 * facts.heldout.accuracy).toFixed(1)}%`);
    expect(card).toContain(`${facts.heldout.predicted.toLocaleString('en-US')} masked tokens`);
    expect(readdirSync(out).sort()).toEqual(['MODEL_CARD.md', 'config.json', 'model.safetensors', 'pretraining.json', 'vocab.txt']);
  });
});
