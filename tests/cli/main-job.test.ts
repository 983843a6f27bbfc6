// The main job's commands end to end, as subprocesses: train → eval → predict → score →
// ask → export, on the PyTorch fixture checkpoint (tests/reference/fixtures/checkpoint,
// written by tests/reference/generate_fixtures.py) and the shipped example file. The
// checks are about the commands' contracts (files written, JSON fields, the agreement of
// `eval` with `predict` + `score`), not about accuracy: the fixture model is untrained.
import { execFile } from 'node:child_process';
import { mkdtemp, readFile, readdir, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

const run = promisify(execFile);
const BASE = 'tests/reference/fixtures/checkpoint';
const DATA = 'examples/mini.jsonl';
const WINDOW = ['--max-len', '32', '--stride', '8'];

async function cli(args: string[]): Promise<{ stdout: string; stderr: string; code: number }> {
  try {
    const { stdout, stderr } = await run('npx', ['tsx', 'src/cli/main.ts', ...args], { maxBuffer: 1 << 24 });
    return { stdout, stderr, code: 0 };
  } catch (err) {
    const e = err as { stdout: string; stderr: string; code: number };
    return { stdout: e.stdout, stderr: e.stderr, code: e.code };
  }
}

const lastJson = (stdout: string) => JSON.parse(stdout.trim().split('\n').pop()!);

describe('train, eval, predict, score, ask', () => {
  let dir: string;
  let model: string;
  let trained: { em: number; f1: number; total: number; decoding: { nullThreshold: number; kindBonus: number; saved: boolean } };

  beforeAll(async () => {
    dir = await mkdtemp(join(tmpdir(), 'spanwright-cli-'));
    model = join(dir, 'model');
    const r = await cli([
      'train',
      '--train',
      DATA,
      '--eval',
      DATA,
      '--base',
      BASE,
      '--out',
      model,
      '--epochs',
      '2',
      '--batch',
      '4',
      ...WINDOW,
      '--json',
    ]);
    expect(r.code, r.stderr).toBe(0);
    trained = lastJson(r.stdout);
  }, 120_000);
  afterAll(() => rm(dir, { recursive: true, force: true }));

  it('train writes the model directory with a card, checkpoints, and the score object', async () => {
    const files = await readdir(model);
    expect(files).toEqual(expect.arrayContaining(['config.json', 'model.safetensors', 'vocab.txt', 'MODEL_CARD.md', 'checkpoints']));
    expect(trained.total).toBe(10);
    expect(trained).toHaveProperty('answerable.total', 8);
    expect(trained).toHaveProperty('unanswerable.total', 2);
    const card = await readFile(join(model, 'MODEL_CARD.md'), 'utf8');
    expect(card).toMatch(/checked against its source|Check every answer against its source/);
    expect((await readdir(join(model, 'checkpoints'))).some((f) => f.endsWith('.safetensors'))).toBe(true);
  });

  it('eval of the written model gives the scores train printed', async () => {
    const r = await cli(['eval', '--model', model, '--data', DATA, ...WINDOW, '--json']);
    expect(r.code, r.stderr).toBe(0);
    const e = lastJson(r.stdout);
    expect(e.em).toBeCloseTo(trained.em, 6);
    expect(e.f1).toBeCloseTo(trained.f1, 6);
    // both decoded with the cut and bonus train chose on its questions and wrote into config.json
    expect(e.decoding).toEqual(trained.decoding);
    expect(e.decoding.saved).toBe(true);
    const config = JSON.parse(await readFile(join(model, 'config.json'), 'utf8')) as { spanwright_decoding: unknown };
    expect(config.spanwright_decoding).toEqual({ null_threshold: expect.any(Number), kind_bonus: e.decoding.kindBonus });
  });

  it('predict + score agree with eval', async () => {
    const pred = join(dir, 'pred.json');
    const p = await cli(['predict', '--model', model, '--data', DATA, ...WINDOW, '--out', pred]);
    expect(p.code, p.stderr).toBe(0);
    const s = await cli(['score', '--gold', DATA, '--pred', pred, '--json']);
    expect(s.code, s.stderr).toBe(0);
    const scored = lastJson(s.stdout);
    expect(scored.f1).toBeCloseTo(trained.f1, 1);
    expect(Object.keys(JSON.parse(await readFile(pred, 'utf8')))).toHaveLength(10);
  });

  it('--resume refuses clearly when there is no checkpoint of this data', async () => {
    const fresh = join(dir, 'fresh');
    const none = await cli(['train', '--train', DATA, '--base', BASE, '--out', fresh, ...WINDOW, '--resume']);
    expect(none.code).toBe(1);
    expect(none.stderr).toMatch(/no checkpoint of this training data/);
    expect(none.stderr).not.toMatch(/\n\s+at /); // no stack trace
  });

  it('ask retrieves, reads and prints answers with all three scores and the caution', async () => {
    const r = await cli(['ask', '--model', model, '--passages', 'examples/mini.jsonl', '--question', 'How steep is the line?', '--json']);
    // examples/mini.jsonl is a question file, not a passage file: each line has no "text"
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/line 1, field "text"/);
    const ok = await cli([
      'ask',
      '--model',
      model,
      '--passages',
      'tiny-models/demo/passages',
      '--question',
      'When did the first vessel enter service?',
      '--top',
      '2',
      '--json',
    ]);
    expect(ok.code, ok.stderr).toBe(0);
    const out = lastJson(ok.stdout);
    expect(out.answers).toHaveLength(2);
    for (const a of out.answers) {
      expect(a).toHaveProperty('passageId');
      expect(typeof a.readerScore).toBe('number');
      expect(typeof a.retrieverScore).toBe('number');
      expect(typeof a.combinedScore).toBe('number');
    }
    expect(out.caution).toMatch(/Check every answer/);
  });

  it('bad options are clear errors without stack traces', async () => {
    const r = await cli(['train', '--train', DATA, '--base', BASE, '--out', join(dir, 'x'), '--max-len', '4096']);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/--max-len 4096 exceeds the 32 positions/);
    const m = await cli(['eval', '--model', join(dir, 'nowhere'), '--data', DATA]);
    expect(m.code).toBe(1);
    expect(m.stderr).toMatch(/not a readable folder/);
  });
});
