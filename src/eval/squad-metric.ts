// defines: normalizeAnswer, answerTokens, exactMatch, f1Score, goldFromRecords,
// scoreQuestion, scoreAll, summarize, evaluate, missingPredictions,
// applyNoAnswerThreshold, findBestThresholds — exact match and F1 by the rules of the
// official SQuAD 2.0 evaluation script (v2.0), reproduced here from memory, plus its
// best no-answer threshold search.
//
// The rules, as that script states them (from memory):
//   normalize(s) = collapse whitespace(remove articles(remove punctuation(lowercase(s))))
//     - punctuation is Python's `string.punctuation`: the 32 ASCII punctuation marks
//     - articles are `a`, `an`, `the` as whole words (`\b(a|an|the)\b`, Unicode-aware)
//   EM(gold, pred) = 1 if normalize(gold) == normalize(pred) else 0
//   F1(gold, pred) = harmonic mean of token precision and recall, where tokens are
//     normalize(s) split on whitespace and the overlap is a bag (multiset) intersection;
//     if either side has no tokens, F1 = 1 when both have none, else 0
//   A question's score is the maximum over its gold answers. A question with no gold
//   answer (or whose gold answers all normalise to nothing) has the single gold answer
//   "", so only a prediction that normalises to nothing scores 1 (EM and F1 alike).
//
// Deliberate differences from the script, each for a reason:
//   - Missing predictions score as "" (the script skips them and prints a line); the
//     caller is told how many through `missingPredictions`.
//   - The headline numbers score the predictions as given. The script also applies its
//     --na-prob-thresh (default 1.0) to them whenever a na-prob file is passed, which
//     assumes probabilities; here the scores are null-score differences of any sign,
//     so applying a threshold is an explicit step (`applyNoAnswerThreshold`).
//   - The threshold search steps over whole runs of equal score differences, so the
//     best score it reports is the one its threshold really gives (the script updates
//     inside a run of ties, which can report a score no threshold reaches). Without
//     ties the two agree.
//   - If answering nothing is best, the threshold reported is just below the smallest
//     difference (the script reports 0.0, which for probabilities means the same).
import type { QARecord } from '../data/record.js';

// ---------------------------------------------------------------- normalisation

/** Python's `string.punctuation`: !"#$%&'()*+,-./:;<=>?@[\]^_`{|}~ (ASCII only). */
const ASCII_PUNCTUATION = new Set('!"#$%&\'()*+,-./:;<=>?@[\\]^_`{|}~');

/**
 * `\b(a|an|the)\b` as Python 3's `re` reads it on a str: a word character is a letter,
 * a number or `_` (str.isalnum() or '_'; from memory). JavaScript's `\b` is ASCII-only
 * even with the `u` flag, so the boundary is spelled out with lookarounds.
 */
const ARTICLES = /(?<![\p{L}\p{N}_])(?:a|an|the)(?![\p{L}\p{N}_])/gu;

/**
 * Python's `str.split()` splits on the characters for which `str.isspace()` holds
 * (from memory): the ASCII controls \t \n \v \f \r and \x1c–\x1f, space, \x85, \xa0,
 * \u1680, \u2000–\u200a, \u2028, \u2029, \u202f, \u205f, \u3000. JavaScript's `\s`
 * differs (it includes \ufeff and lacks \x1c–\x1f and \x85).
 */
// eslint-disable-next-line no-control-regex -- the control characters are the point: Python's str.split() splits on them
const PYTHON_WHITESPACE = /[\t\n\v\f\r\x1c-\x1f \x85\xa0\u1680\u2000-\u200a\u2028\u2029\u202f\u205f\u3000]+/u;

function removePunctuation(text: string): string {
  let out = '';
  for (const ch of text) if (!ASCII_PUNCTUATION.has(ch)) out += ch;
  return out;
}

function splitWhitespace(text: string): string[] {
  return text.split(PYTHON_WHITESPACE).filter((t) => t.length > 0);
}

/** The script's `normalize_answer`: lowercase, drop ASCII punctuation, drop articles, collapse whitespace. */
export function normalizeAnswer(text: string): string {
  const lowered = text.toLowerCase();
  const noPunctuation = removePunctuation(lowered);
  const noArticles = noPunctuation.replace(ARTICLES, ' ');
  return splitWhitespace(noArticles).join(' ');
}

/** The script's `get_tokens`: the normalised text split on whitespace. */
export function answerTokens(text: string): string[] {
  return splitWhitespace(normalizeAnswer(text));
}

// ---------------------------------------------------------------- one pair

