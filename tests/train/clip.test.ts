// Global-norm clipping with torch.nn.utils.clip_grad_norm_'s semantics as DEVELOPERS.md
// states them: c = maxNorm / (‖g‖₂ + 1e-6) over all parameters together, applied when
// c < 1. Expected values are worked out by hand beside each check.
import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { clipScale, globalNorm } from '../../src/train/clip.js';

beforeAll(async () => {
  await tf.setBackend('cpu');
});

describe('globalNorm', () => {
  it('is the 2-norm of all gradients together', () => {
    const grads = [tf.tensor1d([3, 4]), tf.tensor2d([[12]])];
    const norm = globalNorm(grads);
    // √(9 + 16 + 144) = √169 = 13
    expect(norm.dataSync()[0]).toBeCloseTo(13, 5);
    norm.dispose();
    grads.forEach((g) => g.dispose());
  });

  it('leaves no tensor behind but its result', () => {
    const g = tf.ones([5]);
    const before = tf.memory().numTensors;
    const norm = globalNorm([g]);
    expect(tf.memory().numTensors).toBe(before + 1);
    expect(norm.dataSync()[0]).toBeCloseTo(Math.sqrt(5), 6);
    norm.dispose();
    g.dispose();
  });
});

describe('clipScale', () => {
  it('scales down to maxNorm when the norm exceeds it', () => {
    // 1 / (13 + 1e-6)
    expect(clipScale(13, 1)).toBeCloseTo(1 / 13.000001, 12);
    expect(clipScale(13, 1) * 13).toBeLessThan(1);
  });

  it('leaves gradients within the bound alone', () => {
    expect(clipScale(0.5, 1)).toBe(1);
    // exactly at the bound: c = 1 / (1 + 1e-6) < 1, so torch scales by a hair
    expect(clipScale(1, 1)).toBeCloseTo(1 / 1.000001, 12);
    expect(clipScale(1, 1)).toBeLessThan(1);
  });

  it('is off with maxNorm 0', () => {
    expect(clipScale(1e9, 0)).toBe(1);
  });
});
