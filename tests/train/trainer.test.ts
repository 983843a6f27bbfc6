// The training step on a tiny reader (cpu backend): repeatability from the seed,
// gradient accumulation as DEVELOPERS.md defines it (the mean of the micro-batch
// gradients), exact padding trim, a refused non-finite step, eval mode, checkpoint
// layout of the moments, and a flat tensor count. These are properties of the engine's
// own definitions; the comparison against PyTorch is in reference.test.ts.
import * as tf from '@tensorflow/tfjs';
import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import type { NamedTensors } from '../../src/io/tensors.js';
import { ReaderParams } from '../../src/model/params.js';
import { collateMlm, collateSpan, type SpanExample } from '../../src/train/batches.js';
import { trainConfig, type TrainConfig } from '../../src/train/config.js';
import { planTraining } from '../../src/train/schedule.js';
import { NonFiniteError, Trainer } from '../../src/train/trainer.js';
import { CLS, firstDifference, MASK, SEP, snapshot, TINY, tinyFeatures, tinySequences } from './tiny.js';

beforeAll(async () => {
  await tf.setBackend('cpu');
});

const owned: { dispose(): void }[] = [];
afterEach(() => {
  while (owned.length > 0) owned.pop()!.dispose();
});

function makeTrainer(overrides: Partial<TrainConfig> = {}, features = 8, initSeed = 1, modelConfig = TINY) {
  const config = trainConfig({
    batchSize: 2,
    gradAccumulation: 1,
    epochs: 1,
    maxLength: 16,
    stride: 4,
    learningRate: 1e-3,
    warmupRatio: 0,
    ...overrides,
  });
  const params = ReaderParams.init(modelConfig, initSeed);
  const trainer = new Trainer(params, modelConfig, config, planTraining(config, features));
  owned.push(params, trainer);
  return { params, trainer, config };
}

const batchOf = (features: SpanExample[], trim = true) => collateSpan(features, trim);

