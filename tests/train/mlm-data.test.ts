// Tests for src/train/mlm-data.ts: packing documents into full [CLS] … [SEP] rows, and
// BERT's masking of those rows (Devlin et al. 2019, §3.1: 15% of tokens chosen; of those
// 80% replaced by [MASK], 10% by a random token, 10% left unchanged).

import { describe, expect, it } from 'vitest';
import { IGNORE_LABEL, type MlmMasking } from '../../src/train/batches.js';
import { maskedBatch, maskedPositions, packDocuments, packedExample, type DocumentTokens } from '../../src/train/mlm-data.js';
import { mulberry32 } from '../../src/data/random.js';

const PAD = 0;
const UNK = 1;
const CLS = 2;
const SEP = 3;
const MASK = 4;
const IDS = { clsId: CLS, sepId: SEP, padId: PAD };
const VOCAB = 1000;
const MASKING: MlmMasking = { probability: 0.15, maskId: MASK, vocabSize: VOCAB, specialIds: [PAD, UNK, CLS, SEP, MASK] };

function docs(lists: number[][]): DocumentTokens {
  const starts = new Int32Array(lists.length + 1);
  lists.forEach((l, i) => (starts[i + 1] = starts[i] + l.length));
  return { ids: Int32Array.from(lists.flat()), starts };
}

function row(packed: ReturnType<typeof packDocuments>, r: number): number[] {
  return Array.from(packed.inputIds.subarray(r * packed.maxLength, (r + 1) * packed.maxLength));
}

/** Documents of ordinary ids (5 … VOCAB − 1) with a sprinkling of [UNK], lengths 1 … 300. */
function randomDocs(count: number, seed: number): DocumentTokens {
  const random = mulberry32(seed);
  const below = (n: number) => Math.floor(random() * n);
  const lists: number[][] = [];
  for (let d = 0; d < count; d++) {
    const n = 1 + below(300);
    lists.push(Array.from({ length: n }, () => (random() < 0.01 ? UNK : 5 + below(VOCAB - 5))));
  }
  return docs(lists);
}

describe('packDocuments', () => {
  it('cuts the [SEP]-joined stream into full [CLS] … [SEP] rows, padding only the last', () => {
    // stream: 10 11 12 SEP 20 21 SEP 30 31 32 33 34 35 — rows of T − 2 = 4 tokens
    const packed = packDocuments(
      docs([
        [10, 11, 12],
        [20, 21],
        [30, 31, 32, 33, 34, 35],
      ]),
      6,
      IDS,
    );
    expect(packed.count).toBe(4);
    expect(row(packed, 0)).toEqual([CLS, 10, 11, 12, SEP, SEP]);
    expect(row(packed, 1)).toEqual([CLS, 20, 21, SEP, 30, SEP]);
    expect(row(packed, 2)).toEqual([CLS, 31, 32, 33, 34, SEP]);
    expect(row(packed, 3)).toEqual([CLS, 35, SEP, PAD, PAD, PAD]);
    expect(Array.from(packed.lengths)).toEqual([6, 6, 6, 3]);
  });

  it('never opens a row with the separator between two documents', () => {
    // stream: 10 11 12 13 | SEP 20 21 — the SEP falls at the start of row 2 and is dropped
    const packed = packDocuments(
      docs([
        [10, 11, 12, 13],
        [20, 21],
      ]),
      6,
      IDS,
    );
    expect(row(packed, 0)).toEqual([CLS, 10, 11, 12, 13, SEP]);
    expect(row(packed, 1)).toEqual([CLS, 20, 21, SEP, PAD, PAD]);
  });

  it('keeps every document token, in order, and skips empty documents', () => {
    const input = randomDocs(200, 7);
    const withEmpty: DocumentTokens = docs([
      [],
      ...Array.from({ length: 200 }, (_, d) => Array.from(input.ids.subarray(input.starts[d], input.starts[d + 1]))),
      [],
    ]);
    const packed = packDocuments(withEmpty, 128, IDS);
    const bodies: number[] = [];
    for (let r = 0; r < packed.count; r++) {
      const tokens = row(packed, r).slice(0, packed.lengths[r]);
      expect(tokens[0]).toBe(CLS);
      expect(tokens[tokens.length - 1]).toBe(SEP);
      if (r < packed.count - 1) expect(packed.lengths[r]).toBe(128);
      bodies.push(...tokens.slice(1, -1));
    }
    const withoutSeps = bodies.filter((t) => t !== SEP);
    expect(withoutSeps).toEqual(Array.from(input.ids));
  });

  it('names the problem with bad input', () => {
    expect(() => packDocuments(docs([[5, 6]]), 2, IDS)).toThrow(/maxLength/);
    expect(() => packDocuments({ ids: new Int32Array(3), starts: Int32Array.from([0, 2]) }, 8, IDS)).toThrow(
      /starts must run from 0 to ids.length/,
    );
  });
});

