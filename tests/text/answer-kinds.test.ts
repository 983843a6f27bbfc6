// The answer-kind token type (src/text/answer-kinds.ts, level 'words+sentence+kind' of
// src/text/features.ts), on the demo handbook's training questions (tiny-models/demo):
// the question-word rules, the spans they mark, and the token types that carry them.
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { loadDataset } from '../../src/data/load.js';
import { answerCandidates } from '../../src/practice/candidates.js';
import { splitSentences } from '../../src/practice/sentences.js';
import { askedKinds, kindSpans } from '../../src/text/answer-kinds.js';
import { FeatureBuilder } from '../../src/text/features.js';
import { WordPieceTokenizer } from '../../src/text/wordpiece.js';

const file = new URL('../../tiny-models/demo/train.jsonl', import.meta.url);
const records = loadDataset(new Uint8Array(readFileSync(file)), 'train.jsonl').records;
const tokenizer = WordPieceTokenizer.fromVocabTxt(readFileSync(new URL('../../tiny-models/base/vocab.txt', import.meta.url), 'utf8'));
const sorted = (s: Set<string>) => [...s].sort();

describe('askedKinds', () => {
  it('reads the first question word and the words after it', () => {
    const cases: Array<[RegExp, string[]]> = [
      [/^what time /i, ['time']],
      [/^when /i, ['date', 'time']],
      [/^how many /i, ['number', 'quantity']],
      [/^how long /i, ['quantity', 'time']],
      [/^who /i, ['name', 'phrase']],
      [/^which form /i, ['code', 'number']],
      [/^what is the speed limit /i, ['quantity']],
    ];
    for (const [form, kinds] of cases) {
      const asked = records.filter((r) => form.test(r.question));
      expect(asked.length, String(form)).toBeGreaterThan(0);
      for (const r of asked) expect(sorted(askedKinds(r.question)), r.question).toEqual(kinds);
    }
    // a question word after a preposition, and a "when" that only opens a clause
    const byWhat = records.find((r) => /^by what date /i.test(r.question))!;
    expect(sorted(askedKinds(byWhat.question))).toEqual(['date']);
    // "What is the mean wind limit … when …": the limit is asked for, the "when" opens a clause
    const clause = records.find((r) => /^what is the mean wind limit .* when /i.test(r.question))!;
    expect(sorted(askedKinds(clause.question)), clause.question).toEqual(['quantity']);
  });

  it('names no kind for "Which vessel", "Which ship" or "What is the name" questions', () => {
    const plain = records.filter((x) => /^(which vessel|which ship|what is the name) /i.test(x.question));
    expect(plain.length).toBeGreaterThan(5);
    for (const r of plain) expect(askedKinds(r.question).size, r.question).toBe(0);
  });

  it('marks a span holding the gold answer for most questions that name a kind (0.80 measured on these 411)', () => {
    let named = 0;
    let held = 0;
    for (const r of records) {
      if (r.unanswerable) continue;
      const kinds = askedKinds(r.question);
      if (kinds.size === 0) continue;
      named++;
      const a = r.answers[0]!;
      if (kindSpans(r.context, kinds).some(([s, e]) => s < a.start + a.text.length && e > a.start)) held++;
    }
    expect(named).toBeGreaterThan(200);
    expect(held / named).toBeGreaterThan(0.7);
  });
});

describe('kindSpans', () => {
  it('are the answer candidates of the asked kinds, in order, each an exact stretch of its passage', () => {
    const r = records.find((x) => /^when /i.test(x.question))!;
    const kinds = askedKinds(r.question);
    const expected: Array<[number, number]> = [];
    for (const s of splitSentences(r.context)) {
      for (const c of answerCandidates(r.context, s.words)) {
        if (kinds.has(c.kind)) expected.push([s.words[c.first]!.start, s.words[c.last - 1]!.end]);
      }
    }
    const spans = kindSpans(r.context, kinds);
    expect(spans).toEqual(expected);
    expect(spans.length).toBeGreaterThan(0);
    for (let i = 1; i < spans.length; i++) expect(spans[i]![0]).toBeGreaterThanOrEqual(spans[i - 1]![1]);
    expect(kindSpans(r.context, new Set())).toEqual([]);
  });
});

describe("token types of level 'words+sentence+kind'", () => {
  const options = { maxLength: 256, stride: 64, maxQueryLength: 48 };
  const sentence = new FeatureBuilder(tokenizer, { ...options, questionMatch: 'words+sentence' });
  const kind = new FeatureBuilder(tokenizer, { ...options, questionMatch: 'words+sentence+kind' });

  it('add 4 to exactly the context tokens that overlap a span of an asked kind', () => {
    let marked = 0;
    for (const r of records.slice(0, 120)) {
      const spans = kindSpans(r.context, askedKinds(r.question));
      const a = sentence.build(r).features;
      const b = kind.build(r).features;
      expect(b.length).toBe(a.length);
      a.forEach((f, w) => {
        const g = b[w]!;
        expect(g.inputIds).toEqual(f.inputIds);
        expect(g.offsets).toEqual(f.offsets);
        for (let t = 0; t < f.tokenTypeIds.length; t++) {
          const s = f.offsets[2 * t]!;
          const e = f.offsets[2 * t + 1]!;
          const inside = s >= 0 && spans.some(([x, y]) => x < e && y > s);
          if (inside) marked++;
          expect(g.tokenTypeIds[t], `${r.id} token ${t}`).toBe(f.tokenTypeIds[t]! + (inside ? 4 : 0));
        }
      });
    }
    expect(marked).toBeGreaterThan(500);
  });
});
