// defines: BertNormalizerOptions, CharClass, BertCharTable, bertOptions, normalizeForBert,
// isChineseIdeograph — the BERT text normaliser and pre-tokeniser character rules, one
// code point at a time, so that the tokenizer can keep a map back to the original text.
//
// The rules are those of BERT's BasicTokenizer (Devlin et al. 2019, google-research/bert
// `tokenization.py`) as the `tokenizers` library applies them in `BertNormalizer` and
// `BertPreTokenizer`, in this order:
//   1. clean text: drop U+0000, U+FFFD and every control, format, surrogate and private-use
//      character (general categories Cc, Cf, Cs, Co; unassigned ones stay) except tab, newline and carriage return; every White_Space
//      character becomes a space. (So zero-width spaces, joiners and soft hyphens vanish.)
//   2. Chinese characters: each CJK ideograph stands alone, as if spaces surrounded it.
//   3. strip accents (on by default when lowercasing): NFD, then drop the nonspacing marks
//      (category Mn).
//   4. lowercase, one code point at a time (Unicode full lowercase mapping, no context).
//   5. pre-tokenise: split on White_Space (dropped); every punctuation character (ASCII
//      punctuation or category P) is a word of its own.
//
// Working one code point at a time differs from the whole-string NFD in one corner: NFD
// reorders runs of combining marks by combining class across code points. With accents
// stripped, the marks that could move are nonspacing and dropped anyway; only spacing marks
// with a nonzero combining class (a few musical symbols) could come out in another order.

export interface BertNormalizerOptions {
  /** lowercase the text (uncased models); default true */
  lowercase: boolean;
  /** drop accents (NFD, remove Mn); `tokenizers` defaults it to the value of `lowercase` */
  stripAccents: boolean;
  /** remove control and format characters, map White_Space to a space; default true */
  cleanText: boolean;
  /** make every CJK ideograph a word of its own; default true */
  handleChineseChars: boolean;
}

/**
 * What the pre-tokeniser does with one normalised code point: `WORD` is part of a word,
 * `SPACE` ends the current word and is dropped, `ALONE` is a word of its own (punctuation).
 */
export type CharClass = 0 | 1 | 2;
export const WORD: CharClass = 0;
export const SPACE: CharClass = 1;
export const ALONE: CharClass = 2;

/**
 * CJK ideograph blocks that BERT isolates. These are the ranges the `tokenizers` 0.23.2
 * `BertNormalizer` isolates, found by probing every code point from U+2000 to U+3FFFF:
 * 3400–4DBF, 4E00–9FFF, F900–FAFF, 20000–2A6DF, 2A700–2B81F, 2B920–2CEAF, 2F800–2FA1F.
 * (BERT's own list has 2B820–2CEAF; the library has 2B920 and we follow the library.)
 */
export function isChineseIdeograph(cp: number): boolean {
  return (
    (cp >= 0x4e00 && cp <= 0x9fff) ||
    (cp >= 0x3400 && cp <= 0x4dbf) ||
    (cp >= 0xf900 && cp <= 0xfaff) ||
    (cp >= 0x20000 && cp <= 0x2a6df) ||
    (cp >= 0x2a700 && cp <= 0x2b81f) ||
    (cp >= 0x2b920 && cp <= 0x2ceaf) ||
    (cp >= 0x2f800 && cp <= 0x2fa1f)
  );
}

