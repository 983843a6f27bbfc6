// defines: readerLogits, predictRecords, evaluateRecords — the reader run over records:
// records → windows (src/text/features.ts) → start/end logits (eval mode) → decoded
// answers (span-choice.ts) → the SQuAD 2.0 report (report.ts). The CLI, the worker, the
// training loop's evaluation and the int8 check all go through here.
//
// Letters: W windows, B windows per forward pass, T tokens per window (trimmed).

import * as tf from '@tensorflow/tfjs';
import type { QARecord } from '../data/record.js';
import type { ReaderConfig } from '../model/config.js';
import { spanLogits } from '../model/encoder.js';
import type { ReaderParams } from '../model/params.js';
import { FeatureBuilder, type Feature, type FeatureOptions, type FeatureTokenizer } from '../text/features.js';
import { predictAll, type DecodableWindow, type Decoded, type SpanChoiceOptions, type WindowLogits } from './span-choice.js';
import { buildReport, questionsFromRecords, type EvaluationReport } from './report.js';

/** A window with its model inputs; a Feature fits structurally. */
export interface InputWindow extends DecodableWindow {
  inputIds: Int32Array;
  tokenTypeIds: Int32Array;
  attentionMask: Int32Array;
}

/** Real (unpadded) length of a window: padding sits at the end. */
function realLength(w: InputWindow): number {
  let n = w.attentionMask.length;
  while (n > 0 && w.attentionMask[n - 1] === 0) n--;
  return n;
}

/**
 * Start/end logits of every window (dropout off), `batchSize` windows per forward pass.
 * Each batch is cut to its longest real window, which is exact because padding is masked
 * out of attention and never decoded; the logits come back padded to the window length
 * with −Infinity, so decoding sees the positions it expects.
 */
export function readerLogits(
  params: ReaderParams,
  config: ReaderConfig,
  windows: readonly InputWindow[],
  options: { batchSize?: number; onProgress?: (done: number, total: number) => void } = {},
): WindowLogits[] {
  const batchSize = options.batchSize ?? 16;
  const out: WindowLogits[] = new Array(windows.length);
  // Batch windows of similar length together, so trimming saves the most.
  const lengths = windows.map(realLength);
  const order = windows.map((_, i) => i).sort((a, b) => lengths[a]! - lengths[b]! || a - b);
  for (let b = 0; b < order.length; b += batchSize) {
    const idx = order.slice(b, b + batchSize);
    const full = windows[idx[0]!]!.inputIds.length;
    const T = Math.max(1, ...idx.map((i) => lengths[i]!));
    const stack = (pick: (w: InputWindow) => Int32Array): Int32Array => {
      const flat = new Int32Array(idx.length * T);
      idx.forEach((i, row) => {
        const w = windows[i]!;
        const v = pick(w);
        if (v.length !== full) throw new Error(`record "${w.recordId}" window ${w.window}: ${v.length} tokens, expected ${full}`);
        flat.set(v.subarray(0, T), row * T);
      });
      return flat;
    };
    const [start, end] = tf.tidy(() => {
      const inputs = {
        inputIds: tf.tensor2d(
          stack((w) => w.inputIds),
          [idx.length, T],
          'int32',
        ), // [B, T]
        tokenTypeIds: tf.tensor2d(
          stack((w) => w.tokenTypeIds),
          [idx.length, T],
          'int32',
        ),
        attentionMask: tf.tensor2d(
          stack((w) => w.attentionMask),
          [idx.length, T],
          'int32',
        ),
      };
      const logits = spanLogits(params, config, inputs, { training: false }); // [B, T] each
      return [logits.start.dataSync() as Float32Array, logits.end.dataSync() as Float32Array];
    });
    idx.forEach((i, row) => {
      const s = new Float32Array(full).fill(-Infinity);
      const e = new Float32Array(full).fill(-Infinity);
      s.set(start!.subarray(row * T, (row + 1) * T));
      e.set(end!.subarray(row * T, (row + 1) * T));
      out[i] = { startLogits: s, endLogits: e };
    });
    options.onProgress?.(Math.min(b + batchSize, order.length), order.length);
  }
  return out;
}

/** The model and tokenizer a prediction needs. */
export interface ReaderParts {
  params: ReaderParams;
  config: ReaderConfig;
  tokenizer: FeatureTokenizer;
}

export interface PredictOptions {
  features?: Partial<FeatureOptions>;
  /** over the reader's own decoding settings (ReaderConfig.decoding), field by field; an undefined field keeps the reader's */
  decode?: SpanChoiceOptions;
  batchSize?: number;
  onProgress?: (done: number, total: number) => void;
  /** windows already built for these records with the same options (skips tokenizing) */
  windows?: readonly Feature[];
}

/** Answers for records: windows, logits, decoding. */
export function predictRecords(
  reader: ReaderParts,
  records: readonly QARecord[],
  options: PredictOptions = {},
): Decoded & { windows: number } {
  const windows = options.windows ?? readerWindows(reader, records, options.features);
  const logits = readerLogits(reader.params, reader.config, windows, { batchSize: options.batchSize, onProgress: options.onProgress });
  return { ...predictAll(records, windows, logits, readerDecoding(reader.config, options.decode)), windows: windows.length };
}

/** The decoding options for this reader: its saved settings (ReaderConfig.decoding), then `over`'s defined fields. */
export function readerDecoding(config: Pick<ReaderConfig, 'decoding'>, over: SpanChoiceOptions = {}): SpanChoiceOptions {
  const out: SpanChoiceOptions = { ...config.decoding };
  for (const [k, v] of Object.entries(over) as Array<[keyof SpanChoiceOptions, number | undefined]>) if (v !== undefined) out[k] = v;
  return out;
}

/** Every window of every record. */
export function buildWindows(tokenizer: FeatureTokenizer, records: readonly QARecord[], options: Partial<FeatureOptions> = {}): Feature[] {
  const builder = new FeatureBuilder(tokenizer, options);
  return records.flatMap((r) => builder.build(r).features);
}

/** Every window of every record as this reader reads them: with its question-match token types when its config has them. */
export function readerWindows(
  reader: Pick<ReaderParts, 'config' | 'tokenizer'>,
  records: readonly QARecord[],
  options: Partial<FeatureOptions> = {},
): Feature[] {
  return buildWindows(reader.tokenizer, records, { ...options, questionMatch: reader.config.questionMatch });
}

/** The SQuAD 2.0 report of the reader on labelled records, with the tuned threshold. */
export function evaluateRecords(
  reader: ReaderParts,
  records: readonly QARecord[],
  options: PredictOptions = {},
): { report: EvaluationReport; decoded: Decoded } {
  const decoded = predictRecords(reader, records, options);
  const report = buildReport(questionsFromRecords(records), decoded.predictions, {
    bestSpans: decoded.bestSpans,
    scoreDiffs: decoded.scoreDiffs,
  });
  return { report, decoded };
}
