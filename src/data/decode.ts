// defines: decodeText — bytes of a data file to a string, with located errors.
//
// 1. A byte-order mark is stripped: UTF-8 (EF BB BF), and UTF-16 LE/BE (FF FE / FE FF),
//    which are then decoded as UTF-16. Without a mark the file must be UTF-8.
// 2. Invalid UTF-8 is an error at the byte offset of the first bad sequence (and its line).
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
    if (invalid === body.length) {
      // every byte is valid UTF-8, so the decoder failed for the text's length: one
      // JavaScript string holds at most 2^29 − 24 UTF-16 code units in V8 (from memory)
      return {
        ok: false,
        message: `the file is ${(bytes.length / 1e6).toFixed(0)} MB of valid UTF-8, more text than one JavaScript string can hold (about 536 million characters); split it into files of a few hundred MB`,
        byteOffset: 0,
        line: 1,
      };
    }
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
