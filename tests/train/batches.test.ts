// Batching and data order. The checks are properties of the definitions in
// src/train/batches.ts (seeded per-epoch permutation, (epoch, index) positions) and of
// BERT's masked-LM recipe (Devlin et al. 2018, §3.1: 15% of tokens, 80/10/10).
import { describe, expect, it } from 'vitest';
import {
  collateMlm,
  collateSpan,
  epochOrder,
  IGNORE_LABEL,
  orderAtUpdate,
  UpdateSampler,
  type DataOrder,
  type SpanExample,
} from '../../src/train/batches.js';
import { trainConfig } from '../../src/train/config.js';
import { seedAt, shuffledOrder } from '../../src/train/random.js';
import { planTraining } from '../../src/train/schedule.js';

function example(real: number, T: number, start: number, end: number, fill = 5): SpanExample {
  const ids = new Int32Array(T);
  const mask = new Int32Array(T);
  const types = new Int32Array(T);
  for (let i = 0; i < real; i++) {
    ids[i] = fill + i;
    mask[i] = 1;
    types[i] = i >= 3 ? 1 : 0;
  }
  return { inputIds: ids, tokenTypeIds: types, attentionMask: mask, startPosition: start, endPosition: end };
}

describe('collateSpan', () => {
  it('packs rows and positions; trimming cuts to the longest real row', () => {
    const batch = collateSpan([example(4, 8, 3, 3), example(6, 8, 0, 0, 100)], true);
    expect(batch.size).toBe(2);
    expect(batch.seqLen).toBe(6);
    expect(Array.from(batch.inputIds)).toEqual([5, 6, 7, 8, 0, 0, 100, 101, 102, 103, 104, 105]);
    expect(Array.from(batch.attentionMask)).toEqual([1, 1, 1, 1, 0, 0, 1, 1, 1, 1, 1, 1]);
    expect(Array.from(batch.tokenTypeIds)).toEqual([0, 0, 0, 1, 0, 0, 0, 0, 0, 1, 1, 1]);
    expect(Array.from(batch.startPositions)).toEqual([3, 0]);
    const untrimmed = collateSpan([example(4, 8, 3, 3)], false);
    expect(untrimmed.seqLen).toBe(8);
  });

  it('names the example and field that does not fit', () => {
    expect(() => collateSpan([example(4, 8, 1, 1), example(4, 6, 1, 1)], false)).toThrow(/example 1: inputIds has 6 tokens/);
    expect(() => collateSpan([example(4, 8, 2, 1)], false)).toThrow(/example 0: endPosition 1 is before startPosition 2/);
    expect(() => collateSpan([example(4, 8, 9, 9)], false)).toThrow(/example 0: startPosition 9/);
    expect(() => collateSpan([], false)).toThrow(/at least one example/);
  });
});

describe('collateMlm', () => {
  const masking = { probability: 0.15, maskId: 3, vocabSize: 50, specialIds: [1, 2] };
  const rows = Array.from({ length: 16 }, (_, r) => {
    const T = 64;
    const ids = new Int32Array(T);
    const mask = new Int32Array(T);
    ids[0] = 1; // [CLS]
    for (let i = 1; i < 60; i++) ids[i] = 10 + ((i + r) % 40);
    ids[60] = 2; // [SEP]
    for (let i = 0; i <= 60; i++) mask[i] = 1;
    return { inputIds: ids, tokenTypeIds: new Int32Array(T), attentionMask: mask };
  });

  it('labels about 15% of real, non-special tokens, and only those', () => {
    const batch = collateMlm(rows, masking, 7, false);
    let labelled = 0;
    let masked = 0;
    for (let i = 0; i < batch.labels.length; i++) {
      if (batch.labels[i] === IGNORE_LABEL) {
        expect(batch.inputIds[i]).toBe(rows[Math.floor(i / 64)].inputIds[i % 64]);
        continue;
      }
      labelled++;
      const t = i % 64;
      expect(t).toBeGreaterThanOrEqual(1); // never [CLS], [SEP] or padding
      expect(t).toBeLessThan(60);
      expect(batch.labels[i]).toBe(rows[Math.floor(i / 64)].inputIds[t]);
      if (batch.inputIds[i] === masking.maskId) masked++;
    }
    // 16 · 59 = 944 eligible; 15% ≈ 142, binomial σ ≈ 11 — a 5σ band
    expect(labelled).toBeGreaterThan(142 - 55);
    expect(labelled).toBeLessThan(142 + 55);
    // 80% of those become [MASK]: a loose band around 0.8
    expect(masked / labelled).toBeGreaterThan(0.65);
    expect(masked / labelled).toBeLessThan(0.95);
  });

  it('is fixed by the seed', () => {
    const a = collateMlm(rows, masking, 11, true);
    const b = collateMlm(rows, masking, 11, true);
    const c = collateMlm(rows, masking, 12, true);
    expect(Array.from(a.labels)).toEqual(Array.from(b.labels));
    expect(Array.from(a.inputIds)).toEqual(Array.from(b.inputIds));
    expect(Array.from(a.labels)).not.toEqual(Array.from(c.labels));
  });

  it('always predicts at least one token', () => {
    const batch = collateMlm(rows.slice(0, 1), { ...masking, probability: 0 }, 3, true);
    expect(Array.from(batch.labels).filter((l) => l !== IGNORE_LABEL)).toHaveLength(1);
  });
});

