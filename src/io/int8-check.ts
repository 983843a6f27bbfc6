// defines: measureInt8Drift, int8AccuracyCost — what int8 weights cost, measured
// with the engine itself (spanLogits on whichever tfjs backend is active):
//   measureInt8Drift   start/end logits of the fp32 and the dequantized int8 model on a
//                      fixed set of token sequences; needs no data.
//   int8AccuracyCost   EM/F1 (SQuAD 2.0 rules, src/eval) of both models on validation
//                      windows; needs records and their features.

import { mulberry32 } from '../data/random.js';
import type { QARecord } from '../data/record.js';
import { predictAll } from '../eval/span-choice.js';
import { readerLogits, type InputWindow } from '../eval/evaluate.js';
import { evaluate, goldFromRecords, type SquadScores } from '../eval/squad-metric.js';
import type { ReaderConfig } from '../model/config.js';
import { ReaderParams } from '../model/params.js';
import { dequantizeModel, type QuantizedModel } from './int8.js';
import type { Int8Drift } from './model-card.js';
import type { NamedTensors } from './tensors.js';

/** Runs `body` with an engine model built from `named`, disposing it afterwards. */
function withModel<R>(config: ReaderConfig, named: NamedTensors, body: (params: ReaderParams) => R): R {
  const { params } = ReaderParams.fromNamed(config, named, { source: 'export' });
  try {
    return body(params);
  } finally {
    params.dispose();
  }
}

function argmax(a: ArrayLike<number>): number {
  let best = 0;
  for (let i = 1; i < a.length; i++) if (a[i]! > a[best]!) best = i;
  return best;
}

/**
 * Logit drift of int8 on `count` sequences of `length` token ids drawn uniformly (seeded)
 * from the vocabulary, token type 0 for the first third and 1 after, no padding. The ids
 * are not text: this measures the weights' effect on the network, not accuracy.
 */
export function measureInt8Drift(
  config: ReaderConfig,
  named: NamedTensors,
  quantized: QuantizedModel,
  opts: { count?: number; length?: number; seed?: number } = {},
): Int8Drift {
  const count = opts.count ?? 8;
  const length = Math.min(opts.length ?? 64, config.maxPositions);
  const random = mulberry32(opts.seed ?? 1); // uniform in [0, 1)
  const windows: InputWindow[] = [];
  for (let s = 0; s < count; s++) {
    const inputIds = Int32Array.from({ length }, () => Math.floor(random() * config.vocabSize));
    const tokenTypeIds = Int32Array.from({ length }, (_, t) => (t < length / 3 ? 0 : 1));
    windows.push({
      recordId: `probe${s}`,
      window: 0,
      offsets: new Int32Array(2 * length).fill(-1),
      inputIds,
      tokenTypeIds,
      attentionMask: new Int32Array(length).fill(1),
    });
  }
  const fp32 = withModel(config, named, (p) => readerLogits(p, config, windows));
  const int8 = withModel(config, dequantizeModel(quantized), (p) => readerLogits(p, config, windows));
  let maxAbs = 0;
  let lo = Infinity;
  let hi = -Infinity;
  let changed = 0;
  for (let s = 0; s < count; s++) {
    const a = fp32[s]!;
    const b = int8[s]!;
    for (const [x, y] of [
      [a.startLogits, b.startLogits],
      [a.endLogits, b.endLogits],
    ] as const) {
      for (let t = 0; t < length; t++) {
        maxAbs = Math.max(maxAbs, Math.abs(x[t]! - y[t]!));
        lo = Math.min(lo, x[t]!);
        hi = Math.max(hi, x[t]!);
      }
    }
    if (argmax(a.startLogits) !== argmax(b.startLogits) || argmax(a.endLogits) !== argmax(b.endLogits)) changed++;
  }
  return {
    probe: `${count} sequences of ${length} seeded random token ids`,
    maxAbsLogitDiff: maxAbs,
    logitSpread: hi - lo,
    argmaxChanges: { changed, total: count },
  };
}

/** EM/F1 (decoder default threshold) of the fp32 model and of its dequantized int8 twin. */
export function int8AccuracyCost(
  config: ReaderConfig,
  named: NamedTensors,
  quantized: QuantizedModel,
  records: readonly QARecord[],
  windows: readonly InputWindow[],
): { fp32: SquadScores; int8: SquadScores } {
  const windowed = new Set(windows.map((w) => w.recordId));
  const gold = goldFromRecords(records.filter((r) => windowed.has(r.id)));
  const score = (model: NamedTensors): SquadScores =>
    withModel(config, model, (p) => evaluate(gold, predictAll(records, windows, readerLogits(p, config, windows)).predictions));
  return { fp32: score(named), int8: score(dequantizeModel(quantized)) };
}
