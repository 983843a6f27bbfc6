// The validation rules of src/data/validate.ts, one by one, on synthetic records.
import { describe, expect, it } from 'vitest';
import { formatProblem, summarise, validateQARecords, validateRecords } from '../../src/data/validate.js';
import { PLAIN_NAMES, type RawRecord } from '../../src/data/formats/raw.js';
import type { QARecord } from '../../src/data/record.js';

const ctx = 'The west pier closes at dusk. The east pier stays open.';
const rec = (over: Partial<QARecord> = {}): QARecord => ({
  id: 'q',
  passageId: 'pier',
  context: ctx,
  question: 'When does the west pier close?',
  answers: [{ text: 'dusk', start: ctx.indexOf('dusk') }],
  unanswerable: false,
  ...over,
});
const raw = (over: Partial<RawRecord>, index = 0): RawRecord => ({
  index,
  where: `line ${index + 1}`,
  names: PLAIN_NAMES,
  id: 'q',
  passageId: 'pier',
  context: ctx,
  question: 'When?',
  answers: [{ text: 'dusk', start: ctx.indexOf('dusk') }],
  unanswerable: false,
  ...over,
});
const codes = (records: QARecord[] | RawRecord[]): Array<[number, string, string | undefined]> => {
  const result =
    'names' in (records[0] ?? {}) ? validateRecords(records as RawRecord[], 'f') : validateQARecords(records as QARecord[], 'f');
  return result.problems.map((p) => [p.record, p.field, p.code]);
};

