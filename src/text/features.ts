// defines: FeatureOptions, Feature, RecordFeatures, FeatureBuilder, windowStarts,
// tokenSpanToCharSpan — a question and its passage as model inputs:
// `[CLS] question [SEP] context [SEP]`, padded to the max sequence length, with sliding
// windows over contexts too long for one sequence (BERT's SQuAD recipe, Devlin et al. 2019).
//
// Stride, as used here: the number of context tokens that two consecutive windows SHARE
// (the overlap), the common convention of Hugging Face's tokenizers (`stride` with
// overflowing tokens). With `room` context tokens per window, window w starts at context
// token w × (room − stride), and the last window is the first one that reaches the end of
// the context. (BERT's original `doc_stride` is the distance between window starts
// instead; with this definition that distance is room − stride.)
//
// Letters used below: n context tokens; q question tokens (at most maxQueryLength);
// room = maxLength − q − 3 context tokens fit beside the question and the three special tokens.
import type { QARecord } from '../data/record.js';
import type { QuestionMatch } from '../model/config.js';
import type { AnswerKind } from '../practice/candidates.js';
import { askedKinds, kindSpans } from './answer-kinds.js';
import type { FlatEncoding, WordPieceTokenizer } from './wordpiece.js';

export interface FeatureOptions {
  /** max sequence length in tokens, special tokens included; 384 as in BERT's SQuAD runs */
  maxLength: number;
  /** context tokens shared by consecutive windows (see the top of this file); 128, common practice */
  stride: number;
  /** longer questions keep their first maxQueryLength tokens; 64 as in BERT's SQuAD runs */
  maxQueryLength: number;
  /**
   * Word-match token types (the reader's `questionMatch`, src/model/config.ts):
   *   'words'           context tokens of a word the question also holds get type 2. A
   *                     word is a run of tokens with no character between them and letters
   *                     or digits on both sides of every join; two words match when their
   *                     token ids are the same, so matching follows the tokenizer's own
   *                     normalisation (lower case and no accents for an uncased vocabulary).
   *   'words+sentence'  also, the context tokens of the sentence the question matches best
   *                     get type 3 (not matched) or 4 (matched). A sentence's match is the
   *                     share of the question's distinct words it holds, each weighted by
   *                     its rarity among the passage's sentences, ln((S + 1) / (df + 0.5)) —
   *                     the sentence coverage of sliding-window word-overlap readers, as
   *                     src/eval/lexical-baseline.ts computes it, but over token-id words
   *                     and with no stopword list.
   *   'words+sentence+kind'  also, context tokens inside a span of a kind the question
   *                     asks for (a time for "what time", a quantity for "how long": see
   *                     src/text/answer-kinds.ts) get 4 more, so types 5–8.
   */
  questionMatch?: QuestionMatch;
}

export const DEFAULT_FEATURE_OPTIONS: Readonly<FeatureOptions> = { maxLength: 384, stride: 128, maxQueryLength: 64 };

/** What feature building needs of a tokenizer (a WordPieceTokenizer, or a stand-in in benchmarks). */
export type FeatureTokenizer = Pick<WordPieceTokenizer, 'encodeFlat' | 'clsId' | 'sepId' | 'padId'>;

/** One window of one record, as DEVELOPERS.md specifies. */
export interface Feature {
  recordId: string;
  /** index of this window among the record's windows */
  window: number;
  inputIds: Int32Array; // [maxLength]
  tokenTypeIds: Int32Array; // [maxLength] 0 for [CLS] question [SEP], 1 for context [SEP]
  attentionMask: Int32Array; // [maxLength] 1 for tokens, 0 for padding
  /** answer start token in this window; 0 ([CLS]) when there is no whole answer in it */
  startPosition: number;
  endPosition: number;
  /** [2 × maxLength]: character start, end of each context token; -1, -1 for every other token */
  offsets: Int32Array;
}

