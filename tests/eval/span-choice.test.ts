// Decoding start/end logits into answers, on synthetic windows whose answer is known by
// construction. The rules checked (n-best starts/ends, end ≥ start, both in the context,
// max answer length, start + end logit, null score from [CLS] = min over windows, ""
// when null − best > threshold) are common practice for BERT span readers.
import { describe, expect, it } from 'vitest';
import { chooseAnswer, predictAll, type DecodableWindow, type WindowLogits } from '../../src/eval/span-choice.js';

const CONTEXT = 'Marie Curie won the Nobel Prize in 1903 for physics';
//               word: 0     1     2   3   4     5     6  7    8   9

/** Character [start, end) of each whitespace-separated word of `text`. */
function wordSpans(text: string): Array<[number, number]> {
  return [...text.matchAll(/\S+/g)].map((m) => [m.index!, m.index! + m[0].length]);
}

const QUESTION_TOKENS = 2;
/** token position of the first context token: [CLS] q q [SEP] → 4 */
const FIRST = QUESTION_TOKENS + 2;

/**
 * A window laid out as [CLS] q q [SEP] words[from..to) [SEP] [PAD]…, with offsets −1
 * for every token that is not context.
 */
function makeWindow(recordId: string, window: number, context: string, from: number, to: number, maxLength = 16): DecodableWindow {
  const words = wordSpans(context);
  const offsets = new Int32Array(2 * maxLength).fill(-1);
  for (let w = from; w < to; w++) {
    const t = FIRST + (w - from);
    offsets[2 * t] = words[w]![0];
    offsets[2 * t + 1] = words[w]![1];
  }
  return { recordId, window, offsets };
}

/** Logits of −5 everywhere except the given positions. */
function makeLogits(maxLength: number, start: Record<number, number>, end: Record<number, number>): WindowLogits {
  const s = new Float32Array(maxLength).fill(-5);
  const e = new Float32Array(maxLength).fill(-5);
  for (const [k, v] of Object.entries(start)) s[Number(k)] = v;
  for (const [k, v] of Object.entries(end)) e[Number(k)] = v;
  return { startLogits: s, endLogits: e };
}

