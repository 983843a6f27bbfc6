// defines: buildVocabulary, VocabReport — the uncased WordPiece vocabulary of the shipped
// base reader, trained with the `tokenizers` npm package and cut to a target size.
//
// `tokenizers` 0.23.2's `train(files)` takes no options, so it trains ~30 000 tokens
// (docs/DESIGN.md); a 2-layer, 128-wide encoder spends too much of itself on such a table
// (30 000 × 128 weights, 2·H·V FLOPs per predicted token). The cut, deterministic:
//   1. train on the training documents (build-vocab.ts: BERT normaliser and
//      pre-tokeniser, lowercased, accents stripped; [PAD] [UNK] [CLS] [SEP] [MASK] put
//      first, ids 0–4, and the model rebuilt with WordPiece.init)
//   2. tokenize the training documents with that full vocabulary and count each token
//   3. keep the specials, every single-character token and its "##" continuation (so any
//      word spelled in the corpus's alphabet stays spellable, greedy longest-match
//      falling back to characters), then the most frequent other tokens until the
//      target size. The order is canonical, because the trainer's own id order varies
//      from run to run (seen with 0.23.2: the same tokens, in another order): specials,
//      the alphabet by code point (bare forms, then "##" forms), then the rest by count,
//      ties by the token's text
//   4. re-tokenize with the cut vocabulary and report the [UNK] share and tokens per
//      word of both, to show what the cut cost

import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { SPECIAL_TOKENS, referenceTokenizer, trainVocabulary } from '../build-vocab.js';

export interface VocabReport {
  trainedSize: number;
  size: number;
  /** single characters and their ## forms kept unconditionally */
  alphabet: number;
  /** words (whitespace-separated) in the training text */
  words: number;
  full: { tokens: number; unk: number; tokensPerWord: number };
  cut: { tokens: number; unk: number; tokensPerWord: number };
}

/** Token counts over the texts (ids of `vocab`), with the [UNK] count. */
async function countTokens(vocab: string[], texts: readonly string[]): Promise<{ counts: Float64Array; tokens: number; unk: number }> {
  const tokenizer = referenceTokenizer(vocab, true);
  const counts = new Float64Array(vocab.length);
  const unkId = vocab.indexOf('[UNK]');
  let tokens = 0;
  const chunk = 64;
  for (let i = 0; i < texts.length; i += chunk) {
    const encodings = await tokenizer.encodeBatch(texts.slice(i, i + chunk));
    for (const e of encodings) {
      for (const id of e.getIds()) counts[id]++;
      tokens += e.getIds().length;
    }
  }
  return { counts, tokens, unk: counts[unkId] };
}

/** Steps 1–4 above; `workDir` receives the training text files the trainer reads. */
export async function buildVocabulary(
  texts: readonly string[],
  target: number,
  workDir: string,
): Promise<{ vocab: string[]; report: VocabReport }> {
  // 1. train (one document per line)
  mkdirSync(workDir, { recursive: true });
  const file = join(workDir, 'vocab-train.txt');
  writeFileSync(file, `${texts.join('\n')}\n`);
  const full = trainVocabulary([file], true);

  // 2. count with the full vocabulary
  const fullCount = await countTokens(full, texts);

  // 3. specials, the alphabet, then by frequency
  const specials = new Set<string>(SPECIAL_TOKENS);
  const isAlphabet = (t: string) => [...(t.startsWith('##') ? t.slice(2) : t)].length === 1;
  const keep = new Set<number>();
  full.forEach((t, id) => {
    if (specials.has(t) || isAlphabet(t)) keep.add(id);
  });
  const alphabet = keep.size - specials.size;
  if (keep.size > target) throw new Error(`buildVocabulary: the alphabet alone (${keep.size} tokens) exceeds the target size ${target}`);
  const byText = (a: string, b: string) => (a < b ? -1 : a > b ? 1 : 0);
  const ranked = full
    .map((_, id) => id)
    .filter((id) => !keep.has(id))
    .sort((a, b) => fullCount.counts[b] - fullCount.counts[a] || byText(full[a]!, full[b]!));
  const letters = full.filter((t) => isAlphabet(t) && !specials.has(t));
  const vocab = [
    ...SPECIAL_TOKENS,
    ...letters.filter((t) => !t.startsWith('##')).sort(byText),
    ...letters.filter((t) => t.startsWith('##')).sort(byText),
    ...ranked.slice(0, target - keep.size).map((id) => full[id]!),
  ];

  // 4. what the cut cost
  const cutCount = await countTokens(vocab, texts);
  const words = texts.reduce((n, t) => n + (t.length === 0 ? 0 : t.split(' ').length), 0);
  return {
    vocab,
    report: {
      trainedSize: full.length,
      size: vocab.length,
      alphabet,
      words,
      full: { tokens: fullCount.tokens, unk: fullCount.unk, tokensPerWord: fullCount.tokens / words },
      cut: { tokens: cutCount.tokens, unk: cutCount.unk, tokensPerWord: cutCount.tokens / words },
    },
  };
}
