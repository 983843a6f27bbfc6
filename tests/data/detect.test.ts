import { describe, expect, it } from 'vitest';
import { detectFormat, formatFromName } from '../../src/data/formats/detect.js';
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
