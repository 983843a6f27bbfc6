// The engine against PyTorch. Every expected value below comes from PyTorch 1.13
// (Debian python3-torch) running the same architecture in float64, via
// tests/reference/generate_fixtures.py (the model in tests/reference/bert_reference.py);
// the fixtures sit in tests/reference/fixtures/. The engine runs in float32 from the
// same (float32-exact) weights, on the cpu and the wasm backends.
//
// Tolerance: |ours − theirs| ≤ atol + rtol·|theirs| with rtol 1e-4 and atol 1e-4 for
// logits and losses (values O(1)); for gradients atol is 1e-4 × the largest |value|
// of that tensor, at least 1e-6 (gradients range over orders of magnitude; float32
// accumulation error scales with the tensor's largest terms, not with each element;
// the floor covers the key biases, whose gradient is exactly 0 — softmax ignores a
// per-query constant — so both sides hold pure rounding noise, ~1e-9 here).

import { readFileSync } from 'node:fs';
import * as tf from '@tensorflow/tfjs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { NamedTensors } from '../../src/io/tensors.js';
import { parameterShapes, type ReaderConfig } from '../../src/model/config.js';
import { mlmLogits, spanLogits, type ReaderInputs } from '../../src/model/encoder.js';
import { ReaderParams } from '../../src/model/params.js';
import { mlmLoss, spanLoss } from '../../src/train/losses.js';
import { useBackend, type BackendName } from '../helpers/backend.js';
import { compareValues, FIXTURES, inputsFromJson, loadFixture, namedFromJson, type JsonTensor, type Tolerance } from './fixtures.js';

interface ModelFixture {
  config: ReaderConfig;
  /** which positions the span softmax covers: 'padding' = every real token (padding left out), as the Trainer does */
  span_softmax: 'padding' | 'all';
  inputs: {
    input_ids: number[][];
    token_type_ids: number[][];
    attention_mask: number[][];
    start_positions: number[];
    end_positions: number[];
    mlm_input_ids: number[][];
    mlm_labels: number[][];
  };
  weights: Record<string, JsonTensor>;
}
interface ForwardFixture {
  start_logits: JsonTensor;
  end_logits: JsonTensor;
  span_loss: number;
  span_loss_masked: number;
  mlm_logits: JsonTensor;
  mlm_loss: number;
}
interface GradsFixture {
  span_loss: Record<string, JsonTensor>;
  mlm_loss: Record<string, JsonTensor>;
}
interface CheckpointExpected {
  inputs: { input_ids: number[][]; token_type_ids: number[][]; attention_mask: number[][] };
  start_logits: JsonTensor;
  end_logits: JsonTensor;
}

const model = loadFixture<ModelFixture>('model.json');
const forward = loadFixture<ForwardFixture>('forward.json');
const gradsFixture = loadFixture<GradsFixture>('grads.json');
const OUTPUTS: Tolerance = { atol: 1e-4, rtol: 1e-4 };

function gradTolerance(theirs: number[]): Tolerance {
  return { atol: Math.max(1e-4 * theirs.reduce((m, v) => Math.max(m, Math.abs(v)), 0), 1e-6), rtol: 1e-4 };
}

function expectMatch(name: string, ours: ArrayLike<number>, theirs: ArrayLike<number>, tol: Tolerance): void {
  const problem = compareValues(name, ours, theirs, tol);
  expect(problem, problem ?? '').toBeNull();
}

/** Gradients keyed by engine name, as NamedTensors (the engine keeps every weight in the checkpoint layout). */
function gradsInCheckpointLayout(config: ReaderConfig, grads: Map<string, tf.Tensor>): NamedTensors {
  const specs = parameterShapes(config);
  const out: NamedTensors = new Map();
  for (const [name, g] of grads) {
    const spec = specs.get(name)!;
    expect(g.shape, name).toEqual(spec.shape);
    out.set(name, { shape: spec.shape, data: Float32Array.from(g.dataSync() as Float32Array) });
  }
  return out;
}

/** A reader for the safetensors layout (spec: huggingface/safetensors README), enough for F32. */
function readSafetensors(bytes: Uint8Array): NamedTensors {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const headerLength = Number(view.getBigUint64(0, true));
  const header = JSON.parse(new TextDecoder().decode(bytes.subarray(8, 8 + headerLength))) as Record<
    string,
    { dtype: string; shape: number[]; data_offsets: [number, number] }
  >;
  const base = 8 + headerLength;
  const named: NamedTensors = new Map();
  for (const [name, entry] of Object.entries(header)) {
    if (name === '__metadata__') continue;
    expect(entry.dtype).toBe('F32');
    const [begin, end] = entry.data_offsets;
    const copy = bytes.slice(base + begin, base + end);
    named.set(name, { shape: entry.shape, data: new Float32Array(copy.buffer, 0, (end - begin) / 4) });
  }
  return named;
}

