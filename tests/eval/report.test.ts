// The per-question report: outcomes follow from EM/F1 by the SQuAD 2.0 script rules
// (from memory); the tuned summary uses the F1-best threshold (common practice).
// Expected values are worked out by hand beside each check.
import { describe, expect, it } from 'vitest';
import { buildReport, questionsFromRecords, type ReportQuestion } from '../../src/eval/report.js';
import type { QARecord } from '../../src/data/record.js';

const gold: ReportQuestion[] = [
  { id: 'ok', question: 'Which animal?', answers: ['blue whale'] },
  { id: 'part', question: 'Who?', answers: ['Marie Curie'] },
  { id: 'wrong', question: 'Where?', answers: ['Paris'] },
  { id: 'fna', question: 'When?', answers: ['1905'] },
  { id: 'fa', question: 'Why?', answers: [] },
  { id: 'nn', question: 'How?', answers: [] },
];

describe('buildReport', () => {
  it('puts every question in one outcome', () => {
    const r = buildReport(gold, { ok: 'The blue whale.', part: 'Curie', wrong: 'London', fna: '', fa: 'because', nn: '' });
    expect(r.questions.map((q) => [q.id, q.outcome])).toEqual([
      ['ok', 'correct'],
      ['part', 'partial'], // F1 2/3, EM 0
      ['wrong', 'wrong-span'], // F1 0
      ['fna', 'false-no-answer'],
      ['fa', 'false-answer'],
      ['nn', 'correct'], // unanswerable, predicted nothing
    ]);
    expect(r.counts).toEqual({ correct: 2, partial: 1, 'wrong-span': 1, 'false-no-answer': 1, 'false-answer': 1 });
    expect(r.questions[1]).toMatchObject({ question: 'Who?', gold: ['Marie Curie'], prediction: 'Curie', exact: 0, hasAnswer: true });
    expect(r.questions[1]!.f1).toBeCloseTo(2 / 3, 12);
    // EM: ok, nn → 2/6; F1: 1 + 2/3 + 0 + 0 + 0 + 1 = 8/3 → (8/3)/6
    expect(r.summary.em).toBeCloseTo((100 * 2) / 6, 10);
    expect(r.summary.f1).toBeCloseTo((100 * 8) / 3 / 6, 10);
    expect(r.bestCut).toBeUndefined();
  });

  it('a prediction that normalises to nothing counts as no answer', () => {
    const r = buildReport([{ id: 'a', answers: ['Paris'] }], { a: 'the' });
    expect(r.questions[0]!.outcome).toBe('false-no-answer');
  });

  it('marks missing predictions and scores them as ""', () => {
    const r = buildReport(gold, { ok: 'blue whale' });
    expect(r.missing).toEqual(['part', 'wrong', 'fna', 'fa', 'nn']);
    expect(r.questions.find((q) => q.id === 'fa')).toMatchObject({ missing: true, prediction: '', outcome: 'correct' });
    expect(r.questions[0]!.missing).toBe(false);
  });

  it('adds the summary at the tuned threshold when spans and score differences are given', () => {
    // Best spans and diffs (null − span):
    //   ok   "blue whale" −4 (1, 1)    part "Curie"  −2 (0, 2/3)   wrong "London" 1 (0, 0)
    //   fna  "1905"        3 (1, 1)    fa   "because" 2 (0, 0)/""→1   nn  "so"    5 (0, 0)/""→1
    // Predictions at the decode threshold 0: ok, part answered; the rest "".
    //   EM 1 + 0 + 0 + 0 + 1 + 1 = 3;  F1 1 + 2/3 + 0 + 0 + 1 + 1 = 11/3
    // Threshold search, all "" → EM 2, F1 2 (fa, nn); passing by diff:
    //   ok −4 → (3, 3)  part −2 → (3, 3 2/3)  wrong 1 → (3, 3 2/3)  fa 2 → (2, 2 2/3)
    //   fna 3 → (3, 3 2/3)  nn 5 → (2, 2 2/3)
    // Best F1 3 2/3 first at −2 (later equal totals do not replace it): threshold −2,
    // which gives the same predictions as threshold 0 here.
    const bestSpans = { ok: 'blue whale', part: 'Curie', wrong: 'London', fna: '1905', fa: 'because', nn: 'so' };
    const scoreDiffs = { ok: -4, part: -2, wrong: 1, fna: 3, fa: 2, nn: 5 };
    const predictions = { ok: 'blue whale', part: 'Curie', wrong: '', fna: '', fa: '', nn: '' };
    const r = buildReport(gold, predictions, { bestSpans, scoreDiffs });
    expect(r.summary.em).toBeCloseTo(50, 10);
    expect(r.bestCut!.threshold).toBe(-2);
    expect(r.bestCut!.search.bestF1Threshold).toBe(-2);
    expect(r.bestCut!.search.bestF1).toBeCloseTo((100 * 11) / 3 / 6, 10);
    expect(r.bestCut!.summary.f1).toBeCloseTo(r.bestCut!.search.bestF1, 10);
    expect(r.bestCut!.search.bestEm).toBeCloseTo(50, 10);
    expect(r.bestCut!.search.bestEmThreshold).toBe(-4);
    expect(r.questions.find((q) => q.id === 'fna')!.scoreDiff).toBe(3);
  });

  it('the tuned threshold can change the outcome counts', () => {
    // one answerable question whose right span sits behind a null score 1 higher
    const g: ReportQuestion[] = [
      { id: 'a', answers: ['x'] },
      { id: 'b', answers: [] },
    ];
    // all "": EM 1 (b); pass a (diff 1) → 2; pass b (diff 3) → 1. Best 2 at threshold 1.
    const r = buildReport(g, { a: '', b: '' }, { bestSpans: { a: 'x', b: 'y' }, scoreDiffs: { a: 1, b: 3 } });
    expect(r.counts['false-no-answer']).toBe(1);
    expect(r.bestCut!.threshold).toBe(1);
    expect(r.bestCut!.counts).toEqual({ correct: 2, partial: 0, 'wrong-span': 0, 'false-no-answer': 0, 'false-answer': 0 });
    expect(r.bestCut!.summary.em).toBe(100);
  });

  it('reads questions from records', () => {
    const records: QARecord[] = [
      { id: '1', passageId: 'p', context: 'c', question: 'Q one?', answers: [{ text: 'c', start: 0 }], unanswerable: false },
      { id: '2', passageId: 'p', context: 'c', question: 'Q two?', answers: [], unanswerable: true },
    ];
    expect(questionsFromRecords(records)).toEqual([
      { id: '1', question: 'Q one?', answers: ['c'] },
      { id: '2', question: 'Q two?', answers: [] },
    ]);
  });
});