describe('seeded order', () => {
  it('shuffledOrder is a permutation fixed by the seed', () => {
    const p = shuffledOrder(100, 5);
    expect([...p].sort((x, y) => x - y)).toEqual(Array.from({ length: 100 }, (_, i) => i));
    expect(Array.from(shuffledOrder(100, 5))).toEqual(Array.from(p));
    expect(Array.from(shuffledOrder(100, 6))).not.toEqual(Array.from(p));
  });

  it('seedAt separates uses and places', () => {
    const seeds = new Set([
      seedAt(1, 'dropout', 0, 0),
      seedAt(1, 'dropout', 0, 1),
      seedAt(1, 'dropout', 1, 0),
      seedAt(1, 'mlm', 0, 0),
      seedAt(2, 'dropout', 0, 0),
    ]);
    expect(seeds.size).toBe(5);
    expect(seedAt(1, 'shuffle', 3)).toBe(seedAt(1, 'shuffle', 3));
  });

  it('each epoch has its own order, determined by seed and epoch alone', () => {
    expect(Array.from(epochOrder(50, 1, 0))).not.toEqual(Array.from(epochOrder(50, 1, 1)));
    expect(Array.from(epochOrder(50, 1, 3))).toEqual(Array.from(epochOrder(50, 1, 3)));
  });
});

describe('UpdateSampler', () => {
  // 10 features, b = 2, A = 2: 4 per update, U = ⌈10/4⌉ = 3 updates per epoch (4, 4, 2)
  const items = Array.from({ length: 10 }, (_, i) => i);
  const plan = planTraining(trainConfig({ batchSize: 2, gradAccumulation: 2, epochs: 2 }), items.length);

  function walk(sampler: UpdateSampler<number>, from: DataOrder, updates: number) {
    const seen: number[][][] = [];
    let order = from;
    for (let i = 0; i < updates; i++) {
      const { groups, next } = sampler.take(order);
      seen.push(groups);
      order = next;
    }
    return { seen, order };
  }

  it('visits every feature once per epoch, in micro-batches of b, the last update short', () => {
    const { seen, order } = walk(new UpdateSampler(items, plan, 42), { epoch: 0, index: 0 }, plan.updatesPerEpoch);
    expect(seen.map((groups) => groups.map((g) => g.length))).toEqual([[2, 2], [2, 2], [2]]);
    expect(seen.flat(2).sort((a, b) => a - b)).toEqual(items);
    expect(order).toEqual({ epoch: 1, index: 0 });
    expect(seen.flat(2)).toEqual(Array.from(epochOrder(10, 42, 0)));
  });

  it('resumed at any update hands out what an uninterrupted run does', () => {
    const straight = walk(new UpdateSampler(items, plan, 42), { epoch: 0, index: 0 }, plan.totalUpdates).seen;
    for (let k = 0; k < plan.totalUpdates; k++) {
      const resumed = walk(new UpdateSampler(items, plan, 42), orderAtUpdate(plan, k), plan.totalUpdates - k).seen;
      expect(resumed).toEqual(straight.slice(k));
    }
  });

  it('refuses a plan made for another data size, and a position outside the epoch', () => {
    expect(() => new UpdateSampler(items.slice(1), plan, 1)).toThrow(/plan counts 10 features but 9/);
    expect(() => new UpdateSampler(items, plan, 1).take({ epoch: 0, index: 10 })).toThrow(/position 10/);
  });
});
