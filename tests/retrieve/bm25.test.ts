// BM25 against a corpus worked by hand with the formula of Robertson & Zaragoza 2009,
// "The Probabilistic Relevance Framework: BM25 and Beyond", with Lucene's IDF
// ln(1 + (N − n + 0.5)/(n + 0.5)) and k1 = 1.2, b = 0.75 (common practice).
import { describe, expect, it } from 'vitest';
import { Bm25Index, ENGLISH_STOP_WORDS, retrievalTokens } from '../../src/retrieve/bm25.js';

// Three passages; lengths 3, 2, 4 → avgdl = 9 / 3 = 3; N = 3.
const CORPUS = [
  { id: 'd1', text: 'apple banana apple' },
  { id: 'd2', text: 'banana cherry' },
  { id: 'd3', text: 'cherry date fig elder' },
];

describe('retrievalTokens', () => {
  it('lowercases and splits on anything that is not a letter, mark or digit, in any script', () => {
    expect(retrievalTokens('Ünïcode café—naïve, 3.14!')).toEqual(['ünïcode', 'café', 'naïve', '3', '14']);
    expect(retrievalTokens('Москва и Київ')).toEqual(['москва', 'и', 'київ']);
    expect(retrievalTokens('')).toEqual([]);
  });

  it('composes decomposed accents first (NFC), so both spellings match', () => {
    expect(retrievalTokens('cafe\u0301')).toEqual(['caf\u00e9']);
  });

  it('drops stop words when asked', () => {
    expect(retrievalTokens('What is the capital of France', ENGLISH_STOP_WORDS)).toEqual(['capital', 'france']);
  });
});

describe('Bm25Index', () => {
  it('scores the hand-worked example', () => {
    // Query "apple cherry".
    //   IDF(apple)  n = 1: ln(1 + (3 − 1 + 0.5)/(1 + 0.5)) = ln(1 + 2.5/1.5) = ln 2.6667 = 0.980829
    //   IDF(cherry) n = 2: ln(1 + (3 − 2 + 0.5)/(2 + 0.5)) = ln(1 + 1.5/2.5) = ln 1.6    = 0.470004
    //   d1: apple tf 2, |D| 3: K = 1.2·(0.25 + 0.75·3/3) = 1.2
    //       0.980829 · 2 · 2.2 / (2 + 1.2) = 0.980829 · 1.375 = 1.348640
    //   d2: cherry tf 1, |D| 2: K = 1.2·(0.25 + 0.75·2/3) = 0.9
    //       0.470004 · 2.2 / 1.9 = 0.544215
    //   d3: cherry tf 1, |D| 4: K = 1.2·(0.25 + 0.75·4/3) = 1.5
    //       0.470004 · 2.2 / 2.5 = 0.413603
    const index = new Bm25Index(CORPUS);
    expect(index.idf('apple')).toBeCloseTo(0.980829, 6);
    expect(index.idf('cherry')).toBeCloseTo(0.470004, 6);
    const hits = index.search('apple cherry', 10);
    expect(hits.map((h) => h.passageId)).toEqual(['d1', 'd2', 'd3']);
    expect(hits[0]!.score).toBeCloseTo(1.34864, 5);
    expect(hits[1]!.score).toBeCloseTo(0.544215, 5);
    expect(hits[2]!.score).toBeCloseTo(0.413603, 5);
  });

  it('sums over terms present in the passage: "banana cherry" on d2', () => {
    // IDF(banana) = IDF(cherry) = 0.470004 (both n = 2); d2 has each once, K = 0.9:
    //   2 · 0.470004 · 2.2 / 1.9 = 1.088429; d1: banana tf 1, K 1.2 → 0.470004·2.2/2.2 = 0.470004
    const hits = new Bm25Index(CORPUS).search('Banana, CHERRY?');
    expect(hits[0]).toEqual({ passageId: 'd2', score: expect.closeTo(1.088429, 5) });
    expect(hits.find((h) => h.passageId === 'd1')!.score).toBeCloseTo(0.470004, 5);
  });

  it('with b = 0 length does not matter: d2 and d3 tie, earlier passage first', () => {
    // K = k1 = 1.2 for every passage; cherry tf 1: 0.470004 · 2.2 / 2.2 = IDF
    const hits = new Bm25Index(CORPUS, { b: 0 }).search('cherry');
    expect(hits).toEqual([
      { passageId: 'd2', score: expect.closeTo(0.470004, 6) },
      { passageId: 'd3', score: expect.closeTo(0.470004, 6) },
    ]);
  });

  it('counts a repeated query term once, keeps topK, and leaves out passages with no match', () => {
    const index = new Bm25Index(CORPUS);
    expect(index.search('apple apple cherry')).toEqual(index.search('apple cherry'));
    expect(index.search('apple cherry', 1).map((h) => h.passageId)).toEqual(['d1']);
    expect(index.search('zebra')).toEqual([]);
    expect(index.search('fig').map((h) => h.passageId)).toEqual(['d3']);
  });

  it('IDF stays positive for a term in every passage (Lucene variant)', () => {
    // n = N = 3: ln(1 + 0.5/3.5) = ln(8/7) = 0.133531 > 0 (the classic RSJ weight would be < 0)
    const index = new Bm25Index([
      { id: 'a', text: 'x y' },
      { id: 'b', text: 'x' },
      { id: 'c', text: 'x z' },
    ]);
    expect(index.idf('x')).toBeCloseTo(Math.log(8 / 7), 12);
    expect(index.search('x').every((h) => h.score > 0)).toBe(true);
  });

  it('stop words are ignored in passages and queries alike', () => {
    const index = new Bm25Index(
      [
        { id: 'a', text: 'The capital of France is Paris' },
        { id: 'b', text: 'the the the of of' },
      ],
      { stopWords: ENGLISH_STOP_WORDS },
    );
    expect(index.search('the capital').map((h) => h.passageId)).toEqual(['a']);
    expect(index.search('the of')).toEqual([]);
  });

  it('handles an empty collection and rejects duplicate ids and bad settings', () => {
    expect(new Bm25Index([]).search('anything')).toEqual([]);
    expect(
      () =>
        new Bm25Index([
          { id: 'a', text: 'x' },
          { id: 'a', text: 'y' },
        ]),
    ).toThrow(/passage 1: id "a" appears twice/);
    expect(() => new Bm25Index(CORPUS, { b: 1.5 })).toThrow(/b must be in \[0, 1\]/);
    expect(() => new Bm25Index(CORPUS).search('x', -1)).toThrow(/topK/);
  });
});
