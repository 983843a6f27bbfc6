// defines: lexicalAnswer, lexicalPredictions, lexicalBaselineScores, contextSentences,
// LexicalOptions, LexicalAnswer — a word-overlap BASELINE reader. It is a yardstick for measurements (a
// trained reader should beat it; tests/external/factbook.test.ts checks that), not a
// product feature: nothing in the workbench answers questions with it.
//
// The method, in the spirit of the sliding-window word-overlap baselines that reading-
// comprehension papers report (e.g. Richardson et al. 2013, MCTest; from memory), made
// extractive:
//   1. Words are runs of letters and digits, lowercased; question words that are not in
//      a short list of English function words (STOPWORDS) are its content words.
//   2. The context is cut into sentences: at ".", "!" or "?" followed by white space, and
//      at line breaks.
//   3. Each content word weighs ln((S + 1) / (df + 0.5)), S sentences, df the sentences
//      that contain it: a word in every sentence (the place name of a profile) counts
//      little, a word in no sentence counts most — and, being absent, lowers coverage.
//   4. A sentence's coverage is the weight of the question's distinct content words it
//      contains over the weight of all of them, in [0, 1]. The best sentence has the
//      highest coverage (the earliest on ties).
//   5. No answer when the best coverage is below `minCoverage`.
//   6. The answer is the part of the best sentence after the last question word in it,
//      with function words dropped from both ends and closing punctuation cut; if
//      nothing is left, the part before the first question word, trimmed alike; if that
//      is empty too, the whole sentence, trimmed alike.
// Offsets are UTF-16 code units into the context, as everywhere (DEVELOPERS.md).

import type { QARecord } from '../data/record.js';
import { evaluate, findBestThresholds, goldFromRecords, type SquadScores } from './squad-metric.js';

export interface LexicalOptions {
  /** answer "" when the best sentence covers less than this share of the question's weight */
  minCoverage?: number;
}

/** Half the question's weight: a neutral middle, to be tuned on training data by the caller. */
const DEFAULT_MIN_COVERAGE = 0.5;

/** English function words and question words (our own short list). */
const STOPWORDS = new Set(
  (
    'a an the of in on at to for from by with and or not no is are was were be been being am do does did has have had ' +
    'what which who whom whose when where why how this that these those it its as into than there their they them ' +
    'his her he she we you your our i me my can could would should will shall may might must about many much like ' +
    'if so such very any some all each every other s'
  ).split(' '),
);

interface Word {
  text: string;
  start: number;
  end: number;
}

function words(text: string, offset = 0): Word[] {
  const out: Word[] = [];
  for (const m of text.matchAll(/[\p{L}\p{N}]+/gu)) {
    out.push({ text: m[0].toLowerCase(), start: offset + m.index, end: offset + m.index + m[0].length });
  }
  return out;
}

/** Step 2: sentence [start, end) ranges of a context, trimmed, empty ones dropped. */
export function contextSentences(context: string): Array<[number, number]> {
  const out: Array<[number, number]> = [];
  const push = (start: number, end: number) => {
    while (start < end && /\s/u.test(context[start]!)) start++;
    while (end > start && /\s/u.test(context[end - 1]!)) end--;
    if (end > start) out.push([start, end]);
  };
  let start = 0;
  for (const m of context.matchAll(/[.!?](?=\s)|\n/g)) {
    const end = m.index + m[0].length;
    push(start, m[0] === '\n' ? m.index : end);
    start = end;
  }
  push(start, context.length);
  return out;
}

export interface LexicalAnswer {
  /** "" for no answer */
  prediction: string;
  /** the answer the rule gives before the no-answer decision (always a span) */
  bestSpan: string;
  /** character range of `bestSpan` in the context */
  charStart: number;
  charEnd: number;
  /** coverage of the best sentence, in [0, 1] */
  coverage: number;
  /** the best sentence's range */
  sentence: [number, number];
}

/**
 * Trims function words off both ends of [start, end) of the context, and the sentence's
 * closing punctuation: "is Vienna." → "Vienna", "Oranjestad is the" → "Oranjestad".
 * Marks that belong to the kept words stay: "(landlocked)", "38.4%", "\"Hino Nacional\"".
 */
