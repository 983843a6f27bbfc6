// Importing one more file into a dataset (src/data/merge.ts): what is added, what is
// skipped as already present, and the warnings and errors, with records counted from 1
// in the lines people read.
import { describe, expect, it } from 'vitest';
import { parseDataset } from '../../src/data/load.js';
import { alreadyPresentSummary, mergeRecords } from '../../src/data/merge.js';
import type { QARecord } from '../../src/data/record.js';
import { formatProblem } from '../../src/data/validate.js';

const depot = 'The tram depot opens at six. Night trams stop at one.';
const line = (o: object): string => `${JSON.stringify(o)}\n`;
const fileText = [
  line({ id: 'a', passage_id: 'depot', context: depot, question: 'When does the depot open?', answers: [{ text: 'six', start: 24 }] }),
  line({
    id: 'b',
    passage_id: 'depot',
    context: depot,
    question: 'When do night trams stop?',
    answers: [{ text: 'one', start: depot.indexOf('one') }],
  }),
  line({ id: 'c', passage_id: 'depot', context: depot, question: 'Who drives?', answers: [], unanswerable: true }),
].join('');

function load(text: string, file = 'q.jsonl') {
  const r = parseDataset(text, file);
  expect(r.problems).toEqual([]);
  return r;
}

const empty = { records: [] as QARecord[], passages: [] as Array<{ id: string; text: string }> };

describe('mergeRecords', () => {
  it('adds a new file whole, with the passages it brings', () => {
    const loaded = load(fileText);
    const m = mergeRecords(empty, loaded.records, 'q.jsonl', loaded.indices);
    expect(m.added.map((r) => r.id)).toEqual(['a', 'b', 'c']);
    expect(m.newPassages).toEqual([{ id: 'depot', text: depot }]);
    expect(m.alreadyPresent).toEqual([]);
    expect(m.problems).toEqual([]);
  });

  it('the same file again: every record already present, skipped, summed up in one line', () => {
    const loaded = load(fileText);
    const first = mergeRecords(empty, loaded.records, 'q.jsonl', loaded.indices);
    const again = mergeRecords({ records: first.added, passages: first.newPassages }, loaded.records, 'q.jsonl', loaded.indices);
    expect(again.added).toEqual([]);
    expect(again.newPassages).toEqual([]);
    expect(again.problems).toEqual([]);
    expect(again.alreadyPresent.map((p) => [p.severity, p.code, p.record, p.id])).toEqual([
      ['warning', 'already-present', 0, 'a'],
      ['warning', 'already-present', 1, 'b'],
      ['warning', 'already-present', 2, 'c'],
    ]);
    expect(alreadyPresentSummary(again.alreadyPresent.length)).toBe('3 questions already present, skipped');
    expect(alreadyPresentSummary(1)).toBe('1 question already present, skipped');
    expect(alreadyPresentSummary(0)).toBe('');
    // the folded details count records from 1
    expect(formatProblem(again.alreadyPresent[0]!)).toBe(
      'q.jsonl: record 1 (id a), id: warning: id "a" is already in the dataset with this question; skipped',
    );
  });

  it('a question already asked of its passage under a new id: added, with a warning naming the other id', () => {
    const loaded = load(fileText);
    const first = mergeRecords(empty, loaded.records, 'q.jsonl', loaded.indices);
    const renumbered = load(
      line({
        id: 'a2',
        passage_id: 'depot',
        context: depot,
        question: '  when does the DEPOT open? ',
        answers: [{ text: 'six', start: 24 }],
      }),
      'again.jsonl',
    );
    const m = mergeRecords({ records: first.added, passages: first.newPassages }, renumbered.records, 'again.jsonl', renumbered.indices);
    expect(m.added.map((r) => r.id)).toEqual(['a2']);
    expect(m.problems.map((p) => [p.severity, p.code, p.record, p.id, p.field])).toEqual([
      ['warning', 'duplicate-question', 0, 'a2', 'question'],
    ]);
    expect(m.problems[0]!.message).toContain('under id "a"');
  });

  it('an id already used by another question, and a passage id with another text, are errors and add nothing', () => {
    const loaded = load(fileText);
    const first = mergeRecords(empty, loaded.records, 'q.jsonl', loaded.indices);
    const held = { records: first.added, passages: first.newPassages };
    const reused = load(
      line({ id: 'b', passage_id: 'depot', context: depot, question: 'What stops at one?', answers: [{ text: 'Night trams', start: 29 }] }),
      'reused.jsonl',
    );
    const retitled = load(
      line({ id: 'd', passage_id: 'depot', context: 'Another text.', question: 'Which text?', answers: [], unanswerable: true }),
      'retitled.jsonl',
    );
    const m1 = mergeRecords(held, reused.records, 'reused.jsonl', reused.indices);
    const m2 = mergeRecords(held, retitled.records, 'retitled.jsonl', retitled.indices);
    expect([...m1.added, ...m2.added]).toEqual([]);
    expect([...m1.alreadyPresent, ...m2.alreadyPresent]).toEqual([]);
    expect([...m1.problems, ...m2.problems].map((p) => [p.severity, p.code, p.record, p.id])).toEqual([
      ['error', 'duplicate-id', 0, 'b'],
      ['error', 'passage-conflict', 0, 'd'],
    ]);
    expect(m1.problems[0]!.message).toContain('with another question');
  });

  it('names each record by its place in the file, past records validation left out', () => {
    const text = line({ id: 'x', context: depot, question: 'Broken?', answers: 'six' }) + fileText;
    const loaded = parseDataset(text, 'q.jsonl');
    expect(loaded.indices).toEqual([1, 2, 3]);
    const first = mergeRecords(empty, loaded.records, 'q.jsonl', loaded.indices);
    const again = mergeRecords({ records: first.added, passages: first.newPassages }, loaded.records, 'q.jsonl', loaded.indices);
    expect(again.alreadyPresent.map((p) => p.record)).toEqual([1, 2, 3]);
  });
});
