// defines: readerWarnings — plain-language warnings under a reader's scores, shown by the
// CLI (train, eval, demo) and the workbench's Evaluation screen.
import type { SquadScores } from './squad-metric.js';

/** Answerable F1 under which a reader is called unusable on a set (a rule of thumb of ours). */
export const UNUSABLE_ANSWERABLE_F1 = 5;

/**
 * Plain-language warnings under a score table, so a weak reader is not mistaken for a
 * working one: almost no answerable question answered, fine-tuning that did not raise F1
 * over the base (`before`), or a reader no better than the word-overlap baseline
 * (`baseline`). Empty when none holds. `compared` names the row of a table the F1 values
 * come from ("the “F1, all” row"), so the warning says which numbers it compares.
 */
export function readerWarnings(
  after: SquadScores,
  before: SquadScores | null = null,
  baseline: SquadScores | null = null,
  compared?: string,
): string[] {
  const out: string[] = [];
  const ans = after.answerable;
  if (ans.total > 0 && ans.f1 !== null && ans.f1 < UNUSABLE_ANSWERABLE_F1) {
    out.push(
      `warning: the reader found almost none of the ${ans.total} answerable questions' answers (answerable F1 ${ans.f1.toFixed(1)})` +
        (after.unanswerable.total > 0 ? '; its overall score comes from saying "no answer"' : '') +
        '. It is not a usable reader for these questions yet: more labelled questions, more epochs, or a stronger base reader may help.',
    );
  }
  if (before !== null && before.f1 !== null && after.f1 !== null && after.f1 <= before.f1) {
    const which = compared ? `${compared}: ` : '';
    out.push(`warning: fine-tuning did not raise F1 (${which}base ${before.f1.toFixed(1)}, fine-tuned ${after.f1.toFixed(1)}).`);
  }
  if (baseline !== null && baseline.f1 !== null && after.f1 !== null && after.f1 <= baseline.f1) {
    out.push(
      `warning: the word-overlap baseline scores as high or higher (F1 ${baseline.f1.toFixed(1)} against the reader's ${after.f1.toFixed(1)}): the reader adds nothing over matching the question's words.`,
    );
  }
  return out;
}
