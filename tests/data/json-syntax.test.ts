// Locating JSON syntax errors. Reference: V8's JSON.parse (RFC 8259 grammar) — whatever it
// accepts, findJsonError must accept, and whatever it rejects, findJsonError must reject.
import { describe, expect, it } from 'vitest';
import { findJsonError, parseJson } from '../../src/data/json-syntax.js';
import { mulberry32 } from '../../src/data/random.js';

const accepts = (t: string): boolean => {
  try {
    JSON.parse(t);
    return true;
  } catch {
    return false;
  }
};

describe('parseJson', () => {
  it('returns the value of valid JSON', () => {
    expect(parseJson('{"a": [1, 2.5e3, "x\\u00e9", true, null]}')).toEqual({ ok: true, value: { a: [1, 2500, 'xé', true, null] } });
  });

  it.each([
    ['trailing comma', '{\n  "a": 1,\n}', 3, 1],
    ['cut short inside a string', '{\n  "a": "abc', 2, 8],
    ['cut short after a colon', '{"a":', 1, 6],
    ['unquoted key', '{\n\n   key: 1}', 3, 4],
    ['raw line break inside a string', '["a\nb"]', 1, 4],
    ['garbage after the value', '{}\r\n{}', 2, 1],
    ['column counts code points, not UTF-16 units', '["🙂🙂", x]', 1, 8],
  ])('%s: line and column', (_name, text, line, column) => {
    const r = parseJson(text);
    expect(r.ok).toBe(false);
    expect(r).toMatchObject({ line, column });
  });
});

describe('error messages', () => {
  it('say plainly that a file ends too early', () => {
    const r = parseJson('{"a":');
    expect(r.ok).toBe(false);
    expect(r.ok ? '' : r.message).toBe('unexpected end of the text (is the file cut short?); expected a value');
  });
});

describe('findJsonError agrees with JSON.parse', () => {
  const samples = [
    '{"data": [{"title": "t", "paragraphs": [{"context": "c", "qas": []}]}]}',
    '[1, -0, 0.5, 1e-7, -12E+3, "\\"\\\\\\/\\b\\f\\n\\r\\t\\u0041", {}, [], true, false, null]',
    '  "just a string"  ',
    '01',
    '1.',
    '.5',
    '-',
    '+1',
    '"\\x"',
    '"\\u12"',
    '[1,]',
    '{"a" 1}',
    'tru',
    'nul',
    '[',
    '',
    ' ',
    '{"a":1}}',
    '"\t"',
  ];
  it.each(samples)('%j', (text) => {
    expect(findJsonError(text) === null).toBe(accepts(text));
  });

  it('on random mutations of a valid document', () => {
    const base = samples[0]!;
    const alphabet = '{}[],:"\\ 0123456789-+.eEtrufalsn\n';
    const random = mulberry32(11);
    for (let trial = 0; trial < 2000; trial++) {
      let text = base;
      const edits = 1 + Math.floor(random() * 3);
      for (let e = 0; e < edits; e++) {
        const at = Math.floor(random() * (text.length + 1));
        const op = random();
        const ch = alphabet[Math.floor(random() * alphabet.length)]!;
        text = op < 0.4 ? text.slice(0, at) + text.slice(at + 1) : op < 0.8 ? text.slice(0, at) + ch + text.slice(at) : text.slice(0, at);
      }
      expect(findJsonError(text) === null, text).toBe(accepts(text));
    }
  });
});
