// withQuestionMatch (src/model/question-match.ts): turning word-match token types on must
// not change what a reader reads until it trains — the new token-type rows copy the rows
// they refine, so logits with match types equal the plain reader's logits on plain types.
// A property of the construction, checked on the engine's own forward pass (cpu backend).
import * as tf from '@tensorflow/tfjs';
import { beforeAll, describe, expect, it } from 'vitest';
import { presetConfig } from '../../src/model/config.js';
import { spanLogits } from '../../src/model/encoder.js';
import { ReaderParams } from '../../src/model/params.js';
import { withQuestionMatch } from '../../src/model/question-match.js';
import { useBackend } from '../helpers/backend.js';

describe('withQuestionMatch', () => {
  beforeAll(() => useBackend('cpu'));

  it('grows the token-type table to 3, 5 or 9 rows, each new row a copy of the one it refines', () => {
    const config = presetConfig('tiny', 50, { maxPositions: 32 });
    const plain = ReaderParams.init(config, 3);
    const named = plain.toNamed();
    const table = named.get('bert.embeddings.token_type_embeddings.weight')!;
    const H = config.hiddenSize;
    const row = (d: Float32Array, r: number) => Array.from(d.subarray(r * H, (r + 1) * H));
    const words = withQuestionMatch(config, named, 'words');
    expect(words.config).toMatchObject({ typeVocabSize: 3, questionMatch: 'words' });
    const w = words.named.get('bert.embeddings.token_type_embeddings.weight')!;
    expect(w.shape).toEqual([3, H]);
    expect(row(w.data, 2)).toEqual(row(table.data, 1));
    const both = withQuestionMatch(words.config, words.named, 'words+sentence');
    const b = both.named.get('bert.embeddings.token_type_embeddings.weight')!;
    expect(b.shape).toEqual([5, H]);
    expect(row(b.data, 3)).toEqual(row(table.data, 1));
    expect(row(b.data, 4)).toEqual(row(w.data, 2));
    // the answer-kind rows 5–8 copy rows 1–4, from either a plain or a 'words+sentence' table
    for (const from of [named, both.named]) {
      const k = withQuestionMatch(config, from, 'words+sentence+kind').named.get('bert.embeddings.token_type_embeddings.weight')!;
      expect(k.shape).toEqual([9, H]);
      for (let r = 5; r < 9; r++) expect(row(k.data, r)).toEqual(row(k.data, r - 4));
      expect(row(k.data, 3)).toEqual(row(table.data, 1));
    }
    plain.dispose();
  });

  it('leaves the logits as they were until training moves the new rows', () => {
    const config = presetConfig('tiny', 50, { maxPositions: 32 });
    const plain = ReaderParams.init(config, 5);
    const m = withQuestionMatch(config, plain.toNamed(), 'words+sentence');
    const matched = ReaderParams.fromNamed(m.config, m.named).params;
    const ids = [2, 7, 9, 3, 11, 7, 12, 9, 30, 3];
    const plainTypes = [0, 0, 0, 0, 1, 1, 1, 1, 1, 1];
    const matchTypes = [0, 0, 0, 0, 3, 4, 1, 2, 1, 1];
    const run = (p: ReaderParams, c: typeof config, types: number[]) =>
      tf.tidy(() => {
        const t = (v: number[]) => tf.tensor2d(v, [1, v.length], 'int32');
        const { start, end } = spanLogits(
          p,
          c,
          { inputIds: t(ids), tokenTypeIds: t(types), attentionMask: t(ids.map(() => 1)) },
          { training: false },
        );
        return [...start.dataSync(), ...end.dataSync()];
      });
    const a = run(plain, config, plainTypes);
    const b = run(matched, m.config, matchTypes);
    expect(Math.max(...a.map((v, i) => Math.abs(v - b[i]!)))).toBeLessThan(1e-6);
    // and the types do reach the model: a changed row 4 changes the logits
    const moved = new Map(m.named);
    const t = moved.get('bert.embeddings.token_type_embeddings.weight')!;
    const data = Float32Array.from(t.data);
    // (not by a constant: LayerNorm would take a constant shift right out)
    for (let i = 4 * config.hiddenSize; i < 5 * config.hiddenSize; i++) data[i] = data[i]! + (i % 2 === 0 ? 0.5 : -0.5);
    moved.set('bert.embeddings.token_type_embeddings.weight', { shape: t.shape, data });
    const changed = ReaderParams.fromNamed(m.config, moved).params;
    const c = run(changed, m.config, matchTypes);
    expect(Math.max(...c.map((v, i) => Math.abs(v - b[i]!)))).toBeGreaterThan(1e-3);
    changed.dispose();
    plain.dispose();
    matched.dispose();
  });
});
