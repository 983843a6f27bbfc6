// The export directory: file names, readable weights in fp32/fp16, the int8 file, ONNX
// files, and a model card that carries provenance, scores and the caution. Checked against
// our own readers and against onnxruntime-node (the reference ONNX runtime) for loading.
import * as tf from '@tensorflow/tfjs';
import * as ort from 'onnxruntime-node';
import { beforeAll, describe, expect, it } from 'vitest';
import { exportModel } from '../../src/io/export.js';
import { dequantizeModel, quantizeModel, readInt8Safetensors } from '../../src/io/int8.js';
import { measureInt8Drift } from '../../src/io/int8-check.js';
import { CAUTION } from '../../src/io/model-card.js';
import { readCheckpointDir } from '../../src/io/checkpoint-dir.js';
import { readSafetensors } from '../../src/io/safetensors.js';
import type { SquadScores } from '../../src/eval/squad-metric.js';
import { presetConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';

const VOCAB = ['[PAD]', '[UNK]', '[CLS]', '[SEP]', '[MASK]', 'the', 'river', 'bridge', '##s', '.', '?'];
const config = presetConfig('tiny', VOCAB.length, { hiddenSize: 16, numHeads: 2, intermediateSize: 32, maxPositions: 16 });

function weights() {
  const params = ReaderParams.init(config, 9);
  const named = params.toNamed();
  params.dispose();
  return named;
}

const scores = (em: number, f1: number): SquadScores => ({
  em,
  f1,
  total: 10,
  answerable: { em: em + 5, f1: f1 + 5, total: 6 },
  unanswerable: { em: em - 5, f1: f1 - 5, total: 4 },
});

beforeAll(async () => {
  await tf.setBackend('cpu');
});

describe('exportModel', () => {
  it('writes a directory our own importer reads back to the same weights', () => {
    const named = weights();
    const { files, report } = exportModel({
      config,
      tensors: named,
      vocab: { file: 'vocab.txt', text: `${VOCAB.join('\n')}\n` },
      card: { baseModel: 'tiny test reader', date: '2025-01-02T03:04:05Z' },
    });
    expect(files.map((f) => f.name)).toEqual(['config.json', 'model.safetensors', 'vocab.txt', 'MODEL_CARD.md']);
    expect(report.files.map((f) => f.name)).toEqual(files.map((f) => f.name));
    const byName = new Map(files.map((f) => [f.name, f.bytes]));
    const back = readCheckpointDir({
      configJson: new TextDecoder().decode(byName.get('config.json')),
      safetensors: byName.get('model.safetensors')!,
      vocab: { file: 'vocab.txt', text: new TextDecoder().decode(byName.get('vocab.txt')) },
    });
    expect(back.config).toEqual(config);
    expect(back.metadata).toEqual({ format: 'pt' });
    expect([...back.tensors.keys()]).toEqual([...named.keys()]);
    for (const [k, t] of named) expect(Array.from(back.tensors.get(k)!.data)).toEqual(Array.from(t.data));
  });

  it('fp16 weights are rounded to binary16; the int8 and ONNX files load', async () => {
    const named = weights();
    const quantized = quantizeModel(named);
    const drift = measureInt8Drift(config, named, quantized, { count: 2, length: 12 });
    const { files, report } = exportModel({
      config,
      tensors: named,
      vocab: { file: 'vocab.txt', text: `${VOCAB.join('\n')}\n` },
      fp16: true,
      int8: quantized,
      onnx: true,
      card: { baseModel: 'tiny test reader', date: '2025-01-02T03:04:05Z', int8: { drift } },
    });
    const byName = new Map(files.map((f) => [f.name, f.bytes]));
    expect([...byName.keys()]).toEqual([
      'config.json',
      'model.safetensors',
      'vocab.txt',
      'model.int8.safetensors',
      'model.onnx',
      'model.int8.onnx',
      'MODEL_CARD.md',
    ]);
    const fp16 = readSafetensors(byName.get('model.safetensors')!);
    expect(new Set(fp16.dtypes.values())).toEqual(new Set(['F16']));
    const w = named.get('bert.encoder.layer.0.intermediate.dense.weight')!;
    const w16 = fp16.tensors.get('bert.encoder.layer.0.intermediate.dense.weight')!;
    w.data.forEach((v, i) => expect(Math.abs(w16.data[i]! - v)).toBeLessThanOrEqual(Math.abs(v) * 2 ** -11 + 2 ** -25)); // binary16 rounding
    const int8 = readInt8Safetensors(byName.get('model.int8.safetensors')!);
    expect(Array.from(dequantizeModel(int8).get('qa_outputs.weight')!.data)).toEqual(
      Array.from(dequantizeModel(quantized).get('qa_outputs.weight')!.data),
    );
    expect(report.int8!.length).toBe(quantized.report.length);
    for (const name of ['model.onnx', 'model.int8.onnx']) {
      const session = await ort.InferenceSession.create(byName.get(name)!, { logSeverityLevel: 3 });
      expect(session.inputNames).toEqual(['input_ids', 'attention_mask', 'token_type_ids']);
      expect(session.outputNames).toEqual(['start_logits', 'end_logits']);
      await session.release();
    }
    expect(drift.maxAbsLogitDiff).toBeGreaterThan(0);
    expect(drift.maxAbsLogitDiff).toBeLessThan(drift.logitSpread);
  });

  it('the model card gives provenance, settings, both kinds of scores, int8 naming and the caution', () => {
    const { files } = exportModel({
      config,
      tensors: weights(),
      vocab: { file: 'vocab.txt', text: `${VOCAB.join('\n')}\n` },
      int8: true,
      card: {
        baseModel: 'tiny-models/base',
        date: '2025-01-02T03:04:05Z',
        dataset: { hash: 'ab'.repeat(32), records: 120, train: 100, validation: 20 },
        settings: { learningRate: 5e-5, epochs: 3 },
        metrics: { withoutThreshold: scores(50, 60), withThreshold: { ...scores(55, 65), threshold: -1.25 } },
      },
    });
    const card = new TextDecoder().decode(files.find((f) => f.name === 'MODEL_CARD.md')!.bytes);
    expect(card).toContain(CAUTION);
    expect(CAUTION).toMatch(/extracted|copied out/);
    expect(CAUTION).toMatch(/out of their context/);
    expect(CAUTION).toMatch(/legal, medical or safety decision/);
    expect(card).toContain('Base model: tiny-models/base');
    expect(card).toContain(`\`${'ab'.repeat(32)}\``);
    expect(card).toContain('120 records, 100 for training, 20 for validation');
    expect(card).toContain('"learningRate": 0.00005');
    expect(card).toContain('| no-answer threshold 0 | all | 50.00 | 60.00 | 10 |');
    expect(card).toContain('| best threshold -1.250 | answerable | 60.00 | 70.00 | 6 |');
    expect(card).toContain('2025-01-02T03:04:05Z');
    expect(card).toContain('`<name>.scale` is F32 `[rows]`');
    expect(card).toMatch(/\| `qa_outputs\.weight` \| 2×16 \|/);
    expect(card).toContain('EM/F1 of the int8 model on validation questions: not measured');
    expect(card).not.toContain('Warning:');
  });

  it('the model card warns when the reader found almost no answerable answer', () => {
    const weak = { ...scores(20, 20), answerable: { em: 0, f1: 1, total: 6 } };
    const { files } = exportModel({
      config,
      tensors: weights(),
      vocab: { file: 'vocab.txt', text: `${VOCAB.join('\n')}\n` },
      card: { baseModel: 'tiny-models/base', date: '2025-01-02T03:04:05Z', metrics: { withoutThreshold: weak } },
    });
    const card = new TextDecoder().decode(files.find((f) => f.name === 'MODEL_CARD.md')!.bytes);
    expect(card).toContain("**Warning: the reader found almost none of the 6 answerable questions' answers (answerable F1 1.0)");
  });
});
