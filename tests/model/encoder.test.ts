// The forward pass's own properties: no tensor leaks, seeded dropout, padding
// invariance, the activation switch, input errors.

import * as tf from '@tensorflow/tfjs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { presetConfig, type ReaderConfig } from '../../src/model/config.js';
import { mlmLogits, mlmLogitsAt, spanLogits, type ReaderInputs } from '../../src/model/encoder.js';
import { ReaderParams } from '../../src/model/params.js';
import { mlmLoss, spanLoss } from '../../src/train/losses.js';
import { useBackend } from '../helpers/backend.js';

const config: ReaderConfig = presetConfig('tiny', 200, { hiddenSize: 32, intermediateSize: 64, maxPositions: 64 });

/** Two windows of 12 tokens, the second padded after 8. */
function batch(T = 12): ReaderInputs {
  const ids = [
    [2, 10, 11, 3, 20, 21, 22, 23, 24, 25, 26, 3],
    [2, 12, 3, 30, 31, 32, 33, 3, 0, 0, 0, 0],
  ].map((row) => [...row, ...new Array(T - 12).fill(0)]);
  const types = [
    [0, 0, 0, 0, 1, 1, 1, 1, 1, 1, 1, 1],
    [0, 0, 0, 1, 1, 1, 1, 1, 0, 0, 0, 0],
  ].map((row) => [...row, ...new Array(T - 12).fill(0)]);
  const mask = [
    [1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1],
    [1, 1, 1, 1, 1, 1, 1, 1, 0, 0, 0, 0],
  ].map((row) => [...row, ...new Array(T - 12).fill(0)]);
  return {
    inputIds: tf.tensor2d(ids, undefined, 'int32'),
    tokenTypeIds: tf.tensor2d(types, undefined, 'int32'),
    attentionMask: tf.tensor2d(mask, undefined, 'int32'),
  };
}

let params: ReaderParams;
let inputs: ReaderInputs;

beforeAll(async () => {
  await useBackend('cpu');
  params = ReaderParams.init(config, 99);
  inputs = batch();
});

afterAll(() => {
  params.dispose();
  tf.dispose(Object.values(inputs));
});

function startLogits(p: ReaderParams, c: ReaderConfig, x: ReaderInputs, training: boolean, dropoutSeed?: number): Float32Array {
  return tf.tidy(() => spanLogits(p, c, x, { training, dropoutSeed }).start.dataSync() as Float32Array);
}

describe('tensor discipline', () => {
  it('leaves the tensor count unchanged across repeated forward and gradient calls', () => {
    const sp = tf.tensor1d([5, 0], 'int32');
    const ep = tf.tensor1d([7, 0], 'int32');
    const labels = tf.tensor2d(
      [[-100, 10, -100, -100, -100, 21, -100, -100, -100, -100, -100, -100], new Array(12).fill(-100)],
      undefined,
      'int32',
    );
    const before = tf.memory().numTensors;
    for (let step = 0; step < 3; step++) {
      // a block body: tf.tidy keeps what its function returns
      tf.tidy(() => {
        spanLogits(params, config, inputs, { training: true, dropoutSeed: step });
      });
      tf.tidy(() => {
        mlmLogits(params, config, inputs, { training: false });
      });
      const { value, grads } = params.variableGrads(() => {
        const { start, end } = spanLogits(params, config, inputs, { training: true, dropoutSeed: step });
        return tf.add(
          spanLoss(start, end, sp, ep, inputs.attentionMask, inputs.tokenTypeIds),
          mlmLoss(mlmLogits(params, config, inputs, { training: false }), labels),
        ) as tf.Scalar;
      });
      tf.dispose([value, ...grads.values()]);
      expect(tf.memory().numTensors).toBe(before);
    }
    tf.dispose([sp, ep, labels]);
  });
});

describe('dropout', () => {
  it('is off at inference, and while training its masks follow the seed', () => {
    const evalA = startLogits(params, config, inputs, false, 1);
    const evalB = startLogits(params, config, inputs, false, 2);
    expect(evalA).toEqual(evalB);
    const trainA = startLogits(params, config, inputs, true, 1);
    const trainA2 = startLogits(params, config, inputs, true, 1);
    const trainB = startLogits(params, config, inputs, true, 2);
    expect(trainA2).toEqual(trainA);
    expect(trainB).not.toEqual(trainA);
    expect(trainA).not.toEqual(evalA);
  });

  it('with both rates 0, training equals inference', () => {
    const noDropout = { ...config, hiddenDropout: 0, attentionDropout: 0 };
    expect(startLogits(params, noDropout, inputs, true, 3)).toEqual(startLogits(params, noDropout, inputs, false));
  });
});

describe('architecture properties', () => {
  it('padding keys get no attention: extra padding leaves real positions unchanged (BERT mask −10000)', () => {
    const longer = batch(20);
    try {
      const short = startLogits(params, config, inputs, false);
      const long = startLogits(params, config, longer, false);
      for (let b = 0; b < 2; b++) {
        const real = b === 0 ? 12 : 8;
        for (let t = 0; t < real; t++) expect(Math.abs(long[b * 20 + t] - short[b * 12 + t])).toBeLessThan(1e-5);
      }
    } finally {
      tf.dispose(Object.values(longer));
    }
  });

  it('the MLM head at chosen positions gives the rows of the full head (mlmLogits is checked against PyTorch)', () => {
    const positions = [1, 5, 6, 13, 15];
    const [full, picked] = tf.tidy(() => [
      mlmLogits(params, config, inputs, { training: false }).reshape([24, config.vocabSize]).arraySync() as number[][],
      mlmLogitsAt(params, config, inputs, tf.tensor1d(positions, 'int32'), { training: false }).arraySync() as number[][],
    ]);
    positions.forEach((at, k) => {
      const worst = Math.max(...picked[k]!.map((v, j) => Math.abs(v - full[at]![j]!)));
      expect(worst, `position ${at}`).toBeLessThan(1e-5);
    });
  });

  it('the sigmoid GELU is a different function from the exact one, close to it (Hendrycks & Gimpel 2016)', () => {
    const exact = startLogits(params, config, inputs, false);
    const approx = startLogits(params, { ...config, activation: 'gelu_sigmoid' }, inputs, false);
    expect(approx).not.toEqual(exact);
    for (let i = 0; i < exact.length; i++) expect(Math.abs(approx[i] - exact[i])).toBeLessThan(0.1);
  });
});

describe('bad input', () => {
  it('names the field with a wrong dtype or shape, and sequences longer than maxPositions', () => {
    const floatIds = { ...inputs, inputIds: tf.cast(inputs.inputIds, 'float32') as tf.Tensor2D };
    expect(() => tf.tidy(() => spanLogits(params, config, floatIds, { training: false }))).toThrow(
      'reader inputs: inputIds must be int32, got float32',
    );
    floatIds.inputIds.dispose();
    const shortMask = { ...inputs, attentionMask: tf.ones([2, 5], 'int32') as tf.Tensor2D };
    expect(() => tf.tidy(() => spanLogits(params, config, shortMask, { training: false }))).toThrow(
      'reader inputs: attentionMask has shape [2, 5], expected [2, 12]',
    );
    shortMask.attentionMask.dispose();
    const tooLong = batch(70);
    expect(() => tf.tidy(() => spanLogits(params, config, tooLong, { training: false }))).toThrow(
      'reader: 70 tokens per sequence exceed maxPositions (64)',
    );
    tf.dispose(Object.values(tooLong));
  });
});
