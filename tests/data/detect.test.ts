import { describe, expect, it } from 'vitest';
import { ACCEPTED_FORMATS, detectFormat, formatFromName } from '../../src/data/formats/detect.js';
import { parseDataset } from '../../src/data/load.js';

describe('format detection', () => {
  it('by extension, case-insensitively', () => {
    expect(formatFromName('a/b/train.JSON')).toBe('squad');
    expect(formatFromName('q.jsonl')).toBe('jsonl');
    expect(formatFromName('q.ndjson')).toBe('jsonl');
    expect(formatFromName('sheet.csv')).toBe('csv');
    expect(formatFromName('sheet.tsv')).toBe('tsv');
    expect(formatFromName('notes.txt')).toBeNull();
    expect(formatFromName('noextension')).toBeNull();
  });

  it('the extension wins over content', () => {
    expect(detectFormat('x.csv', '{"data": []}')).toBe('csv');
  });

  it('by content when the extension says nothing', () => {
    expect(detectFormat('data', '{"version": "v2.0", "data": [\n]}')).toBe('squad');
    expect(detectFormat('data', '{\n  "data": []\n}')).toBe('squad');
    expect(detectFormat('data', '{"id": "a", "context": "c"}\n{"id": "b"}\n')).toBe('jsonl');
    expect(detectFormat('data', 'id,context,question,answer\n')).toBe('csv');
    expect(detectFormat('export.txt', '"id","Context","question","answer"\n')).toBe('csv');
    expect(detectFormat('export.txt', 'id\tcontext\tquestion\tanswer\n')).toBe('tsv');
  });

  it('prose under a name of no format is no format, not CSV', () => {
    expect(detectFormat('notes.txt', 'The depot opens at six, and closes at one.\n')).toBeNull();
    expect(detectFormat('README', '# Notes\n')).toBeNull();
    expect(detectFormat('empty.txt', '')).toBeNull();
  });
});

describe('a file of no format', () => {
  it('is one file-level error naming the file and every accepted format, and no records', () => {
    const r = parseDataset('The depot opens at six, and closes at one.\n', 'notes.txt');
    expect(r.format).toBeNull();
    expect(r.records).toEqual([]);
    expect(r.problems.map((p) => [p.severity, p.code, p.record, p.file])).toEqual([['error', 'unknown-format', -1, 'notes.txt']]);
    expect(r.problems[0]!.message).toBe(
      `cannot tell the format: the name ends in .txt, which is no question format, and the text is neither JSON nor a table whose header names context and question columns; accepted formats are ${ACCEPTED_FORMATS}`,
    );
    expect(ACCEPTED_FORMATS).toContain('SQuAD 1.1/2.0 JSON');
    expect(parseDataset('x', 'noextension').problems[0]!.message).toContain('the name has no extension');
  });

  it('is read as the format it is given', () => {
    expect(parseDataset('The depot opens at six.\n', 'notes.txt', { format: 'jsonl' }).format).toBe('jsonl');
  });
});

describe('a file without questions', () => {
  it.each([
    ['empty.jsonl', ''],
    ['blank.jsonl', '\n \n'],
    ['empty.json', '{"version": "v2.0", "data": []}'],
    ['header-only.csv', 'id,context,question,answer\n'],
  ])('%s is an error', (name, text) => {
    const r = parseDataset(text, name);
    expect(r.problems.map((p) => [p.severity, p.code, p.record])).toEqual([['error', 'layout', -1]]);
    expect(r.problems[0]!.message).toContain('holds no questions');
  });
});