describe('validation, per record', () => {
  it('warns about a question of invisible characters or punctuation only, and keeps it', () => {
    // U+200B ZERO WIDTH SPACE and U+00AD SOFT HYPHEN: not white space to String.prototype.trim
    for (const question of ['\u200b\u200b', '\u00ad?', '…?!']) {
      const v = validateQARecords([rec({ question })], 'f');
      expect(v.problems.map((p) => [p.severity, p.field, p.code])).toEqual([['warning', 'question', 'question-without-words']]);
      expect(v.records).toHaveLength(1);
    }
    expect(validateQARecords([rec({ question: '¿Dónde?' })], 'f').problems).toEqual([]);
  });

  it('passes a good record unchanged', () => {
    const r = rec();
    const v = validateQARecords([r], 'f');
    expect(v.problems).toEqual([]);
    expect(v.records).toEqual([r]);
  });

  it('answer text must equal the context at its start; a unique occurrence is repaired with a warning', () => {
    const v = validateQARecords([rec({ answers: [{ text: 'dusk', start: 3 }] })], 'f');
    expect(v.problems.map((p) => [p.severity, p.code, p.field])).toEqual([['warning', 'answer-repaired', 'answers[0].start']]);
    expect(v.records[0]!.answers).toEqual([{ text: 'dusk', start: 24 }]);
    expect(summarise(v).repairs).toBe(1);
  });

  it('a text occurring twice, or never, is an error and the record is left out', () => {
    const v = validateQARecords(
      [rec({ id: 'a', answers: [{ text: 'pier', start: 0 }] }), rec({ id: 'b', answers: [{ text: 'harbour', start: 0 }] })],
      'f',
    );
    expect(v.problems.map((p) => [p.id, p.code])).toEqual([
      ['a', 'answer-mismatch'],
      ['b', 'answer-mismatch'],
    ]);
    expect(v.records).toEqual([]);
  });

  it('offsets out of range: negative, at or past the end', () => {
    for (const start of [-1, ctx.length, ctx.length + 10]) {
      expect(codes([rec({ answers: [{ text: 'dusk', start }] })])).toEqual([[0, 'answers[0].start', 'offset-out-of-range']]);
    }
  });

  it('an answer running past the end of the context is a mismatch, not a crash', () => {
    const start = ctx.length - 2;
    expect(codes([rec({ answers: [{ text: 'open.!!', start }] })])).toEqual([[0, 'answers[0].start', 'answer-mismatch']]);
  });

  it('empty question and empty context are errors naming the field', () => {
    expect(codes([rec({ question: ' \n ' })])).toEqual([[0, 'question', 'empty-text']]);
    expect(codes([raw({ context: '' })])).toEqual([[0, 'context', 'empty-text']]);
    expect(codes([rec({ answers: [{ text: '', start: 0 }] })])).toEqual([[0, 'answers[0].text', 'empty-text']]);
  });

  it('unanswerable with answers, and answerable without, are errors', () => {
    expect(codes([rec({ unanswerable: true })])).toEqual([[0, 'answers', 'unanswerable-with-answers']]);
    expect(codes([rec({ answers: [] })])).toEqual([[0, 'answers', 'answerable-without-answers']]);
  });

  it('wrong types are errors naming the field and the value', () => {
    const v = validateRecords(
      [
        raw({ answers: [{ text: 'dusk', start: '24' }] }, 0),
        raw({ id: 'b', answers: [{ text: 5, start: 24 }] }, 1),
        raw({ id: 'c', answers: ['dusk'] }, 2),
        raw({ id: 'd', unanswerable: 'false' }, 3),
        raw({ id: { x: 1 } }, 4),
        raw({ id: 'f', context: ['a'] }, 5),
        raw({ id: 'g', passageId: true }, 6),
        raw({ id: 'h', answers: [{ text: 'dusk', start: 24.5 }] }, 7),
      ],
      'f',
    );
    expect(v.problems.map((p) => [p.record, p.field, p.code])).toEqual([
      [0, 'answers[0].start', 'wrong-type'],
      [1, 'answers[0].text', 'wrong-type'],
      [2, 'answers[0]', 'wrong-type'],
      [3, 'unanswerable', 'wrong-type'],
      [4, 'id', 'wrong-type'],
      [5, 'context', 'wrong-type'],
      [6, 'passage_id', 'wrong-type'],
      [7, 'answers[0].start', 'wrong-type'],
    ]);
    expect(v.problems[0]!.message).toBe('line 1: the answer start must be a whole number, not a string ("24")');
    expect(v.records).toEqual([]);
  });

  it('a NUL character inside text is an error', () => {
    expect(codes([rec({ question: 'When\u0000?' })])).toEqual([[0, 'question', 'nul-character']]);
  });

  it('never throws on values of any kind', () => {
    const odd: unknown[] = [undefined, null, 0, -0, NaN, Infinity, '', 'x', [], {}, [[]], { text: {} }, true];
    const records = odd.flatMap((v, i) =>
      (['id', 'passageId', 'context', 'question', 'answers', 'unanswerable'] as const).map((k, j) => raw({ [k]: v }, i * 6 + j)),
    );
    const v = validateRecords(records, 'f');
    for (const p of v.problems) expect(p.field === '' ? p.message : p.field).not.toBe('');
    for (const r of v.records) for (const a of r.answers) expect(r.context.slice(a.start, a.start + a.text.length)).toBe(a.text);
  });
});

describe('line breaks', () => {
  it('CRLF and CR become LF; starts move left by the CRLFs before them; one warning per file', () => {
    const stored = 'Line one.\r\nLine two.\r\nLine three.\rEnd.';
    const v = validateQARecords(
      [
        rec({ id: 'a', context: stored, answers: [{ text: 'three', start: stored.indexOf('three') }] }),
        rec({ id: 'b', context: stored, question: 'Where is the end?', answers: [{ text: 'End', start: stored.indexOf('End') }] }),
      ],
      'f',
    );
    expect(v.problems.map((p) => [p.record, p.code])).toEqual([[0, 'line-breaks-normalised']]);
    const norm = 'Line one.\nLine two.\nLine three.\nEnd.';
    expect(v.records.map((r) => [r.context, r.answers[0]])).toEqual([
      [norm, { text: 'three', start: norm.indexOf('three') }],
      [norm, { text: 'End', start: norm.indexOf('End') }],
    ]);
  });

  it('an answer spanning a CRLF is normalised the same way', () => {
    const stored = 'Top\r\nBottom';
    const v = validateQARecords([rec({ context: stored, answers: [{ text: 'Top\r\nBot', start: 0 }] })], 'f');
    expect(v.records[0]!.answers).toEqual([{ text: 'Top\nBot', start: 0 }]);
  });
});