export interface RecordFeatures {
  features: Feature[];
  /** things the user should know, e.g. a truncated question; never printed here */
  warnings: string[];
  /** an answerable record whose first answer no window holds whole (or that covers no token) */
  answerLost: boolean;
  /**
   * the first answer's start or end falls inside a token (or on characters the tokenizer
   * drops), so the token span maps back to a different text than the gold answer
   */
  boundaryMismatch: boolean;
}

/** The first context token of each window: w × (room − stride), until a window reaches n. */
export function windowStarts(n: number, room: number, stride: number): number[] {
  const starts = [0];
  const step = room - stride;
  while (starts[starts.length - 1]! + room < n) starts.push(starts[starts.length - 1]! + step);
  return starts;
}

/**
 * The character span [start, end) of tokens start..end (inclusive) of a feature, or null
 * when either token is not a context token or the span is reversed. Decoding uses this to
 * turn a predicted token span into answer text: context.slice(start, end).
 */
export function tokenSpanToCharSpan(feature: Feature, startToken: number, endToken: number): [number, number] | null {
  if (endToken < startToken) return null;
  const s = feature.offsets[2 * startToken];
  const e = feature.offsets[2 * endToken + 1];
  if (s === undefined || e === undefined || s < 0 || e < 0) return null;
  return [s, e];
}

/**
 * Builds the features of records. Contexts are tokenized once and kept by their text,
 * since many questions share a passage; clearCache() lets the memory go.
 */
export class FeatureBuilder {
  readonly options: Readonly<FeatureOptions>;
  private readonly contexts = new Map<string, FlatEncoding>();

  constructor(
    readonly tokenizer: FeatureTokenizer,
    options: Partial<FeatureOptions> = {},
  ) {
    const o = { ...DEFAULT_FEATURE_OPTIONS, ...options };
    for (const key of ['maxLength', 'stride', 'maxQueryLength'] as const) {
      if (!Number.isInteger(o[key]) || o[key] < (key === 'stride' ? 0 : 1)) {
        throw new RangeError(`${key} must be a whole number${key === 'stride' ? '' : ' above 0'}, not ${o[key]}`);
      }
    }
    const minRoom = o.maxLength - o.maxQueryLength - 3;
    if (minRoom <= o.stride) {
      throw new RangeError(
        `stride (${o.stride}) must be smaller than the context tokens a window holds beside the longest question: ` +
          `max length ${o.maxLength} − max question tokens ${o.maxQueryLength} − 3 special tokens = ${minRoom}`,
      );
    }
    this.options = o;
  }

  clearCache(): void {
    this.contexts.clear();
  }

  /** The context's encoding (from the cache when this text was seen before). */
  contextEncoding(context: string): FlatEncoding {
    let enc = this.contexts.get(context);
    if (enc === undefined) {
      enc = this.tokenizer.encodeFlat(context);
      this.contexts.set(context, enc);
    }
    return enc;
  }

