// Checks EM/F1 and the no-answer threshold search against the rules of the official
// SQuAD 2.0 evaluation script (v2.0), as remembered (from memory): normalize_answer =
// lower → remove string.punctuation → remove \b(a|an|the)\b → ' '.join(split());
// F1 over Counter-intersected tokens; max over gold answers; no-answer gold is [''].
// Every expected number below is worked out by hand beside the check.
import { describe, expect, it } from 'vitest';
import {
  answerTokens,
  applyNoAnswerThreshold,
  evaluate,
  exactMatch,
  f1Score,
  findBestThresholds,
  goldFromRecords,
  missingPredictions,
  normalizeAnswer,
  scoreQuestion,
  type GoldQuestion,
} from '../../src/eval/squad-metric.js';
import type { QARecord } from '../../src/data/record.js';

describe('normalizeAnswer (SQuAD 2.0 script rules, from memory)', () => {
  it('lowercases, drops ASCII punctuation and collapses whitespace', () => {
    expect(normalizeAnswer('  Hello,   World!  ')).toBe('hello world');
    // punctuation is removed, not replaced by a space: "U.S.A." → "usa", "co-op" → "coop"
    expect(normalizeAnswer('U.S.A.')).toBe('usa');
    expect(normalizeAnswer('co-op')).toBe('coop');
    // all 32 characters of Python's string.punctuation vanish
    expect(normalizeAnswer('x!"#$%&\'()*+,-./:;<=>?@[\\]^_`{|}~y')).toBe('xy');
  });

  it('removes the articles a, an, the only as whole words', () => {
    expect(normalizeAnswer('The cat and a dog ate an apple')).toBe('cat and dog ate apple');
    // inside words they stay: "theater", "Anthem", "data"
    expect(normalizeAnswer('theater Anthem data')).toBe('theater anthem data');
    expect(normalizeAnswer('A')).toBe('');
    // punctuation goes first, so "the." and "(an)" are bare articles by then
    expect(normalizeAnswer('the. (an) x')).toBe('x');
  });

  it('keeps non-ASCII punctuation and reads word boundaries the Unicode way', () => {
    // string.punctuation is ASCII only: the em dash and curly quotes stay
    expect(normalizeAnswer('Ça va—bien')).toBe('ça va—bien');
    expect(normalizeAnswer('“Quoted”')).toBe('“quoted”');
    // Python's \b treats é as a word character, so "an" in "anémona" is not an article
    // (an ASCII-only \b would strip it)
    expect(normalizeAnswer('anémona')).toBe('anémona');
    expect(normalizeAnswer('Ñthe the')).toBe('ñthe');
  });

  it("splits on Python's whitespace (str.split(), from memory)", () => {
    expect(normalizeAnswer('x\u3000y\u00a0z')).toBe('x y z'); // ideographic space, no-break space
    expect(normalizeAnswer('x\u0085y')).toBe('x y'); // NEL is whitespace to Python, not to JS \s
    expect(normalizeAnswer('x\ufeffy')).toBe('x\ufeffy'); // BOM is not whitespace to Python
  });

  it('tokens are the normalised words', () => {
    expect(answerTokens('The Denver Broncos.')).toEqual(['denver', 'broncos']);
    expect(answerTokens('')).toEqual([]);
    expect(answerTokens('the')).toEqual([]);
  });
});

describe('exact match and F1 of one pair', () => {
  it('exact match compares normalised strings', () => {
    expect(exactMatch('the Eiffel Tower', 'Eiffel tower!')).toBe(1);
    expect(exactMatch('Eiffel Tower', 'Tower Eiffel')).toBe(0);
  });

  it('F1 is token precision/recall: "Denver Broncos" vs "the Broncos"', () => {
    // gold [denver, broncos], pred [broncos]: overlap 1, P = 1, R = 1/2, F1 = 2·1·½ / 1½ = 2/3
    expect(f1Score('Denver Broncos', 'the Broncos')).toBeCloseTo(2 / 3, 12);
  });

  it('F1 intersects bags of tokens, not sets', () => {
    // gold [x, y, y, z], pred [y, y, y]: overlap min(2, 3) = 2, P = 2/3, R = 2/4,
    // F1 = 2·(2/3)(1/2) / (2/3 + 1/2) = (2/3) / (7/6) = 4/7
    expect(f1Score('x y y z', 'y y y')).toBeCloseTo(4 / 7, 12);
    // with sets it would be 1 common of {y} over {x,y,z}: 2·1·(1/3)/(4/3) = 1/2 — not this
    expect(f1Score('x y y z', 'y y y')).not.toBeCloseTo(0.5, 3);
  });

  it('F1 is 1 when both sides are empty and 0 when only one is', () => {
    expect(f1Score('', '')).toBe(1);
    expect(f1Score('', 'the')).toBe(1); // "the" normalises to nothing
    expect(f1Score('', 'Paris')).toBe(0);
    expect(f1Score('Paris', '')).toBe(0);
    expect(f1Score('Paris', 'London')).toBe(0);
  });
});

