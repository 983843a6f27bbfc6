// The learning rate a run gets when none is given: by the reader's width
// (src/train/config.ts, suggestedLearningRate), read from the base's config.json by the
// CLI, and the plain default when the base cannot be read (loading it reports that later).
import { describe, expect, it } from 'vitest';
import { baseHiddenSize, configFromOptions } from '../../src/cli/commands/train.js';
import { DEFAULT_TRAIN_CONFIG, suggestedLearningRate } from '../../src/train/config.js';

describe('the learning rate when none is given', () => {
  it('steps down with the width: 1e-3 up to 256, 1e-4 up to 512, 5e-5 above', () => {
    expect([64, 128, 256, 257, 512, 768, 1024].map(suggestedLearningRate)).toEqual([1e-3, 1e-3, 1e-3, 1e-4, 1e-4, 5e-5, 5e-5]);
  });

  it("comes from the base directory's hidden size, and --lr wins over it", () => {
    expect(baseHiddenSize('tiny-models/base')).toBe(128);
    expect(configFromOptions({ train: 't.jsonl', base: 'tiny-models/base', out: 'o' }).learningRate).toBe(1e-3);
    expect(configFromOptions({ train: 't.jsonl', base: 'tiny-models/base', out: 'o', lr: '2e-5' }).learningRate).toBe(2e-5);
  });

  it('falls back to the plain default when the base has no readable config.json', () => {
    expect(baseHiddenSize('no/such/dir')).toBeNull();
    expect(configFromOptions({ train: 't.jsonl', base: 'no/such/dir', out: 'o' }).learningRate).toBe(DEFAULT_TRAIN_CONFIG.learningRate);
  });
});
