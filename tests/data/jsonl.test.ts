// Spanwright's own JSONL shape (src/data/formats/jsonl.ts); records are synthetic.
import { describe, expect, it } from 'vitest';
import { parseDataset } from '../../src/data/load.js';
import { writeJsonl } from '../../src/data/formats/jsonl.js';
import { contextPassageId } from '../../src/data/passage-id.js';
import type { QARecord } from '../../src/data/record.js';

const mill = 'The mill wheel 🛞 turns "slowly",\nand\tthe café grinds rye.';
const records: QARecord[] = [
  {
    id: 'w1',
    passageId: 'mill/p0',
    context: mill,
    question: 'What does it grind?',
    answers: [{ text: 'rye', start: mill.indexOf('rye') }],
    unanswerable: false,
  },
  { id: 'w2', passageId: 'mill/p0', context: mill, question: 'Who built it?', answers: [], unanswerable: true },
  {
    id: 'w3',
    passageId: 'שער',
    context: 'שער הכניסה נפתח בשבע.',
    question: 'מתי?',
    answers: [
      { text: 'בשבע', start: 16 },
      { text: 'נפתח בשבע', start: 11 },
    ],
    unanswerable: false,
  },
];

describe('JSONL', () => {
  it('round-trips records exactly, one line each', () => {
    for (const r of records) for (const a of r.answers) expect(r.context.slice(a.start, a.start + a.text.length)).toBe(a.text);
    const text = writeJsonl(records);
    expect(text.split('\n')).toHaveLength(records.length + 1);
    const back = parseDataset(text, 'x.jsonl');
    expect(back.problems).toEqual([]);
    expect(back.records).toEqual(records);
    expect(writeJsonl(back.records)).toBe(text);
  });

  it('writes the documented field names in order', () => {
    const first = JSON.parse(writeJsonl(records).split('\n')[0]!) as object;
    expect(Object.keys(first)).toEqual(['id', 'passage_id', 'context', 'question', 'answers', 'unanswerable']);
  });

  it('fills optional fields: passage id from the context, answerable by default, start located', () => {
    const ctx = 'Lamps are lit at dusk.';
    const r = parseDataset(`${JSON.stringify({ id: 1, context: ctx, question: 'When?', answers: [{ text: 'dusk' }] })}\n`, 'x.jsonl');
    expect(r.problems).toEqual([]);
    expect(r.records).toEqual([
      {
        id: '1',
        passageId: contextPassageId(ctx),
        context: ctx,
        question: 'When?',
        answers: [{ text: 'dusk', start: 17 }],
        unanswerable: false,
      },
    ]);
  });

  it('warns once per unknown field name, naming the first line', () => {
    const line = (id: string): string =>
      JSON.stringify({
        id,
        context: 'Lamps are lit at dusk.',
        question: `When ${id}?`,
        answers: [{ text: 'dusk', answer_start: 17 }],
        title: 't',
      });
    const r = parseDataset(`${line('a')}\n${line('b')}\n`, 'x.jsonl');
    expect(r.problems.map((p) => [p.severity, p.code, p.record, p.field])).toEqual([
      ['warning', 'unknown-field', 0, 'title'],
      ['warning', 'unknown-field', 0, 'answers[].answer_start'],
    ]);
    expect(r.problems[0]!.message).toContain('on 2 lines');
    expect(r.records).toHaveLength(2);
  });

  it('a line that is not an object is an error for that record only', () => {
    const good = JSON.stringify({ id: 'g', context: 'Lamps are lit at dusk.', question: 'When?', answers: [{ text: 'dusk', start: 17 }] });
    const r = parseDataset(`[1, 2]\n${good}\n`, 'x.jsonl');
    expect(r.problems.map((p) => [p.record, p.code, p.message])).toEqual([
      [0, 'layout', 'line 1: each line must be one JSON object (one question)'],
    ]);
    expect(r.records.map((x) => x.id)).toEqual(['g']);
  });
});
