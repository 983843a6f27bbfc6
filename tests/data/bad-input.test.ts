// Walks tests/fixtures/bad-input/: every file must give exactly the problems its entry in
// manifest.json lists (a located error or a documented repair), never a throw.
import { readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadDataset, parseDataset } from '../../src/data/load.js';
import type { Problem } from '../../src/data/validate.js';

const folder = join(import.meta.dirname, '../fixtures/bad-input');

interface Expected {
  what: string;
  records: number;
  problems: Array<Pick<Problem, 'severity' | 'code' | 'record' | 'field' | 'id' | 'message'>>;
  kept?: Array<{ id: string; text: string; start: number; context?: string }>;
}
const manifest = JSON.parse(readFileSync(join(folder, 'manifest.json'), 'utf8')) as { files: Record<string, Expected> };
const dataFiles = readdirSync(folder).filter((f) => f !== 'manifest.json' && f !== 'generate.ts');

/** An error is located when it names a field, or a line, row or byte in its message. */
function isLocated(p: Problem): boolean {
  return p.field !== '' || /\b(line|row|byte offset) \d+/.test(p.message);
}

describe('bad-input fixtures', () => {
  it('has a manifest entry for every file and a file for every entry', () => {
    expect(dataFiles.sort()).toEqual(Object.keys(manifest.files).sort());
  });

  for (const name of dataFiles) {
    const expected = manifest.files[name]!;
    it(`${name}: ${expected.what}`, () => {
      const bytes = new Uint8Array(readFileSync(join(folder, name)));
      const result = loadDataset(bytes, name);
      expect(result.problems.map((p) => `${p.severity} ${p.code} ${p.record} ${p.field}`)).toEqual(
        expected.problems.map((p) => `${p.severity} ${p.code} ${p.record} ${p.field}`),
      );
      result.problems.forEach((p, i) => {
        const want = expected.problems[i]!;
        expect(p.file).toBe(name);
        expect(p.id).toBe(want.id);
        expect(p.message).toContain(want.message);
        if (p.severity === 'error') expect(isLocated(p), p.message).toBe(true);
      });
      expect(result.records).toHaveLength(expected.records);
      for (const k of expected.kept ?? []) {
        const r = result.records.find((x) => x.id === k.id);
        expect(r, k.id).toBeDefined();
        expect(r!.answers[0]).toEqual({ text: k.text, start: k.start });
        expect(r!.context.slice(k.start, k.start + k.text.length)).toBe(k.text);
        if (k.context !== undefined) expect(r!.context).toBe(k.context);
      }
    });
  }

  it('truncated.json: the line and column point at the string the file ends inside', () => {
    const text = readFileSync(join(folder, 'truncated.json'), 'utf8');
    const line = text.split('\n')[7]!;
    expect(line[21]).toBe('"');
  });
});

describe('a 200,000-character context', () => {
  // sentences numbered so that each answer occurs exactly once
  const sentences: string[] = [];
  for (let i = 0; sentences.join(' ').length < 200_000; i++) sentences.push(`Gate ${i} opens at hour ${i * 7}.`);
  const context = sentences.join(' ').slice(0, 200_000);
  const answer = 'Gate 5000 opens';
  const start = context.indexOf(answer);
  const line = (s: number): string =>
    `${JSON.stringify({ id: 'long', context, question: 'Which gate?', answers: [{ text: answer, start: s }] })}\n`;

  it('loads with its offset intact', () => {
    expect(context.length).toBe(200_000);
    expect(start).toBeGreaterThan(100_000);
    const result = parseDataset(line(start), 'long.jsonl');
    expect(result.problems).toEqual([]);
    expect(result.records[0]!.answers[0]).toEqual({ text: answer, start });
  });

  it('a wrong start there is repaired to the only occurrence', () => {
    const result = parseDataset(line(start - 40), 'long.jsonl');
    expect(result.problems.map((p) => p.code)).toEqual(['answer-repaired']);
    expect(result.records[0]!.answers[0]!.start).toBe(start);
  });

  it('an answer that repeats in it cannot be placed', () => {
    const text = JSON.stringify({ id: 'long', context, question: 'Which?', answers: [{ text: 'opens at hour', start: 3 }] });
    const result = parseDataset(text, 'long.jsonl');
    expect(result.problems.map((p) => [p.code, p.field])).toEqual([['answer-mismatch', 'answers[0].start']]);
  });
});