describe('Trainer.step', () => {
  it('gives the same losses from the same seed, and other losses from another', () => {
    const data = tinyFeatures(6, 7);
    const run = (seed: number) => {
      const { trainer } = makeTrainer({ seed, batchSize: 2 }, 6);
      return [0, 2, 4].map((i) => trainer.step([batchOf(data.slice(i, i + 2))]).loss);
    };
    const first = run(5);
    expect(run(5)).toEqual(first);
    // same weights and data, other dropout masks
    expect(run(6)).not.toEqual(first);
    for (const loss of first) expect(Number.isFinite(loss)).toBe(true);
  });

  it('accumulating A micro-batches of b equals one batch of A·b (DEVELOPERS.md: mean of micro-batch gradients)', () => {
    const data = tinyFeatures(4, 11);
    // dropout off: the masks of a micro-batch and of the whole batch cannot coincide
    const whole = makeTrainer({ dropout: 0, batchSize: 4, gradAccumulation: 1, maxGradNorm: 0.5 }, 4);
    const split = makeTrainer({ dropout: 0, batchSize: 2, gradAccumulation: 2, maxGradNorm: 0.5 }, 4);
    const a = whole.trainer.step([batchOf(data)]);
    const b = split.trainer.step([batchOf(data.slice(0, 2)), batchOf(data.slice(2))]);
    expect(b.loss).toBeCloseTo(a.loss, 5);
    expect(b.gradNorm).toBeCloseTo(a.gradNorm, 5);
    expect(a.clipScale).toBeLessThan(1); // the clip took part
    expect(firstDifference(snapshot(split.params.variables), snapshot(whole.params.variables), 1e-5)).toBeNull();
    expect(b.features).toBe(4);
  });

  it('trimming padding changes nothing but the work', () => {
    const data = tinyFeatures(2, 3);
    const trimmed = makeTrainer({ dropout: 0 }, 2);
    const full = makeTrainer({ dropout: 0 }, 2);
    const t = trimmed.trainer.step([batchOf(data, true)]);
    const f = full.trainer.step([batchOf(data, false)]);
    expect(t.positions).toBeLessThan(f.positions);
    expect(t.tokens).toBe(f.tokens);
    expect(t.loss).toBeCloseTo(f.loss, 5);
    expect(firstDifference(snapshot(trimmed.params.variables), snapshot(full.params.variables), 1e-5)).toBeNull();
  });

  it('reports the scheduled learning rate and counts updates', () => {
    const { trainer } = makeTrainer({ warmupRatio: 0.5, learningRate: 1e-3 }, 8); // S = 4, W = 2
    const data = tinyFeatures(8, 1);
    const lrs = [0, 2, 4, 6].map((i) => trainer.step([batchOf(data.slice(i, i + 2))]).lr);
    expect(lrs[0]).toBe(0);
    expect(lrs[1]).toBeCloseTo(5e-4, 12); // 1/2
    expect(lrs[2]).toBeCloseTo(1e-3, 12); // (4 − 2)/(4 − 2)
    expect(lrs[3]).toBeCloseTo(5e-4, 12); // (4 − 3)/2
    expect(trainer.updatesDone).toBe(4);
    expect(trainer.state()).toEqual({ update: 4, seed: trainer.config.seed });
  });

  it('does not decay the MLM head under the span loss: parameters without a gradient stay put', () => {
    const { params, trainer } = makeTrainer({ weightDecay: 0.1 }, 2);
    const before = snapshot(params.variables);
    trainer.step([batchOf(tinyFeatures(2, 9))]);
    const after = snapshot(params.variables);
    expect(after.get('cls.predictions.transform.dense.weight')).toEqual(before.get('cls.predictions.transform.dense.weight'));
    expect(after.get('qa_outputs.weight')).not.toEqual(before.get('qa_outputs.weight'));
  });

  it('refuses a NaN loss, naming it, and leaves weights and moments as they were', () => {
    const { params, trainer } = makeTrainer({}, 8);
    const data = tinyFeatures(8, 2);
    trainer.step([batchOf(data.slice(0, 2))]);
    trainer.step([batchOf(data.slice(2, 4))]);
    // poison one weight: the forward pass, and so the loss, become NaN
    const poisoned = params.get('qa_outputs.bias');
    tf.tidy(() => poisoned.assign(tf.tensor1d([NaN, 0])));
    const weights = snapshot(params.variables);
    const moments = trainer.optimizerState();
    let error: unknown;
    try {
      trainer.step([batchOf(data.slice(4, 6))]);
    } catch (e) {
      error = e;
    }
    expect(error).toBeInstanceOf(NonFiniteError);
    expect((error as NonFiniteError).culprit).toBe('loss');
    expect((error as NonFiniteError).message).toMatch(/update 2: the loss is NaN; the step was not applied/);
    expect(firstDifference(snapshot(params.variables), weights, 0)).toBeNull();
    const after = trainer.optimizerState();
    expect(after.step).toEqual(moments.step);
    expect(firstDifference(dataOf(after.m), dataOf(moments.m), 0)).toBeNull();
    expect(firstDifference(dataOf(after.v), dataOf(moments.v), 0)).toBeNull();
    expect(trainer.updatesDone).toBe(2);
  });

  // Huge span-head weights (sign pattern × scale) give a finite loss with huge gradients.
  // The scales were found by trying (cpu backend, this tiny reader): at 1e30 every
  // gradient is finite but the sum of squares overflows; at 1e37 the token-type
  // embedding's gradient (two rows summing all B·T positions) overflows itself.
  const blowUp = (scale: number) => {
    const { params, trainer } = makeTrainer({}, 2);
    const head = params.get('qa_outputs.weight');
    tf.tidy(() => head.assign(tf.mul(tf.sign(tf.randomNormal(head.shape, 0, 1, 'float32', 3)), scale)));
    const weights = snapshot(params.variables);
    let error: unknown;
    try {
      trainer.step([batchOf(tinyFeatures(2, 4))]);
    } catch (e) {
      error = e;
    }
    expect(error).toBeInstanceOf(NonFiniteError);
    expect(firstDifference(snapshot(params.variables), weights, 0)).toBeNull();
    expect(Object.values(trainer.optimizerState().step).every((s) => s === 0)).toBe(true);
    expect(trainer.updatesDone).toBe(0);
    return { error: error as NonFiniteError, names: [...params.variables.keys()] };
  };

  it('refuses finite gradients whose norm overflows, and leaves everything as it was', () => {
    const { error } = blowUp(1e30);
    expect(error.culprit).toBe('gradient norm');
    expect(error.message).toMatch(/gradients are finite but their global norm overflows/);
  });

  it('refuses a non-finite gradient under a finite loss, naming the first such parameter', () => {
    const { error, names } = blowUp(1e37);
    expect(names).toContain(error.culprit);
    expect(error.message).toContain(`the gradient of ${error.culprit} is not finite`);
  });

  it('keeps the tensor count flat over 200 updates', () => {
    const { trainer } = makeTrainer({ epochs: 200 }, 2);
    const batch = batchOf(tinyFeatures(2, 5));
    trainer.step([batch]);
    const settled = tf.memory().numTensors;
    for (let i = 1; i < 200; i++) trainer.step([batch]);
    expect(tf.memory().numTensors).toBe(settled);
  });
});

