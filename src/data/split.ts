// defines: splitByPassage — train/validation split that never puts one passage on both
// sides, so validation measures reading unseen text rather than recalling a passage;
// SplitChoice, chooseSplit — the one rule for which questions train and which validate:
// by passage as below, or the questions the user imported as validation, kept as they are.
//
// 1. Passage ids are sorted (UTF-16 code-unit order), so the split depends on the set
//    of records, not on their order in the file (as the dataset hash does, hash.ts).
// 2. They are shuffled with mulberry32(seed).
// 3. Walking that order, a passage goes to validation when its questions still fit
//    under the target (validationFraction × all questions, rounded); with a fraction
//    above zero the first passage always goes, so a small set still gets one. When
//    there are two passages or more, at least one stays in training.
// Records keep their input order on each side.
import type { QARecord } from './record.js';
import { mulberry32, shuffleInPlace } from './random.js';

export interface SplitOptions {
  /** share of questions (not passages) to hold out, in [0, 1) */
  validationFraction: number;
  /** any 32-bit integer; the same seed and records give the same split */
  seed: number;
}

export interface Split {
  train: QARecord[];
  validation: QARecord[];
}

export function splitByPassage(records: readonly QARecord[], options: SplitOptions): Split {
  const { validationFraction, seed } = options;
  if (!(validationFraction >= 0 && validationFraction < 1)) {
    throw new RangeError(`validationFraction must be in [0, 1), not ${validationFraction}`);
  }
  if (!Number.isInteger(seed)) throw new RangeError(`seed must be an integer, not ${seed}`);

  // 1. passages and their sizes, in a fixed order
  const size = new Map<string, number>();
  for (const r of records) size.set(r.passageId, (size.get(r.passageId) ?? 0) + 1);
  const passages = [...size.keys()].sort((a, b) => (a < b ? -1 : a > b ? 1 : 0));

  // 2. shuffled by the seed
  shuffleInPlace(passages, mulberry32(seed));

  // 3. fill validation up to the target
  const target = Math.round(validationFraction * records.length);
  const held = new Set<string>();
  let heldQuestions = 0;
  for (const p of passages) {
    if (held.size === passages.length - 1) break; // keep one for training
    const n = size.get(p)!;
    if (validationFraction > 0 && (held.size === 0 || heldQuestions + n <= target)) {
      held.add(p);
      heldQuestions += n;
    }
    if (held.size > 0 && heldQuestions >= target) break;
  }

  const split: Split = { train: [], validation: [] };
  for (const r of records) (held.has(r.passageId) ? split.validation : split.train).push(r);
  return split;
}

/**
 * How the questions are divided, as the user chose:
 *   passage  splitByPassage over every question, under `validationFraction` and `seed`
 *   file     the questions imported as validation (their ids) validate, all others train;
 *            the fraction and seed are kept for a switch back
 */
export interface SplitChoice extends SplitOptions {
  mode: 'passage' | 'file';
}

/** Today's default: 15 % of the questions, by whole passages, seed 42. */
export const DEFAULT_SPLIT: SplitChoice = { mode: 'passage', validationFraction: 0.15, seed: 42 };

/**
 * The split under `choice`. `validationIds` are the ids of the questions imported as
 * validation; only mode 'file' reads them. Records keep their input order on each side.
 */
export function chooseSplit(records: readonly QARecord[], validationIds: Iterable<string>, choice: SplitChoice): Split {
  if (choice.mode === 'passage') return splitByPassage(records, choice);
  const held = new Set(validationIds);
  const split: Split = { train: [], validation: [] };
  for (const r of records) (held.has(r.id) ? split.validation : split.train).push(r);
  return split;
}

/** Passages with questions on both sides of a split (possible only in mode 'file'). */
export function sharedPassages(split: Split): string[] {
  const train = new Set(split.train.map((r) => r.passageId));
  return [...new Set(split.validation.map((r) => r.passageId))].filter((p) => train.has(p));
}