describe('maskedBatch (BERT masking over packed rows)', () => {
  const packed = packDocuments(randomDocs(400, 11), 128, IDS);
  const allRows = Array.from({ length: packed.count }, (_, r) => r);

  /** Counts over every row, masked in batches of 32 with per-batch seeds. */
  function tally(seed: number) {
    let eligible = 0;
    let chosen = 0;
    let masked = 0;
    let random = 0;
    let kept = 0;
    let specialTouched = 0;
    for (let start = 0; start < packed.count; start += 32) {
      const rows = allRows.slice(start, start + 32);
      const batch = maskedBatch(packed, rows, MASKING, seed + start);
      rows.forEach((r, b) => {
        const original = packedExample(packed, r);
        for (let t = 0; t < packed.maxLength; t++) {
          const i = b * packed.maxLength + t;
          const id = original.inputIds[t];
          const real = original.attentionMask[t] === 1;
          const special = MASKING.specialIds.includes(id);
          if (!real || special) {
            if (batch.labels[i] !== IGNORE_LABEL || batch.inputIds[i] !== id) specialTouched++;
            continue;
          }
          eligible++;
          if (batch.labels[i] === IGNORE_LABEL) {
            expect(batch.inputIds[i]).toBe(id);
            continue;
          }
          expect(batch.labels[i]).toBe(id);
          chosen++;
          if (batch.inputIds[i] === MASK) masked++;
          else if (batch.inputIds[i] === id) kept++;
          else random++;
        }
      });
    }
    return { eligible, chosen, masked, random, kept, specialTouched };
  }

  /**
   * |observed − n·p| ≤ 4·√(n·p·(1 − p)): the binomial tolerance (a false failure about 6 in
   * 100 000 per check). A random replacement that happens to draw the original id or
   * [MASK] (probability 1/V = 0.001 each, of the 10%) shifts the shares by 1e-4, far inside.
   */
  function expectBinomial(observed: number, n: number, p: number): void {
    const tolerance = 4 * Math.sqrt(n * p * (1 - p));
    expect(
      Math.abs(observed - n * p),
      `observed ${observed} of ${n}, expected ${(n * p).toFixed(1)} ± ${tolerance.toFixed(1)}`,
    ).toBeLessThanOrEqual(tolerance);
  }

  it('chooses 15% of the non-special tokens, and 80/10/10 of those (Devlin et al. 2019, §3.1)', () => {
    const t = tally(1);
    expect(t.eligible).toBeGreaterThan(50_000);
    expectBinomial(t.chosen, t.eligible, 0.15);
    expectBinomial(t.masked, t.chosen, 0.8);
    expectBinomial(t.random, t.chosen, 0.1);
    expectBinomial(t.kept, t.chosen, 0.1);
  });

  it('never chooses or changes [CLS], [SEP], [PAD], [UNK] or [MASK]', () => {
    const t = tally(2);
    expect(t.specialTouched).toBe(0);
  });

  it('is fixed by its seed', () => {
    const rows = [3, 1, 4, 1, 5, 9, 2, 6];
    const a = maskedBatch(packed, rows, MASKING, 99);
    const b = maskedBatch(packed, rows, MASKING, 99);
    const c = maskedBatch(packed, rows, MASKING, 100);
    expect(Array.from(b.inputIds)).toEqual(Array.from(a.inputIds));
    expect(Array.from(b.labels)).toEqual(Array.from(a.labels));
    expect(Array.from(c.labels)).not.toEqual(Array.from(a.labels));
  });

  it('lists exactly the labelled positions', () => {
    const batch = maskedBatch(packed, [0, 1, 2], MASKING, 5);
    const expected: number[] = [];
    batch.labels.forEach((l, i) => {
      if (l !== IGNORE_LABEL) expected.push(i);
    });
    expect(expected.length).toBeGreaterThan(0);
    expect(Array.from(maskedPositions(batch))).toEqual(expected);
  });
});
