// defines: chooseAnswer, predictAll — from the start/end logits of every window of a
// question to an answer: the n-best spans across windows, the null ([CLS]) score, and the
// no-answer decision.
//
// The decoding follows common practice for BERT span readers (the procedure of
// Devlin et al. 2019's SQuAD setup, described here in our own words):
//   1. In each window take the n-best start positions and the n-best end positions by
//      logit, among context tokens only (offsets not −1).
//   2. Pair them: keep end ≥ start and length end − start + 1 ≤ max answer length;
//      a span's score is start logit + end logit.
//   3. Map token spans to characters through the window's offsets, widened to whole
//      words where a span starts or ends inside one (WordPiece cuts "2025" into "20",
//      "##2", "##5"; an answer "202" is never meant), and gather the spans of all windows;
//      the same character span seen twice keeps its best score. Sort by score, keep the
//      n best. Scripts written without spaces between words (Han, kana, Thai) are not
//      widened: there a character is a fair boundary.
//   4. The null score of a window is start[0] + end[0] ([CLS]); the question's null
//      score is the minimum over its windows (common practice: a question is only as
//      unanswerable as its most confident window says).
//   5. Predict "" when null score − best span score > threshold (default 0).
// Step 1 differs slightly from the usual recipe, which takes the n best over every
// position and discards non-context ones afterwards; choosing among context tokens
// only never wastes a candidate on a question token.
import type { QARecord } from '../data/record.js';
import { askedKinds, kindSpans } from '../text/answer-kinds.js';
import type { Feature } from '../text/features.js';

/** A letter or digit of a script that separates its words with spaces (step 3). */
const WORD_CHAR = /(?![\p{sc=Han}\p{sc=Hiragana}\p{sc=Katakana}\p{sc=Thai}])[\p{L}\p{N}\p{M}]/u;
const inWord = (text: string, i: number) => i >= 0 && i < text.length && WORD_CHAR.test(text[i]!);

/**
 * The part of a `Feature` (src/text/features.ts, contract in DEVELOPERS.md) the decoder
 * reads: which record and window, and the offsets (2 × maxLength: char start, end per
 * token; −1, −1 for tokens that are not context).
 */
export type DecodableWindow = Pick<Feature, 'recordId' | 'window' | 'offsets'>;

/** The reader's output for one window: one logit per token position (length maxLength). */
export interface WindowLogits {
  startLogits: ArrayLike<number>;
  endLogits: ArrayLike<number>;
}

export interface SpanChoiceOptions {
  /** start and end candidates per window, and spans kept; 20 is common practice */
  nBest?: number;
  /** longest answer in tokens; 30 is common practice for SQuAD-like data */
  maxAnswerLength?: number;
  /** predict "" when null score − best span score exceeds this; 0 is the neutral default */
  nullThreshold?: number;
  /**
   * Type-aware decoding: added to the score of a span that is exactly a span of the kind
   * the question asks for (src/text/answer-kinds.ts: a time for "What time", a quantity for
   * "How long"), scored from its first and last token's logits. 0 (the default) leaves
   * decoding as above. Chosen with the no-answer cut on training questions
   * (ReaderSession.scoreWithTrainedCut); the usual answer-type constraint of question
   * answering pipelines, made soft.
   */
  kindBonus?: number;
}

/** The bonuses tried when one is chosen on training questions (our choice: 0 and a few steps of logit scale). */
export const KIND_BONUS_GRID: readonly number[] = Object.freeze([0, 0.5, 1, 2, 3, 5]);

const DEFAULTS: Required<Omit<SpanChoiceOptions, 'kindBonus'>> = { nBest: 20, maxAnswerLength: 30, nullThreshold: 0 };

/** One candidate answer span. */
export interface SpanCandidate {
  text: string;
  /** UTF-16 offsets into the context: text = context.slice(charStart, charEnd) */
  charStart: number;
  charEnd: number;
  /** start logit + end logit */
  score: number;
  startLogit: number;
  endLogit: number;
  /** the window (Feature.window) it came from */
  window: number;
  /** token positions within that window, inclusive */
  startToken: number;
  endToken: number;
}

