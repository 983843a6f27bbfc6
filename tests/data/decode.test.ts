// Decoding data files. The reference for "is this valid UTF-8" is the WHATWG Encoding
// Standard decoder as built into Node (TextDecoder with fatal: true).
import { describe, expect, it } from 'vitest';
import { MAX_STRING_UNITS, decodeText, firstInvalidUtf8, utf16Units } from '../../src/data/decode.js';
import { mulberry32 } from '../../src/data/random.js';

const bytes = (...b: number[]): Uint8Array => new Uint8Array(b);
const fatal = new TextDecoder('utf-8', { fatal: true, ignoreBOM: true });
const decodes = (b: Uint8Array): boolean => {
  try {
    fatal.decode(b);
    return true;
  } catch {
    return false;
  }
};

describe('firstInvalidUtf8', () => {
  it.each([
    ['lone continuation byte', [0x61, 0x80], 1],
    ['overlong 2-byte form of NUL', [0xc0, 0x80], 0],
    ['truncated 3-byte sequence', [0x61, 0x62, 0xe2, 0x82], 2],
    ['UTF-16 surrogate encoded in UTF-8', [0xed, 0xa0, 0x80], 0],
    ['above U+10FFFF', [0xf4, 0x90, 0x80, 0x80], 0],
    ['byte F5 never appears', [0xf5], 0],
    ['Latin-1 é between ASCII', [0x43, 0x61, 0x66, 0xe9, 0x20], 3],
  ])('%s', (_name, b, at) => {
    expect(firstInvalidUtf8(bytes(...b))).toBe(at);
    expect(decodes(bytes(...b))).toBe(false);
  });

  it('accepts what the WHATWG decoder accepts: 1- to 4-byte forms', () => {
    const text = 'a é € 𝄞 中文 🙂';
    const b = new TextEncoder().encode(text);
    expect(firstInvalidUtf8(b)).toBe(b.length);
  });

  it('agrees with the WHATWG decoder on random byte strings', () => {
    const random = mulberry32(7);
    for (let trial = 0; trial < 3000; trial++) {
      // bias toward the interesting ranges: ASCII, continuation bytes, lead bytes
      const b = new Uint8Array(1 + Math.floor(random() * 8));
      for (let i = 0; i < b.length; i++) {
        const r = random();
        b[i] = r < 0.3 ? Math.floor(random() * 0x80) : r < 0.6 ? 0x80 + Math.floor(random() * 0x40) : 0xc0 + Math.floor(random() * 0x40);
      }
      const bad = firstInvalidUtf8(b);
      expect(bad === b.length, `bytes ${[...b].map((x) => x.toString(16))}`).toBe(decodes(b));
      if (bad < b.length) expect(decodes(b.subarray(0, bad))).toBe(true);
    }
  });
});

describe('utf16Units', () => {
  it('counts the UTF-16 code units the WHATWG decoder gives, without decoding', () => {
    const random = mulberry32(11);
    // code points from every UTF-8 length: ASCII, 2-byte, 3-byte (surrogates skipped), 4-byte
    const pick = (): number => {
      const r = random();
      if (r < 0.4) return Math.floor(random() * 0x80);
      if (r < 0.6) return 0x80 + Math.floor(random() * 0x780);
      if (r < 0.8) return 0xe000 + Math.floor(random() * 0x2000);
      return 0x10000 + Math.floor(random() * 0x100000);
    };
    for (let trial = 0; trial < 500; trial++) {
      const text = String.fromCodePoint(...Array.from({ length: Math.floor(random() * 40) }, pick));
      const b = new TextEncoder().encode(text);
      expect(utf16Units(b), JSON.stringify(text)).toBe(fatal.decode(b).length);
    }
  });
});

describe('decodeText', () => {
  it('says plainly that a valid UTF-8 file is too large for one string, with its length, not that it is invalid', () => {
    // 600 MB of "a\n": more characters than a V8 string holds (2^29 − 24, from memory)
    const big = new Uint8Array(600_000_000).fill(0x61);
    for (let i = 99; i < big.length; i += 100) big[i] = 0x0a;
    expect(big.length).toBeGreaterThan(MAX_STRING_UNITS);
    const r = decodeText(big);
    expect(r.ok).toBe(false);
    expect(r.ok ? '' : r.message).toBe(
      'the file is 600 MB of valid UTF-8, 600 million characters: more text than one JavaScript string can hold ' +
        '(about 537 million); split it into files of a few hundred MB',
    );
    // the same bytes as 200 million three-byte characters: a string holds them, but Node 20's
    // decoder takes at most 2^29 − 24 bytes in one call (ERR_STRING_TOO_LONG, measured); the
    // file is refused for that, saying so — never called invalid. (A runtime whose decoder
    // takes it reads it whole.)
    for (let i = 0; i < big.length; i += 3) [big[i], big[i + 1], big[i + 2]] = [0xe6, 0x97, 0xa5]; // 日
    const wide = decodeText(big);
    if (wide.ok) expect(wide.text.length).toBe(200_000_000);
    else
      expect(wide.message).toMatch(
        /^the file is 600 MB of valid UTF-8, more than this runtime decodes into one string \(about 537 MB at once\)/,
      );
  }, 60_000);

  it('strips a UTF-8 byte-order mark', () => {
    const r = decodeText(bytes(0xef, 0xbb, 0xbf, 0x68, 0x69));
    expect(r).toEqual({ ok: true, text: 'hi', encoding: 'utf-8', hadByteOrderMark: true });
  });

  it('keeps a second mark, which is content', () => {
    const r = decodeText(bytes(0xef, 0xbb, 0xbf, 0xef, 0xbb, 0xbf, 0x68));
    expect(r.ok && r.text).toBe('\ufeffh');
  });

  it('decodes UTF-16 LE and BE after their marks', () => {
    expect(decodeText(bytes(0xff, 0xfe, 0x68, 0x00, 0xe9, 0x00))).toMatchObject({ ok: true, text: 'hé', encoding: 'utf-16le' });
    expect(decodeText(bytes(0xfe, 0xff, 0x00, 0x68, 0xd8, 0x3d, 0xde, 0x42))).toMatchObject({
      ok: true,
      text: 'h🙂',
      encoding: 'utf-16be',
    });
  });

  it('reports invalid UTF-8 with its byte offset and line', () => {
    const b = new Uint8Array([...new TextEncoder().encode('ab\ncd\n'), 0xff, 0x41]);
    const r = decodeText(b);
    expect(r).toMatchObject({ ok: false, byteOffset: 6, line: 3 });
    expect(!r.ok && r.message).toContain('byte offset 6');
  });

  it('reports a NUL with line, column and byte offset', () => {
    const b = new Uint8Array([...new TextEncoder().encode('é\nab'), 0x00]);
    const r = decodeText(b);
    expect(r).toMatchObject({ ok: false, byteOffset: 5, line: 2 });
    expect(!r.ok && r.message).toContain('line 2, column 3');
  });
});
