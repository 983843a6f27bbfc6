// The window settings `train` builds from its options (configFromOptions): a short
// --max-len alone gets a question length and a stride that fit it, by the one rule of
// src/session/windows.ts, and an asked stride that cannot fit is refused naming the flag.
import { describe, expect, it } from 'vitest';
import { configFromOptions } from '../../src/cli/commands/train.js';

const base = { train: 't.jsonl', base: 'tiny-models/base', out: 'o' };

describe('train --max-len', () => {
  it('128 alone: a third of the window for the question, half the context room left for the stride', () => {
    // (128 − 42 − 3) / 2 = 41; the defaults 128 / 64 would leave no room (128 − 64 − 3 = 61 < 128)
    const c = configFromOptions({ ...base, maxLen: '128' });
    expect([c.maxLength, c.maxQueryLength, c.stride]).toEqual([128, 42, 41]);
  });

  it('keeps an asked stride that fits, and refuses one that does not, naming the flag', () => {
    expect(configFromOptions({ ...base, maxLen: '128', stride: '30' }).stride).toBe(30);
    expect(() => configFromOptions({ ...base, maxLen: '128', stride: '100' })).toThrow(/^--stride 100 must be below the 83 context tokens/);
  });
});