// Character tables. JavaScript's Unicode properties are newer than the tables of the
// `tokenizers` library whose tokens BERT checkpoints were made with (0.23.2 knows neither
// U+2E4F, a punctuation mark of Unicode 13, nor the nonspacing marks added since about
// Unicode 10, nor the canonical decompositions added since, and it counts unassigned code
// points as letters). To give the same tokens,
// the LEGACY_* ranges ([first, last] pairs) list every code point where that library's
// answer differs from the JavaScript property; they were printed by
// tests/text/probe-reference-unicode.ts, which asks the library about every code point.
// tests/text/wordpiece-reference.test.ts checks all code points again.
const LEGACY_NOT_OTHER: readonly number[] = [0x890, 0x891, 0x8e2, 0x8e2, 0x110cd, 0x110cd, 0x13430, 0x1343f];
const LEGACY_OTHER: readonly number[] = [];
const LEGACY_NOT_MN: readonly number[] = [
  0x7fd, 0x7fd, 0x897, 0x89f, 0x8ca, 0x8e1, 0x9fe, 0x9fe, 0xafa, 0xaff, 0xb55, 0xb55, 0xc04, 0xc04, 0xc3c, 0xc3c, 0xd00, 0xd00, 0xd3b,
  0xd3c, 0xd81, 0xd81, 0xeba, 0xeba, 0xece, 0xece, 0x180f, 0x180f, 0x1885, 0x1886, 0x1abf, 0x1add, 0x1ae0, 0x1aeb, 0x1df6, 0x1dfb, 0xa82c,
  0xa82c, 0xa8c5, 0xa8c5, 0xa8ff, 0xa8ff, 0xa9bd, 0xa9bd, 0x10d24, 0x10d27, 0x10d69, 0x10d6d, 0x10eab, 0x10eac, 0x10efa, 0x10eff, 0x10f46,
  0x10f50, 0x10f82, 0x10f85, 0x11070, 0x11070, 0x11073, 0x11074, 0x110c2, 0x110c2, 0x111c9, 0x111c9, 0x111cf, 0x111cf, 0x1123e, 0x1123e,
  0x11241, 0x11241, 0x1133b, 0x1133b, 0x113bb, 0x113c0, 0x113ce, 0x113ce, 0x113d0, 0x113d0, 0x113d2, 0x113d2, 0x113e1, 0x113e2, 0x11438,
  0x1143f, 0x11442, 0x11444, 0x11446, 0x11446, 0x1145e, 0x1145e, 0x1182f, 0x11837, 0x11839, 0x1183a, 0x1193b, 0x1193c, 0x1193e, 0x1193e,
  0x11943, 0x11943, 0x119d4, 0x119d7, 0x119da, 0x119db, 0x119e0, 0x119e0, 0x11a01, 0x11a0a, 0x11a33, 0x11a38, 0x11a3b, 0x11a3e, 0x11a47,
  0x11a47, 0x11a51, 0x11a56, 0x11a59, 0x11a5b, 0x11a8a, 0x11a96, 0x11a98, 0x11a99, 0x11b60, 0x11b60, 0x11b62, 0x11b64, 0x11b66, 0x11b66,
  0x11c30, 0x11c36, 0x11c38, 0x11c3d, 0x11c3f, 0x11c3f, 0x11c92, 0x11ca7, 0x11caa, 0x11cb0, 0x11cb2, 0x11cb3, 0x11cb5, 0x11cb6, 0x11d31,
  0x11d36, 0x11d3a, 0x11d3a, 0x11d3c, 0x11d3d, 0x11d3f, 0x11d45, 0x11d47, 0x11d47, 0x11d90, 0x11d91, 0x11d95, 0x11d95, 0x11d97, 0x11d97,
  0x11ef3, 0x11ef4, 0x11f00, 0x11f01, 0x11f36, 0x11f3a, 0x11f40, 0x11f40, 0x11f42, 0x11f42, 0x11f5a, 0x11f5a, 0x13440, 0x13440, 0x13447,
  0x13455, 0x1611e, 0x16129, 0x1612d, 0x1612f, 0x16f4f, 0x16f4f, 0x16fe4, 0x16fe4, 0x1cf00, 0x1cf2d, 0x1cf30, 0x1cf46, 0x1e000, 0x1e006,
  0x1e008, 0x1e018, 0x1e01b, 0x1e021, 0x1e023, 0x1e024, 0x1e026, 0x1e02a, 0x1e08f, 0x1e08f, 0x1e130, 0x1e136, 0x1e2ae, 0x1e2ae, 0x1e2ec,
  0x1e2ef, 0x1e4ec, 0x1e4ef, 0x1e5ee, 0x1e5ef, 0x1e6e3, 0x1e6e3, 0x1e6e6, 0x1e6e6, 0x1e6ee, 0x1e6ef, 0x1e6f5, 0x1e6f5, 0x1e944, 0x1e94a,
];
const LEGACY_MN: readonly number[] = [0x1734, 0x1734, 0x1171e, 0x1171e];
const LEGACY_NOT_DECOMPOSED: readonly number[] = [
  0x105c9, 0x105c9, 0x105e4, 0x105e4, 0x11383, 0x11383, 0x11385, 0x11385, 0x1138e, 0x1138e, 0x11391, 0x11391, 0x113c5, 0x113c5, 0x113c7,
  0x113c8, 0x11938, 0x11938, 0x16121, 0x16128, 0x16d68, 0x16d6a,
];
const LEGACY_NOT_PUNCT: readonly number[] = [
  0x61d, 0x61d, 0x9fd, 0x9fd, 0xa76, 0xa76, 0xc77, 0xc77, 0xc84, 0xc84, 0x1b4e, 0x1b4f, 0x1b7d, 0x1b7f, 0x2e43, 0x2e4f, 0x2e52, 0x2e5d,
  0x10d6e, 0x10d6e, 0x10ead, 0x10ead, 0x10ed0, 0x10ed0, 0x10f55, 0x10f59, 0x10f86, 0x10f89, 0x113d4, 0x113d5, 0x113d7, 0x113d8, 0x1144b,
  0x1144f, 0x1145a, 0x1145b, 0x1145d, 0x1145d, 0x11660, 0x1166c, 0x116b9, 0x116b9, 0x1183b, 0x1183b, 0x11944, 0x11946, 0x119e2, 0x119e2,
  0x11a3f, 0x11a46, 0x11a9a, 0x11a9c, 0x11a9e, 0x11aa2, 0x11b00, 0x11b09, 0x11be1, 0x11be1, 0x11c41, 0x11c45, 0x11c70, 0x11c71, 0x11ef7,
  0x11ef8, 0x11f43, 0x11f4f, 0x11fff, 0x11fff, 0x12ff1, 0x12ff2, 0x16d6d, 0x16d6f, 0x16e97, 0x16e9a, 0x16fe2, 0x16fe2, 0x1e5ff, 0x1e5ff,
  0x1e95e, 0x1e95f,
];
const LEGACY_PUNCT: readonly number[] = [0x166d, 0x166d, 0x111c9, 0x111c9];

