// defines: WordPieceTokenizer, Encoding, FlatEncoding, WordPieceOptions, VocabularyError —
// BERT WordPiece tokenisation with the [start, end) of every token in the ORIGINAL string
// (UTF-16 code units, as JavaScript string indices count), before lowercasing and accent
// stripping.
//
// Why our own implementation rather than `@huggingface/tokenizers` at run time: that
// library (0.2.0) returns ids and tokens but no character offsets, and offsets cannot be
// recovered afterwards without running the normaliser again with an alignment map, which
// is the whole job. Doing it in one pass over the text is also several times faster. The
// library stays as an independent check of our ids in tests/text/.
//
// The algorithm, one pass over the original code points:
//   1. each code point becomes its normalised text (normalize.ts: clean, isolate CJK, strip
//      accents, lowercase), and every normalised code unit remembers the original range
//      [i, i + 1 or 2) of the code point it came from;
//   2. the pre-tokeniser splits words on whitespace and isolates punctuation;
//   3. each word goes through greedy longest-match-first WordPiece (Schuster & Nakajima
//      2012; BERT's `WordpieceTokenizer`): the longest vocabulary entry that prefixes the
//      rest of the word, continuation pieces spelled with "##"; a word with more than
//      `maxCharsPerWord` code points, or one that cannot be covered, is a single [UNK];
//   4. a token's offsets are the original start of its first normalised code unit and the
//      original end of its last one — the same rule `tokenizers` uses, so the offsets of
//      the two libraries agree (tests/text/wordpiece-reference.test.ts).
import { ALONE, BertCharTable, SPACE, bertOptions, type BertNormalizerOptions } from './normalize.js';

/** The bare encoding of one text (no special tokens), as DEVELOPERS.md specifies. */
export interface Encoding {
  ids: number[];
  tokens: string[];
  /** [start, end) in UTF-16 code units of the original text */
  offsets: [number, number][];
}

/** The same, in typed arrays: what feature building reads. */
export interface FlatEncoding {
  ids: Int32Array;
  starts: Int32Array;
  ends: Int32Array;
}

export interface WordPieceOptions {
  /** lowercase before lookup (uncased models); default: decided from the vocabulary, see fromVocabTxt */
  lowercase?: boolean;
  /** strip accents; default: the value of `lowercase`, as BERT's uncased models do */
  stripAccents?: boolean;
  /** a word longer than this (in code points) becomes [UNK]; default 100 (BERT's value) */
  maxCharsPerWord?: number;
  /** the mark of a word-continuing piece; default "##" */
  continuingPrefix?: string;
  unkToken?: string;
}

/** A vocabulary file that cannot be used; the message names the file and what is wrong. */
export class VocabularyError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'VocabularyError';
  }
}

const SPECIAL = { pad: '[PAD]', cls: '[CLS]', sep: '[SEP]', mask: '[MASK]' } as const;

export class WordPieceTokenizer {
  readonly vocabSize: number;
  readonly padId: number;
  readonly unkId: number;
  readonly clsId: number;
  readonly sepId: number;
  readonly maskId: number;
  readonly lowercase: boolean;
  readonly stripAccents: boolean;
  readonly maxCharsPerWord: number;
  readonly continuingPrefix: string;

  private readonly vocab: readonly string[];
  /** every token → id (the lookup for a word's first piece) */
  private readonly initial = new Map<string, number>();
  /** continuation tokens without their prefix → id */
  private readonly continuing = new Map<string, number>();
  /** longest key in each map, in code units: no piece can be longer */
  private readonly maxInitial: number;
  private readonly maxContinuing: number;
  private readonly table: BertCharTable;

  // Scratch state of one encode() call, kept on the instance to avoid allocation.
  private outIds = new Int32Array(1024);
  private outStarts = new Int32Array(1024);
  private outEnds = new Int32Array(1024);
  private count = 0;
  /** original [start, end) of each code unit of the current word */
  private wStarts = new Int32Array(256);
  private wEnds = new Int32Array(256);
  private wLen = 0;
  /** while true, the word is text.slice(wFirst, wFirst + wLen), ASCII only, and wStr is unused */
  private wSimple = true;
  private wFirst = 0;
  private wStr = '';
  /** the text being encoded */
  private text = '';

