import { describe, expect, it } from 'vitest';
import { lineColumn } from '../../src/data/text-position.js';

describe('lineColumn', () => {
  it('counts LF, CRLF and lone CR as one line break each', () => {
    const text = 'a\nb\r\nc\rd';
    expect(lineColumn(text, text.indexOf('b'))).toEqual({ line: 2, column: 1 });
    expect(lineColumn(text, text.indexOf('c'))).toEqual({ line: 3, column: 1 });
    expect(lineColumn(text, text.indexOf('d'))).toEqual({ line: 4, column: 1 });
  });

  it('counts columns in code points, so an emoji is one column', () => {
    expect(lineColumn('x\n🙂🙂z', 6)).toEqual({ line: 2, column: 3 });
  });

  it('clamps offsets outside the text', () => {
    expect(lineColumn('ab', 99)).toEqual({ line: 1, column: 3 });
    expect(lineColumn('ab', -4)).toEqual({ line: 1, column: 1 });
  });
});
