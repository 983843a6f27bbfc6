// Importing a model directory (config.json + model.safetensors + vocab.txt/tokenizer.json).
// The main check is against PyTorch (Debian python3-torch): the directory written by
// tests/reference/generate_fixtures.py, and the start/end logits PyTorch computed for it
// in float64 (checkpoint_expected.json); the imported model must match within 1e-4.
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { loadCheckpointDir, readCheckpointDir, type CheckpointDirFiles } from '../../src/io/checkpoint-dir.js';
import { namedToSafetensors } from '../../src/io/safetensors.js';
import { configToHf, presetConfig } from '../../src/model/config.js';
import { spanLogits } from '../../src/model/encoder.js';
import { ReaderParams } from '../../src/model/params.js';

const FIXTURES = join(import.meta.dirname, '..', 'reference', 'fixtures');
const CHECKPOINT = join(FIXTURES, 'checkpoint');
const EXPECTED = join(FIXTURES, 'checkpoint_expected.json');

const VOCAB = ['[PAD]', '[UNK]', '[CLS]', '[SEP]', '[MASK]', 'the', 'river', 'bridge', '##s', '.', '?'];

beforeAll(async () => {
  await tf.setBackend('cpu');
});

/** A directory made here: the engine's own fresh weights, optionally altered by `edit`. */
function madeDir(
  edit: (files: CheckpointDirFiles, named: Map<string, { shape: number[]; data: Float32Array }>) => void = () => {},
): CheckpointDirFiles {
  const config = presetConfig('tiny', VOCAB.length, { hiddenSize: 16, numHeads: 2, intermediateSize: 32, maxPositions: 16 });
  const params = ReaderParams.init(config, 2);
  const named = params.toNamed();
  params.dispose();
  const files: CheckpointDirFiles = {
    configJson: JSON.stringify(configToHf(config)),
    safetensors: new Uint8Array(0),
    vocab: { file: 'vocab.txt', text: `${VOCAB.join('\n')}\n` },
  };
  edit(files, named);
  files.safetensors = namedToSafetensors(named, { dtype: 'F16' });
  return files;
}

