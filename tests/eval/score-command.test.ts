// The `score` command end to end: files in, scores out. Expected numbers follow the
// SQuAD 2.0 evaluation script's rules (from memory), worked by hand beside each check.
import { execFile } from 'node:child_process';
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

const run = promisify(execFile);
const TSX = join(process.cwd(), 'node_modules', '.bin', 'tsx');
const MAIN = join(process.cwd(), 'src', 'cli', 'main.ts');

let dir = '';
const path = (name: string) => join(dir, name);

async function score(...args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  try {
    const { stdout, stderr } = await run(TSX, [MAIN, 'score', ...args], { encoding: 'utf8' });
    return { code: 0, stdout, stderr };
  } catch (err) {
    const e = err as { code: number; stdout: string; stderr: string };
    return { code: e.code, stdout: e.stdout, stderr: e.stderr };
  }
}

const GOLD = [
  {
    id: 'q1',
    context: 'The blue whale is the largest animal.',
    question: 'Which animal is largest?',
    answers: [{ text: 'blue whale', start: 4 }],
  },
  { id: 'q2', context: 'Marie Curie won the prize in 1903.', question: 'Who won?', answers: [{ text: 'Marie Curie', start: 0 }] },
  { id: 'q3', context: 'Marie Curie won the prize in 1903.', question: 'Who lost?', answers: [], unanswerable: true },
];

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'spanwright-score-'));
  await writeFile(path('gold.jsonl'), GOLD.map((g) => JSON.stringify(g)).join('\n') + '\n');
  await writeFile(path('pred.json'), JSON.stringify({ q1: 'the Blue Whale', q2: 'Curie' }));
  await writeFile(path('na.json'), JSON.stringify({ q1: -2, q2: 1 }));
  await writeFile(path('cut.json'), '{"q1": "x",\n');
  await writeFile(path('number.json'), '{"q1": 3}');
  await writeFile(path('list.json'), '["x"]');
});

afterAll(async () => {
  if (dir) await rm(dir, { recursive: true, force: true });
});

describe('spanwright score', () => {
  it('prints overall, answerable and unanswerable scores as JSON, and warns about missing predictions', async () => {
    const r = await score('--gold', path('gold.jsonl'), '--pred', path('pred.json'), '--json');
    expect(r.code).toBe(0);
    // q1 exact (1, 1); q2 "Curie" vs "Marie Curie": EM 0, F1 P 1 R ½ = 2/3; q3 missing → "" → (1, 1)
    const out = JSON.parse(r.stdout.trim().split('\n').pop()!);
    expect(out.total).toBe(3);
    expect(out.em).toBeCloseTo((100 * 2) / 3, 10);
    expect(out.f1).toBeCloseTo((100 * (1 + 2 / 3 + 1)) / 3, 10);
    expect(out.answerable).toEqual({ em: 50, f1: expect.closeTo((100 * (1 + 2 / 3)) / 2, 10), total: 2 });
    expect(out.unanswerable).toEqual({ em: 100, f1: 100, total: 1 });
    expect(out.missing).toBe(1);
    expect(out.threshold).toBeUndefined();
    expect(r.stderr).toMatch(/no prediction for 1 of 3 question\(s\) \("q3"\)/);
  });

  it('searches the no-answer threshold with --na-prob', async () => {
    // all "": EM 1, F1 1 (q3); pass q1 (−2) → (2, 2); pass q2 (1) → (2, 2 2/3)
    // best EM 2/3 at −2, best F1 (8/3)/3 at 1
    const r = await score('--gold', path('gold.jsonl'), '--pred', path('pred.json'), '--na-prob', path('na.json'), '--json');
    expect(r.code).toBe(0);
    const out = JSON.parse(r.stdout.trim().split('\n').pop()!);
    expect(out.threshold).toEqual({
      bestEm: expect.closeTo((100 * 2) / 3, 10),
      bestEmThreshold: -2,
      bestF1: expect.closeTo((100 * 8) / 3 / 3, 10),
      bestF1Threshold: 1,
    });
  });

  it('prints a table without --json', async () => {
    const r = await score('--gold', path('gold.jsonl'), '--pred', path('pred.json'));
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/all\s+66\.67\s+88\.89\s+3/);
    expect(r.stdout).toMatch(/unanswerable\s+100\.00\s+100\.00\s+1/);
  });

  it('names the file and the place for malformed predictions', async () => {
    const cut = await score('--gold', path('gold.jsonl'), '--pred', path('cut.json'));
    expect(cut.code).toBe(1);
    expect(cut.stderr).toContain(`${path('cut.json')}: line 2`);
    const num = await score('--gold', path('gold.jsonl'), '--pred', path('number.json'));
    expect(num.stderr).toContain(`${path('number.json')}: question "q1": the answer must be a string`);
    const list = await score('--gold', path('gold.jsonl'), '--pred', path('list.json'));
    expect(list.stderr).toContain(`${path('list.json')}: expected a JSON object`);
    const none = await score('--gold', path('gold.jsonl'), '--pred', path('absent.json'));
    expect(none.stderr).toContain(`${path('absent.json')}: no such file`);
  });

  it('asks for a no-answer score for every predicted answer', async () => {
    const r = await score('--gold', path('gold.jsonl'), '--pred', path('pred.json'), '--na-prob', path('number.json'));
    expect(r.code).toBe(1);
    expect(r.stderr).toContain(`${path('number.json')}: no score for 1 question(s) that have a predicted answer ("q2")`);
  });
  it('scores a gold answer by its text when its offset is wrong or its text is not in the context, as the SQuAD 2.0 script does', async () => {
    // the script compares normalised answer texts only and never reads answer_start
    // (SQuAD 2.0 evaluate-v2.0.py, from memory): both questions below count, with a warning —
    // w1's start is wrong and its text occurs twice, w2's text is not in the context at all
    const gold = [
      { id: 'w1', context: 'The ferry leaves at noon, or after noon.', question: 'When?', answers: [{ text: 'noon', start: 3 }] },
      { id: 'w2', context: 'The ferry leaves at noon, or after noon.', question: 'What?', answers: [{ text: 'the night boat', start: 0 }] },
    ];
    await writeFile(path('offsets.jsonl'), gold.map((g) => JSON.stringify(g)).join('\n') + '\n');
    await writeFile(path('offsets-pred.json'), JSON.stringify({ w1: 'noon', w2: 'night boat' }));
    const r = await score('--gold', path('offsets.jsonl'), '--pred', path('offsets-pred.json'), '--json');
    expect(r.code).toBe(0);
    expect(r.stderr).toMatch(/record 1 \(id w1\), answers\[0\]\.start: warning: .*scored by its text/);
    expect(r.stderr).toMatch(/2 answer\(s\) not found at their offset in the context are scored by their text alone/);
    const out = JSON.parse(r.stdout.trim().split('\n').pop()!);
    // w1: exact; w2: "the night boat" normalises to "night boat" (articles dropped) → exact
    expect(out).toMatchObject({ total: 2, em: 100, f1: 100 });
  });
});
