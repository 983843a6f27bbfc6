// Combining retriever and reader scores: min–max normalised weighted sum (the formula in
// src/retrieve/combine.ts; linear interpolation is common practice). Values by hand.
import { describe, expect, it } from 'vitest';
import { combineScores, minMaxNormalize } from '../../src/retrieve/combine.js';

describe('minMaxNormalize', () => {
  it('maps the smallest to 0 and the largest to 1', () => {
    // (x − 2) / (10 − 2): 2 → 0, 4 → 0.25, 10 → 1
    expect(minMaxNormalize([4, 2, 10])).toEqual([0.25, 0, 1]);
  });
  it('gives 1 to all when they are equal, and nothing for nothing', () => {
    expect(minMaxNormalize([3, 3])).toEqual([1, 1]);
    expect(minMaxNormalize([])).toEqual([]);
  });
  it('rejects scores that are not finite', () => {
    expect(() => minMaxNormalize([1, Infinity])).toThrow(/not a finite score/);
  });
});

describe('combineScores', () => {
  const candidates = [
    { passageId: 'p1', retrieverScore: 8, readerScore: 2 },
    { passageId: 'p2', retrieverScore: 4, readerScore: 10 },
    { passageId: 'p3', retrieverScore: 0, readerScore: 6 },
  ];

  it('mixes the normalised scores with the default weight 0.5', () => {
    // retriever normalised: 8 → 1, 4 → 0.5, 0 → 0; reader: 2 → 0, 10 → 1, 6 → 0.5
    // combined: p1 0.5·1 + 0.5·0 = 0.5; p2 0.5·0.5 + 0.5·1 = 0.75; p3 0 + 0.25 = 0.25
    const out = combineScores(candidates);
    expect(out.map((c) => [c.passageId, c.combinedScore])).toEqual([
      ['p2', 0.75],
      ['p1', 0.5],
      ['p3', 0.25],
    ]);
  });

  it('the weight moves the ranking toward the retriever', () => {
    // w = 0.9: p1 0.9; p2 0.45 + 0.1 = 0.55; p3 0 + 0.05 = 0.05
    const out = combineScores(candidates, { retrieverWeight: 0.9 });
    expect(out.map((c) => c.passageId)).toEqual(['p1', 'p2', 'p3']);
    expect(out[1]!.combinedScore).toBeCloseTo(0.55, 12);
    // w = 0 is the reader alone, w = 1 the retriever alone
    expect(combineScores(candidates, { retrieverWeight: 0 }).map((c) => c.passageId)).toEqual(['p2', 'p3', 'p1']);
    expect(combineScores(candidates, { retrieverWeight: 1 }).map((c) => c.passageId)).toEqual(['p1', 'p2', 'p3']);
  });

  it('keeps the candidates’ own fields and rejects a weight outside [0, 1]', () => {
    expect(combineScores([{ retrieverScore: 1, readerScore: 1, text: 'x' }])).toEqual([
      { retrieverScore: 1, readerScore: 1, text: 'x', combinedScore: 1 },
    ]);
    expect(() => combineScores(candidates, { retrieverWeight: 2 })).toThrow(/retrieverWeight/);
  });
});
