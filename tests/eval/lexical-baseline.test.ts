// The lexical baseline (src/eval/lexical-baseline.ts) on small hand-made cases: every
// expected value follows from the rule stated at the top of that file, worked by hand
// here; no outside reference is involved.
import { describe, expect, it } from 'vitest';
import { contextSentences, lexicalAnswer, lexicalPredictions } from '../../src/eval/lexical-baseline.js';
import type { QARecord } from '../../src/data/record.js';

const CONTEXT =
  'The harbour opens at six. The night ferry leaves from pier four at midnight! Tickets are sold on board?\n' + 'Dogs travel free';

describe('contextSentences', () => {
  it('cuts at . ! ? before white space and at line breaks, trimmed', () => {
    const spans = contextSentences(CONTEXT).map(([s, e]) => CONTEXT.slice(s, e));
    expect(spans).toEqual([
      'The harbour opens at six.',
      'The night ferry leaves from pier four at midnight!',
      'Tickets are sold on board?',
      'Dogs travel free',
    ]);
  });

  it('keeps a full stop that is not followed by white space inside its sentence', () => {
    const text = 'Population 8,665,550 (July 2015 est.). Capital Vienna.';
    expect(contextSentences(text).map(([s, e]) => text.slice(s, e))).toEqual(['Population 8,665,550 (July 2015 est.).', 'Capital Vienna.']);
  });

  it('gives nothing for an empty or blank context', () => {
    expect(contextSentences('')).toEqual([]);
    expect(contextSentences('  \n ')).toEqual([]);
  });
});

describe('lexicalAnswer', () => {
  it('answers with the part of the best sentence after the last question word', () => {
    const a = lexicalAnswer(CONTEXT, 'When does the night ferry leave from pier four?');
    // content words: night, ferry, leave, pier, four; "leave" is not in the text ("leaves")
    expect(a.sentence).toEqual([26, 76]);
    expect(a.prediction).toBe('midnight'); // after "four", "at" dropped, "!" cut
    expect(CONTEXT.slice(a.charStart, a.charEnd)).toBe('midnight');
    // four of the five in one sentence of S = 4: 4·ln(5/1.5) / (4·ln(5/1.5) + ln(5/0.5))
    expect(a.coverage).toBeCloseTo((4 * Math.log(5 / 1.5)) / (4 * Math.log(5 / 1.5) + Math.log(5 / 0.5)), 10);
  });

  it('answers with the part before the first question word when nothing follows the last', () => {
    const text = 'Oranjestad is the capital. The island is flat.';
    const a = lexicalAnswer(text, 'What is the capital?');
    expect(a.prediction).toBe('Oranjestad');
  });

  it('answers the whole sentence when the question words fill it', () => {
    const text = 'Dogs travel free. Cats pay.';
    expect(lexicalAnswer(text, 'Do dogs travel free?').prediction).toBe('Dogs travel free');
  });

  it('says no answer when coverage is below minCoverage, and keeps the span it would have given', () => {
    const a = lexicalAnswer(CONTEXT, 'How much does a cabin for the harbour cost?', { minCoverage: 0.5 });
    // content words: cabin, harbour, cost; only "harbour" occurs, in sentence 1:
    // weights ln(5/0.5) for cabin and cost, ln(5/1.5) for harbour → coverage ≈ 0.21
    expect(a.coverage).toBeCloseTo(Math.log(5 / 1.5) / (2 * Math.log(5 / 0.5) + Math.log(5 / 1.5)), 10);
    expect(a.prediction).toBe('');
    expect(a.bestSpan).toBe('opens at six');
    expect(lexicalAnswer(CONTEXT, 'How much does a cabin for the harbour cost?', { minCoverage: 0.2 }).prediction).toBe('opens at six');
  });

  it('weighs a word found in every sentence less than a rare one', () => {
    const text = 'Aruba has a capital called Oranjestad. Aruba has a coast of 68 km. Aruba has a flat terrain.';
    const a = lexicalAnswer(text, 'How long is the coast of Aruba?');
    // S = 3; coast in one sentence, aruba in all three, long in none
    const coast = Math.log(4 / 1.5);
    const aruba = Math.log(4 / 3.5);
    expect(a.coverage).toBeCloseTo((coast + aruba) / (coast + aruba + Math.log(4 / 0.5)), 10);
    expect(a.bestSpan).toBe('68 km');
    expect(a.prediction).toBe(''); // ≈ 0.35, below the default 0.5
    expect(lexicalAnswer(text, 'How long is the coast of Aruba?', { minCoverage: 0.3 }).prediction).toBe('68 km');
  });

  it('keeps a bracket that belongs to the answer', () => {
    const text = 'The coastline of Austria: 0 km (landlocked).';
    expect(lexicalAnswer(text, 'How long is the coastline of Austria?').bestSpan).toBe('0 km (landlocked)');
    const share = 'Arable land is 38.4% of it.';
    expect(lexicalAnswer(share, 'How much land is arable?', { minCoverage: 0 }).prediction).toBe('38.4%');
  });

  it('gives no answer for an empty context or a question of function words only', () => {
    expect(lexicalAnswer('', 'Where is the harbour?').prediction).toBe('');
    const a = lexicalAnswer(CONTEXT, 'What is it?');
    expect(a.coverage).toBe(0);
    expect(a.prediction).toBe('');
  });
});

describe('lexicalPredictions', () => {
  const record = (id: string, question: string): QARecord => ({
    id,
    passageId: 'p',
    context: CONTEXT,
    question,
    answers: [],
    unanswerable: true,
  });

  it('scores records, with minCoverage − coverage as the score difference', () => {
    const out = lexicalPredictions([record('a', 'When does the night ferry leave from pier four?'), record('b', 'What is it?')], {
      minCoverage: 0.4,
    });
    expect(out.predictions).toEqual({ a: 'midnight', b: '' });
    expect(out.bestSpans['a']).toBe('midnight');
    expect(out.scoreDiffs['b']).toBeCloseTo(0.4, 12);
    expect(out.scoreDiffs['a']).toBeLessThan(0);
  });
});