  build(record: QARecord): RecordFeatures {
    const { maxLength, stride, maxQueryLength } = this.options;
    const tok = this.tokenizer;
    const warnings: string[] = [];
    const ctx = this.contextEncoding(record.context);
    const n = ctx.ids.length;

    // 1. the question, truncated to maxQueryLength
    const qEnc = tok.encodeFlat(record.question);
    let qIds = qEnc.ids;
    if (qIds.length > maxQueryLength) {
      warnings.push(`record "${record.id}": the question has ${qIds.length} tokens; only the first ${maxQueryLength} are kept`);
      qIds = qIds.subarray(0, maxQueryLength);
    }
    // which context tokens belong to a word the (kept) question holds
    const asked = this.options.questionMatch ? wordKeys(qEnc, record.question, qIds.length) : null;
    const matched = asked ? matchedTokens(ctx, record.context, asked) : null;
    const level = this.options.questionMatch;
    const inBest = asked && level !== 'words' ? bestSentenceTokens(ctx, record.context, asked) : null;
    const ofKind = asked && level === 'words+sentence+kind' ? kindTokens(ctx, record.context, askedKinds(record.question)) : null;
    const q = qIds.length;
    const room = maxLength - q - 3;

    // 2. the gold answer as context tokens [aStart, aEnd] (inclusive), -1 when there is none
    let aStart = -1;
    let aEnd = -1;
    let answerLost = false;
    let boundaryMismatch = false;
    const answer = record.unanswerable ? undefined : record.answers[0];
    if (answer !== undefined) {
      const s = answer.start;
      const e = answer.start + answer.text.length;
      if (s < 0 || e > record.context.length || record.context.slice(s, e) !== answer.text) {
        warnings.push(`record "${record.id}": the answer text is not at its start offset ${s} in the context`);
        answerLost = true;
      } else {
        aStart = firstTokenEndingAfter(ctx.ends, s);
        aEnd = lastTokenStartingBefore(ctx.starts, e);
        if (aStart > aEnd || aStart < 0) {
          // the span covers only characters the tokenizer drops (spaces, zero-width…)
          answerLost = true;
          boundaryMismatch = true;
          aStart = aEnd = -1;
        } else boundaryMismatch = ctx.starts[aStart] !== s || ctx.ends[aEnd] !== e;
      }
    }

    // 3. one feature per window
    const features: Feature[] = [];
    const base = q + 2; // position of the first context token: after [CLS] question [SEP]
    let held = false;
    const starts = windowStarts(n, room, stride);
    for (let w = 0; w < starts.length; w++) {
      const from = starts[w]!;
      const to = Math.min(n, from + room);
      const inputIds = new Int32Array(maxLength).fill(tok.padId);
      const tokenTypeIds = new Int32Array(maxLength);
      const attentionMask = new Int32Array(maxLength);
      const offsets = new Int32Array(2 * maxLength).fill(-1);
      inputIds[0] = tok.clsId;
      inputIds.set(qIds, 1);
      inputIds[q + 1] = tok.sepId;
      inputIds.set(ctx.ids.subarray(from, to), base);
      const end = base + (to - from); // position of the final [SEP]
      inputIds[end] = tok.sepId;
      tokenTypeIds.fill(1, base, end + 1);
      if (matched)
        for (let k = from; k < to; k++)
          tokenTypeIds[base + k - from] = 1 + matched[k]! + (inBest ? 2 * inBest[k]! : 0) + (ofKind ? 4 * ofKind[k]! : 0);
      attentionMask.fill(1, 0, end + 1);
      for (let k = from; k < to; k++) {
        offsets[2 * (base + k - from)] = ctx.starts[k]!;
        offsets[2 * (base + k - from) + 1] = ctx.ends[k]!;
      }
      let startPosition = 0;
      let endPosition = 0;
      if (aStart >= from && aEnd < to) {
        startPosition = base + aStart - from;
        endPosition = base + aEnd - from;
        held = true;
      }
      features.push({ recordId: record.id, window: w, inputIds, tokenTypeIds, attentionMask, startPosition, endPosition, offsets });
    }
    if (aStart >= 0 && !held) answerLost = true;
    return { features, warnings, answerLost, boundaryMismatch };
  }
}

/**
 * Word ranges [first, last) of an encoding: tokens joined with no gap between letters or
 * digits. Punctuation is no word: a "?" or "," would match everywhere and say nothing.
 */
function wordRanges(enc: FlatEncoding, text: string, count = enc.ids.length): Array<[number, number]> {
  const out: Array<[number, number]> = [];
  const alnum = (i: number) => i >= 0 && i < text.length && /[\p{L}\p{N}]/u.test(text[i]!);
  let first = 0;
  for (let k = 1; k <= count; k++) {
    const joins = k < count && enc.starts[k] === enc.ends[k - 1] && alnum(enc.starts[k]! - 1) && alnum(enc.starts[k]!);
    if (!joins) {
      if (/[\p{L}\p{N}]/u.test(text.slice(enc.starts[first]!, enc.ends[k - 1]!))) out.push([first, k]);
      first = k;
    }
  }
  return out;
}

const keyOf = (ids: Int32Array, [first, last]: [number, number]) => Array.from(ids.subarray(first, last)).join(',');