describe('validation, across records', () => {
  it('a duplicate id is an error on the later record, naming the first', () => {
    const v = validateRecords([raw({}, 0), raw({ question: 'Other?' }, 1)], 'f');
    expect(v.problems.map((p) => [p.record, p.field, p.code])).toEqual([[1, 'id', 'duplicate-id']]);
    expect(v.problems[0]!.message).toContain('record 1 (line 1)');
    expect(v.records).toHaveLength(1);
  });

  it('a duplicate id is caught even when the first record has another error', () => {
    const v = validateRecords([raw({ question: '' }, 0), raw({}, 1)], 'f');
    expect(v.problems.map((p) => [p.record, p.code])).toEqual([
      [0, 'empty-text'],
      [1, 'duplicate-id'],
    ]);
  });

  it('one passage id with two contexts is an error', () => {
    expect(codes([rec({ id: 'a' }), rec({ id: 'b', context: `${ctx} More.` })])).toEqual([[1, 'context', 'passage-conflict']]);
  });

  it('the same question twice on one passage is a warning; on another passage it is fine', () => {
    const v = validateQARecords(
      [rec({ id: 'a' }), rec({ id: 'b', question: '  when does the WEST pier   close? ' }), rec({ id: 'c', passageId: 'other' })],
      'f',
    );
    expect(v.problems.map((p) => [p.record, p.severity, p.code])).toEqual([[1, 'warning', 'duplicate-question']]);
    expect(v.records).toHaveLength(3);
  });
});

describe('report helpers', () => {
  it('summarise counts records, passages, unanswerable, errors, warnings, repairs', () => {
    const v = validateQARecords(
      [
        rec({ id: 'a' }),
        rec({ id: 'b', passageId: 'p2', question: 'Who?', answers: [], unanswerable: true }),
        rec({ id: 'c', answers: [{ text: 'dusk', start: 0 }] }),
        rec({ id: 'd', question: '' }),
      ],
      'f',
    );
    expect(summarise(v)).toEqual({ records: 3, passages: 2, unanswerable: 1, errors: 1, warnings: 2, repairs: 1 });
  });

  it('formatProblem names file, record (counted from 1 for people; Problem.record stays the 0-based index), id and field', () => {
    expect(formatProblem({ severity: 'error', file: 'a.csv', record: 3, id: 'q4', field: 'answer_start', message: 'row 5: bad' })).toBe(
      'a.csv: record 4 (id q4), answer_start: error: row 5: bad',
    );
    expect(formatProblem({ severity: 'error', file: 'a.json', record: -1, field: '', message: 'bad JSON' })).toBe(
      'a.json: error: bad JSON',
    );
  });
});

describe("answers: 'texts' (how the SQuAD 2.0 evaluation reads gold answers)", () => {
  it('keeps an answer it cannot place, by its text at start −1, with a warning; strict refuses the record', () => {
    const bad = [
      raw({ answers: [{ text: 'nowhere', start: 0 }] }, 0),
      raw({ id: 'q2', question: 'Which?', answers: [{ text: 'nowhere', start: 999 }] }, 1),
    ];
    const strict = validateRecords(bad, 'f');
    expect(strict.records).toEqual([]);
    expect(strict.problems.map((p) => p.code)).toEqual(['answer-mismatch', 'offset-out-of-range']);
    const texts = validateRecords(bad, 'f', { answers: 'texts' });
    expect(texts.records.map((r) => r.answers)).toEqual([[{ text: 'nowhere', start: -1 }], [{ text: 'nowhere', start: -1 }]]);
    expect(texts.problems.map((p) => [p.severity, p.code])).toEqual([
      ['warning', 'answer-scored-by-text'],
      ['warning', 'answer-scored-by-text'],
    ]);
  });
});