describe('scoring questions', () => {
  it('takes the maximum over gold answers, for EM and F1 separately', () => {
    const q: GoldQuestion = { id: 'q', answers: ['Denver Broncos', 'Broncos'] };
    // vs "Denver Broncos": pred [denver, team] overlap 1 → P ½ R ½ F1 ½; vs "Broncos": 0
    expect(scoreQuestion(q, 'the Denver team')).toEqual({ id: 'q', hasAnswer: true, exact: 0, f1: 0.5 });
    const city: GoldQuestion = { id: 'c', answers: ['Paris', 'the city of Paris'] };
    expect(scoreQuestion(city, 'City of Paris').exact).toBe(1);
  });

  it('an unanswerable question scores 1 only for an empty prediction (after normalisation)', () => {
    const q: GoldQuestion = { id: 'n', answers: [] };
    expect(scoreQuestion(q, '')).toMatchObject({ hasAnswer: false, exact: 1, f1: 1 });
    expect(scoreQuestion(q, 'The.')).toMatchObject({ exact: 1, f1: 1 });
    expect(scoreQuestion(q, 'Paris')).toMatchObject({ exact: 0, f1: 0 });
  });

  it('an answerable question scores 0 for an empty prediction', () => {
    expect(scoreQuestion({ id: 'a', answers: ['Paris'] }, '')).toMatchObject({ exact: 0, f1: 0 });
  });

  it('gold answers that normalise to nothing are dropped, leaving the gold ""', () => {
    // the script keeps only golds with normalize_answer(a) non-empty, else gold_answers = ['']
    const q: GoldQuestion = { id: 'g', answers: ['The'] };
    expect(scoreQuestion(q, '')).toMatchObject({ hasAnswer: true, exact: 1, f1: 1 });
  });

  it('reads gold from records: unanswerable records have no gold answers', () => {
    const records: QARecord[] = [
      { id: '1', passageId: 'p', context: 'Paris is big.', question: 'What?', answers: [{ text: 'Paris', start: 0 }], unanswerable: false },
      { id: '2', passageId: 'p', context: 'Paris is big.', question: 'Who?', answers: [], unanswerable: true },
    ];
    expect(goldFromRecords(records)).toEqual([
      { id: '1', answers: ['Paris'] },
      { id: '2', answers: [] },
    ]);
  });
});

describe('summaries in percent, answerable and unanswerable apart', () => {
  const gold: GoldQuestion[] = [
    { id: 'a1', answers: ['blue whale'] },
    { id: 'a2', answers: ['Marie Curie'] },
    { id: 'n1', answers: [] },
    { id: 'n2', answers: [] },
  ];

  it('scores a small hand-made set', () => {
    // a1 exact (1, 1); a2 "Curie": EM 0, F1 P 1 R ½ → 2/3; n1 "" (1, 1); n2 "x" (0, 0)
    const s = evaluate(gold, { a1: 'the Blue Whale', a2: 'Curie', n1: '', n2: 'x' });
    expect(s.total).toBe(4);
    expect(s.em).toBeCloseTo((100 * 2) / 4, 10); // 50
    expect(s.f1).toBeCloseTo((100 * (1 + 2 / 3 + 1 + 0)) / 4, 10); // 66.67
    expect(s.answerable).toEqual({ em: 50, f1: expect.closeTo((100 * (1 + 2 / 3)) / 2, 10), total: 2 });
    expect(s.unanswerable).toEqual({ em: 50, f1: 50, total: 2 });
  });

  it('counts a missing prediction as "" and names it', () => {
    const predictions = { a1: 'blue whale', a2: 'Marie Curie', n1: '' };
    expect(missingPredictions(gold, predictions)).toEqual(['n2']);
    // n2 missing → "" → correct for an unanswerable question: all four right
    expect(evaluate(gold, predictions).em).toBe(100);
    expect(evaluate(gold, { n1: '', n2: '' }).answerable).toEqual({ em: 0, f1: 0, total: 2 });
  });

  it('an empty split has no percentage', () => {
    const s = evaluate([{ id: 'a', answers: ['x'] }], { a: 'x' });
    expect(s.unanswerable).toEqual({ em: null, f1: null, total: 0 });
    expect(s.answerable).toEqual({ em: 100, f1: 100, total: 1 });
  });

  it('does not read inherited object keys as predictions', () => {
    const s = evaluate([{ id: 'toString', answers: [] }], {});
    expect(s.em).toBe(100); // missing → "" → correct; Object.prototype.toString is not a prediction
  });
});