function rangeSet(ranges: readonly number[]): Set<number> {
  const set = new Set<number>();
  for (let i = 0; i < ranges.length; i += 2) for (let cp = ranges[i]!; cp <= ranges[i + 1]!; cp++) set.add(cp);
  return set;
}

const NOT_OTHER = rangeSet(LEGACY_NOT_OTHER);
const EXTRA_OTHER = rangeSet(LEGACY_OTHER);
const NOT_MN = rangeSet(LEGACY_NOT_MN);
const EXTRA_MN = rangeSet(LEGACY_MN);
const NOT_DECOMPOSED = rangeSet(LEGACY_NOT_DECOMPOSED);
const NOT_PUNCT = rangeSet(LEGACY_NOT_PUNCT);
const EXTRA_PUNCT = rangeSet(LEGACY_PUNCT);

const OTHER = /^[\p{Cc}\p{Cf}\p{Cs}\p{Co}]$/u; // control, format, surrogate, private use
const WHITE_SPACE = /^\p{White_Space}$/u;
const PUNCTUATION = /^\p{P}$/u;
const NONSPACING_MARK = /^\p{Mn}$/u;

function isOther(cp: number, ch: string): boolean {
  return EXTRA_OTHER.has(cp) || (OTHER.test(ch) && !NOT_OTHER.has(cp));
}

function isNonspacingMark(cp: number, ch: string): boolean {
  return EXTRA_MN.has(cp) || (NONSPACING_MARK.test(ch) && !NOT_MN.has(cp));
}

