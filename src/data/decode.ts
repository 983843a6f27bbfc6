// defines: decodeText — bytes of a data file to a string, with located errors.
//
// 1. A byte-order mark is stripped: UTF-8 (EF BB BF), and UTF-16 LE/BE (FF FE / FE FF),
//    which are then decoded as UTF-16. Without a mark the file must be UTF-8.
// 2. Invalid UTF-8 is an error at the byte offset of the first bad sequence (and its line).
//    Valid text longer than one JavaScript string can hold is an error saying so, found
//    by counting before decoding.
// 3. A NUL character is an error with its line and column: no text format Spanwright
//    reads allows one, and a run of them usually means UTF-16 saved without a mark.
// Line endings are left as they are here; each format decides (see normalise.ts).
import { lineColumn } from './text-position.js';

export type Encoding = 'utf-8' | 'utf-16le' | 'utf-16be';

export type DecodeResult =
  | { ok: true; text: string; encoding: Encoding; hadByteOrderMark: boolean }
  | { ok: false; message: string; byteOffset: number; line: number };

export function decodeText(bytes: Uint8Array): DecodeResult {
  let encoding: Encoding = 'utf-8';
  let skip = 0;
  if (bytes[0] === 0xef && bytes[1] === 0xbb && bytes[2] === 0xbf) skip = 3;
  else if (bytes[0] === 0xff && bytes[1] === 0xfe) [encoding, skip] = ['utf-16le', 2];
  else if (bytes[0] === 0xfe && bytes[1] === 0xff) [encoding, skip] = ['utf-16be', 2];
  const body = bytes.subarray(skip);

  // a text longer than one string can hold is refused by counting, before the decoder is
  // asked to build it: the message can give the count, and does not rest on how the
  // decoder happens to fail
  const units = encoding !== 'utf-8' ? Math.floor(body.length / 2) : body.length > MAX_STRING_UNITS ? utf16Units(body) : body.length;
  if (units > MAX_STRING_UNITS) {
    const invalid = encoding === 'utf-8' ? firstInvalidUtf8(body) : body.length;
    if (invalid === body.length) return tooLarge(bytes.length, encoding, units);
  }

  let text: string;
  try {
    // ignoreBOM: the mark is already skipped above; a second one would be content
    text = new TextDecoder(encoding, { fatal: true, ignoreBOM: true }).decode(body);
  } catch {
    if (encoding !== 'utf-8') {
      return {
        ok: false,
        message: `not valid ${encoding.toUpperCase()} text (it starts with a ${encoding.toUpperCase()} byte-order mark)`,
        byteOffset: skip,
        line: 1,
      };
    }
    const invalid = firstInvalidUtf8(body);
    // every byte is valid UTF-8 and the text fits a string (the check above), so the
    // decoder refused the input's size: Node's refuses more than MAX_STRING_UNITS bytes in
    // one call (ERR_STRING_TOO_LONG, measured with Node 20) even when, as with a 1 GB file
    // of three-byte characters, the text would fit. Decoding in pieces would read such a
    // file, but `check` of one then peaked at 3.3× its size in memory (measured), so it is
    // refused, saying why.
    if (invalid === body.length) return tooLarge(bytes.length, encoding, null);
    const bad = skip + invalid;
    return {
      ok: false,
      message: `invalid UTF-8 at byte offset ${bad} (line ${lineOfByte(bytes, bad)}); save the file as UTF-8`,
      byteOffset: bad,
      line: lineOfByte(bytes, bad),
    };
  }

  const nul = text.indexOf('\u0000');
  if (nul >= 0) {
    const { line, column } = lineColumn(text, nul);
    const byteOffset = encoding === 'utf-8' ? skip + bytes.subarray(skip).indexOf(0) : skip + 2 * nul;
    const hint =
      encoding === 'utf-8' && looksLikeUtf16(body)
        ? '; the file looks like UTF-16 saved without a byte-order mark: save it as UTF-8'
        : '; text data files must not contain NUL';
    return {
      ok: false,
      message: `NUL character at line ${line}, column ${column} (byte offset ${byteOffset})${hint}`,
      byteOffset,
      line,
    };
  }
  return { ok: true, text, encoding, hadByteOrderMark: skip > 0 };
}

