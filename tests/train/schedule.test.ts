// The learning-rate schedule and run plan as DEVELOPERS.md defines them ("Learning-rate
// schedule and optimizer"): lr(k) = base·k/W for k < W, else base·max(0, (S − k)/(S − W)),
// W = round(warmupRatio·S). Every expected value is worked out by hand beside the check.
import { describe, expect, it } from 'vitest';
import { trainConfig } from '../../src/train/config.js';
import { learningRateAt, planTraining } from '../../src/train/schedule.js';

describe('planTraining', () => {
  it('derives updates, warmup and tokens once from the config and the data size', () => {
    const config = trainConfig({ batchSize: 8, gradAccumulation: 2, epochs: 3, warmupRatio: 0.1, learningRate: 1e-4, maxLength: 384 });
    const plan = planTraining(config, 100);
    // A·b = 16 features per update; ⌈100 / 16⌉ = 7 updates per epoch (the last holds 4)
    expect(plan.featuresPerUpdate).toBe(16);
    expect(plan.updatesPerEpoch).toBe(7);
    // S = 3 · 7 = 21; W = round(2.1) = 2
    expect(plan.totalUpdates).toBe(21);
    expect(plan.warmupUpdates).toBe(2);
    // 16 features × 384 tokens
    expect(plan.tokensPerUpdate).toBe(6144);
    expect(plan.baseLearningRate).toBe(1e-4);
  });

  it('counts an exact fit without a short last update', () => {
    const plan = planTraining(trainConfig({ batchSize: 4, gradAccumulation: 1, epochs: 2, warmupRatio: 0 }), 12);
    expect(plan.updatesPerEpoch).toBe(3); // 12 / 4
    expect(plan.totalUpdates).toBe(6);
    expect(plan.warmupUpdates).toBe(0);
  });

  it('rejects an empty training set', () => {
    expect(() => planTraining(trainConfig(), 0)).toThrow(/at least one feature/);
  });
});

describe('learningRateAt', () => {
  const plan = { totalUpdates: 20, warmupUpdates: 4, baseLearningRate: 1e-3 };

  it('warms up linearly from 0 over W updates', () => {
    expect(learningRateAt(plan, 0)).toBe(0); // LambdaLR's first factor is 0/W
    expect(learningRateAt(plan, 1)).toBeCloseTo(2.5e-4, 15); // 1/4
    expect(learningRateAt(plan, 2)).toBeCloseTo(5e-4, 15); // 2/4
    expect(learningRateAt(plan, 3)).toBeCloseTo(7.5e-4, 15); // 3/4
  });

  it('peaks at update W and decays linearly to 0 at S', () => {
    expect(learningRateAt(plan, 4)).toBeCloseTo(1e-3, 15); // (20 − 4) / 16 = 1
    expect(learningRateAt(plan, 12)).toBeCloseTo(5e-4, 15); // (20 − 12) / 16 = 0.5
    expect(learningRateAt(plan, 19)).toBeCloseTo(6.25e-5, 15); // 1 / 16
    expect(learningRateAt(plan, 20)).toBe(0);
    expect(learningRateAt(plan, 25)).toBe(0); // max(0, ·) past the end
  });

  it('with no warmup starts at the peak', () => {
    const flat = { totalUpdates: 10, warmupUpdates: 0, baseLearningRate: 2e-5 };
    expect(learningRateAt(flat, 0)).toBeCloseTo(2e-5, 18);
    expect(learningRateAt(flat, 5)).toBeCloseTo(1e-5, 18); // (10 − 5) / 10
  });

  it('with warmup over every update never decays', () => {
    const all = { totalUpdates: 4, warmupUpdates: 4, baseLearningRate: 1 };
    expect([0, 1, 2, 3].map((k) => learningRateAt(all, k))).toEqual([0, 0.25, 0.5, 0.75]);
  });
});

describe('trainConfig', () => {
  it('names the bad field', () => {
    expect(() => trainConfig({ batchSize: 0 })).toThrow(/batchSize/);
    expect(() => trainConfig({ warmupRatio: 1.5 })).toThrow(/warmupRatio/);
    expect(() => trainConfig({ gradAccumulation: 1.5 })).toThrow(/gradAccumulation/);
    expect(() => trainConfig({ stride: 400, maxLength: 384 })).toThrow(/stride/);
    expect(() => trainConfig({ dropout: 1 })).toThrow(/dropout/);
  });
});