/** Everything the decoder decided about one question, for scoring and for display. */
export interface QuestionDecoding {
  /** the answer: "" for no answer */
  prediction: string;
  /** the best non-null span, or null when no window had a valid span */
  best: SpanCandidate | null;
  /** best first, at most nBest, distinct character spans */
  nBest: SpanCandidate[];
  /** min over windows of start[0] + end[0] */
  nullScore: number;
  /** the window whose null score was taken */
  nullWindow: number;
  /** nullScore − best.score; +Infinity when there is no span */
  scoreDiff: number;
}

/** Positions of the `n` largest values among `positions`, largest first (ties: earlier first). */
function topPositions(values: ArrayLike<number>, positions: readonly number[], n: number): number[] {
  return [...positions].sort((a, b) => values[b]! - values[a]! || a - b).slice(0, n);
}

function checkWindow(w: DecodableWindow, l: WindowLogits): number {
  const maxLength = w.offsets.length / 2;
  if (!Number.isInteger(maxLength) || maxLength < 1) {
    throw new Error(`record "${w.recordId}" window ${w.window}: offsets length ${w.offsets.length} is not 2 × maxLength`);
  }
  for (const [name, logits] of [
    ['startLogits', l.startLogits],
    ['endLogits', l.endLogits],
  ] as const) {
    if (logits.length !== maxLength) {
      throw new Error(`record "${w.recordId}" window ${w.window}: ${name} has ${logits.length} values, expected ${maxLength}`);
    }
  }
  return maxLength;
}

/**
 * Decodes one question from all its windows. `windows[i]` and `logits[i]` belong
 * together; offsets index into `context`.
 */
export function chooseAnswer(
  context: string,
  windows: readonly DecodableWindow[],
  logits: readonly WindowLogits[],
  options: SpanChoiceOptions = {},
  /** character spans [start, end) that get options.kindBonus (kindSpans of the question) */
  kindSpans: ReadonlyArray<readonly [number, number]> = [],
): QuestionDecoding {
  const { nBest, maxAnswerLength, nullThreshold } = { ...DEFAULTS, ...options };
  const bonus = options.kindBonus ?? 0;
  if (windows.length === 0) throw new Error('chooseAnswer: a question needs at least one window');
  if (windows.length !== logits.length) {
    throw new Error(`chooseAnswer: ${windows.length} windows but ${logits.length} logit pairs`);
  }

  let nullScore = Infinity;
  let nullWindow = windows[0]!.window;
  const bySpan = new Map<string, SpanCandidate>();
  /** the span from token s to e of window `win`, kept when it beats what that character span had */
  const offer = (win: DecodableWindow, logit: WindowLogits, s: number, e: number, charStart: number, charEnd: number, extra = 0) => {
    const score = logit.startLogits[s]! + logit.endLogits[e]! + extra;
    const key = `${charStart}:${charEnd}`;
    const seen = bySpan.get(key);
    if (seen && seen.score >= score) return;
    bySpan.set(key, {
      text: context.slice(charStart, charEnd),
      charStart,
      charEnd,
      score,
      startLogit: logit.startLogits[s]!,
      endLogit: logit.endLogits[e]!,
      window: win.window,
      startToken: s,
      endToken: e,
    });
  };

  for (let w = 0; w < windows.length; w++) {
    const win = windows[w]!;
    const { startLogits, endLogits } = logits[w]!;
    const maxLength = checkWindow(win, logits[w]!);
    const offsets = win.offsets;

    // 4. this window's null score
    const windowNull = startLogits[0]! + endLogits[0]!;
    if (windowNull < nullScore) {
      nullScore = windowNull;
      nullWindow = win.window;
    }

    // 1. n-best starts and ends among context tokens
    const contextTokens: number[] = [];
    for (let t = 0; t < maxLength; t++) if (offsets[2 * t]! >= 0 && offsets[2 * t + 1]! >= 0) contextTokens.push(t);
    const starts = topPositions(startLogits, contextTokens, nBest);
    const ends = topPositions(endLogits, contextTokens, nBest);

    // 2. valid pairs; 3. to characters, best score per character span
    for (const s of starts) {
      for (const e of ends) {
        if (e < s || e - s + 1 > maxAnswerLength) continue;
        let charStart = offsets[2 * s]!;
        let charEnd = offsets[2 * e + 1]!;
        if (charEnd < charStart || charEnd > context.length) {
          throw new Error(
            `record "${win.recordId}" window ${win.window}: offsets ${charStart}..${charEnd} do not fit a context of ${context.length} characters`,
          );
        }
        while (charStart > 0 && inWord(context, charStart - 1) && inWord(context, charStart)) charStart--;
        while (charEnd < context.length && inWord(context, charEnd) && inWord(context, charEnd - 1)) charEnd++;
        offer(win, logits[w]!, s, e, charStart, charEnd);
      }
    }

    // type-aware decoding: each span of the asked kind, from the tokens that cover it exactly
    if (bonus !== 0) {
      for (const [cs, ce] of kindSpans) {
        let s = -1;
        let e = -1;
        for (const t of contextTokens) {
          if (s < 0 && offsets[2 * t + 1]! > cs) s = t;
          if (offsets[2 * t]! < ce) e = t;
        }
        if (s < 0 || e < s || offsets[2 * s]! !== cs || offsets[2 * e + 1]! !== ce) continue;
        if (e - s + 1 > maxAnswerLength) continue;
        offer(win, logits[w]!, s, e, cs, ce, bonus);
      }
    }
  }

  const ranked = [...bySpan.values()]
    .sort((a, b) => b.score - a.score || a.window - b.window || a.charStart - b.charStart || a.charEnd - b.charEnd)
    .slice(0, nBest);
  const best = ranked[0] ?? null;
  const scoreDiff = best ? nullScore - best.score : Infinity;
  // 5. the no-answer decision
  const prediction = best && !(scoreDiff > nullThreshold) ? best.text : '';
  return { prediction, best, nBest: ranked, nullScore, nullWindow, scoreDiff };
}