/** 1 when gold and prediction are equal after normalisation, else 0. */
export function exactMatch(gold: string, prediction: string): number {
  return normalizeAnswer(gold) === normalizeAnswer(prediction) ? 1 : 0;
}

/** Token-overlap F1 in [0, 1] (bag-of-tokens intersection, as `collections.Counter &`). */
export function f1Score(gold: string, prediction: string): number {
  const goldTokens = answerTokens(gold);
  const predTokens = answerTokens(prediction);
  // either side empty: 1 if both are (both say "no answer"), else 0
  if (goldTokens.length === 0 || predTokens.length === 0) {
    return goldTokens.length === predTokens.length ? 1 : 0;
  }
  const goldCounts = new Map<string, number>();
  for (const t of goldTokens) goldCounts.set(t, (goldCounts.get(t) ?? 0) + 1);
  let common = 0;
  for (const t of predTokens) {
    const left = goldCounts.get(t) ?? 0;
    if (left > 0) {
      common += 1;
      goldCounts.set(t, left - 1);
    }
  }
  if (common === 0) return 0;
  const precision = common / predTokens.length;
  const recall = common / goldTokens.length;
  return (2 * precision * recall) / (precision + recall);
}

// ---------------------------------------------------------------- questions

/** What the metric needs of one question: its id and gold answer texts ([] = unanswerable). */
export interface GoldQuestion {
  id: string;
  /** empty when the question has no answer in its passage */
  answers: string[];
}

/** Gold questions from records; an `unanswerable` record has no gold answers. */
export function goldFromRecords(records: readonly QARecord[]): GoldQuestion[] {
  return records.map((r) => ({
    id: r.id,
    answers: r.unanswerable ? [] : r.answers.map((a) => a.text),
  }));
}

/** Predictions as the script reads them: question id → answer text ("" = no answer). */
export type Predictions = Readonly<Record<string, string>>;

/** Question id → null score minus best span score (the script's "na_probs" role). */
export type ScoreDiffs = Readonly<Record<string, number>>;

export interface QuestionScore {
  id: string;
  /** the split it counts in: HasAns when the question has gold answers */
  hasAnswer: boolean;
  /** 0 or 1 */
  exact: number;
  /** in [0, 1] */
  f1: number;
}

/** The gold texts actually compared: answers that normalise to something, else [""]. */
function comparedGolds(gold: GoldQuestion): string[] {
  const golds = gold.answers.filter((a) => normalizeAnswer(a) !== '');
  return golds.length > 0 ? golds : [''];
}

/** EM and F1 of one prediction against one question: the maximum over its gold answers. */
export function scoreQuestion(gold: GoldQuestion, prediction: string): QuestionScore {
  const golds = comparedGolds(gold);
  let exact = 0;
  let f1 = 0;
  for (const g of golds) {
    exact = Math.max(exact, exactMatch(g, prediction));
    f1 = Math.max(f1, f1Score(g, prediction));
  }
  return { id: gold.id, hasAnswer: gold.answers.length > 0, exact, f1 };
}

function predictionFor(predictions: Predictions, id: string): string {
  return Object.hasOwn(predictions, id) ? (predictions[id] as string) : '';
}

/** Scores every gold question; a question with no prediction scores as "". */
export function scoreAll(gold: readonly GoldQuestion[], predictions: Predictions): QuestionScore[] {
  return gold.map((g) => scoreQuestion(g, predictionFor(predictions, g.id)));
}

/** Ids of gold questions that have no entry in `predictions`. */
export function missingPredictions(gold: readonly GoldQuestion[], predictions: Predictions): string[] {
  return gold.filter((g) => !Object.hasOwn(predictions, g.id)).map((g) => g.id);
}

// ---------------------------------------------------------------- summaries

export interface SplitScores {
  /** exact match in percent; null when the split has no questions */
  em: number | null;
  /** F1 in percent; null when the split has no questions */
  f1: number | null;
  total: number;
}

/** Overall, answerable (the script's HasAns) and unanswerable (NoAns) scores. */
export interface SquadScores extends SplitScores {
  answerable: SplitScores;
  unanswerable: SplitScores;
}

function splitScores(scores: readonly QuestionScore[]): SplitScores {
  const total = scores.length;
  if (total === 0) return { em: null, f1: null, total };
  let exact = 0;
  let f1 = 0;
  for (const s of scores) {
    exact += s.exact;
    f1 += s.f1;
  }
  return { em: (100 * exact) / total, f1: (100 * f1) / total, total };
}

/** Percentages over all questions and over each split. */
export function summarize(scores: readonly QuestionScore[]): SquadScores {
  return {
    ...splitScores(scores),
    answerable: splitScores(scores.filter((s) => s.hasAnswer)),
    unanswerable: splitScores(scores.filter((s) => !s.hasAnswer)),
  };
}