describe('chooseAnswer', () => {
  it('finds the planted span and maps it to characters', () => {
    const w = makeWindow('q', 0, CONTEXT, 0, 10);
    // Nobel is word 4 → token 8, Prize word 5 → token 9; [CLS] 1 + 1 = 2
    const l = makeLogits(16, { 0: 1, [FIRST + 4]: 5 }, { 0: 1, [FIRST + 5]: 4 });
    const d = chooseAnswer(CONTEXT, [w], [l]);
    expect(d.prediction).toBe('Nobel Prize');
    expect(d.best).toMatchObject({
      text: 'Nobel Prize',
      charStart: CONTEXT.indexOf('Nobel'),
      charEnd: CONTEXT.indexOf('Prize') + 'Prize'.length,
      score: 9,
      startLogit: 5,
      endLogit: 4,
      window: 0,
      startToken: 8,
      endToken: 9,
    });
    expect(d.nullScore).toBe(2);
    expect(d.scoreDiff).toBe(2 - 9);
  });

  it('takes the best span across two overlapping windows and the minimum null score', () => {
    // window 0 holds words 0–5, window 1 words 4–9; "Nobel Prize" (words 4, 5) is in both
    const w0 = makeWindow('q', 0, CONTEXT, 0, 6);
    const w1 = makeWindow('q', 1, CONTEXT, 4, 10);
    // window 0: "Marie Curie" 3 + 3 = 6, "Nobel Prize" 2 + 2 = 4, null 1 + 1 = 2
    const l0 = makeLogits(16, { 0: 1, [FIRST + 0]: 3, [FIRST + 4]: 2 }, { 0: 1, [FIRST + 1]: 3, [FIRST + 5]: 2 });
    // window 1: "in 1903" (words 6, 7 → tokens 6, 7) 4 + 4 = 8, "Nobel Prize" 1 + 1 = 2, null −2
    const l1 = makeLogits(16, { 0: -1, [FIRST + 0]: 1, [FIRST + 2]: 4 }, { 0: -1, [FIRST + 1]: 1, [FIRST + 3]: 4 });
    const d = chooseAnswer(CONTEXT, [w0, w1], [l0, l1]);
    expect(d.prediction).toBe('in 1903');
    expect(d.best).toMatchObject({ window: 1, score: 8, startToken: FIRST + 2, endToken: FIRST + 3 });
    expect(d.nullScore).toBe(-2);
    expect(d.nullWindow).toBe(1);
    expect(d.scoreDiff).toBe(-10);
    // the shared span appears once, with its better score (window 0's 4)
    const nobel = d.nBest.filter((c) => c.text === 'Nobel Prize');
    expect(nobel).toHaveLength(1);
    expect(nobel[0]).toMatchObject({ score: 4, window: 0 });
    // window 0 pairs: Marie–Curie 6, Marie–Prize 5, Nobel–Prize 4; window 1: in–1903 8,
    // Nobel–1903 1 + 4 = 5, Nobel–Prize 2. Equal scores: the earlier window first.
    expect(d.nBest.slice(0, 5).map((c) => [c.text, c.score])).toEqual([
      ['in 1903', 8],
      ['Marie Curie', 6],
      ['Marie Curie won the Nobel Prize', 5],
      ['Nobel Prize in 1903', 5],
      ['Nobel Prize', 4],
    ]);
  });

  it('respects the max answer length', () => {
    const w = makeWindow('q', 0, CONTEXT, 0, 10);
    // "Marie … physics" (10 tokens) scores 6 + 6 = 12; "Marie Curie" 6 + 2 = 8
    const l = makeLogits(16, { 0: -9, [FIRST]: 6 }, { 0: -9, [FIRST + 1]: 2, [FIRST + 9]: 6 });
    const short = chooseAnswer(CONTEXT, [w], [l], { maxAnswerLength: 4 });
    expect(short.prediction).toBe('Marie Curie');
    for (const c of short.nBest) expect(c.endToken - c.startToken + 1).toBeLessThanOrEqual(4);
    const long = chooseAnswer(CONTEXT, [w], [l], { maxAnswerLength: 10 });
    expect(long.prediction).toBe(CONTEXT);
    expect(long.best!.score).toBe(12);
    // the default (30 tokens) allows it too
    expect(chooseAnswer(CONTEXT, [w], [l]).prediction).toBe(CONTEXT);
  });

  it('never starts or ends a span in the question, at [SEP] or in padding', () => {
    const w = makeWindow('q', 0, CONTEXT, 0, 10);
    // question tokens 1, 2 get huge start logits; [SEP] (token 14) and [PAD] (15) huge end logits
    const l = makeLogits(16, { 0: -9, 1: 20, 2: 20, [FIRST + 4]: 1 }, { 0: -9, 14: 20, 15: 20, [FIRST + 4]: 3 });
    const d = chooseAnswer(CONTEXT, [w], [l]);
    expect(d.prediction).toBe('Nobel');
    expect(d.best!.score).toBe(4);
    for (const c of d.nBest) {
      expect(c.startToken).toBeGreaterThanOrEqual(FIRST);
      expect(c.endToken).toBeLessThan(FIRST + 10);
    }
  });

  it('rejects spans that end before they start', () => {
    const w = makeWindow('q', 0, CONTEXT, 0, 10);
    // start peak on Prize (token 9) and end peak on Nobel (token 8) would score 10 but is
    // backwards; the best valid one is start Nobel 1 + end Nobel 5 = 6
    const l = makeLogits(16, { 0: -9, [FIRST + 5]: 5, [FIRST + 4]: 1 }, { 0: -9, [FIRST + 4]: 5 });
    const d = chooseAnswer(CONTEXT, [w], [l]);
    expect(d.prediction).toBe('Nobel');
    expect(d.best!.score).toBe(6);
    for (const c of d.nBest) expect(c.endToken).toBeGreaterThanOrEqual(c.startToken);
  });

  it('predicts no answer when the null score beats the best span by more than the threshold', () => {
    const w = makeWindow('q', 0, CONTEXT, 0, 10);
    // null 5 + 5 = 10, best span "Nobel Prize" 5 + 4 = 9: diff 1
    const l = makeLogits(16, { 0: 5, [FIRST + 4]: 5 }, { 0: 5, [FIRST + 5]: 4 });
    const d = chooseAnswer(CONTEXT, [w], [l]);
    expect(d.prediction).toBe('');
    expect(d.best!.text).toBe('Nobel Prize'); // still offered for display and threshold search
    expect(d.scoreDiff).toBe(1);
    // "" only when the difference is strictly greater than the threshold
    expect(chooseAnswer(CONTEXT, [w], [l], { nullThreshold: 1 }).prediction).toBe('Nobel Prize');
    expect(chooseAnswer(CONTEXT, [w], [l], { nullThreshold: 0.5 }).prediction).toBe('');
  });

  it('keeps at most n-best distinct spans, best first', () => {
    const w = makeWindow('q', 0, CONTEXT, 0, 10);
    const l = makeLogits(16, { [FIRST + 1]: 3, [FIRST + 4]: 2 }, { [FIRST + 1]: 3, [FIRST + 5]: 2 });
    const d = chooseAnswer(CONTEXT, [w], [l], { nBest: 3 });
    expect(d.nBest).toHaveLength(3);
    // with 3 starts and 3 ends the top pairs are Curie–Curie 6, Curie–Prize 5, Nobel–Prize 4
    expect(d.nBest.map((c) => [c.text, c.score])).toEqual([
      ['Curie', 6],
      ['Curie won the Nobel Prize', 5],
      ['Nobel Prize', 4],
    ]);
    expect(new Set(d.nBest.map((c) => `${c.charStart}:${c.charEnd}`)).size).toBe(3);
  });

  it('a window without context tokens yields no span and predicts ""', () => {
    const w = makeWindow('q', 0, CONTEXT, 0, 0);
    const d = chooseAnswer(CONTEXT, [w], [makeLogits(16, { 0: -3 }, { 0: -3 })]);
    expect(d).toMatchObject({ prediction: '', best: null, nBest: [], nullScore: -6, scoreDiff: Infinity });
  });

  it('widens a span cut inside a word to the whole word, but not in a script written without spaces', () => {
    // WordPiece pieces of "1903" as "19" "##0" "##3" (offsets by hand): a span on "19"..."0" is "1903"
    const context = 'won in 1903 for physics';
    const offsets = new Int32Array(2 * 16).fill(-1);
    const pieces: Array<[number, number]> = [
      [0, 3],
      [4, 6],
      [7, 9],
      [9, 10],
      [10, 11],
      [12, 15],
      [16, 23],
    ];
    pieces.forEach(([a, b], i) => {
      offsets[2 * (FIRST + i)] = a;
      offsets[2 * (FIRST + i) + 1] = b;
    });
    const d = chooseAnswer(context, [{ recordId: 'q', window: 0, offsets }], [makeLogits(16, { [FIRST + 2]: 5 }, { [FIRST + 3]: 5 })]);
    expect(d.prediction).toBe('1903');
    // Han characters: one token per character, and a character is a fair answer on its own
    const han = '東京都は日本の首都';
    const hanOffsets = new Int32Array(2 * 16).fill(-1);
    for (let i = 0; i < han.length; i++) {
      hanOffsets[2 * (FIRST + i)] = i;
      hanOffsets[2 * (FIRST + i) + 1] = i + 1;
    }
    const h = chooseAnswer(
      han,
      [{ recordId: 'h', window: 0, offsets: hanOffsets }],
      [makeLogits(16, { [FIRST + 4]: 5 }, { [FIRST + 5]: 5 })],
    );
    expect(h.prediction).toBe('日本');
  });

  it('names the record and window when logits do not fit the window', () => {
    const w = makeWindow('q7', 2, CONTEXT, 0, 10);
    expect(() => chooseAnswer(CONTEXT, [w], [makeLogits(15, {}, {})])).toThrow(
      /record "q7" window 2: startLogits has 15 values, expected 16/,
    );
  });
});

