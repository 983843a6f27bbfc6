// The span and MLM losses' masking rules (src/train/losses.ts); their values against
// PyTorch are checked in reference.test.ts.

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { mlmLoss, spanAllowedBias, spanLoss } from '../../src/train/losses.js';
import { useBackend } from '../helpers/backend.js';

beforeAll(async () => {
  await useBackend('cpu');
});

describe('spanAllowedBias', () => {
  it('allows [CLS] and context tokens, and masks the question, its [SEP] and padding', () => {
    const mask = tf.tensor2d([[1, 1, 1, 1, 1, 1, 0, 0]], undefined, 'int32');
    const types = tf.tensor2d([[0, 0, 0, 1, 1, 1, 0, 0]], undefined, 'int32');
    expect(Array.from(spanAllowedBias(mask, types).dataSync())).toEqual([0, -10000, -10000, 0, 0, 0, -10000, -10000]);
    expect(Array.from(spanAllowedBias(mask).dataSync())).toEqual([0, 0, 0, 0, 0, 0, -10000, -10000]);
    tf.dispose([mask, types]);
  });
});

describe('spanLoss', () => {
  it('with masking, logits at question and padding positions do not change the loss', () => {
    const mask = tf.tensor2d([[1, 1, 1, 1, 1, 0]], undefined, 'int32');
    const types = tf.tensor2d([[0, 0, 0, 1, 1, 0]], undefined, 'int32');
    const pos = tf.tensor1d([3], 'int32');
    const a = tf.tensor2d([[0.5, 0.1, 0.2, 1.0, -1.0, 0.3]]);
    const b = tf.tensor2d([[0.5, 9.0, -7.0, 1.0, -1.0, 50.0]]);
    const la = spanLoss(a, a, pos, pos, mask, types).dataSync()[0];
    const lb = spanLoss(b, b, pos, pos, mask, types).dataSync()[0];
    expect(lb).toBeCloseTo(la, 6);
    // the softmax over [CLS], 3, 4 only: −log(e¹ / (e^0.5 + e¹ + e⁻¹))
    expect(la).toBeCloseTo(-Math.log(Math.exp(1) / (Math.exp(0.5) + Math.exp(1) + Math.exp(-1))), 5);
    expect(spanLoss(b, b, pos, pos).dataSync()[0]).toBeGreaterThan(40);
    tf.dispose([mask, types, pos, a, b]);
  });
});

describe('mlmLoss', () => {
  it('averages only over labelled positions and is 0 when none is labelled', () => {
    const logits = tf.tensor3d([
      [
        [2, 0, 0],
        [0, 0, 5],
      ],
    ]);
    const one = tf.tensor2d([[0, -100]], undefined, 'int32');
    const none = tf.tensor2d([[-100, -100]], undefined, 'int32');
    expect(mlmLoss(logits, one).dataSync()[0]).toBeCloseTo(-Math.log(Math.exp(2) / (Math.exp(2) + 2)), 5);
    expect(mlmLoss(logits, none).dataSync()[0]).toBe(0);
    tf.dispose([logits, one, none]);
  });
});
