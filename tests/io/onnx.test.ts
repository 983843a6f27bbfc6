// The ONNX export run by onnxruntime-node (the reference ONNX runtime, npm package
// `onnxruntime-node`) against the engine's own forward pass (spanLogits on tfjs's cpu
// backend): fp32 logits within 1e-4, and the int8 variant within a measured bound.
import * as tf from '@tensorflow/tfjs';
import * as ort from 'onnxruntime-node';
import { beforeAll, describe, expect, it } from 'vitest';
import { presetConfig, type ReaderConfig } from '../../src/model/config.js';
import { spanLogits } from '../../src/model/encoder.js';
import { ReaderParams } from '../../src/model/params.js';
import { dequantizeModel, quantizeModel } from '../../src/io/int8.js';
import { exportOnnx } from '../../src/io/onnx.js';
import type { NamedTensors } from '../../src/io/tensors.js';

/** A small reader with weights spread wider than the init's σ = 0.02, so every layer matters. */
function testModel(activation: ReaderConfig['activation']): { config: ReaderConfig; named: NamedTensors } {
  const config = presetConfig('tiny', 64, {
    hiddenSize: 32,
    numHeads: 4,
    intermediateSize: 64,
    numLayers: 2,
    maxPositions: 24,
    activation,
  });
  const params = ReaderParams.init(config, 11);
  const named = params.toNamed();
  params.dispose();
  let k = 0;
  for (const [name, t] of named) {
    // LayerNorm scales around 1, everything else ~σ 0.3: logits of order 1–10
    const isLnWeight = name.includes('LayerNorm') && name.endsWith('.weight');
    for (let i = 0; i < t.data.length; i++) {
      const wiggle = Math.sin(++k * 12.9898) * 0.5; // deterministic, in [−0.5, 0.5]
      t.data[i] = isLnWeight ? 1 + 0.3 * wiggle : t.data[i]! * 15 + (name.endsWith('.bias') ? 0.2 * wiggle : 0);
    }
  }
  return { config, named };
}

/** Two sequences of 10 tokens; the second padded after 6. */
const B = 2;
const T = 10;
const ids = [2, 17, 33, 5, 9, 3, 41, 12, 60, 3, 2, 8, 8, 50, 3, 19, 0, 0, 0, 0];
const mask = [1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 0, 0, 0, 0];
const types = [0, 0, 0, 0, 1, 1, 1, 1, 1, 1, 0, 0, 0, 1, 1, 1, 0, 0, 0, 0];

function engineLogits(config: ReaderConfig, named: NamedTensors): { start: Float32Array; end: Float32Array } {
  const { params } = ReaderParams.fromNamed(config, named);
  try {
    return tf.tidy(() => {
      const inputs = {
        inputIds: tf.tensor2d(ids, [B, T], 'int32'),
        attentionMask: tf.tensor2d(mask, [B, T], 'int32'),
        tokenTypeIds: tf.tensor2d(types, [B, T], 'int32'),
      };
      const { start, end } = spanLogits(params, config, inputs, { training: false });
      return { start: start.dataSync() as Float32Array, end: end.dataSync() as Float32Array };
    });
  } finally {
    params.dispose();
  }
}

async function onnxLogits(
  bytes: Uint8Array,
  options: ort.InferenceSession.SessionOptions = {},
): Promise<{ start: Float32Array; end: Float32Array }> {
  const session = await ort.InferenceSession.create(bytes, { logSeverityLevel: 3, ...options });
  const feed = (v: number[]) => new ort.Tensor('int64', BigInt64Array.from(v.map(BigInt)), [B, T]);
  const out = await session.run({ input_ids: feed(ids), attention_mask: feed(mask), token_type_ids: feed(types) });
  expect(out.start_logits!.dims).toEqual([B, T]);
  expect(out.end_logits!.dims).toEqual([B, T]);
  await session.release();
  return { start: out.start_logits!.data as Float32Array, end: out.end_logits!.data as Float32Array };
}

function maxDiff(a: Float32Array, b: Float32Array): number {
  expect(a.length).toBe(b.length);
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i]! - b[i]!));
  return m;
}

function spread(a: Float32Array): number {
  return Math.max(...a) - Math.min(...a);
}

beforeAll(async () => {
  await tf.setBackend('cpu');
});

describe('ONNX export against onnxruntime-node', () => {
  for (const activation of ['gelu', 'gelu_sigmoid'] as const) {
    it(`fp32 (${activation}): start/end logits equal the engine's within 1e-4`, async () => {
      const { config, named } = testModel(activation);
      const expected = engineLogits(config, named);
      expect(spread(expected.start)).toBeGreaterThan(1); // the check has something to compare
      const got = await onnxLogits(exportOnnx(config, named));
      expect(maxDiff(got.start, expected.start)).toBeLessThan(1e-4);
      expect(maxDiff(got.end, expected.end)).toBeLessThan(1e-4);
    });
  }

  it('int8: equals the engine run on the dequantized weights, and stays near fp32', async () => {
    const { config, named } = testModel('gelu');
    const quantized = quantizeModel(named);
    const fp32 = engineLogits(config, named);
    const dequantized = engineLogits(config, dequantizeModel(quantized));
    const bytes = exportOnnx(config, named, { int8: quantized });
    // With onnxruntime's DequantizeLinear→MatMul fusion computing in float (accuracy level 0),
    // the int8 graph is exactly the dequantized model: the same 1e-4 as fp32.
    const exact = await onnxLogits(bytes, { extra: { session: { qdq_matmulnbits_accuracy_level: '0' } } });
    expect(maxDiff(exact.start, dequantized.start)).toBeLessThan(1e-4);
    expect(maxDiff(exact.end, dequantized.end)).toBeLessThan(1e-4);
    // Against fp32 the quantization error itself. Measured on this model (weights ~15× the
    // usual σ, start logits spread 3.6): max |Δ| = 0.097, 2.7% of the spread; asserted at 5%.
    const spreadFp32 = spread(fp32.start);
    const drift = Math.max(maxDiff(exact.start, fp32.start), maxDiff(exact.end, fp32.end));
    expect(drift).toBeGreaterThan(0); // quantization did change something
    expect(drift).toBeLessThan(0.05 * spreadFp32);
    // onnxruntime's default session fuses the same graph into int8 products with int8
    // activations (MatMulNBits, accuracy level 4): faster and a little further off.
    // Measured here: max |Δ| = 0.150, 4.2% of the spread; asserted at 8%.
    const fused = await onnxLogits(bytes);
    const fusedDrift = Math.max(maxDiff(fused.start, fp32.start), maxDiff(fused.end, fp32.end));
    expect(fusedDrift).toBeLessThan(0.08 * spreadFp32);
  });
});
