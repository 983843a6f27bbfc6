// defines: parseJson — JSON.parse, and on failure the line and column of the first error.
//
// Node 20's JSON.parse reports a position for some errors and none for others
// ("Unexpected end of JSON input"), so on failure a small scanner written to the
// grammar of RFC 8259 (from memory) walks the text again to find where it goes wrong.
import { lineColumn } from './text-position.js';

export type JsonParseResult = { ok: true; value: unknown } | { ok: false; message: string; offset: number; line: number; column: number };

export function parseJson(text: string): JsonParseResult {
  try {
    return { ok: true, value: JSON.parse(text) };
  } catch (err) {
    const found = findJsonError(text) ?? { offset: text.length, message: (err as Error).message };
    const { line, column } = lineColumn(text, found.offset);
    return { ok: false, message: found.message, offset: found.offset, line, column };
  }
}

const MAX_DEPTH = 2000;

class JsonSyntaxError {
  constructor(
    readonly offset: number,
    readonly message: string,
  ) {}
}

/** The first syntax error in `text`, or null when it is valid JSON. */
export function findJsonError(text: string): { offset: number; message: string } | null {
  let i = 0;
  const fail = (message: string, at = i): never => {
    throw new JsonSyntaxError(at, message);
  };
  const describe = (at: number): string => (at >= text.length ? 'end of the text (is the file cut short?)' : `'${text[at]}'`);
  const skipSpace = (): void => {
    while (i < text.length) {
      const c = text.charCodeAt(i);
      if (c === 0x20 || c === 0x09 || c === 0x0a || c === 0x0d) i++;
      else break;
    }
  };
  const expectWord = (word: string): void => {
    if (text.startsWith(word, i)) i += word.length;
    else fail(`unexpected ${describe(i)}; expected a value`);
  };
  const string = (): void => {
    const open = i;
    i++; // opening quote
    for (;;) {
      if (i >= text.length) fail('the text ends inside a string that starts here (is the file cut short?)', open);
      const c = text.charCodeAt(i);
      if (c === 0x22) {
        i++;
        return;
      }
      if (c < 0x20) fail('raw control character in a string (a line break must be written \\n)');
      if (c === 0x5c) {
        const e = text[i + 1];
        if (e === 'u') {
          if (!/^[0-9a-fA-F]{4}$/.test(text.slice(i + 2, i + 6))) fail('bad \\u escape in a string');
          i += 6;
        } else if (e !== undefined && '"\\/bfnrt'.includes(e)) i += 2;
        else fail(`bad escape \\${e ?? ''} in a string`);
      } else i++;
    }
  };
  const number = (): void => {
    const m = /^-?(0|[1-9][0-9]*)(\.[0-9]+)?([eE][+-]?[0-9]+)?/.exec(text.slice(i, i + 400));
    if (!m || m[0] === '' || m[0] === '-') fail(`unexpected ${describe(i)}; expected a value`);
    i += m![0].length;
  };
  const value = (depth: number): void => {
    if (depth > MAX_DEPTH) fail(`nested more than ${MAX_DEPTH} levels deep`);
    skipSpace();
    const c = text[i];
    if (c === '{') {
      i++;
      skipSpace();
      if (text[i] === '}') {
        i++;
        return;
      }
      for (;;) {
        skipSpace();
        if (text[i] !== '"') fail(`unexpected ${describe(i)}; expected a property name in double quotes`);
        string();
        skipSpace();
        if (text[i] !== ':') fail(`unexpected ${describe(i)}; expected ':' after the property name`);
        i++;
        value(depth + 1);
        skipSpace();
        if (text[i] === ',') i++;
        else if (text[i] === '}') {
          i++;
          return;
        } else fail(`unexpected ${describe(i)}; expected ',' or '}' in an object`);
      }
    } else if (c === '[') {
      i++;
      skipSpace();
      if (text[i] === ']') {
        i++;
        return;
      }
      for (;;) {
        value(depth + 1);
        skipSpace();
        if (text[i] === ',') i++;
        else if (text[i] === ']') {
          i++;
          return;
        } else fail(`unexpected ${describe(i)}; expected ',' or ']' in an array`);
      }
    } else if (c === '"') string();
    else if (c === 't') expectWord('true');
    else if (c === 'f') expectWord('false');
    else if (c === 'n') expectWord('null');
    else number();
  };
  try {
    value(0);
    skipSpace();
    if (i < text.length) fail(`unexpected ${describe(i)} after the end of the JSON value`);
    return null;
  } catch (e) {
    if (e instanceof JsonSyntaxError) return { offset: e.offset, message: e.message };
    throw e;
  }
}
