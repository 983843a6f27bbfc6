import { describe, expect, it } from 'vitest';
import { mulberry32, shuffleInPlace } from '../../src/data/random.js';

describe('mulberry32', () => {
  it('repeats for a seed and differs across seeds', () => {
    const a = mulberry32(123);
    const b = mulberry32(123);
    const c = mulberry32(124);
    const xs = Array.from({ length: 50 }, () => a());
    expect(Array.from({ length: 50 }, () => b())).toEqual(xs);
    expect(Array.from({ length: 50 }, () => c())).not.toEqual(xs);
  });

  it('gives floats in [0, 1) that look uniform (mean and bucket counts, common practice)', () => {
    const r = mulberry32(2024);
    const n = 100_000;
    const buckets = new Array<number>(10).fill(0);
    let sum = 0;
    let outside = 0;
    for (let i = 0; i < n; i++) {
      const x = r();
      if (!(x >= 0 && x < 1)) outside++;
      sum += x;
      buckets[Math.floor(x * 10)]!++;
    }
    expect(outside).toBe(0);
    expect(Math.abs(sum / n - 0.5)).toBeLessThan(0.005);
    // chi-square with 9 degrees of freedom: 27.9 is the 0.999 quantile (from memory)
    const chi = buckets.reduce((s, k) => s + (k - n / 10) ** 2 / (n / 10), 0);
    expect(chi).toBeLessThan(27.9);
  });

  it('treats seeds modulo 2^32', () => {
    expect(mulberry32(-1)()).toBe(mulberry32(0xffffffff)());
  });
});

describe('shuffleInPlace', () => {
  it('permutes without losing items, deterministically', () => {
    const items = Array.from({ length: 100 }, (_, i) => i);
    const a = shuffleInPlace([...items], mulberry32(9));
    expect([...a].sort((x, y) => x - y)).toEqual(items);
    expect(a).not.toEqual(items);
    expect(shuffleInPlace([...items], mulberry32(9))).toEqual(a);
  });

  it('puts each item in each place about equally often', () => {
    const r = mulberry32(1);
    const counts = [0, 0, 0, 0];
    const trials = 40_000;
    for (let t = 0; t < trials; t++) counts[shuffleInPlace([0, 1, 2, 3], r).indexOf(0)]!++;
    for (const c of counts) expect(Math.abs(c / trials - 0.25)).toBeLessThan(0.01);
  });
});