function trimSpan(context: string, start: number, end: number): [number, number] {
  const inner = words(context.slice(start, end), start);
  let first = 0;
  while (first < inner.length && STOPWORDS.has(inner[first]!.text)) first++;
  let last = inner.length - 1;
  while (last >= first && STOPWORDS.has(inner[last]!.text)) last--;
  if (first > last) return [start, start];
  let s = inner[first]!.start;
  while (s > start && /["'([]/u.test(context[s - 1]!)) s--; // an opening mark of the first word
  let e: number;
  if (last === inner.length - 1) {
    e = end; // nothing dropped at the end but punctuation and space
    while (e > s && /[\s.,;:!?]/u.test(context[e - 1]!)) e--;
  } else {
    e = inner[last]!.end;
    while (e < end && /["')\]%]/u.test(context[e]!)) e++; // a closing mark of the last word
  }
  return [s, e];
}

/** Steps 1–6 for one question. */
export function lexicalAnswer(context: string, question: string, options: LexicalOptions = {}): LexicalAnswer {
  const minCoverage = options.minCoverage ?? DEFAULT_MIN_COVERAGE;
  // 1.
  const asked = [...new Set(words(question).map((w) => w.text))].filter((w) => !STOPWORDS.has(w));
  // 2.
  const sentences = contextSentences(context);
  const sentenceWords = sentences.map(([s, e]) => words(context.slice(s, e), s));
  const present = sentenceWords.map((ws) => new Set(ws.map((w) => w.text)));
  // 3.
  const S = sentences.length;
  const weight = new Map(asked.map((w) => [w, Math.log((S + 1) / (present.filter((p) => p.has(w)).length + 0.5))]));
  const total = [...weight.values()].reduce((a, b) => a + b, 0);
  // 4.
  let best = -1;
  let bestCoverage = -1;
  sentences.forEach((_, i) => {
    const got = asked.reduce((sum, w) => sum + (present[i]!.has(w) ? weight.get(w)! : 0), 0);
    const coverage = total > 0 ? got / total : 0;
    if (coverage > bestCoverage) {
      bestCoverage = coverage;
      best = i;
    }
  });
  if (best < 0) return { prediction: '', bestSpan: '', charStart: 0, charEnd: 0, coverage: 0, sentence: [0, 0] };

  // 6. the span next to the question's words
  const [sStart, sEnd] = sentences[best]!;
  const matched = sentenceWords[best]!.filter((w) => weight.has(w.text));
  const whole = trimSpan(context, sStart, sEnd);
  let span: [number, number] = whole[1] > whole[0] ? whole : [sStart, sEnd];
  if (matched.length > 0) {
    const after = trimSpan(context, matched[matched.length - 1]!.end, sEnd);
    const before = trimSpan(context, sStart, matched[0]!.start);
    if (after[1] > after[0]) span = after;
    else if (before[1] > before[0]) span = before;
  }
  const bestSpan = context.slice(span[0], span[1]);
  // 5.
  const prediction = bestCoverage < minCoverage ? '' : bestSpan;
  return { prediction, bestSpan, charStart: span[0], charEnd: span[1], coverage: bestCoverage, sentence: [sStart, sEnd] };
}

/**
 * The baseline over records, in the shapes squad-metric.ts scores: predictions, the best
 * spans and score differences (minCoverage − coverage, so the metric's threshold search,
 * `findBestThresholds`, can tune the no-answer rule, and threshold 0 is the rule itself).
 */
export function lexicalPredictions(
  records: readonly QARecord[],
  options: LexicalOptions = {},
): { predictions: Record<string, string>; bestSpans: Record<string, string>; scoreDiffs: Record<string, number> } {
  const minCoverage = options.minCoverage ?? DEFAULT_MIN_COVERAGE;
  const predictions: Record<string, string> = Object.create(null);
  const bestSpans: Record<string, string> = Object.create(null);
  const scoreDiffs: Record<string, number> = Object.create(null);
  for (const r of records) {
    const a = lexicalAnswer(r.context, r.question, { minCoverage });
    predictions[r.id] = a.prediction;
    bestSpans[r.id] = a.bestSpan;
    scoreDiffs[r.id] = minCoverage - a.coverage;
  }
  return { predictions, bestSpans, scoreDiffs };
}

/**
 * The baseline's SQuAD 2.0 scores on `heldOut`, its no-answer cut (minCoverage) chosen on
 * `tuneOn` (training questions) by the metric's best-threshold search, so the cut is never
 * tuned on the questions it is scored on.
 */
export function lexicalBaselineScores(
  tuneOn: readonly QARecord[],
  heldOut: readonly QARecord[],
): { scores: SquadScores; minCoverage: number } {
  const neutral = DEFAULT_MIN_COVERAGE; // lexicalPredictions' score difference is minCoverage − coverage
  const onTrain = lexicalPredictions(tuneOn, { minCoverage: neutral });
  const search = findBestThresholds(goldFromRecords(tuneOn), onTrain.bestSpans, onTrain.scoreDiffs);
  const minCoverage = Math.max(0, neutral - search.bestF1Threshold);
  const { predictions } = lexicalPredictions(heldOut, { minCoverage });
  return { scores: evaluate(goldFromRecords(heldOut), predictions), minCoverage };
}
