// A tiny reader and synthetic features for the engine's property tests (determinism,
// accumulation, memory, resume). The features are random token ids laid out as
// `[CLS] question [SEP] context [SEP] pad…`; no check compares them to an outside value.
import type { ReaderConfig } from '../../src/model/config.js';
import type { SpanExample, TokenExample } from '../../src/train/batches.js';
import { mulberry32 } from '../../src/data/random.js';

export const TINY: ReaderConfig = {
  vocabSize: 40,
  hiddenSize: 16,
  numLayers: 1,
  numHeads: 2,
  intermediateSize: 32,
  maxPositions: 16,
  typeVocabSize: 2,
  hiddenDropout: 0.1,
  attentionDropout: 0.1,
  layerNormEps: 1e-12,
  activation: 'gelu_sigmoid',
  initStd: 0.02,
};

export const CLS = 2;
export const SEP = 3;
export const MASK = 4;

/** `count` windows of T = 16: question of 3, context of 4…10 tokens, the rest padding. */
export function tinyFeatures(count: number, seed: number, T = 16): SpanExample[] {
  const random = mulberry32(seed);
  const below = (n: number) => Math.floor(random() * n);
  return Array.from({ length: count }, () => {
    const inputIds = new Int32Array(T);
    const tokenTypeIds = new Int32Array(T);
    const attentionMask = new Int32Array(T);
    const contextLength = 4 + below(7);
    const ids = [CLS, ...[0, 1, 2].map(() => 5 + below(35)), SEP];
    const contextStart = ids.length;
    for (let i = 0; i < contextLength; i++) ids.push(5 + below(35));
    ids.push(SEP);
    ids.forEach((id, i) => {
      inputIds[i] = id;
      attentionMask[i] = 1;
      tokenTypeIds[i] = i >= contextStart ? 1 : 0;
    });
    const answered = random() < 0.75;
    const start = answered ? contextStart + below(contextLength) : 0;
    const end = answered ? Math.min(contextStart + contextLength - 1, start + below(2)) : 0;
    return { inputIds, tokenTypeIds, attentionMask, startPosition: start, endPosition: end };
  });
}

export function tinySequences(count: number, seed: number): TokenExample[] {
  return tinyFeatures(count, seed).map(({ inputIds, tokenTypeIds, attentionMask }) => ({ inputIds, tokenTypeIds, attentionMask }));
}

/** Every variable's values, by name, for before/after comparisons. */
export function snapshot(variables: Map<string, { dataSync(): unknown }>): Map<string, Float32Array> {
  return new Map([...variables].map(([name, v]) => [name, Float32Array.from(v.dataSync() as Float32Array)]));
}

/** The first entry that differs beyond `tol` (relative to max(1, |expected|)), or null. */
export function firstDifference(actual: Map<string, Float32Array>, expected: Map<string, Float32Array>, tol: number): string | null {
  for (const [name, want] of expected) {
    const got = actual.get(name);
    if (got === undefined) return `${name}: missing`;
    if (got.length !== want.length) return `${name}: ${got.length} values, expected ${want.length}`;
    for (let i = 0; i < want.length; i++) {
      const ok = Object.is(got[i], want[i]) || Math.abs(got[i] - want[i]) <= tol * Math.max(1, Math.abs(want[i]));
      if (!ok) return `${name}[${i}]: ${got[i]}, expected ${want[i]}`;
    }
  }
  return null;
}
