// readerWarnings: the plain-language lines under a score table that keep a reader which
// only says "no answer" from passing for a working one. The scores here are built by hand
// to sit on either side of each rule; they check our own rule, not the outside world.
import { describe, expect, it } from 'vitest';
import type { SquadScores } from '../../src/eval/squad-metric.js';
import { readerWarnings, UNUSABLE_ANSWERABLE_F1 } from '../../src/eval/reader-warnings.js';

function scores(ansF1: number, unansF1: number, ans = 65, unans = 14): SquadScores {
  const f1 = (ansF1 * ans + unansF1 * unans) / (ans + unans);
  return {
    em: f1,
    f1,
    total: ans + unans,
    answerable: { em: ansF1, f1: ansF1, total: ans },
    unanswerable: { em: unansF1, f1: unansF1, total: unans },
  };
}

describe('readerWarnings', () => {
  it('warns when almost no answerable question is answered, and says the score comes from "no answer"', () => {
    const w = readerWarnings(scores(0, 100));
    expect(w).toHaveLength(1);
    expect(w[0]).toMatch(/almost none of the 65 answerable questions' answers \(answerable F1 0\.0\)/);
    expect(w[0]).toMatch(/from saying "no answer"/);
  });

  it('is silent for a reader at or above the line', () => {
    expect(readerWarnings(scores(UNUSABLE_ANSWERABLE_F1, 50))).toEqual([]);
    expect(readerWarnings(scores(49.3, 52), scores(0, 100))).toEqual([]);
  });

  it('warns when fine-tuning did not raise F1 over the base', () => {
    const w = readerWarnings(scores(30, 40), scores(35, 40));
    expect(w).toEqual([expect.stringMatching(/did not raise F1 \(base 35\.9, fine-tuned 31\.8\)/)]);
    // naming the table row the numbers come from
    expect(readerWarnings(scores(30, 40), scores(35, 40), null, 'the “F1, all” row')).toEqual([
      expect.stringMatching(/did not raise F1 \(the “F1, all” row: base 35\.9, fine-tuned 31\.8\)/),
    ]);
  });

  it('leaves out the "no answer" clause when the set has no unanswerable questions', () => {
    const [w] = readerWarnings(scores(1, 0, 10, 0));
    expect(w).not.toMatch(/no answer/);
  });
});