function isAsciiPunctuation(cp: number): boolean {
  return (cp >= 0x21 && cp <= 0x2f) || (cp >= 0x3a && cp <= 0x40) || (cp >= 0x5b && cp <= 0x60) || (cp >= 0x7b && cp <= 0x7e);
}

/** Step 5's class of one normalised code point. */
function classify(cp: number): CharClass {
  const ch = String.fromCodePoint(cp);
  if (WHITE_SPACE.test(ch)) return SPACE;
  if (isAsciiPunctuation(cp) || EXTRA_PUNCT.has(cp) || (PUNCTUATION.test(ch) && !NOT_PUNCT.has(cp))) return ALONE;
  return WORD;
}

/**
 * One original code point through steps 1–4: the normalised text it becomes (possibly
 * empty, possibly several code points). White_Space becomes ' ' and an isolated CJK
 * ideograph comes back padded with spaces, exactly as the `tokenizers` normaliser writes.
 */
function normalizeOne(cp: number, o: BertNormalizerOptions): string {
  const ch = String.fromCodePoint(cp);
  if (o.cleanText) {
    if (cp === 0 || cp === 0xfffd) return '';
    // tab, newline and carriage return are Cc but count as whitespace, not control
    if (cp === 0x09 || cp === 0x0a || cp === 0x0d) return ' ';
    if (isOther(cp, ch)) return '';
    if (WHITE_SPACE.test(ch)) return ' ';
  }
  let out = ch;
  if (o.stripAccents) out = stripMarks(NOT_DECOMPOSED.has(cp) ? out : out.normalize('NFD'));
  if (o.lowercase) out = lowercaseByCodePoint(out);
  if (o.handleChineseChars && isChineseIdeograph(cp)) out = ` ${out} `;
  return out;
}

function stripMarks(s: string): string {
  let out = '';
  for (const c of s) if (!isNonspacingMark(c.codePointAt(0)!, c)) out += c;
  return out;
}

/** Lowercases code point by code point: no context rules (Σ is always σ), as Rust's `char::to_lowercase`. */
function lowercaseByCodePoint(s: string): string {
  let out = '';
  for (const c of s) out += c.toLowerCase();
  return out;
}

/**
 * Per-code-point answers to steps 1–5, computed once and kept: ASCII in flat tables,
 * everything else in maps filled as characters are met (a text meets few distinct ones).
 */
export class BertCharTable {
  /** steps 1–4 for each ASCII code point: '' (removed) or one ASCII character */
  readonly asciiOut: string[] = [];
  /** step 5 for each ASCII code point as a normalised character */
  readonly asciiClass = new Uint8Array(128);
  private readonly out = new Map<number, string>();
  private readonly cls = new Map<number, CharClass>();

  constructor(readonly options: BertNormalizerOptions) {
    for (let cp = 0; cp < 128; cp++) {
      const s = normalizeOne(cp, options);
      this.asciiOut.push(s);
      this.asciiClass[cp] = classify(cp);
    }
  }

  /** Steps 1–4 for one original code point. */
  normalized(cp: number): string {
    let s = this.out.get(cp);
    if (s === undefined) {
      s = normalizeOne(cp, this.options);
      this.out.set(cp, s);
    }
    return s;
  }

  /** Step 5 for one normalised code point. */
  charClass(cp: number): CharClass {
    if (cp < 128) return this.asciiClass[cp] as CharClass;
    let c = this.cls.get(cp);
    if (c === undefined) {
      c = classify(cp);
      this.cls.set(cp, c);
    }
    return c;
  }
}

/** The whole normalised string, as `tokenizers`' `BertNormalizer.normalizeString` gives it (for checks). */
export function normalizeForBert(text: string, table: BertCharTable): string {
  let out = '';
  for (const c of text) out += table.normalized(c.codePointAt(0)!);
  return out;
}

export function bertOptions(lowercase: boolean, stripAccents = lowercase): BertNormalizerOptions {
  return { lowercase, stripAccents, cleanText: true, handleChineseChars: true };
}
