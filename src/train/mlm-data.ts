// defines: DocumentTokens, PackedSequences, packDocuments, packedExample, maskedBatch,
// maskedPositions — the data side of masked-language-model pretraining.
//
// Packing (whole sequences, as BERT's pretraining data; Devlin et al. 2019, §3.1 and
// appendix A.2, without the next-sentence pairs): the documents' tokens are read as one
// stream with [SEP] between documents and cut into rows of T − 2 tokens, each row
// written `[CLS] tokens… [SEP]`. Every row is full except possibly the last, so no work
// is spent on padding. A row never starts with a document-separating [SEP].
//
// Masking: `maskedBatch` hands the packed rows to `collateMlm` (batches.ts), which
// applies BERT's rule — each real, non-special token chosen with probability 0.15; of
// those 80% → [MASK], 10% → a uniformly random id, 10% kept; labels −100 elsewhere — with
// every draw fixed by the seed. `maskedPositions` lists the chosen positions so a head
// can score only them.
//
// Letters: T tokens per row, R rows.

import { collateMlm, IGNORE_LABEL, type MlmBatch, type MlmMasking, type TokenExample } from './batches.js';

/** Token ids of many documents in one flat array: document d is ids[starts[d] … starts[d + 1]). */
export interface DocumentTokens {
  ids: Int32Array;
  /** D + 1 offsets, ascending, starts[0] = 0, starts[D] = ids.length */
  starts: Int32Array;
}

/** R rows of T tokens, row-major, with the real length of each row. */
export interface PackedSequences {
  /** R */
  count: number;
  /** T */
  maxLength: number;
  inputIds: Int32Array; // [R, T]
  /** real tokens per row ([CLS] and [SEP] included); the rest of a row is [PAD] */
  lengths: Int32Array; // [R]
}

export interface PackingIds {
  clsId: number;
  sepId: number;
  padId: number;
}

/** Packs the documents' token stream into `[CLS] … [SEP]` rows of `maxLength` tokens. */
export function packDocuments(docs: DocumentTokens, maxLength: number, ids: PackingIds): PackedSequences {
  if (!Number.isInteger(maxLength) || maxLength < 3)
    throw new RangeError(`packDocuments: maxLength must be an integer ≥ 3, got ${maxLength}`);
  const D = docs.starts.length - 1;
  if (D < 0 || docs.starts[0] !== 0 || docs.starts[D] !== docs.ids.length) {
    throw new RangeError(
      `packDocuments: starts must run from 0 to ids.length (${docs.ids.length}), got ${docs.starts[0]} … ${docs.starts[D]}`,
    );
  }
  const body = maxLength - 2; // tokens between [CLS] and the closing [SEP]

  // 1. the stream: documents in order, one [SEP] between neighbours, empty documents skipped
  let streamLength = 0;
  let nonEmpty = 0;
  for (let d = 0; d < D; d++) {
    const n = docs.starts[d + 1] - docs.starts[d];
    if (n < 0) throw new RangeError(`packDocuments: document ${d} ends before it starts`);
    if (n > 0) {
      streamLength += n;
      nonEmpty++;
    }
  }
  const stream = new Int32Array(streamLength + Math.max(0, nonEmpty - 1));
  let at = 0;
  for (let d = 0; d < D; d++) {
    const doc = docs.ids.subarray(docs.starts[d], docs.starts[d + 1]);
    if (doc.length === 0) continue;
    if (at > 0) stream[at++] = ids.sepId;
    stream.set(doc, at);
    at += doc.length;
  }

  // 2. rows of `body` tokens; a separator that would open a row is dropped
  const rows: Array<[number, number]> = [];
  let start = 0;
  while (start < stream.length) {
    if (stream[start] === ids.sepId && start > 0) start++;
    if (start >= stream.length) break;
    const end = Math.min(stream.length, start + body);
    rows.push([start, end]);
    start = end;
  }

  // 3. [CLS] row [SEP], padded only when the stream runs out
  const R = rows.length;
  const inputIds = new Int32Array(R * maxLength).fill(ids.padId);
  const lengths = new Int32Array(R);
  rows.forEach(([s, e], r) => {
    const o = r * maxLength;
    inputIds[o] = ids.clsId;
    inputIds.set(stream.subarray(s, e), o + 1);
    inputIds[o + 1 + (e - s)] = ids.sepId;
    lengths[r] = e - s + 2;
  });
  return { count: R, maxLength, inputIds, lengths };
}

/** Row `r` as a TokenExample (views into the packed ids; token type 0 throughout). */
export function packedExample(packed: PackedSequences, r: number): TokenExample {
  if (!Number.isInteger(r) || r < 0 || r >= packed.count) throw new RangeError(`packedExample: row ${r} is outside [0, ${packed.count})`);
  const T = packed.maxLength;
  const attentionMask = new Int32Array(T);
  attentionMask.fill(1, 0, packed.lengths[r]);
  return { inputIds: packed.inputIds.subarray(r * T, (r + 1) * T), tokenTypeIds: new Int32Array(T), attentionMask };
}

/**
 * Rows → one masked batch (BERT's 15% with 80/10/10, through collateMlm), full length T:
 * packed rows are full, so trimming would save nothing. `seed` fixes every draw.
 */
export function maskedBatch(packed: PackedSequences, rows: ArrayLike<number>, masking: MlmMasking, seed: number): MlmBatch {
  const examples: TokenExample[] = [];
  for (let i = 0; i < rows.length; i++) examples.push(packedExample(packed, rows[i]));
  return collateMlm(examples, masking, seed, false);
}

/** Flat indices (b·T + t) of the positions a batch predicts (label ≠ −100), ascending. */
export function maskedPositions(batch: Pick<MlmBatch, 'labels'>): Int32Array {
  let n = 0;
  for (const label of batch.labels) if (label !== IGNORE_LABEL) n++;
  const out = new Int32Array(n);
  let k = 0;
  batch.labels.forEach((label, i) => {
    if (label !== IGNORE_LABEL) out[k++] = i;
  });
  return out;
}
