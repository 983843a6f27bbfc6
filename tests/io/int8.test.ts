// int8 per-output-channel symmetric quantization (Jacob et al. 2018, zero point 0): the
// per-element bound |w − q·scale| ≤ scale/2 that follows from rounding to nearest, the
// [−127, 127] range, the file naming, and which tensors are quantized.
import { describe, expect, it } from 'vitest';
import {
  SCALE_SUFFIX,
  dequantizeInt8,
  dequantizeModel,
  int8ToSafetensors,
  isQuantized,
  quantizeInt8,
  quantizeModel,
  readInt8Safetensors,
} from '../../src/io/int8.js';
import { readSafetensorsRaw, writeSafetensors } from '../../src/io/safetensors.js';
import type { NamedTensors } from '../../src/io/tensors.js';
import { parameterShapes, presetConfig } from '../../src/model/config.js';

describe('int8 quantization', () => {
  it('quantizes each row with its own scale, max |w| mapping to ±127', () => {
    const q = quantizeInt8({ shape: [3, 4], data: Float32Array.from([0.5, -1, 0.25, 0, 10, 5, -2.5, 0.04, 0, 0, 0, 0]) });
    expect(Array.from(q.scale)).toEqual([Math.fround(1 / 127), Math.fround(10 / 127), 1]); // an all-zero row gets scale 1
    expect(Array.from(q.data.subarray(0, 4))).toEqual([64, -127, 32, 0]); // 0.5·127 = 63.5 → 64 (half away from zero)
    expect(Array.from(q.data.subarray(4, 8))).toEqual([127, 64, -32, 1]); // −2.5/10·127 = −31.75 → −32
    expect(Array.from(q.data.subarray(8))).toEqual([0, 0, 0, 0]);
    const back = dequantizeInt8(q);
    expect(back.data[1]).toBeCloseTo(-1, 6);
    expect(back.data[4]).toBeCloseTo(10, 5);
  });

  it('stays within scale/2 of every weight and reports the measured error', () => {
    let seed = 5;
    const next = () => ((seed = (seed * 1103515245 + 12345) % 2 ** 31) / 2 ** 31) * 2 - 1;
    const named: NamedTensors = new Map([
      ['bert.encoder.layer.0.intermediate.dense.weight', { shape: [16, 8], data: Float32Array.from({ length: 128 }, () => next() * 0.1) }],
      ['bert.encoder.layer.0.intermediate.dense.bias', { shape: [16], data: Float32Array.from({ length: 16 }, next) }],
    ]);
    const model = quantizeModel(named);
    expect([...model.int8.keys()]).toEqual(['bert.encoder.layer.0.intermediate.dense.weight']);
    expect([...model.float.keys()]).toEqual(['bert.encoder.layer.0.intermediate.dense.bias']);
    const [r] = model.report;
    const w = named.get('bert.encoder.layer.0.intermediate.dense.weight')!;
    const q = model.int8.get('bert.encoder.layer.0.intermediate.dense.weight')!;
    const back = dequantizeInt8(q).data;
    let measured = 0;
    for (let i = 0; i < 128; i++) {
      const row = Math.floor(i / 8);
      const err = Math.abs(w.data[i]! - back[i]!);
      // rounding to nearest: at most half a step, plus float32 rounding of q·scale
      expect(err).toBeLessThanOrEqual(q.scale[row]! / 2 + 1e-7 * Math.abs(w.data[i]!) + 1e-9);
      measured = Math.max(measured, err);
      expect(Math.abs(q.data[i]!)).toBeLessThanOrEqual(127);
    }
    expect(r!.maxAbsError).toBe(measured);
    expect(r!.maxAbsError).toBeGreaterThan(0);
    expect(r!.maxAbsError).toBeLessThanOrEqual(r!.bound * (1 + 1e-6));
    // the biases pass through untouched
    expect(dequantizeModel(model).get('bert.encoder.layer.0.intermediate.dense.bias')).toBe(
      named.get('bert.encoder.layer.0.intermediate.dense.bias'),
    );
  });

  it('quantizes exactly the Linear weights and embedding tables of the reader', () => {
    const config = presetConfig('tiny', 100, { numLayers: 1 });
    const chosen = [...parameterShapes(config)].filter(([name, s]) => isQuantized(name, s.shape)).map(([name]) => name);
    expect(chosen).toEqual([
      'bert.embeddings.word_embeddings.weight',
      'bert.embeddings.position_embeddings.weight',
      'bert.embeddings.token_type_embeddings.weight',
      'bert.encoder.layer.0.attention.self.query.weight',
      'bert.encoder.layer.0.attention.self.key.weight',
      'bert.encoder.layer.0.attention.self.value.weight',
      'bert.encoder.layer.0.attention.output.dense.weight',
      'bert.encoder.layer.0.intermediate.dense.weight',
      'bert.encoder.layer.0.output.dense.weight',
      'qa_outputs.weight',
      'cls.predictions.transform.dense.weight',
    ]);
  });

  it('writes <name> as I8 with <name>.scale beside it, and reads it back', () => {
    const named: NamedTensors = new Map([
      ['qa_outputs.weight', { shape: [2, 3], data: Float32Array.from([0.3, -0.6, 0.1, 2, 1, -1]) }],
      ['qa_outputs.bias', { shape: [2], data: Float32Array.from([0.5, -0.5]) }],
    ]);
    const model = quantizeModel(named);
    const bytes = int8ToSafetensors(model);
    const { header, tensors } = readSafetensorsRaw(bytes);
    expect(header.entries.map((e) => [e.name, e.dtype, e.shape])).toEqual([
      ['qa_outputs.weight', 'I8', [2, 3]],
      ['qa_outputs.weight' + SCALE_SUFFIX, 'F32', [2]],
      ['qa_outputs.bias', 'F32', [2]],
    ]);
    expect(header.metadata['spanwright.quantization']).toBe('int8-per-row-symmetric');
    expect(Array.from(tensors.get('qa_outputs.weight')!.data as Int8Array)).toEqual([64, -127, 21, 127, 64, -64]);
    const back = readInt8Safetensors(bytes);
    expect(Array.from(dequantizeModel(back).get('qa_outputs.weight')!.data)).toEqual(
      Array.from(dequantizeModel(model).get('qa_outputs.weight')!.data),
    );
  });

  it('names the missing or misshapen scale tensor of a damaged int8 file', () => {
    const q = { dtype: 'I8' as const, shape: [2, 2], data: new Int8Array([1, 2, 3, 4]) };
    expect(() => readInt8Safetensors(writeSafetensors([['a.weight', q]]), 'bad.safetensors')).toThrow(
      'bad.safetensors: tensor "a.weight" is I8 but "a.weight.scale" (F32) is missing',
    );
    const wrongScale = writeSafetensors([
      ['a.weight', q],
      ['a.weight.scale', { dtype: 'F32', shape: [3], data: new Float32Array(3) }],
    ]);
    expect(() => readInt8Safetensors(wrongScale, 'bad.safetensors')).toThrow(
      /"a.weight.scale" has shape \[3\], expected \[2\] \(one scale per row\)/,
    );
  });
});
