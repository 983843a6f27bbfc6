// defines: outcomeOf, questionsFromRecords, buildReport — the per-question "what went
// wrong" view: each question's gold answers, prediction, EM/F1 and outcome, and the
// summary scores at the decoder's no-answer cut and at the best one (bestCut).
import type { QARecord } from '../data/record.js';
import {
  applyNoAnswerThreshold,
  findBestThresholds,
  missingPredictions,
  normalizeAnswer,
  scoreQuestion,
  summarize,
  type GoldQuestion,
  type Predictions,
  type QuestionScore,
  type ScoreDiffs,
  type SquadScores,
  type ThresholdSearch,
} from './squad-metric.js';

/**
 * What happened to one question:
 *   correct          exact match (for an unanswerable question: predicted no answer)
 *   partial          answerable, a span was predicted, some tokens overlap (0 < F1)
 *   wrong-span       answerable, a span was predicted, no token overlaps (F1 = 0)
 *   false-no-answer  answerable, but no answer was predicted
 *   false-answer     unanswerable, but a span was predicted
 * "No answer predicted" means the prediction normalises to nothing, as the metric reads it.
 */
export type Outcome = 'correct' | 'partial' | 'wrong-span' | 'false-no-answer' | 'false-answer';

export const OUTCOMES: readonly Outcome[] = ['correct', 'partial', 'wrong-span', 'false-no-answer', 'false-answer'];

/** The outcome of one scored prediction. */
export function outcomeOf(score: QuestionScore, prediction: string): Outcome {
  if (score.exact === 1) return 'correct';
  const predictedNothing = normalizeAnswer(prediction) === '';
  if (!score.hasAnswer) return 'false-answer';
  if (predictedNothing) return 'false-no-answer';
  return score.f1 > 0 ? 'partial' : 'wrong-span';
}

/** A gold question with the question text, for display. */
export interface ReportQuestion extends GoldQuestion {
  question?: string;
}

/** Report questions from records (an `unanswerable` record has no gold answers). */
export function questionsFromRecords(records: readonly QARecord[]): ReportQuestion[] {
  return records.map((r) => ({
    id: r.id,
    question: r.question,
    answers: r.unanswerable ? [] : r.answers.map((a) => a.text),
  }));
}

export interface QuestionReport {
  id: string;
  question?: string;
  gold: string[];
  hasAnswer: boolean;
  /** as given ("" when the prediction was missing) */
  prediction: string;
  /** 0 or 1 */
  exact: number;
  /** in [0, 1] */
  f1: number;
  outcome: Outcome;
  /** null score − best span score, when known */
  scoreDiff?: number;
  /** true when there was no prediction for this question */
  missing: boolean;
}

export type OutcomeCounts = Record<Outcome, number>;

/** The report at the no-answer cut that scores best on these questions (an optimistic figure: chosen on them). */
export interface BestCut {
  /** the search over thresholds */
  search: ThresholdSearch;
  /** the threshold applied: the one that maximises F1 (common practice) */
  threshold: number;
  summary: SquadScores;
  counts: OutcomeCounts;
}

export interface EvaluationReport {
  questions: QuestionReport[];
  /** the predictions as given */
  summary: SquadScores;
  counts: OutcomeCounts;
  /** ids with no prediction (scored as "") */
  missing: string[];
  /** present when best spans and score differences were given */
  bestCut?: BestCut;
}

export interface ReportOptions {
  /** id → best non-null span; with `scoreDiffs`, enables the threshold search */
  bestSpans?: Predictions;
  /** id → null score − best span score */
  scoreDiffs?: ScoreDiffs;
}

function countOutcomes(reports: ReadonlyArray<{ outcome: Outcome }>): OutcomeCounts {
  const counts = Object.fromEntries(OUTCOMES.map((o) => [o, 0])) as OutcomeCounts;
  for (const r of reports) counts[r.outcome] += 1;
  return counts;
}

function reportQuestions(gold: readonly ReportQuestion[], predictions: Predictions, scoreDiffs?: ScoreDiffs) {
  return gold.map((g): QuestionReport => {
    const missing = !Object.hasOwn(predictions, g.id);
    const prediction = missing ? '' : (predictions[g.id] as string);
    const score = scoreQuestion(g, prediction);
    const report: QuestionReport = {
      id: g.id,
      gold: [...g.answers],
      hasAnswer: score.hasAnswer,
      prediction,
      exact: score.exact,
      f1: score.f1,
      outcome: outcomeOf(score, prediction),
      missing,
    };
    if (g.question !== undefined) report.question = g.question;
    if (scoreDiffs && Object.hasOwn(scoreDiffs, g.id)) report.scoreDiff = scoreDiffs[g.id];
    return report;
  });
}

/**
 * Scores `predictions` question by question. With `bestSpans` and `scoreDiffs` (as
 * `predictAll` returns them) it also searches the no-answer threshold and scores the
 * best spans at the F1-best threshold.
 */
export function buildReport(gold: readonly ReportQuestion[], predictions: Predictions, options: ReportOptions = {}): EvaluationReport {
  const questions = reportQuestions(gold, predictions, options.scoreDiffs);
  const report: EvaluationReport = {
    questions,
    summary: summarize(questions),
    counts: countOutcomes(questions),
    missing: missingPredictions(gold, predictions),
  };
  if (options.bestSpans && options.scoreDiffs) {
    const search = findBestThresholds(gold, options.bestSpans, options.scoreDiffs);
    const threshold = search.bestF1Threshold;
    const cutPredictions = applyNoAnswerThreshold(options.bestSpans, options.scoreDiffs, threshold);
    const cutQuestions = reportQuestions(gold, cutPredictions);
    report.bestCut = {
      search,
      threshold,
      summary: summarize(cutQuestions),
      counts: countOutcomes(cutQuestions),
    };
  }
  return report;
}
