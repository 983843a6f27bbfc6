// The dataset hash: SHA-256 (FIPS 180-4) over the canonical text documented in
// src/data/hash.ts. Reference: Node's node:crypto (OpenSSL) createHash('sha256').
import { createHash } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { canonicalDataset, hashDataset } from '../../src/data/hash.js';
import { parseDataset, writeDataset } from '../../src/data/load.js';
import type { QARecord } from '../../src/data/record.js';

const records: QARecord[] = [
  {
    id: 'b',
    passageId: 'p',
    context: 'Gate B opens at ten. 🚪',
    question: 'When?',
    answers: [{ text: 'ten', start: 16 }],
    unanswerable: false,
  },
  { id: 'a', passageId: 'p', context: 'Gate B opens at ten. 🚪', question: 'Who?', answers: [], unanswerable: true },
];
const sha256 = (s: string): string => createHash('sha256').update(s, 'utf8').digest('hex');

describe('hashDataset', () => {
  it('is SHA-256 of the documented canonical text', async () => {
    const expected =
      'spanwright-dataset-v1\n' +
      '["a","p","Gate B opens at ten. 🚪","Who?",true,[]]\n' +
      '["b","p","Gate B opens at ten. 🚪","When?",false,[["ten",16]]]';
    expect(canonicalDataset(records)).toBe(expected);
    expect(await hashDataset(records)).toBe(sha256(expected));
  });

  it('of no records is the hash of the version line', async () => {
    expect(await hashDataset([])).toBe(sha256('spanwright-dataset-v1\n'));
  });

  it('does not depend on record order', async () => {
    expect(await hashDataset([...records].reverse())).toBe(await hashDataset(records));
  });

  it('changes when any field changes', async () => {
    const base = await hashDataset(records);
    const r = records[0]!;
    const variants: QARecord[] = [
      { ...r, id: 'c' },
      { ...r, passageId: 'q' },
      { ...r, context: `${r.context} ` },
      { ...r, question: 'When.' },
      { ...r, answers: [{ text: 'ten', start: 17 }] },
      { ...r, answers: [{ text: 'te', start: 16 }] },
      { ...r, unanswerable: true },
      { ...r, answers: [...r.answers, { text: 'ten.', start: 16 }] },
    ];
    const seen = new Set([base]);
    for (const v of variants) seen.add(await hashDataset([v, records[1]!]));
    expect(seen.size).toBe(variants.length + 1);
  });

  it('survives conversion between SQuAD, JSONL and CSV', async () => {
    const base = await hashDataset(records);
    for (const format of ['squad', 'jsonl', 'csv', 'tsv'] as const) {
      const back = parseDataset(writeDataset(records, format), `x.${format === 'squad' ? 'json' : format}`);
      expect(back.problems).toEqual([]);
      expect(await hashDataset(back.records)).toBe(base);
    }
  });

  it('keeps lone surrogates apart (JSON escapes them)', async () => {
    const one = [{ ...records[1]!, question: '\ud800?' }];
    const two = [{ ...records[1]!, question: '\udc00?' }];
    expect(await hashDataset(one)).not.toBe(await hashDataset(two));
  });
});