describe('checkpoint directory import', () => {
  it('the imported PyTorch checkpoint gives PyTorch’s start/end logits within 1e-4', () => {
    // committed fixtures (tests/reference/generate_fixtures.py): a missing one fails here, never skips
    for (const f of [join(CHECKPOINT, 'model.safetensors'), EXPECTED])
      expect(existsSync(f), `${f} (run tests/reference/generate_fixtures.py)`).toBe(true);
    const files: CheckpointDirFiles = {
      configJson: readFileSync(join(CHECKPOINT, 'config.json'), 'utf8'),
      safetensors: new Uint8Array(readFileSync(join(CHECKPOINT, 'model.safetensors'))),
      vocab: { file: 'vocab.txt', text: readFileSync(join(CHECKPOINT, 'vocab.txt'), 'utf8') },
    };
    const expected = JSON.parse(readFileSync(EXPECTED, 'utf8')) as {
      source: string;
      inputs: Record<'input_ids' | 'token_type_ids' | 'attention_mask', number[][]>;
      start_logits: { shape: number[]; data: number[] };
      end_logits: { shape: number[]; data: number[] };
    };
    expect(expected.source).toMatch(/PyTorch/);
    const { config, params, report, tokenizer } = loadCheckpointDir(files);
    try {
      expect(tokenizer.vocabSize).toBe(config.vocabSize);
      // a QA checkpoint as users bring one: encoder and span head, no MLM head
      expect(report.unexpected).toEqual([]);
      expect(report.missing.every((n) => n.startsWith('cls.predictions.'))).toBe(true);
      expect(report.missing.length).toBeGreaterThan(0);
      expect(report.loaded).toContain('qa_outputs.weight');
      const [B, T] = expected.start_logits.shape as [number, number];
      const input = (k: keyof typeof expected.inputs) => tf.tensor2d(expected.inputs[k].flat(), [B, T], 'int32');
      const [start, end] = tf.tidy(() => {
        const out = spanLogits(
          params,
          config,
          { inputIds: input('input_ids'), tokenTypeIds: input('token_type_ids'), attentionMask: input('attention_mask') },
          { training: false },
        );
        return [Array.from(out.start.dataSync()), Array.from(out.end.dataSync())];
      });
      const firstOff = (got: number[], want: number[]) => {
        const i = got.findIndex((v, k) => !(Math.abs(v - want[k]!) <= 1e-4));
        return i < 0 ? null : { index: i, got: got[i], want: want[i] };
      };
      expect(firstOff(start!, expected.start_logits.data)).toBeNull();
      expect(firstOff(end!, expected.end_logits.data)).toBeNull();
    } finally {
      params.dispose();
    }
  });

  it('reads F16 weights, reports unused tensors, and initialises a missing span head with a notice', () => {
    const files = madeDir((_, named) => {
      named.delete('qa_outputs.weight');
      named.delete('qa_outputs.bias');
      named.set('bert.pooler.dense.weight', { shape: [16, 16], data: new Float32Array(256) });
    });
    const { params, report } = loadCheckpointDir(files);
    params.dispose();
    expect(report.missing).toEqual(['qa_outputs.weight', 'qa_outputs.bias']);
    expect(report.unexpected).toEqual(['bert.pooler.dense.weight']);
    expect(report.notices.join(' ')).toMatch(/widened to float32/);
    expect(report.notices.join(' ')).toMatch(/no span head/);
  });

  it('refuses a vocabulary larger than the embedding table, naming both files', () => {
    const files = madeDir((f) => {
      f.vocab = { file: 'vocab.txt', text: `${[...VOCAB, 'extra', 'tokens'].join('\n')}\n` };
    });
    expect(() => readCheckpointDir(files)).toThrow(/vocab\.txt: the vocabulary has 13 tokens but config\.json field vocab_size is 11/);
  });

  it('names config.json and the place of a JSON error, and a missing key', () => {
    const broken = madeDir((f) => {
      f.configJson = '{\n  "hidden_size": 16,\n  "vocab_size": }';
    });
    expect(() => readCheckpointDir(broken)).toThrow(/^config\.json: not valid JSON at line 3, column/);
    const missing = madeDir((f) => {
      const o = JSON.parse(f.configJson) as Record<string, unknown>;
      delete o.num_hidden_layers;
      f.configJson = JSON.stringify(o);
    });
    expect(() => readCheckpointDir(missing)).toThrow(/config\.json: missing required key "num_hidden_layers"/);
  });

  it('names the tensor whose shape disagrees with the config', () => {
    const files = madeDir((_, named) => {
      named.set('bert.encoder.layer.1.output.dense.weight', { shape: [16, 16], data: new Float32Array(256) });
    });
    expect(() => loadCheckpointDir(files)).toThrow(
      /tensor "bert\.encoder\.layer\.1\.output\.dense\.weight" has shape \[16, 16\], the config expects \[16, 32\]/,
    );
  });

  it('refuses absurd sizes in config.json, and a layer count the weights do not hold, before building anything', () => {
    for (const [layers, pattern] of [
      // the field as config.json spells it
      [1_000_000, /^config\.json: invalid reader config: num_hidden_layers 1000000 is beyond what this engine reads \(at most 96\)/],
      [1_000_000_000, /num_hidden_layers 1000000000 is beyond/],
      [5, /config\.json: field num_hidden_layers is 5, but model\.safetensors holds 2 encoder layer\(s\)/],
    ] as const) {
      const files = madeDir((f) => {
        const o = JSON.parse(f.configJson) as Record<string, unknown>;
        o.num_hidden_layers = layers;
        f.configJson = JSON.stringify(o);
      });
      const started = Date.now();
      expect(() => readCheckpointDir(files)).toThrow(pattern);
      expect(Date.now() - started).toBeLessThan(2000);
    }
  });

  it('refuses NaN or infinite weights, naming the file, the tensor and the first bad index', () => {
    const files = madeDir((_, named) => {
      const t = named.get('bert.encoder.layer.0.attention.self.query.weight')!;
      const data = Float32Array.from(t.data);
      data[5] = Number.NaN;
      data[9] = Number.POSITIVE_INFINITY;
      named.set('bert.encoder.layer.0.attention.self.query.weight', { shape: t.shape, data });
    });
    files.names = { weights: 'mine/model.safetensors' };
    expect(() => loadCheckpointDir(files)).toThrow(
      /^mine\/model\.safetensors: tensor "bert\.encoder\.layer\.0\.attention\.self\.query\.weight" holds 2 value\(s\) that are NaN or infinite \(the first at index 5\)/,
    );
  });

  it('a damaged safetensors file is named in the error', () => {
    const files = madeDir();
    files.safetensors = files.safetensors.subarray(0, files.safetensors.length - 10);
    files.names = { weights: 'mine/model.safetensors' };
    expect(() => readCheckpointDir(files)).toThrow(/^mine\/model\.safetensors: /);
  });
});
