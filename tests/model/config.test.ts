// ReaderConfig: presets, validation, HF-style config.json conversion, parameter counts.

import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
  configFromHf,
  configToHf,
  DEFAULT_CONFIG,
  paramCount,
  presetConfig,
  validateConfig,
  withoutDecoding,
} from '../../src/model/config.js';
import { FIXTURES, loadFixture, type JsonTensor } from './fixtures.js';

describe('presets', () => {
  it('tiny and small have the stated sizes and take the vocabulary size given', () => {
    expect(presetConfig('tiny', 8000)).toMatchObject({
      numLayers: 2,
      hiddenSize: 128,
      numHeads: 2,
      intermediateSize: 512,
      vocabSize: 8000,
    });
    expect(presetConfig('small', 8000)).toMatchObject({
      numLayers: 4,
      hiddenSize: 256,
      numHeads: 4,
      intermediateSize: 1024,
      vocabSize: 8000,
    });
    expect(presetConfig('tiny', 8000, { activation: 'gelu_sigmoid' }).activation).toBe('gelu_sigmoid');
  });
});

describe('validateConfig', () => {
  it('names every bad field with its value', () => {
    const bad = { ...DEFAULT_CONFIG, hiddenSize: 100, numHeads: 3, hiddenDropout: 1.5, activation: 'relu' as never, vocabSize: 0 };
    expect(() => validateConfig(bad, 'run.json')).toThrow(
      'run.json: invalid reader config: vocabSize must be a positive integer, got 0; hiddenDropout must be a number in [0, 1), got 1.5; activation must be "gelu" or "gelu_sigmoid", got "relu"; hiddenSize (100) must be a multiple of numHeads (3)',
    );
  });
});

describe('HF-style config.json', () => {
  it('reads the PyTorch generator checkpoint config.json (tests/reference/generate_fixtures.py)', () => {
    const json = JSON.parse(readFileSync(new URL('checkpoint/config.json', FIXTURES), 'utf8')) as unknown;
    expect(configFromHf(json)).toEqual({
      vocabSize: 64,
      hiddenSize: 32,
      numLayers: 2,
      numHeads: 2,
      intermediateSize: 64,
      maxPositions: 32,
      typeVocabSize: 2,
      hiddenDropout: 0,
      attentionDropout: 0,
      layerNormEps: 1e-12,
      activation: 'gelu',
      initStd: 0.02,
    });
  });

  it('round-trips configToHf → configFromHf, including the sigmoid GELU (HF "quick_gelu")', () => {
    for (const config of [presetConfig('tiny', 5000), presetConfig('small', 300, { activation: 'gelu_sigmoid', hiddenDropout: 0 })]) {
      const hf = configToHf(config);
      expect(configFromHf(JSON.parse(JSON.stringify(hf)))).toEqual(config);
    }
    expect(configToHf(presetConfig('tiny', 10, { activation: 'gelu_sigmoid' })).hidden_act).toBe('quick_gelu');
  });

  it('carries the word-match level as "spanwright_question_match", only when on, and checks the token types it needs', () => {
    const on = presetConfig('tiny', 100, { typeVocabSize: 5, questionMatch: 'words+sentence' });
    const hf = configToHf(on);
    expect(hf.spanwright_question_match).toBe('words+sentence');
    expect(configFromHf(JSON.parse(JSON.stringify(hf)))).toEqual(on);
    expect('spanwright_question_match' in configToHf(presetConfig('tiny', 100))).toBe(false);
    expect(() => presetConfig('tiny', 100, { typeVocabSize: 3, questionMatch: 'words+sentence' })).toThrow(
      /needs typeVocabSize of at least 5/,
    );
    expect(() => configFromHf({ ...configToHf(presetConfig('tiny', 100)), spanwright_question_match: true }, 'c.json')).toThrow(
      /c\.json: "spanwright_question_match" must be "words", "words\+sentence" or "words\+sentence\+kind"/,
    );
  });

  it('carries the decoding chosen for a fine-tuned reader as "spanwright_decoding", only when set, and names a bad value', () => {
    const tuned = presetConfig('tiny', 100, { decoding: { nullThreshold: -1.25, kindBonus: 3 } });
    const hf = configToHf(tuned);
    expect(hf.spanwright_decoding).toEqual({ null_threshold: -1.25, kind_bonus: 3 });
    expect(configFromHf(JSON.parse(JSON.stringify(hf)))).toEqual(tuned);
    expect('spanwright_decoding' in configToHf(presetConfig('tiny', 100))).toBe(false);
    expect(withoutDecoding(tuned)).toEqual(presetConfig('tiny', 100));
    const plain = configToHf(presetConfig('tiny', 100));
    expect(() => configFromHf({ ...plain, spanwright_decoding: 2 }, 'c.json')).toThrow(/c\.json: "spanwright_decoding" must be an object/);
    expect(() => configFromHf({ ...plain, spanwright_decoding: { null_threshold: 'high' } }, 'c.json')).toThrow(
      /c\.json: invalid reader config: spanwright_decoding\.null_threshold must be a finite number, got "high"/,
    );
    expect(() => configFromHf({ ...plain, spanwright_decoding: { null_threshold: 0, kind_bonus: -1 } }, 'c.json')).toThrow(
      /spanwright_decoding\.kind_bonus must be a number ≥ 0, got -1/,
    );
  });

  it('fills optional keys with BERT defaults and rejects missing sizes and unknown activations, naming file and key', () => {
    const minimal = { vocab_size: 100, hidden_size: 64, num_hidden_layers: 1, num_attention_heads: 2, intermediate_size: 128 };
    expect(configFromHf(minimal)).toMatchObject({ maxPositions: 512, typeVocabSize: 2, layerNormEps: 1e-12, activation: 'gelu' });
    expect(() => configFromHf({ ...minimal, hidden_size: undefined }, 'my/config.json')).toThrow(
      'my/config.json: missing required key "hidden_size"',
    );
    expect(() => configFromHf({ ...minimal, hidden_act: 'relu' }, 'my/config.json')).toThrow(
      /my\/config\.json: "hidden_act" "relu" is not supported/,
    );
    expect(() => configFromHf({ ...minimal, layer_norm_eps: '1e-12' }, 'c.json')).toThrow(
      'c.json: "layer_norm_eps" must be a number, got "1e-12"',
    );
    expect(() => configFromHf([], 'c.json')).toThrow('c.json: expected a JSON object');
  });
});

describe('paramCount', () => {
  it('equals the number of values PyTorch wrote for the fixture model (generate_fixtures.py)', () => {
    const model = loadFixture<{ weights: Record<string, JsonTensor>; config: Parameters<typeof paramCount>[0] }>('model.json');
    const total = Object.values(model.weights).reduce((n, t) => n + t.data.length, 0);
    expect(paramCount(model.config).total).toBe(total);
  });

  it('gives BERT-base 108,891,648 encoder parameters (bert-base-uncased: 109,482,240 with the 590,592-value pooler, from memory)', () => {
    expect(paramCount(DEFAULT_CONFIG).encoder).toBe(109_482_240 - 590_592);
  });
});