/**
 * The longest string V8 builds on 64-bit machines: 2^29 − 24 UTF-16 code units
 * (String::kMaxLength in v8.h, from memory) — Node and Chromium alike.
 */
export const MAX_STRING_UNITS = 2 ** 29 - 24;

/**
 * UTF-16 code units that well-formed UTF-8 decodes to, without decoding: one per sequence
 * (every byte that is not a continuation byte 10xxxxxx), two for a 4-byte sequence (a
 * surrogate pair) — Unicode Standard ch. 3, table 3-6 (from memory).
 */
export function utf16Units(bytes: Uint8Array): number {
  let units = 0;
  for (let i = 0; i < bytes.length; i++) {
    const b = bytes[i]!;
    if ((b & 0xc0) !== 0x80) units += b >= 0xf0 ? 2 : 1;
  }
  return units;
}

/**
 * The error for a file too large to decode: with `units`, the text is longer than any
 * string; without, the decoder refused the input's size (see decodeText).
 */
function tooLarge(fileBytes: number, encoding: Encoding, units: number | null): DecodeResult {
  const size = `the file is ${(fileBytes / 1e6).toFixed(0)} MB of ${encoding === 'utf-8' ? 'valid UTF-8' : `${encoding.toUpperCase()} text`}`;
  const limit = (MAX_STRING_UNITS / 1e6).toFixed(0);
  const why =
    units === null
      ? `more than this runtime decodes into one string (about ${limit} MB at once)`
      : `${(units / 1e6).toFixed(0)} million characters: more text than one JavaScript string can hold (about ${limit} million)`;
  return { ok: false, message: `${size}, ${why}; split it into files of a few hundred MB`, byteOffset: 0, line: 1 };
}

/**
 * Offset of the first byte that starts an ill-formed UTF-8 sequence, by the table of
 * well-formed sequences in the Unicode Standard, ch. 3, table 3-7 (from memory).
 * Returns `bytes.length` when every sequence is well formed.
 */
export function firstInvalidUtf8(bytes: Uint8Array): number {
  const n = bytes.length;
  const cont = (i: number, lo = 0x80, hi = 0xbf): boolean => i < n && bytes[i]! >= lo && bytes[i]! <= hi;
  let i = 0;
  while (i < n) {
    const b = bytes[i]!;
    if (b <= 0x7f) i += 1;
    else if (b >= 0xc2 && b <= 0xdf && cont(i + 1)) i += 2;
    else if (b === 0xe0 && cont(i + 1, 0xa0) && cont(i + 2)) i += 3;
    else if (((b >= 0xe1 && b <= 0xec) || b === 0xee || b === 0xef) && cont(i + 1) && cont(i + 2)) i += 3;
    else if (b === 0xed && cont(i + 1, 0x80, 0x9f) && cont(i + 2)) i += 3;
    else if (b === 0xf0 && cont(i + 1, 0x90) && cont(i + 2) && cont(i + 3)) i += 4;
    else if (b >= 0xf1 && b <= 0xf3 && cont(i + 1) && cont(i + 2) && cont(i + 3)) i += 4;
    else if (b === 0xf4 && cont(i + 1, 0x80, 0x8f) && cont(i + 2) && cont(i + 3)) i += 4;
    else return i;
  }
  return n;
}

function lineOfByte(bytes: Uint8Array, offset: number): number {
  let line = 1;
  for (let i = 0; i < offset && i < bytes.length; i++) if (bytes[i] === 0x0a) line++;
  return line;
}

/** UTF-16 text of mostly ASCII has a zero in every other byte. */
function looksLikeUtf16(bytes: Uint8Array): boolean {
  const n = Math.min(bytes.length, 512);
  if (n < 4) return false;
  let zeros = 0;
  for (let i = 0; i < n; i++) if (bytes[i] === 0) zeros++;
  return zeros >= n / 4;
}
