// defines: scoresObject, scoresTable — how evaluation results leave the CLI: the JSON
// object `train`, `eval` and `demo` print with --json, and an aligned text table.
import type { EvaluationReport } from '../eval/report.js';
import type { SquadScores } from '../eval/squad-metric.js';

const round = (v: number | null) => (v === null ? null : Math.round(v * 100) / 100);

function plain(s: SquadScores) {
  return {
    em: round(s.em),
    f1: round(s.f1),
    total: s.total,
    answerable: { em: round(s.answerable.em), f1: round(s.answerable.f1), total: s.answerable.total },
    unanswerable: { em: round(s.unanswerable.em), f1: round(s.unanswerable.f1), total: s.unanswerable.total },
  };
}

/**
 * `{em, f1, total, answerable, unanswerable}` as decoded (the reader's saved cut and bonus,
 * or cut 0: `decoding` says which), plus `bestCut` — the same at the F1-best no-answer
 * threshold on these questions, which is `threshold`.
 */
export function scoresObject(
  report: Pick<EvaluationReport, 'summary'> & {
    bestCut?: { threshold: number; summary: SquadScores } | null;
    /** the cut and bonus the summary was decoded with (EvaluationResult.decoding) */
    decoding?: { nullThreshold: number; kindBonus: number; saved: boolean };
  },
) {
  return {
    ...plain(report.summary),
    ...(report.bestCut ? { threshold: round(report.bestCut.threshold), bestCut: plain(report.bestCut.summary) } : {}),
    ...(report.decoding ? { decoding: { ...report.decoding, nullThreshold: round(report.decoding.nullThreshold) } } : {}),
  };
}

const cell = (v: number | null) => (v === null ? '–' : v.toFixed(1)).padStart(6);

/** Rows of EM/F1 (all, answerable, unanswerable), one per labelled result. */
export function scoresTable(rows: ReadonlyArray<{ label: string; scores: SquadScores }>): string {
  const width = Math.max(12, ...rows.map((r) => r.label.length));
  const head = `${''.padEnd(width)}  ${'EM'.padStart(6)} ${'F1'.padStart(6)}   ${'ans EM'.padStart(6)} ${'ans F1'.padStart(6)}   ${'no-ans'.padStart(6)}`;
  const lines = rows.map(
    ({ label, scores: s }) =>
      `${label.padEnd(width)}  ${cell(s.em)} ${cell(s.f1)}   ${cell(s.answerable.em)} ${cell(s.answerable.f1)}   ${cell(s.unanswerable.em)}`,
  );
  const total = rows[0]?.scores;
  const foot = total
    ? `(${total.total} questions: ${total.answerable.total} answerable, ${total.unanswerable.total} unanswerable; no-ans = share of unanswerable questions answered with nothing, %)`
    : '';
  return [head, ...lines, foot].join('\n');
}
