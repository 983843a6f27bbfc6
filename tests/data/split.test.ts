import { describe, expect, it } from 'vitest';
import { chooseSplit, DEFAULT_SPLIT, sharedPassages, splitByPassage } from '../../src/data/split.js';
import type { QARecord } from '../../src/data/record.js';
import { mulberry32, shuffleInPlace } from '../../src/data/random.js';

/** `passages` passages with 1–5 questions each (sizes drawn from a seeded generator). */
function dataset(passages: number, seed = 1): QARecord[] {
  const random = mulberry32(seed);
  const out: QARecord[] = [];
  for (let p = 0; p < passages; p++) {
    const n = 1 + Math.floor(random() * 5);
    for (let q = 0; q < n; q++) {
      out.push({ id: `p${p}q${q}`, passageId: `p${p}`, context: `Passage ${p}.`, question: `Q${q}?`, answers: [], unanswerable: true });
    }
  }
  return out;
}
const ids = (rs: QARecord[]): string[] => rs.map((r) => r.id);

describe('splitByPassage', () => {
  const records = dataset(60);

  it('never puts one passage on both sides, and loses no record', () => {
    for (const seed of [0, 1, 2, 99, -5]) {
      const { train, validation } = splitByPassage(records, { validationFraction: 0.2, seed });
      const trainPassages = new Set(train.map((r) => r.passageId));
      for (const r of validation) expect(trainPassages.has(r.passageId)).toBe(false);
      expect([...ids(train), ...ids(validation)].sort()).toEqual(ids(records).sort());
    }
  });

  it('is deterministic for a seed, and another seed gives another split', () => {
    const a = splitByPassage(records, { validationFraction: 0.2, seed: 42 });
    const b = splitByPassage(records, { validationFraction: 0.2, seed: 42 });
    const c = splitByPassage(records, { validationFraction: 0.2, seed: 43 });
    expect(ids(b.validation)).toEqual(ids(a.validation));
    expect(ids(c.validation)).not.toEqual(ids(a.validation));
  });

  it('does not depend on record order', () => {
    const shuffled = shuffleInPlace([...records], mulberry32(5));
    const a = splitByPassage(records, { validationFraction: 0.25, seed: 8 });
    const b = splitByPassage(shuffled, { validationFraction: 0.25, seed: 8 });
    expect(ids(b.validation).sort()).toEqual(ids(a.validation).sort());
  });

  it('holds out close to the fraction of questions, never more than the target', () => {
    for (const fraction of [0.1, 0.2, 0.5]) {
      const target = Math.round(fraction * records.length);
      const { validation } = splitByPassage(records, { validationFraction: fraction, seed: 3 });
      expect(validation.length).toBeLessThanOrEqual(target);
      expect(validation.length).toBeGreaterThanOrEqual(target - 5); // a passage holds at most 5 questions
    }
  });

  it('keeps input order on each side', () => {
    const { train } = splitByPassage(records, { validationFraction: 0.3, seed: 1 });
    const order = new Map(records.map((r, i) => [r.id, i]));
    const positions = train.map((r) => order.get(r.id)!);
    expect(positions).toEqual([...positions].sort((x, y) => x - y));
  });

  it('edge cases: fraction 0, one passage, a small set still gets one passage held out', () => {
    expect(splitByPassage(records, { validationFraction: 0, seed: 1 }).validation).toEqual([]);
    const one = dataset(1);
    expect(splitByPassage(one, { validationFraction: 0.5, seed: 1 }).train).toHaveLength(one.length);
    const two = [...dataset(2)];
    const s = splitByPassage(two, { validationFraction: 0.01, seed: 1 });
    expect(new Set(s.validation.map((r) => r.passageId)).size).toBe(1);
    expect(s.train.length).toBeGreaterThan(0);
  });

  it('rejects a fraction outside [0, 1) and a non-integer seed', () => {
    expect(() => splitByPassage(records, { validationFraction: 1, seed: 1 })).toThrow(RangeError);
    expect(() => splitByPassage(records, { validationFraction: -0.1, seed: 1 })).toThrow(RangeError);
    expect(() => splitByPassage(records, { validationFraction: Number.NaN, seed: 1 })).toThrow(RangeError);
    expect(() => splitByPassage(records, { validationFraction: 0.1, seed: 0.5 })).toThrow(RangeError);
  });
});

describe('chooseSplit', () => {
  const records = dataset(30, 7);
  // the questions a user imported as validation: every question of the first three passages, and one more elsewhere
  const imported = [...records.filter((r) => ['p0', 'p1', 'p2'].includes(r.passageId)).map((r) => r.id), 'p9q0'];

  it("mode 'passage' is splitByPassage, whatever was imported as validation", () => {
    const choice = { ...DEFAULT_SPLIT, mode: 'passage' as const };
    expect(chooseSplit(records, imported, choice)).toEqual(splitByPassage(records, choice));
    expect(DEFAULT_SPLIT).toEqual({ mode: 'passage', validationFraction: 0.15, seed: 42 });
  });

  it("mode 'file' keeps the imported validation questions as validation and trains on all others, in input order", () => {
    const { train, validation } = chooseSplit(records, imported, { ...DEFAULT_SPLIT, mode: 'file' });
    expect(ids(validation)).toEqual(ids(records).filter((id) => imported.includes(id)));
    expect(ids(train)).toEqual(ids(records).filter((id) => !imported.includes(id)));
    // the fraction and seed play no part
    expect(chooseSplit(records, imported, { mode: 'file', validationFraction: 0.5, seed: 1 }).validation).toEqual(validation);
  });

  it("mode 'file' ignores ids no record has, and without imported questions validates nothing", () => {
    const { validation } = chooseSplit(records, ['gone', 'p0q0'], { ...DEFAULT_SPLIT, mode: 'file' });
    expect(ids(validation)).toEqual(['p0q0']);
    expect(chooseSplit(records, [], { ...DEFAULT_SPLIT, mode: 'file' }).train).toHaveLength(records.length);
  });

  it('sharedPassages names passages on both sides: none by passage, the mixed ones from a file', () => {
    expect(sharedPassages(chooseSplit(records, imported, DEFAULT_SPLIT))).toEqual([]);
    const mixed = records.filter((r) => r.passageId === 'p9').length > 1 ? ['p9'] : [];
    expect(sharedPassages(chooseSplit(records, imported, { ...DEFAULT_SPLIT, mode: 'file' }))).toEqual(mixed);
  });
});
