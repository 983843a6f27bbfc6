// The SQuAD JSON layout as published with SQuAD 2.0 by Rajpurkar, Jia and Liang (2018),
// "Know What You Don't Know: Unanswerable Questions for SQuAD" (layout from memory):
// data[].{title, paragraphs[].{context, qas[].{id, question, answers[{text, answer_start}],
// is_impossible, plausible_answers?}}}; SQuAD 1.1 (Rajpurkar et al. 2016) lacks is_impossible.
// The records below are small synthetic ones written for this test.
import { describe, expect, it } from 'vitest';
import { parseDataset } from '../../src/data/load.js';
import { writeSquad } from '../../src/data/formats/squad.js';
import type { QARecord } from '../../src/data/record.js';

const harbour = 'The harbour crane lifts twelve tonnes. It was painted green in 1998.';
const station = 'The weather station records rain every hour.';

const squad2 = {
  version: 'v2.0',
  data: [
    {
      title: 'Harbour',
      paragraphs: [
        {
          context: harbour,
          qas: [
            {
              id: 'h1',
              question: 'How much does the crane lift?',
              answers: [{ text: 'twelve tonnes', answer_start: 24 }],
              is_impossible: false,
            },
            {
              id: 'h2',
              question: 'Who painted the crane?',
              answers: [],
              is_impossible: true,
              plausible_answers: [{ text: 'green', answer_start: 54 }],
            },
          ],
        },
        {
          context: station,
          qas: [
            {
              id: 'h3',
              question: 'How often is rain recorded?',
              answers: [{ text: 'every hour', answer_start: 33 }],
              is_impossible: false,
            },
          ],
        },
      ],
    },
  ],
};

describe('SQuAD reader', () => {
  it('reads SQuAD 2.0: answers, is_impossible, passage ids from title and paragraph index', () => {
    const r = parseDataset(JSON.stringify(squad2), 'train.json');
    expect(r.format).toBe('squad');
    expect(r.problems).toEqual([]);
    expect(r.records).toEqual<QARecord[]>([
      {
        id: 'h1',
        passageId: 'Harbour/p0',
        context: harbour,
        question: 'How much does the crane lift?',
        answers: [{ text: 'twelve tonnes', start: 24 }],
        unanswerable: false,
      },
      { id: 'h2', passageId: 'Harbour/p0', context: harbour, question: 'Who painted the crane?', answers: [], unanswerable: true },
      {
        id: 'h3',
        passageId: 'Harbour/p1',
        context: station,
        question: 'How often is rain recorded?',
        answers: [{ text: 'every hour', start: 33 }],
        unanswerable: false,
      },
    ]);
  });

  it('reads SQuAD 1.1 (no is_impossible) as all answerable, keeping several answers', () => {
    const v11 = {
      version: '1.1',
      data: [
        {
          title: 'Station',
          paragraphs: [
            {
              context: station,
              qas: [
                {
                  id: 's1',
                  question: 'What is recorded?',
                  answers: [
                    { text: 'rain', answer_start: 28 },
                    { text: 'rain every hour', answer_start: 28 },
                  ],
                },
              ],
            },
          ],
        },
      ],
    };
    const r = parseDataset(JSON.stringify(v11), 'dev.json');
    expect(r.problems).toEqual([]);
    expect(r.records[0]!.unanswerable).toBe(false);
    expect(r.records[0]!.answers).toEqual([
      { text: 'rain', start: 28 },
      { text: 'rain every hour', start: 28 },
    ]);
  });

  it('gives articles that share a title their article index, and honours passage_id', () => {
    const doc = {
      data: [
        {
          title: 'Same',
          paragraphs: [{ context: harbour, qas: [{ id: 'a', question: 'Lift?', answers: [{ text: 'twelve', answer_start: 24 }] }] }],
        },
        {
          title: 'Same',
          paragraphs: [{ context: station, qas: [{ id: 'b', question: 'Rain?', answers: [{ text: 'rain', answer_start: 28 }] }] }],
        },
        {
          paragraphs: [
            {
              passage_id: 'my-own',
              context: station,
              qas: [{ id: 'c', question: 'Rain?', answers: [{ text: 'rain', answer_start: 28 }] }],
            },
          ],
        },
      ],
    };
    const r = parseDataset(JSON.stringify(doc), 'x.json');
    expect(r.problems).toEqual([]);
    expect(r.records.map((x) => x.passageId)).toEqual(['Same~0/p0', 'Same~1/p0', 'my-own']);
  });

  it('names the full path of a bad field', () => {
    const doc = structuredClone(squad2);
    (doc.data[0]!.paragraphs[1]!.qas[0]!.answers[0] as { answer_start: unknown }).answer_start = '34';
    const r = parseDataset(JSON.stringify(doc), 'x.json');
    expect(r.problems.map((p) => [p.record, p.id, p.field, p.code])).toEqual([
      [2, 'h3', 'data[0].paragraphs[1].qas[0].answers[0].answer_start', 'wrong-type'],
    ]);
  });

  it('reports a paragraph without qas and a question that is not an object, and goes on', () => {
    const doc = {
      data: [
        {
          title: 'T',
          paragraphs: [
            { context: station },
            { context: station, qas: ['q?', { id: 'ok', question: 'Rain?', answers: [{ text: 'rain', answer_start: 28 }] }] },
          ],
        },
      ],
    };
    const r = parseDataset(JSON.stringify(doc), 'x.json');
    expect(r.problems.map((p) => [p.record, p.field, p.code])).toEqual([
      [-1, 'data[0].paragraphs[0].qas', 'layout'],
      [0, 'data[0].paragraphs[1].qas[0]', 'wrong-type'],
    ]);
    expect(r.records.map((x) => [x.id, x.passageId])).toEqual([['ok', 'T/p1']]);
  });
});

describe('SQuAD writer', () => {
  it('round-trips: read, write, read gives the same records (plausible_answers are not kept)', () => {
    const first = parseDataset(JSON.stringify(squad2), 'a.json').records;
    const again = parseDataset(writeSquad(first), 'b.json');
    expect(again.problems).toEqual([]);
    expect(again.records).toEqual(first);
    expect(writeSquad(first)).not.toContain('passage_id');
  });

  it('keeps passage ids that cannot be derived, and groups passages into articles by title', () => {
    const recs: QARecord[] = [
      {
        id: '1',
        passageId: 'Harbour/p3',
        context: harbour,
        question: 'Lift?',
        answers: [{ text: 'twelve', start: 24 }],
        unanswerable: false,
      },
      { id: '2', passageId: 'ctx-0011', context: station, question: 'Rain?', answers: [], unanswerable: true },
      {
        id: '3',
        passageId: 'Harbour/p0',
        context: station,
        question: 'When?',
        answers: [{ text: 'every hour', start: 33 }],
        unanswerable: false,
      },
    ];
    const text = writeSquad(recs);
    const doc = JSON.parse(text) as { version: string; data: Array<{ title: string; paragraphs: unknown[] }> };
    expect(doc.version).toBe('v2.0');
    expect(doc.data.map((a) => [a.title, a.paragraphs.length])).toEqual([
      ['Harbour', 2],
      ['ctx-0011', 1],
    ]);
    const back = parseDataset(text, 'b.json');
    expect(back.problems).toEqual([]);
    // grouped by passage: 1 and 3 share the Harbour article
    expect(back.records).toEqual([recs[0], recs[2], recs[1]]);
  });
});
