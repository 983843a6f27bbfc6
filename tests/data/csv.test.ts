// The CSV columns of src/data/formats/csv.ts, parsed by papaparse; records are synthetic.
import Papa from 'papaparse';
import { describe, expect, it } from 'vitest';
import { parseDataset } from '../../src/data/load.js';
import { CSV_COLUMNS, writeCsv } from '../../src/data/formats/csv.js';
import type { QARecord } from '../../src/data/record.js';

const ctx = 'Boats, kayaks and "rafts" launch from the slip,\nnot the beach.';
const records: QARecord[] = [
  {
    id: 'k1',
    passageId: 'slip',
    context: ctx,
    question: 'What launches?',
    answers: [
      { text: 'Boats, kayaks', start: 0 },
      { text: '"rafts"', start: 18 },
    ],
    unanswerable: false,
  },
  { id: 'k2', passageId: 'slip', context: ctx, question: 'Who owns the slip?', answers: [], unanswerable: true },
  {
    id: 'k3',
    passageId: 'other',
    context: 'Tabs\tand 日本語 text.',
    question: 'Which script?',
    answers: [{ text: '日本語', start: 9 }],
    unanswerable: false,
  },
];
const header = CSV_COLUMNS.join(',');

describe('CSV', () => {
  it('round-trips records with commas, quotes, tabs and line breaks in cells', () => {
    const text = writeCsv(records);
    // RFC 4180 quoting, checked by papaparse reading the rows back
    const rows = Papa.parse<string[]>(text.trimEnd()).data;
    expect(rows[0]).toEqual([...CSV_COLUMNS]);
    expect(rows).toHaveLength(1 + 4); // k1 has two answers: two rows
    const back = parseDataset(text, 'x.csv');
    expect(back.problems).toEqual([]);
    expect(back.records).toEqual(records);
  });

  it('round-trips as TSV', () => {
    const back = parseDataset(writeCsv(records, '\t'), 'x.tsv');
    expect(back.format).toBe('tsv');
    expect(back.problems).toEqual([]);
    expect(back.records).toEqual(records);
  });

  it('places an answer without a start when its text occurs once; errors when it repeats', () => {
    const text = `id,context,question,answer\nq1,"Red buoy, green buoy.",Which colour first?,Red\nq2,"Red buoy, green buoy.",Which thing?,buoy\n`;
    const r = parseDataset(text, 'x.csv');
    expect(r.records.map((x) => x.answers)).toEqual([[{ text: 'Red', start: 0 }]]);
    expect(r.problems.map((p) => [p.record, p.field, p.code, p.message])).toEqual([
      [1, 'answer_start', 'answer-not-found', 'row 3: the answer "buoy" has no start and occurs 2 times in the context; give its start'],
    ]);
  });

  it('reads unanswerable as true/false, yes/no, 1/0 and names a bad value', () => {
    const rows = ['yes', 'NO', '1', 'maybe'].map(
      (flag, i) => `q${i},Text here.,Q${i}?,${flag.toLowerCase().startsWith('n') ? 'Text' : ''},,${flag}`,
    );
    const r = parseDataset(`id,context,question,answer,answer_start,unanswerable\n${rows.join('\n')}\n`, 'x.csv');
    expect(r.records.map((x) => [x.id, x.unanswerable])).toEqual([
      ['q0', true],
      ['q1', false],
      ['q2', true],
    ]);
    expect(r.problems.map((p) => [p.record, p.field, p.code])).toEqual([
      [3, 'unanswerable', 'wrong-type'],
      [3, 'answer', 'answerable-without-answers'],
    ]);
  });

  it('names a start that is not a whole number, and rows with the same id that differ', () => {
    const text = `${header}\nq1,p,Some text.,Q?,text,4.5,\nq2,p,Some text.,Q2?,text,5,\nq2,p,Some text.,Another?,Some,0,\n`;
    const r = parseDataset(text, 'x.csv');
    expect(r.problems.map((p) => [p.record, p.field, p.code])).toEqual([
      [0, 'answer_start', 'wrong-type'],
      [2, 'id', 'duplicate-id'],
    ]);
    expect(r.problems[1]!.message).toContain('record 2 (row 3)');
  });

  it('warns about unknown columns and hints at a semicolon separator', () => {
    const extra = parseDataset('id,context,question,answer,notes\nq,Text.,Q?,Text,hi\n', 'x.csv');
    expect(extra.problems.map((p) => [p.severity, p.field])).toEqual([['warning', 'notes']]);
    const semi = parseDataset('id;context;question;answer\nq;Text.;Q?;Text\n', 'x.csv');
    expect(semi.problems).toHaveLength(1);
    expect(semi.problems[0]!.message).toContain('separated by ";"');
  });

  it('reports a row with too many cells and keeps the others', () => {
    const r = parseDataset('id,context,question,answer\nq1,a,b,c,d\nq2,Text.,Q?,Text\n', 'x.csv');
    expect(r.problems.map((p) => [p.record, p.code])).toEqual([[0, 'syntax']]);
    expect(r.problems[0]!.message).toContain('row 2');
    expect(r.records.map((x) => x.id)).toEqual(['q2']);
  });
});
