// defines: lineColumn — turns an offset into a 1-based line and column for messages.

/** Where an offset falls, as an editor shows it: lines and columns count from 1. */
export interface LineColumn {
  line: number;
  /** counted in Unicode code points, as editors count, not UTF-16 units */
  column: number;
}

/**
 * The line and column of `offset` (a UTF-16 index into `text`). A line ends at
 * LF, CRLF or a lone CR, so a file written on any system reports the same numbers.
 */
export function lineColumn(text: string, offset: number): LineColumn {
  const end = Math.max(0, Math.min(offset, text.length));
  let line = 1;
  let lineStart = 0;
  for (let i = 0; i < end; i++) {
    const c = text.charCodeAt(i);
    if (c === 0x0a || (c === 0x0d && text.charCodeAt(i + 1) !== 0x0a)) {
      line++;
      lineStart = i + 1;
    }
  }
  let column = 1;
  for (let i = lineStart; i < end; i++) {
    const c = text.charCodeAt(i);
    // the low half of a surrogate pair belongs to the code point before it
    if (c >= 0xdc00 && c <= 0xdfff && i > lineStart) {
      const prev = text.charCodeAt(i - 1);
      if (prev >= 0xd800 && prev <= 0xdbff) continue;
    }
    column++;
  }
  return { line, column };
}