  /**
   * @param vocab tokens in id order
   * @param source the file name, for error messages
   */
  constructor(vocab: readonly string[], options: WordPieceOptions = {}, source = 'vocabulary') {
    this.vocab = vocab;
    this.vocabSize = vocab.length;
    this.continuingPrefix = options.continuingPrefix ?? '##';
    this.maxCharsPerWord = options.maxCharsPerWord ?? 100;
    this.lowercase = options.lowercase ?? looksUncased(vocab);
    this.stripAccents = options.stripAccents ?? this.lowercase;
    let maxInitial = 0;
    let maxContinuing = 0;
    const p = this.continuingPrefix;
    // A token listed twice keeps its last id, as BERT's `load_vocab` and `tokenizers` do.
    for (let id = 0; id < vocab.length; id++) {
      const t = vocab[id]!;
      this.initial.set(t, id);
      maxInitial = Math.max(maxInitial, t.length);
      if (p.length > 0 && t.startsWith(p) && t.length > p.length) {
        this.continuing.set(t.slice(p.length), id);
        maxContinuing = Math.max(maxContinuing, t.length - p.length);
      }
    }
    this.maxInitial = maxInitial;
    this.maxContinuing = maxContinuing;
    const need = (token: string): number => {
      const id = this.initial.get(token);
      if (id === undefined) throw new VocabularyError(`${source}: the vocabulary has no "${token}" token`);
      return id;
    };
    this.unkId = need(options.unkToken ?? '[UNK]');
    this.padId = need(SPECIAL.pad);
    this.clsId = need(SPECIAL.cls);
    this.sepId = need(SPECIAL.sep);
    this.maskId = need(SPECIAL.mask);
    const normalizer: BertNormalizerOptions = bertOptions(this.lowercase, this.stripAccents);
    this.table = new BertCharTable(normalizer);
  }

  /**
   * From the text of a `vocab.txt` (one token per line, the line number is the id). When
   * `options.lowercase` is not given, the vocabulary is taken as uncased unless it holds
   * a token with an uppercase letter outside the bracketed special tokens.
   */
  static fromVocabTxt(text: string, options: WordPieceOptions = {}, source = 'vocab.txt'): WordPieceTokenizer {
    const lines = text.split('\n');
    if (lines[lines.length - 1] === '') lines.pop();
    // `tokenizers` reads each line with trailing whitespace trimmed (so "\r\n" files work)
    const vocab = lines.map((l) => l.replace(/\s+$/u, ''));
    if (vocab.length === 0) throw new VocabularyError(`${source}: the file is empty`);
    return new WordPieceTokenizer(vocab, options, source);
  }

  /**
   * From the text of a `tokenizer.json` whose model is WordPiece, normaliser BertNormalizer
   * (or none) and pre-tokeniser BertPreTokenizer. Special tokens written in a text are not
   * matched as special tokens: user text is always plain text.
   */
  static fromTokenizerJson(text: string, source = 'tokenizer.json'): WordPieceTokenizer {
    let json: unknown;
    try {
      json = JSON.parse(text);
    } catch (err) {
      throw new VocabularyError(`${source}: not valid JSON (${(err as Error).message})`);
    }
    const root = asObject(json, source, '(top level)');
    const model = asObject(root.model, source, 'model');
    if (model.type !== 'WordPiece') {
      throw new VocabularyError(`${source}: field "model.type" is ${JSON.stringify(model.type)}; only "WordPiece" is supported`);
    }
    const vocabObj = asObject(model.vocab, source, 'model.vocab');
    const entries = Object.entries(vocabObj);
    const vocab: string[] = new Array<string>(entries.length);
    for (const [token, id] of entries) {
      if (!Number.isInteger(id) || (id as number) < 0 || (id as number) >= entries.length) {
        throw new VocabularyError(
          `${source}: field "model.vocab" gives "${token}" the id ${JSON.stringify(id)}; ids must be 0..${entries.length - 1}`,
        );
      }
      if (vocab[id as number] !== undefined) {
        throw new VocabularyError(`${source}: field "model.vocab" gives the id ${id} to both "${vocab[id as number]}" and "${token}"`);
      }
      vocab[id as number] = token;
    }
    const options: WordPieceOptions = {
      unkToken: optionalString(model.unk_token, source, 'model.unk_token'),
      continuingPrefix: optionalString(model.continuing_subword_prefix, source, 'model.continuing_subword_prefix'),
      maxCharsPerWord: optionalNumber(model.max_input_chars_per_word, source, 'model.max_input_chars_per_word'),
    };
    const norm = root.normalizer;
    if (norm === null || norm === undefined) {
      options.lowercase = false;
      options.stripAccents = false;
    } else {
      const n = asObject(norm, source, 'normalizer');
      if (n.type !== 'BertNormalizer') {
        throw new VocabularyError(`${source}: field "normalizer.type" is ${JSON.stringify(n.type)}; only "BertNormalizer" is supported`);
      }
      if (n.clean_text === false || n.handle_chinese_chars === false) {
        throw new VocabularyError(`${source}: field "normalizer": clean_text and handle_chinese_chars must be on`);
      }
      options.lowercase = n.lowercase !== false;
      // null means "follow lowercase", as in `tokenizers`
      options.stripAccents = n.strip_accents === null || n.strip_accents === undefined ? options.lowercase : n.strip_accents === true;
    }
    const pre = root.pre_tokenizer;
    if (pre !== null && pre !== undefined && asObject(pre, source, 'pre_tokenizer').type !== 'BertPreTokenizer') {
      throw new VocabularyError(
        `${source}: field "pre_tokenizer.type" is ${JSON.stringify((pre as { type?: unknown }).type)}; only "BertPreTokenizer" is supported`,
      );
    }
    return new WordPieceTokenizer(vocab, options, source);
  }

