// int8AccuracyCost and measureInt8Drift: the engine run twice, on fp32 weights and on
// their int8 round trip. No outside reference: these are consistency checks of the
// measuring code (same weights → same scores; drift zero when nothing changed).
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import type { QARecord } from '../../src/data/record.js';
import { dequantizeModel, quantizeModel } from '../../src/io/int8.js';
import { int8AccuracyCost, measureInt8Drift } from '../../src/io/int8-check.js';
import { presetConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import { FeatureBuilder } from '../../src/text/features.js';
import { WordPieceTokenizer } from '../../src/text/wordpiece.js';

// the small vocabulary of the PyTorch fixtures (tests/reference/generate_fixtures.py)
const vocabText = readFileSync(join(import.meta.dirname, '..', 'reference', 'fixtures', 'checkpoint', 'vocab.txt'), 'utf8');

beforeAll(async () => {
  await tf.setBackend('cpu');
});

describe('int8 measurements', () => {
  const tokenizer = WordPieceTokenizer.fromVocabTxt(vocabText);
  const config = presetConfig('tiny', tokenizer.vocabSize, { hiddenSize: 16, numHeads: 2, intermediateSize: 32, maxPositions: 32 });
  const params = ReaderParams.init(config, 4);
  const fp32 = params.toNamed();
  params.dispose();
  // weights that int8 holds exactly: quantizing them again changes nothing
  const exact = dequantizeModel(quantizeModel(fp32));

  const records: QARecord[] = [
    {
      id: 'q1',
      passageId: 'p1',
      context: 'the old stone bridge was built in 1 7 2 0 .',
      question: 'when was the bridge built ?',
      answers: [{ text: '1 7 2 0', start: 34 }],
      unanswerable: false,
    },
    {
      id: 'q2',
      passageId: 'p1',
      context: 'the old stone bridge was built in 1 7 2 0 .',
      question: 'who built the tower ?',
      answers: [],
      unanswerable: true,
    },
  ];
  const builder = new FeatureBuilder(tokenizer, { maxLength: 24, stride: 4, maxQueryLength: 8 });
  const windows = records.flatMap((r) => builder.build(r).features);

  it('scores fp32 and int8 alike when int8 holds the weights exactly', () => {
    const cost = int8AccuracyCost(config, exact, quantizeModel(exact), records, windows);
    expect(cost.fp32.total).toBe(2);
    expect(cost.int8).toEqual(cost.fp32);
  });

  it('drift is zero for exactly held weights and positive for ordinary ones', () => {
    const none = measureInt8Drift(config, exact, quantizeModel(exact), { count: 2, length: 16 });
    expect(none.maxAbsLogitDiff).toBeLessThan(1e-6);
    const some = measureInt8Drift(config, fp32, quantizeModel(fp32), { count: 2, length: 16 });
    expect(some.maxAbsLogitDiff).toBeGreaterThan(0);
    expect(some.argmaxChanges!.total).toBe(2);
    expect(some.probe).toBe('2 sequences of 16 seeded random token ids');
  });
});