/** Answers for a set of questions, in the shapes the metric reads. */
export interface Decoded {
  /** id → answer ("" = no answer) at the decode threshold */
  predictions: Record<string, string>;
  /** id → best non-null span ("" when there is none), for the threshold search */
  bestSpans: Record<string, string>;
  /** id → null score − best span score */
  scoreDiffs: Record<string, number>;
  /** id → the full decoding (n-best list, null score) */
  decodings: Map<string, QuestionDecoding>;
}

/**
 * Decodes every record that has features: groups `features` by `recordId` (with
 * `logits[i]` belonging to `features[i]`) and decodes each group against its record's
 * context. Records without features are left out (the metric reports them missing); a
 * feature whose record is unknown is an error.
 */
export function predictAll(
  records: ReadonlyArray<Pick<QARecord, 'id' | 'context'> & { question?: string }>,
  features: readonly DecodableWindow[],
  logits: readonly WindowLogits[],
  options: SpanChoiceOptions = {},
): Decoded {
  if (features.length !== logits.length) {
    throw new Error(`predictAll: ${features.length} features but ${logits.length} logit pairs`);
  }
  const contexts = new Map<string, string>();
  for (const r of records) contexts.set(r.id, r.context);

  const groups = new Map<string, { windows: DecodableWindow[]; logits: WindowLogits[] }>();
  features.forEach((f, i) => {
    if (!contexts.has(f.recordId)) {
      throw new Error(`feature ${i} (window ${f.window}) belongs to record "${f.recordId}", which is not among the records`);
    }
    let group = groups.get(f.recordId);
    if (!group) groups.set(f.recordId, (group = { windows: [], logits: [] }));
    group.windows.push(f);
    group.logits.push(logits[i]!);
  });

  // null-prototype objects, so an id such as "__proto__" stays a plain key
  const out: Decoded = {
    predictions: Object.create(null),
    bestSpans: Object.create(null),
    scoreDiffs: Object.create(null),
    decodings: new Map(),
  };
  for (const r of records) {
    const group = groups.get(r.id);
    if (!group) continue;
    const spans = options.kindBonus && r.question !== undefined ? kindSpans(r.context, askedKinds(r.question)) : [];
    const d = chooseAnswer(r.context, group.windows, group.logits, options, spans);
    out.predictions[r.id] = d.prediction;
    out.bestSpans[r.id] = d.best?.text ?? '';
    out.scoreDiffs[r.id] = d.scoreDiff;
    out.decodings.set(r.id, d);
  }
  return out;
}