  /** From a vocabulary file's text, telling `tokenizer.json` (a JSON object) from `vocab.txt`. */
  static fromFileText(text: string, source: string, options: WordPieceOptions = {}): WordPieceTokenizer {
    return /^\s*\{/.test(text)
      ? WordPieceTokenizer.fromTokenizerJson(text, source)
      : WordPieceTokenizer.fromVocabTxt(text, options, source);
  }

  idToToken(id: number): string {
    const t = this.vocab[id];
    if (t === undefined) throw new RangeError(`token id ${id} is outside the vocabulary (size ${this.vocabSize})`);
    return t;
  }

  tokenToId(token: string): number | undefined {
    return this.initial.get(token);
  }

  /** The vocabulary as `vocab.txt` text (for exports). */
  toVocabTxt(): string {
    return `${this.vocab.join('\n')}\n`;
  }

  encode(text: string): Encoding {
    const n = this.run(text);
    const ids = new Array<number>(n);
    const tokens = new Array<string>(n);
    const offsets = new Array<[number, number]>(n);
    for (let k = 0; k < n; k++) {
      const id = this.outIds[k]!;
      ids[k] = id;
      tokens[k] = this.vocab[id]!;
      offsets[k] = [this.outStarts[k]!, this.outEnds[k]!];
    }
    return { ids, tokens, offsets };
  }

  encodeFlat(text: string): FlatEncoding {
    const n = this.run(text);
    return { ids: this.outIds.slice(0, n), starts: this.outStarts.slice(0, n), ends: this.outEnds.slice(0, n) };
  }

  /** Steps 1–2 over the text; fills the out* scratch arrays and returns the token count. */
  private run(text: string): number {
    const table = this.table;
    const asciiOut = table.asciiOut;
    const asciiClass = table.asciiClass;
    const n = text.length;
    this.text = text;
    this.count = 0;
    this.wLen = 0;
    this.wSimple = true;
    for (let i = 0; i < n;) {
      const c = text.charCodeAt(i);
      if (c < 128) {
        const s = asciiOut[c]!;
        if (s.length !== 0) {
          const k = asciiClass[s.charCodeAt(0)];
          if (k === SPACE) this.flush(text);
          else if (k === ALONE) {
            this.flush(text);
            this.pushSimple(i);
            this.flush(text);
          } else this.pushSimple(i);
        }
        i++;
        continue;
      }
      const cp = text.codePointAt(i)!;
      const len = cp > 0xffff ? 2 : 1;
      const s = table.normalized(cp);
      for (let j = 0; j < s.length;) {
        const c2 = s.codePointAt(j)!;
        const l2 = c2 > 0xffff ? 2 : 1;
        const k = table.charClass(c2);
        if (k === SPACE) this.flush(text);
        else if (k === ALONE) {
          this.flush(text);
          this.pushUnits(s, j, l2, i, i + len);
          this.flush(text);
        } else this.pushUnits(s, j, l2, i, i + len);
        j += l2;
      }
      i += len;
    }
    this.flush(text);
    this.text = '';
    return this.count;
  }

  /** Appends the ASCII character at text[i] to the current word. */
  private pushSimple(i: number): void {
    if (this.wLen === 0) {
      this.wFirst = i;
      this.wSimple = true;
    } else if (this.wSimple && i !== this.wFirst + this.wLen) {
      this.leaveSimple(this.text);
    }
    if (!this.wSimple) this.wStr += this.table.asciiOut[this.text.charCodeAt(i)];
    this.pushOrigin(i, i + 1);
  }

  /** Appends code units s[j, j + len) of a normalised code point from original [start, end). */
  private pushUnits(s: string, j: number, len: number, start: number, end: number): void {
    if (this.wSimple) {
      if (this.wLen === 0) this.wStr = '';
      else this.leaveSimple(this.text);
      this.wSimple = false;
    }
    this.wStr += len === s.length ? s : s.slice(j, j + len);
    for (let u = 0; u < len; u++) this.pushOrigin(start, end);
  }

  /** Turns a simple word into an explicit string so that other characters can follow. */
  private leaveSimple(text: string): void {
    const raw = text.slice(this.wFirst, this.wFirst + this.wLen);
    this.wStr = this.lowercase ? raw.toLowerCase() : raw;
    this.wSimple = false;
  }

  private pushOrigin(start: number, end: number): void {
    if (this.wLen === this.wStarts.length) {
      this.wStarts = grow(this.wStarts);
      this.wEnds = grow(this.wEnds);
    }
    this.wStarts[this.wLen] = start;
    this.wEnds[this.wLen] = end;
    this.wLen++;
  }

  /** Step 3 on the current word, then starts a new one. */
  private flush(text: string): void {
    const L = this.wLen;
    if (L === 0) return;
    let w: string;
    if (this.wSimple) {
      const raw = text.slice(this.wFirst, this.wFirst + L);
      // ASCII lowercasing has no context rules, so the whole word can go at once
      w = this.lowercase ? raw.toLowerCase() : raw;
    } else w = this.wStr;
    this.wLen = 0;
    this.wSimple = true;
    const ws = this.wStarts;
    const we = this.wEnds;

    if (L > this.maxCharsPerWord && countCodePoints(w) > this.maxCharsPerWord) {
      this.emit(this.unkId, ws[0]!, we[L - 1]!);
      return;
    }
    const whole = this.initial.get(w);
    if (whole !== undefined) {
      this.emit(whole, ws[0]!, we[L - 1]!);
      return;
    }
    const firstToken = this.count;
    let start = 0;
    while (start < L) {
      const map = start === 0 ? this.initial : this.continuing;
      let end = Math.min(L, start + (start === 0 ? this.maxInitial : this.maxContinuing));
      if (end < L && end > start + 1 && isLowSurrogate(w.charCodeAt(end)) && isHighSurrogate(w.charCodeAt(end - 1))) end--;
      let id = -1;
      while (end > start) {
        const got = map.get(w.slice(start, end));
        if (got !== undefined) {
          id = got;
          break;
        }
        end -= end - 2 >= start && isLowSurrogate(w.charCodeAt(end - 1)) && isHighSurrogate(w.charCodeAt(end - 2)) ? 2 : 1;
      }
      if (id < 0) {
        // one piece is missing: the whole word is unknown
        this.count = firstToken;
        this.emit(this.unkId, ws[0]!, we[L - 1]!);
        return;
      }
      this.emit(id, ws[start]!, we[end - 1]!);
      start = end;
    }
  }

  private emit(id: number, start: number, end: number): void {
    const k = this.count;
    if (k === this.outIds.length) {
      this.outIds = grow(this.outIds);
      this.outStarts = grow(this.outStarts);
      this.outEnds = grow(this.outEnds);
    }
    this.outIds[k] = id;
    this.outStarts[k] = start;
    this.outEnds[k] = end;
    this.count = k + 1;
  }
}

function grow(a: Int32Array): Int32Array<ArrayBuffer> {
  const b = new Int32Array(a.length * 2);
  b.set(a);
  return b;
}

function isHighSurrogate(u: number): boolean {
  return u >= 0xd800 && u <= 0xdbff;
}

function isLowSurrogate(u: number): boolean {
  return u >= 0xdc00 && u <= 0xdfff;
}

function countCodePoints(s: string): number {
  let n = 0;
  for (let i = 0; i < s.length; i++) if (!isLowSurrogate(s.charCodeAt(i)) || i === 0 || !isHighSurrogate(s.charCodeAt(i - 1))) n++;
  return n;
}

/** An uncased vocabulary has no uppercase letters outside bracketed special tokens like [CLS]. */
function looksUncased(vocab: readonly string[]): boolean {
  for (const t of vocab) {
    if (t.startsWith('[') && t.endsWith(']')) continue;
    if (t !== t.toLowerCase()) return false;
  }
  return true;
}

function asObject(v: unknown, source: string, field: string): Record<string, unknown> {
  if (typeof v !== 'object' || v === null || Array.isArray(v)) {
    throw new VocabularyError(`${source}: field "${field}" must be an object`);
  }
  return v as Record<string, unknown>;
}

function optionalString(v: unknown, source: string, field: string): string | undefined {
  if (v === undefined || v === null) return undefined;
  if (typeof v !== 'string') throw new VocabularyError(`${source}: field "${field}" must be a string`);
  return v;
}

function optionalNumber(v: unknown, source: string, field: string): number | undefined {
  if (v === undefined || v === null) return undefined;
  if (typeof v !== 'number' || !Number.isInteger(v) || v < 1) {
    throw new VocabularyError(`${source}: field "${field}" must be a positive whole number`);
  }
  return v;
}