describe('Trainer.mlmStep', () => {
  it('trains the MLM head, repeatably, with a flat tensor count', () => {
    const masking = { probability: 0.3, maskId: MASK, vocabSize: TINY.vocabSize, specialIds: [0, CLS, SEP] };
    const batch = collateMlm(tinySequences(2, 8), masking, 1, true);
    const run = () => {
      const { params, trainer } = makeTrainer({ epochs: 5 }, 2);
      const before = snapshot(params.variables).get('cls.predictions.bias')!;
      trainer.mlmStep([batch]);
      const settled = tf.memory().numTensors;
      const losses = [1, 2, 3, 4].map(() => trainer.mlmStep([batch]).loss);
      expect(tf.memory().numTensors).toBe(settled);
      expect(snapshot(params.variables).get('cls.predictions.bias')).not.toEqual(before);
      return losses;
    };
    const losses = run();
    expect(run()).toEqual(losses);
    // the same batch over and over: the loss must come down
    expect(losses[3]).toBeLessThan(losses[0]);
  });
});

describe('Trainer.evalLogits', () => {
  it('runs without dropout: repeated calls agree and leave no tensor behind', () => {
    const { trainer } = makeTrainer({ dropout: 0.5 }, 2);
    const batch = batchOf(tinyFeatures(2, 6));
    const before = tf.memory().numTensors;
    const a = trainer.evalLogits(batch);
    const b = trainer.evalLogits(batch);
    expect(tf.memory().numTensors).toBe(before);
    expect(a.start).toEqual(b.start);
    expect(a.start.length).toBe(batch.size * batch.seqLen);
    expect(a.end.length).toBe(batch.size * batch.seqLen);
  });
});

describe('Trainer optimizer state', () => {
  it('exports moments in checkpoint layout ([out, in]) and restores them', () => {
    const { trainer } = makeTrainer({}, 4);
    const data = tinyFeatures(4, 3);
    trainer.step([batchOf(data.slice(0, 2))]);
    const saved = trainer.optimizerState();
    const m = saved.m.get('bert.encoder.layer.0.intermediate.dense.weight')!;
    expect(m.shape).toEqual([TINY.intermediateSize, TINY.hiddenSize]); // [I, H] as the checkpoint holds the weight
    expect(saved.v.get('qa_outputs.weight')!.shape).toEqual([2, TINY.hiddenSize]);
    expect(saved.step['qa_outputs.weight']).toBe(1);
    expect(saved.step['cls.predictions.bias']).toBe(0);

    const other = makeTrainer({}, 4).trainer;
    other.restore(trainer.state(), saved);
    expect(other.updatesDone).toBe(1);
    const again = other.optimizerState();
    expect(firstDifference(dataOf(again.m), dataOf(saved.m), 0)).toBeNull();
    expect(firstDifference(dataOf(again.v), dataOf(saved.v), 0)).toBeNull();
    expect(() => other.restore({ update: 1, seed: 999 }, saved)).toThrow(/seed 999/);
  });
});

function dataOf(tensors: NamedTensors): Map<string, Float32Array> {
  return new Map([...tensors].map(([k, t]) => [k, t.data]));
}
