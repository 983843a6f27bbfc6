// ReaderParams: seeded initialisation, checkpoint conversion, load reports.

import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import type { NamedTensors } from '../../src/io/tensors.js';
import { parameterShapes, presetConfig, type ReaderConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import { useBackend } from '../helpers/backend.js';

const config: ReaderConfig = presetConfig('tiny', 1000);

function clone(named: NamedTensors): NamedTensors {
  return new Map([...named].map(([k, v]) => [k, { shape: [...v.shape], data: Float32Array.from(v.data) }]));
}

/** Exact equality of two float arrays, as one boolean (vitest's deep equality is slow on 10⁵ elements). */
function sameValues(a: Float32Array, b: Float32Array): boolean {
  return a.length === b.length && a.every((v, i) => Object.is(v, b[i]));
}

function stats(data: Float32Array): { mean: number; std: number; maxAbs: number } {
  let sum = 0;
  let maxAbs = 0;
  for (const v of data) {
    sum += v;
    maxAbs = Math.max(maxAbs, Math.abs(v));
  }
  const mean = sum / data.length;
  let sq = 0;
  for (const v of data) sq += (v - mean) ** 2;
  return { mean, std: Math.sqrt(sq / data.length), maxAbs };
}

beforeAll(async () => {
  await useBackend('cpu');
});

describe('ReaderParams.init', () => {
  it('draws a truncated normal: mean ≈ 0, the truncated σ, nothing beyond 2σ; biases 0, LayerNorm 1 and 0', () => {
    const params = ReaderParams.init(config, 7);
    try {
      const named = params.toNamed();
      const word = stats(named.get('bert.embeddings.word_embeddings.weight')!.data); // 128 000 draws
      // N(0, σ²) cut at ±2σ has σ_t = σ·√(1 − 4φ(2)/(2Φ(2) − 1)) = 0.8796·σ (the
      // truncated-normal variance formula, Johnson, Kotz & Balakrishnan, "Continuous
      // Univariate Distributions" vol. 1, §10.1); torch.nn.init.trunc_normal_ does not rescale.
      expect(Math.abs(word.mean)).toBeLessThan(4 * (0.02 / Math.sqrt(128_000)));
      expect(Math.abs(word.std / (0.02 * 0.8796) - 1)).toBeLessThan(0.01);
      for (const [name, spec] of parameterShapes(config)) {
        const data = named.get(name)!.data;
        if (spec.init === 'normal') expect(stats(data).maxAbs, name).toBeLessThanOrEqual(2 * 0.02 * (1 + 1e-6));
        if (spec.init === 'zeros')
          expect(
            data.every((v) => v === 0),
            name,
          ).toBe(true);
        if (spec.init === 'ones')
          expect(
            data.every((v) => v === 1),
            name,
          ).toBe(true);
      }
      expect(named.get('bert.embeddings.LayerNorm.weight')!.data.every((v) => v === 1)).toBe(true);
      expect(named.get('qa_outputs.bias')!.data.every((v) => v === 0)).toBe(true);
    } finally {
      params.dispose();
    }
  });

  it('is deterministic for a seed and differs between seeds', () => {
    const a = ReaderParams.init(config, 1);
    const b = ReaderParams.init(config, 1);
    const c = ReaderParams.init(config, 2);
    try {
      const [na, nb, nc] = [a.toNamed(), b.toNamed(), c.toNamed()];
      for (const name of na.keys()) expect(sameValues(nb.get(name)!.data, na.get(name)!.data), name).toBe(true);
      const q = 'bert.encoder.layer.0.attention.self.query.weight';
      expect(sameValues(nc.get(q)!.data, na.get(q)!.data)).toBe(false);
    } finally {
      a.dispose();
      b.dispose();
      c.dispose();
    }
  });

  it('owns its tensors: dispose() returns the tensor count to where it was', () => {
    const before = tf.memory().numTensors;
    const params = ReaderParams.init(config, 3);
    expect(params.variables.size).toBe(parameterShapes(config).size);
    params.dispose();
    expect(tf.memory().numTensors).toBe(before);
  });

  it('keeps Linear weights [out, in] as the checkpoint holds them, and toNamed copies them', () => {
    const params = ReaderParams.init(config, 4);
    try {
      const name = 'bert.encoder.layer.0.intermediate.dense.weight';
      expect(params.get(name).shape).toEqual([config.intermediateSize, config.hiddenSize]);
      const named = params.toNamed().get(name)!;
      expect(named.shape).toEqual([config.intermediateSize, config.hiddenSize]);
      const internal = params.get(name).dataSync();
      expect(sameValues(named.data, internal as Float32Array)).toBe(true);
      // a copy: changing what toNamed gave leaves the variable as it was
      named.data[0] += 1;
      expect(params.get(name).dataSync()[0]).toBe(internal[0]);
    } finally {
      params.dispose();
    }
  });
});

describe('ReaderParams.fromNamed', () => {
  let reference: NamedTensors;
  beforeAll(() => {
    const params = ReaderParams.init(config, 11);
    reference = params.toNamed();
    params.dispose();
  });

  it('round-trips toNamed → fromNamed → toNamed exactly', () => {
    const { params, report } = ReaderParams.fromNamed(config, clone(reference));
    try {
      expect(report).toEqual({ loaded: [...reference.keys()], missing: [], unexpected: [], notices: [] });
      const again = params.toNamed();
      expect([...again.keys()]).toEqual([...reference.keys()]);
      for (const [name, t] of reference) {
        expect(again.get(name)!.shape, name).toEqual(t.shape);
        expect(sameValues(again.get(name)!.data, t.data), name).toBe(true);
      }
    } finally {
      params.dispose();
    }
  });

  it('accepts encoder names without the bert. prefix, and LayerNorm gamma/beta spellings', () => {
    const bare: NamedTensors = new Map();
    for (const [name, t] of clone(reference)) {
      let n = name.replace(/^bert\./, '');
      if (n === 'embeddings.LayerNorm.weight') n = 'embeddings.LayerNorm.gamma';
      if (n === 'embeddings.LayerNorm.bias') n = 'embeddings.LayerNorm.beta';
      bare.set(n, t);
    }
    const { params, report } = ReaderParams.fromNamed(config, bare);
    try {
      expect(report.missing).toEqual([]);
      expect(report.unexpected).toEqual([]);
      const again = params.toNamed();
      for (const [name, t] of reference) expect(sameValues(again.get(name)!.data, t.data), name).toBe(true);
    } finally {
      params.dispose();
    }
  });

  it('initialises a missing span head and MLM head afresh, with notices; reports unexpected tensors', () => {
    const named = clone(reference);
    for (const name of [...named.keys()]) if (name.startsWith('qa_outputs') || name.startsWith('cls.')) named.delete(name);
    named.set('bert.pooler.dense.weight', {
      shape: [config.hiddenSize, config.hiddenSize],
      data: new Float32Array(config.hiddenSize ** 2),
    });
    named.set('cls.predictions.decoder.weight', reference.get('bert.embeddings.word_embeddings.weight')!); // tied: ignored
    const { params, report } = ReaderParams.fromNamed(config, named, { seed: 5, source: 'my-model.safetensors' });
    try {
      expect(report.missing.sort()).toEqual(
        [...parameterShapes(config).keys()].filter((n) => n.startsWith('qa_outputs') || n.startsWith('cls.')).sort(),
      );
      expect(report.unexpected).toEqual(['bert.pooler.dense.weight']);
      expect(report.notices).toHaveLength(2);
      expect(report.notices[0]).toMatch(/my-model\.safetensors has no span head \(qa_outputs\)/);
      expect(report.notices[1]).toMatch(/no MLM head/);
      const qa = params.toNamed().get('qa_outputs.weight')!.data;
      expect(stats(qa).std).toBeGreaterThan(0);
      expect(stats(qa).maxAbs).toBeLessThanOrEqual(2 * config.initStd * (1 + 1e-6));
    } finally {
      params.dispose();
    }
  });

  it('rejects a shape mismatch, naming the tensor and both shapes', () => {
    const named = clone(reference);
    named.set('bert.encoder.layer.1.output.dense.weight', {
      shape: [config.intermediateSize, config.hiddenSize],
      data: new Float32Array(config.intermediateSize * config.hiddenSize),
    });
    const before = tf.memory().numTensors;
    expect(() => ReaderParams.fromNamed(config, named, { source: 'ck.safetensors' })).toThrow(
      'ck.safetensors: tensor "bert.encoder.layer.1.output.dense.weight" has shape [512, 128], the config expects [128, 512]',
    );
    expect(tf.memory().numTensors).toBe(before);
  });

  it('rejects a checkpoint missing an encoder tensor, naming it', () => {
    const named = clone(reference);
    named.delete('bert.encoder.layer.1.attention.self.value.bias');
    expect(() => ReaderParams.fromNamed(config, named)).toThrow(
      /missing encoder tensor\(s\): bert\.encoder\.layer\.1\.attention\.self\.value\.bias/,
    );
  });

  it('rejects data whose length disagrees with its shape', () => {
    const named = clone(reference);
    named.set('qa_outputs.bias', { shape: [2], data: new Float32Array(3) });
    expect(() => ReaderParams.fromNamed(config, named)).toThrow(/"qa_outputs\.bias" holds 3 values, its shape \[2\] needs 2/);
  });

  it('rejects NaN or infinite weights from any source (a checkpoint to resume, too), naming the tensor; nothing is left allocated', () => {
    for (const bad of [Number.NaN, Number.POSITIVE_INFINITY, Number.NEGATIVE_INFINITY]) {
      const named = clone(reference);
      const t = named.get('bert.encoder.layer.1.intermediate.dense.weight')!;
      const data = Float32Array.from(t.data);
      data[17] = bad;
      named.set('bert.encoder.layer.1.intermediate.dense.weight', { shape: t.shape, data });
      const before = tf.memory().numTensors;
      let thrown: unknown;
      try {
        ReaderParams.fromNamed(config, named, { source: 'checkpoint step-00000040-x' }).params.dispose();
      } catch (err) {
        thrown = err;
      }
      expect((thrown as Error | undefined)?.message).toMatch(
        /^checkpoint step-00000040-x: tensor "bert\.encoder\.layer\.1\.intermediate\.dense\.weight" holds 1 value\(s\) that are NaN or infinite \(the first at index 17\)/,
      );
      // a fault of the input: the CLI reports it without "internal error" (src/cli/common.ts)
      expect((thrown as Error).name).toBe('WeightsError');
      expect(tf.memory().numTensors).toBe(before);
    }
  });
});