/** The token-id keys of the first `count` tokens' words (a word cut by the count is left out). */
function wordKeys(enc: FlatEncoding, text: string, count: number): Set<string> {
  const keys = new Set<string>();
  for (const range of wordRanges(enc, text)) if (range[1] <= count) keys.add(keyOf(enc.ids, range));
  return keys;
}

/** Per context token: 1 when its word's key is among `keys`. */
/** Per context token: 1 when it overlaps a span of a kind the question asks for (src/text/answer-kinds.ts). */
function kindTokens(ctx: FlatEncoding, text: string, kinds: Set<AnswerKind>): Uint8Array {
  const out = new Uint8Array(ctx.ids.length);
  const spans = kindSpans(text, kinds);
  let s = 0;
  for (let k = 0; k < ctx.ids.length && s < spans.length; k++) {
    while (s < spans.length && spans[s]![1] <= ctx.starts[k]!) s++;
    if (s < spans.length && spans[s]![0] < ctx.ends[k]!) out[k] = 1;
  }
  return out;
}

function matchedTokens(ctx: FlatEncoding, text: string, keys: Set<string>): Uint8Array {
  const out = new Uint8Array(ctx.ids.length);
  if (keys.size === 0) return out;
  for (const range of wordRanges(ctx, text)) if (keys.has(keyOf(ctx.ids, range))) out.fill(1, range[0], range[1]);
  return out;
}

/**
 * Per context token: 1 when it lies in the sentence (or the sentences, on a tie) whose
 * rarity-weighted share of the question's words is highest; all 0 when no sentence holds
 * any question word. Sentences end at ".", "!" or "?" before white space, and at line breaks.
 */
function bestSentenceTokens(ctx: FlatEncoding, text: string, asked: Set<string>): Uint8Array {
  const n = ctx.ids.length;
  const out = new Uint8Array(n);
  if (asked.size === 0 || n === 0) return out;
  // sentence index of each token, by where the token starts
  const ends: number[] = [];
  for (const m of text.matchAll(/[.!?](?=\s)|\n/g)) ends.push(m.index + 1);
  const sentenceOf = new Int32Array(n);
  let sIdx = 0;
  for (let k = 0; k < n; k++) {
    while (sIdx < ends.length && ctx.starts[k]! >= ends[sIdx]!) sIdx++;
    sentenceOf[k] = sIdx;
  }
  const S = sIdx + 1;
  // the question words each sentence holds
  const holds: Array<Set<string>> = Array.from({ length: S }, () => new Set());
  for (const range of wordRanges(ctx, text)) {
    const key = keyOf(ctx.ids, range);
    if (asked.has(key)) holds[sentenceOf[range[0]]!]!.add(key);
  }
  const df = new Map<string, number>();
  for (const h of holds) for (const key of h) df.set(key, (df.get(key) ?? 0) + 1);
  const weight = (key: string) => Math.log((S + 1) / ((df.get(key) ?? 0) + 0.5));
  let total = 0;
  for (const key of asked) total += weight(key);
  const coverage = holds.map((h) => [...h].reduce((a, key) => a + weight(key), 0) / total);
  const best = Math.max(...coverage);
  if (!(best > 0)) return out;
  for (let k = 0; k < n; k++) if (coverage[sentenceOf[k]!] === best) out[k] = 1;
  return out;
}

/** The first k with ends[k] > pos (token ends never decrease), or -1. */
function firstTokenEndingAfter(ends: Int32Array, pos: number): number {
  let lo = 0;
  let hi = ends.length;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (ends[mid]! > pos) hi = mid;
    else lo = mid + 1;
  }
  return lo < ends.length ? lo : -1;
}

/** The last k with starts[k] < pos (token starts never decrease), or -1. */
function lastTokenStartingBefore(starts: Int32Array, pos: number): number {
  let lo = 0;
  let hi = starts.length;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (starts[mid]! < pos) lo = mid + 1;
    else hi = mid;
  }
  return lo - 1;
}