for (const backend of ['cpu', 'wasm'] as BackendName[]) {
  describe(`reader vs PyTorch (Debian python3-torch, generate_fixtures.py) on ${backend}`, () => {
    let params: ReaderParams;
    let inputs: ReaderInputs;
    let mlmInputs: ReaderInputs;
    let startPositions: tf.Tensor1D;
    let endPositions: tf.Tensor1D;
    let mlmLabels: tf.Tensor2D;
    const config = model.config;

    beforeAll(async () => {
      await useBackend(backend);
      const loaded = ReaderParams.fromNamed(config, namedFromJson(model.weights), { source: 'model.json' });
      expect(loaded.report.missing).toEqual([]);
      expect(loaded.report.unexpected).toEqual([]);
      params = loaded.params;
      inputs = inputsFromJson(model.inputs);
      mlmInputs = { ...inputsFromJson(model.inputs), inputIds: tf.tensor2d(model.inputs.mlm_input_ids, undefined, 'int32') };
      startPositions = tf.tensor1d(model.inputs.start_positions, 'int32');
      endPositions = tf.tensor1d(model.inputs.end_positions, 'int32');
      mlmLabels = tf.tensor2d(model.inputs.mlm_labels, undefined, 'int32');
    });

    afterAll(() => {
      params.dispose();
      tf.dispose([inputs.inputIds, inputs.tokenTypeIds, inputs.attentionMask, mlmInputs.inputIds, startPositions, endPositions, mlmLabels]);
    });

    const lossOf = (): tf.Scalar => {
      const { start, end } = spanLogits(params, config, inputs, { training: false });
      return model.span_softmax === 'padding'
        ? spanLoss(start, end, startPositions, endPositions, inputs.attentionMask)
        : spanLoss(start, end, startPositions, endPositions);
    };

    it('start and end logits match PyTorch', () => {
      const [start, end] = tf.tidy(() => {
        const out = spanLogits(params, config, inputs, { training: false });
        return [out.start.dataSync(), out.end.dataSync()];
      });
      expect(start.length).toBe(forward.start_logits.data.length);
      expectMatch('start logits', start, forward.start_logits.data, OUTPUTS);
      expectMatch('end logits', end, forward.end_logits.data, OUTPUTS);
    });

    it('span loss (softmax over real tokens, padding left out) and its masked variant (context + [CLS]) match PyTorch', () => {
      const [unmasked, masked] = tf.tidy(() => {
        const { start, end } = spanLogits(params, config, inputs, { training: false });
        return [
          spanLoss(start, end, startPositions, endPositions, inputs.attentionMask).dataSync()[0],
          spanLoss(start, end, startPositions, endPositions, inputs.attentionMask, inputs.tokenTypeIds).dataSync()[0],
        ];
      });
      expect(model.span_softmax).toBe('padding'); // the generator mirrors the Trainer's objective (src/train/trainer.ts)
      expectMatch('span loss', [unmasked], [forward.span_loss], OUTPUTS);
      expectMatch('masked span loss', [masked], [forward.span_loss_masked], OUTPUTS);
    });

    it('the gradient of the span loss for every parameter matches PyTorch', () => {
      const { value, grads } = params.variableGrads(lossOf);
      const ours = gradsInCheckpointLayout(config, grads);
      tf.dispose([value, ...grads.values()]);
      // the MLM head is not reached by the span loss: PyTorch leaves its grads at None
      expect([...ours.keys()].sort()).toEqual(Object.keys(gradsFixture.span_loss).sort());
      for (const [name, theirs] of Object.entries(gradsFixture.span_loss)) {
        expectMatch(`d(span loss)/d(${name})`, ours.get(name)!.data, theirs.data, gradTolerance(theirs.data));
      }
    });

    it('MLM logits and loss (decoder tied to the word embeddings) match PyTorch', () => {
      const [logits, loss] = tf.tidy(() => {
        const out = mlmLogits(params, config, mlmInputs, { training: false });
        return [out.dataSync(), mlmLoss(out, mlmLabels).dataSync()[0]];
      });
      expectMatch('mlm logits', logits, forward.mlm_logits.data, OUTPUTS);
      expectMatch('mlm loss', [loss], [forward.mlm_loss], OUTPUTS);
    });

    it('the gradient of the MLM loss for every parameter matches PyTorch', () => {
      const { value, grads } = params.variableGrads(() => mlmLoss(mlmLogits(params, config, mlmInputs, { training: false }), mlmLabels));
      const ours = gradsInCheckpointLayout(config, grads);
      tf.dispose([value, ...grads.values()]);
      expect([...ours.keys()].sort()).toEqual(Object.keys(gradsFixture.mlm_loss).sort());
      for (const [name, theirs] of Object.entries(gradsFixture.mlm_loss)) {
        expectMatch(`d(mlm loss)/d(${name})`, ours.get(name)!.data, theirs.data, gradTolerance(theirs.data));
      }
    });

    it('the hand-written checkpoint (config.json + model.safetensors, no MLM head) gives PyTorch logits', () => {
      const expected = loadFixture<CheckpointExpected>('checkpoint_expected.json');
      const hf = JSON.parse(readFileSync(new URL('checkpoint/config.json', FIXTURES), 'utf8')) as Record<string, number>;
      expect(hf.hidden_size).toBe(config.hiddenSize);
      const named = readSafetensors(new Uint8Array(readFileSync(new URL('checkpoint/model.safetensors', FIXTURES))));
      const { params: ck, report } = ReaderParams.fromNamed(config, named, { source: 'checkpoint/model.safetensors' });
      try {
        expect(report.unexpected).toEqual([]);
        expect(report.missing.every((n) => n.startsWith('cls.'))).toBe(true);
        expect(report.notices.join(' ')).toMatch(/MLM head/);
        const [start, end] = tf.tidy(() => {
          const out = spanLogits(ck, config, inputsFromJson(expected.inputs), { training: false });
          return [out.start.dataSync(), out.end.dataSync()];
        });
        expectMatch('checkpoint start logits', start, expected.start_logits.data, OUTPUTS);
        expectMatch('checkpoint end logits', end, expected.end_logits.data, OUTPUTS);
      } finally {
        ck.dispose();
      }
    });
  });
}