/** Scores predictions against gold questions: `summarize(scoreAll(gold, predictions))`. */
export function evaluate(gold: readonly GoldQuestion[], predictions: Predictions): SquadScores {
  return summarize(scoreAll(gold, predictions));
}

// ---------------------------------------------------------------- no-answer threshold

/**
 * Predictions at one no-answer threshold: "" where the score difference (null score −
 * best span score) is greater than `threshold`, else the best non-null span. The same
 * rule as the script's `na_probs[qid] > na_prob_thresh` and as the decoder's.
 * A question with no score difference keeps its span.
 */
export function applyNoAnswerThreshold(bestSpans: Predictions, scoreDiffs: ScoreDiffs, threshold: number): Record<string, string> {
  const out: Record<string, string> = Object.create(null); // ids such as "__proto__" stay plain keys
  for (const [id, text] of Object.entries(bestSpans)) {
    const diff = Object.hasOwn(scoreDiffs, id) ? scoreDiffs[id] : undefined;
    out[id] = diff !== undefined && diff > threshold ? '' : text;
  }
  return out;
}

/** Sums of F1 fractions that differ by less than this are equal (rounding, not a better cut). */
const ROUNDING = 1e-9;

/** The script's best_exact, best_exact_thresh, best_f1, best_f1_thresh (percent, score-difference units). */
export interface ThresholdSearch {
  bestEm: number;
  bestEmThreshold: number;
  bestF1: number;
  bestF1Threshold: number;
}

/**
 * The no-answer threshold that maximises EM, and the one that maximises F1, over all
 * gold questions (the script's `find_best_thresh`):
 *   1. Start with every question answered "" (threshold below every difference): the
 *      score is the sum of each question's score for "".
 *   2. Raise the threshold past the questions in increasing order of score difference;
 *      each one passed switches from "" to its best span, changing the score by
 *      score(span) − score("").
 *   3. After each run of equal differences, keep the threshold if the score beat the
 *      best so far (strictly, beyond rounding, so the lowest such threshold wins).
 * Percent of the number of gold questions. Every question with a non-empty best span
 * needs a score difference; a missing one is an error.
 */
export function findBestThresholds(gold: readonly GoldQuestion[], bestSpans: Predictions, scoreDiffs: ScoreDiffs): ThresholdSearch {
  const total = gold.length;
  if (total === 0) return { bestEm: 0, bestEmThreshold: 0, bestF1: 0, bestF1Threshold: 0 };

  const steps: Array<{ diff: number; deltaEm: number; deltaF1: number }> = [];
  let em = 0;
  let f1 = 0;
  for (const g of gold) {
    const span = predictionFor(bestSpans, g.id);
    const asNull = scoreQuestion(g, '');
    em += asNull.exact; // 1. everything starts as ""
    f1 += asNull.f1;
    if (normalizeAnswer(span) === '') continue; // answering changes nothing
    if (!Object.hasOwn(scoreDiffs, g.id)) {
      throw new Error(`no score difference for question "${g.id}"`);
    }
    const diff = scoreDiffs[g.id] as number;
    if (Number.isNaN(diff)) throw new Error(`score difference for question "${g.id}" is NaN`);
    const answered = scoreQuestion(g, span);
    steps.push({ diff, deltaEm: answered.exact - asNull.exact, deltaF1: answered.f1 - asNull.f1 });
  }
  steps.sort((a, b) => a.diff - b.diff);

  // below every difference: everything abstains (the script reports 0.0 here)
  const lowest = steps.length > 0 && Number.isFinite(steps[0]!.diff) ? steps[0]!.diff - 1 : 0;
  let bestEm = em;
  let bestEmThreshold = lowest;
  let bestF1 = f1;
  let bestF1Threshold = lowest;
  for (let i = 0; i < steps.length; i++) {
    const step = steps[i]!;
    em += step.deltaEm; // 2.
    f1 += step.deltaF1;
    const endOfRun = i + 1 === steps.length || steps[i + 1]!.diff !== step.diff;
    if (!endOfRun || !Number.isFinite(step.diff)) continue;
    if (em > bestEm + ROUNDING) {
      bestEm = em; // 3.
      bestEmThreshold = step.diff;
    }
    if (f1 > bestF1 + ROUNDING) {
      bestF1 = f1;
      bestF1Threshold = step.diff;
    }
  }
  return {
    bestEm: (100 * bestEm) / total,
    bestEmThreshold,
    bestF1: (100 * bestF1) / total,
    bestF1Threshold,
  };
}