describe('best no-answer threshold (find_best_thresh of the SQuAD 2.0 script, from memory)', () => {
  // Five questions, with the best non-null span and the score difference
  // (null score − best span score) the decoder would give:
  //   id  gold             best span     diff   span score (EM, F1)   "" score (EM, F1)
  //   A   blue whale       blue whale     −3    (1, 1)                (0, 0)
  //   B   Marie Curie      Curie          −1    (0, 2/3)              (0, 0)
  //   C   (none)           Paris          0.5   (0, 0)                (1, 1)
  //   D   1905             in 1905         2    (0, 2/3)              (0, 0)
  //   E   (none)           tomorrow        4    (0, 0)                (1, 1)
  // Threshold below −3: all "" → EM 2, F1 2 (C and E).
  // Passing the questions in order of diff (EM, F1 after each):
  //   A −3 → (3, 3)   B −1 → (3, 3 2/3)   C 0.5 → (2, 2 2/3)   D 2 → (2, 3 1/3)   E 4 → (1, 2 1/3)
  // Best EM 3 first reached at −3 (−1 ties it, the lower one is kept): 3/5 = 60 %.
  // Best F1 3 2/3 at −1: (11/3)/5 = 73.33 %.
  const gold: GoldQuestion[] = [
    { id: 'A', answers: ['blue whale'] },
    { id: 'B', answers: ['Marie Curie'] },
    { id: 'C', answers: [] },
    { id: 'D', answers: ['1905'] },
    { id: 'E', answers: [] },
  ];
  const bestSpans = { A: 'blue whale', B: 'Curie', C: 'Paris', D: 'in 1905', E: 'tomorrow' };
  const scoreDiffs = { A: -3, B: -1, C: 0.5, D: 2, E: 4 };

  it('finds the worked-out thresholds', () => {
    const r = findBestThresholds(gold, bestSpans, scoreDiffs);
    expect(r.bestEm).toBeCloseTo(60, 10);
    expect(r.bestEmThreshold).toBe(-3);
    expect(r.bestF1).toBeCloseTo((100 * 11) / 3 / 5, 10);
    expect(r.bestF1Threshold).toBe(-1);
  });

  it('reports scores that its thresholds really give', () => {
    const r = findBestThresholds(gold, bestSpans, scoreDiffs);
    expect(evaluate(gold, applyNoAnswerThreshold(bestSpans, scoreDiffs, r.bestEmThreshold)).em).toBeCloseTo(r.bestEm, 10);
    expect(evaluate(gold, applyNoAnswerThreshold(bestSpans, scoreDiffs, r.bestF1Threshold)).f1).toBeCloseTo(r.bestF1, 10);
  });

  it('no threshold does better (exhaustive check over every distinct cut)', () => {
    const r = findBestThresholds(gold, bestSpans, scoreDiffs);
    for (const t of [-10, -3, -2, -1, 0, 0.5, 1, 2, 3, 4, 10]) {
      const s = evaluate(gold, applyNoAnswerThreshold(bestSpans, scoreDiffs, t));
      expect(s.em!).toBeLessThanOrEqual(r.bestEm + 1e-9);
      expect(s.f1!).toBeLessThanOrEqual(r.bestF1 + 1e-9);
    }
  });

  it('applies "" where the difference is greater than the threshold', () => {
    // diff > 0.5 → "" for D and E; C (0.5) is not greater, keeps its span
    expect(applyNoAnswerThreshold(bestSpans, scoreDiffs, 0.5)).toEqual({
      A: 'blue whale',
      B: 'Curie',
      C: 'Paris',
      D: '',
      E: '',
    });
  });

  it('steps over a run of equal differences as one cut', () => {
    // F answerable and right, G unanswerable with a span, both diff 1. All "": EM 1 (G).
    // Threshold 1 answers both: EM 1 (F right, G wrong). Halfway through the run the
    // count would read 2, but no threshold answers F without G: best stays 1 = 50 %,
    // at a threshold below both (1 − 1 = 0).
    const g: GoldQuestion[] = [
      { id: 'F', answers: ['x'] },
      { id: 'G', answers: [] },
    ];
    const r = findBestThresholds(g, { F: 'x', G: 'y' }, { F: 1, G: 1 });
    expect(r.bestEm).toBe(50);
    expect(r.bestEmThreshold).toBe(0);
    expect(evaluate(g, applyNoAnswerThreshold({ F: 'x', G: 'y' }, { F: 1, G: 1 }, 0)).em).toBe(50);
  });

  it('when answering everything is best, the threshold is the largest difference', () => {
    const g: GoldQuestion[] = [
      { id: 'P', answers: ['x'] },
      { id: 'Q', answers: ['y'] },
    ];
    // all "" → 0; after P (diff 2) → 1; after Q (diff 5) → 2 = 100 %
    expect(findBestThresholds(g, { P: 'x', Q: 'y' }, { P: 2, Q: 5 })).toEqual({
      bestEm: 100,
      bestEmThreshold: 5,
      bestF1: 100,
      bestF1Threshold: 5,
    });
  });

  it('needs a score difference for every question with a span', () => {
    expect(() => findBestThresholds(gold, bestSpans, { A: -3 })).toThrow(/question "B"/);
  });
});