describe('predictAll', () => {
  const other = 'Water boils at 100 degrees';
  const records = [
    { id: 'r1', context: CONTEXT },
    { id: 'r2', context: other },
    { id: 'r3', context: 'no windows for this one' },
  ];

  it('groups windows by record and returns answers, best spans and score differences', () => {
    const features = [makeWindow('r1', 0, CONTEXT, 0, 6), makeWindow('r2', 0, other, 0, 5), makeWindow('r1', 1, CONTEXT, 4, 10)];
    const logits = [
      makeLogits(16, { 0: 0 }, { 0: 0 }), // r1 window 0: null 0, nothing better than −10
      // r2: "100 degrees" (words 3, 4) 3 + 3 = 6 but null 4 + 4 = 8 → diff 2 → ""
      makeLogits(16, { 0: 4, [FIRST + 3]: 3 }, { 0: 4, [FIRST + 4]: 3 }),
      // r1 window 1: "1903" (word 7 → token 7) 4 + 4 = 8, null 1 + 1 = 2; min null is 0
      makeLogits(16, { 0: 1, [FIRST + 3]: 4 }, { 0: 1, [FIRST + 3]: 4 }),
    ];
    const out = predictAll(records, features, logits);
    expect(out.predictions).toEqual({ r1: '1903', r2: '' });
    expect(out.bestSpans).toEqual({ r1: '1903', r2: '100 degrees' });
    expect(out.scoreDiffs).toEqual({ r1: 0 - 8, r2: 2 });
    expect(out.decodings.get('r1')!.best!.window).toBe(1);
    expect(out.decodings.has('r3')).toBe(false);
  });

  it('names a feature whose record is unknown', () => {
    expect(() => predictAll(records, [makeWindow('zz', 3, CONTEXT, 0, 2)], [makeLogits(16, {}, {})])).toThrow(
      /feature 0 \(window 3\) belongs to record "zz"/,
    );
  });

  it('needs one logit pair per feature', () => {
    expect(() => predictAll(records, [makeWindow('r1', 0, CONTEXT, 0, 2)], [])).toThrow(/1 features but 0 logit pairs/);
  });
});
