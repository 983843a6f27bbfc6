// Decoding on real features (src/text/features.ts) from real WordPiece encodings: with
// "oracle" logits that peak at each window's gold start/end positions (and at [CLS] where
// the window holds no answer), decoding must give back the gold answer text exactly, from
// the window that holds it, and "" for the unanswerable question. The gold answers are
// the records' own; the check is that features → logits → decode → metric agree.
import { describe, expect, it } from 'vitest';
import type { QARecord } from '../../src/data/record.js';
import { FeatureBuilder, type Feature } from '../../src/text/features.js';
import { WordPieceTokenizer } from '../../src/text/wordpiece.js';
import { predictAll, type WindowLogits } from '../../src/eval/span-choice.js';
import { evaluate, goldFromRecords } from '../../src/eval/squad-metric.js';

const CONTEXT =
  'The river flows north through the valley. The old bridge was built in 1903 by the town, ' +
  'and the new bridge opened in 1998. Boats still carry apples and wool down the river to the sea.';

const WORDS = [
  ...new Set(
    `${CONTEXT} when was the old bridge built what do boats carry who built the old bridge where does the river go`
      .toLowerCase()
      .match(/[a-z0-9]+|[.,]/g)!,
  ),
];
const VOCAB = ['[PAD]', '[UNK]', '[CLS]', '[SEP]', '[MASK]', ...WORDS];

function at(text: string): { text: string; start: number } {
  const start = CONTEXT.indexOf(text);
  if (start < 0) throw new Error(`test setup: "${text}" is not in the context`);
  return { text, start };
}

const RECORDS: QARecord[] = [
  { id: 'when', passageId: 'p', context: CONTEXT, question: 'When was the old bridge built?', answers: [at('1903')], unanswerable: false },
  { id: 'what', passageId: 'p', context: CONTEXT, question: 'What do boats carry?', answers: [at('apples and wool')], unanswerable: false },
  { id: 'who', passageId: 'p', context: CONTEXT, question: 'Who built the old bridge?', answers: [at('the town')], unanswerable: false },
  { id: 'none', passageId: 'p', context: CONTEXT, question: 'Where does the river go north?', answers: [], unanswerable: true },
];

/** 10 at the gold start and end (which are [CLS], position 0, in windows without the answer). */
function oracleLogits(f: Feature): WindowLogits {
  const startLogits = new Float32Array(f.inputIds.length);
  const endLogits = new Float32Array(f.inputIds.length);
  startLogits[f.startPosition] = 10;
  endLogits[f.endPosition] = 10;
  return { startLogits, endLogits };
}

describe('decoding real features with oracle logits', () => {
  const tokenizer = new WordPieceTokenizer(VOCAB, { lowercase: true });
  // 24 tokens per window: the context (about 40 tokens) needs several windows
  const builder = new FeatureBuilder(tokenizer, { maxLength: 24, stride: 6, maxQueryLength: 10 });
  const features = RECORDS.flatMap((r) => builder.build(r).features);

  it('the setup spreads each context over several windows', () => {
    expect(features.filter((f) => f.recordId === 'when').length).toBeGreaterThan(1);
  });

  it('gives back every gold answer, from the window that holds it, and "" for the unanswerable one', () => {
    const out = predictAll(RECORDS, features, features.map(oracleLogits));
    expect(out.predictions).toEqual({ when: '1903', what: 'apples and wool', who: 'the town', none: '' });
    for (const id of ['when', 'what', 'who']) {
      const d = out.decodings.get(id)!;
      const holding = features.filter((f) => f.recordId === id && f.startPosition > 0).map((f) => f.window);
      expect(holding).toContain(d.best!.window);
      // null score: min over windows; the holding window's [CLS] has 0 + 0
      expect(d.nullScore).toBe(0);
      expect(d.scoreDiff).toBe(-20);
    }
    expect(out.scoreDiffs.none).toBeGreaterThan(0);
    expect(evaluate(goldFromRecords(RECORDS), out.predictions)).toMatchObject({ em: 100, f1: 100, total: 4 });
  });
});
