// Undo of hand-made question edits (src/session/edit-history.ts): the project's own
// rules, no outside reference. Passages and questions are made up for the check.
import { describe, expect, it } from 'vitest';
import type { QARecord } from '../../src/data/record.js';
import {
  describeEdit,
  HISTORY_LIMIT,
  liveHistory,
  pushEdit,
  stillApplies,
  undoEdit,
  type QuestionEdit,
} from '../../src/session/edit-history.js';

const passages = [
  { id: 'a', text: 'The ferry leaves at nine.' },
  { id: 'b', text: 'The harbour closes at dusk.' },
];
const q = (id: string, passageId: string, question: string): QARecord => ({
  id,
  passageId,
  context: passages.find((p) => p.id === passageId)!.text,
  question,
  answers: [],
  unanswerable: true,
});

describe('undo of question edits', () => {
  it('undoes adds, edits and deletes newest first, in several steps', () => {
    const q1 = q('a-1', 'a', 'When does the ferry leave?');
    const q1b = { ...q1, question: 'At what time does the ferry leave?' };
    const q2 = q('b-1', 'b', 'When does the harbour close?');
    let history: QuestionEdit[] = [];
    // add q1, add q2, edit q1, delete q2
    history = pushEdit(history, { kind: 'add', record: q1 });
    history = pushEdit(history, { kind: 'add', record: q2 });
    history = pushEdit(history, { kind: 'edit', before: q1, after: q1b });
    history = pushEdit(history, { kind: 'delete', record: q2, index: 1 });
    let records: QARecord[] = [q1b];
    const steps: string[] = [];
    for (;;) {
      const u = undoEdit(history, { records, passages });
      if (!u) break;
      steps.push(describeEdit(u.undone).verb);
      records = u.records;
      history = u.history;
      if (steps.length === 1) expect(records).toEqual([q1b, q2]); // the deleted question back in its place
      if (steps.length === 2) expect(records).toEqual([q1, q2]);
    }
    expect(steps).toEqual(['deleted', 'edited', 'added', 'added']);
    expect(records).toEqual([]);
  });

  it('drops a step that no longer applies, and the steps before it, instead of restoring out of place', () => {
    const q1 = q('a-1', 'a', 'When does the ferry leave?');
    const q2 = q('b-1', 'b', 'When does the harbour close?');
    // q2 deleted on passage b, then q1 added on passage a
    const history = pushEdit(pushEdit([], { kind: 'delete', record: q2, index: 0 }), { kind: 'add', record: q1 });
    // the dataset was cleared since: nothing applies, nothing is restored
    expect(liveHistory(history, { records: [], passages: [] })).toEqual([]);
    expect(undoEdit(history, { records: [], passages: [] })).toBeNull();
    // q1 was edited by other means (an import replaced it): its add no longer applies, and the older delete goes with it
    const changed = { ...q1, question: 'Changed elsewhere?' };
    expect(liveHistory(history, { records: [changed], passages })).toEqual([]);
    // a question of the deleted one's id came back another way: the delete no longer applies
    expect(stillApplies(history[0]!, { records: [q2], passages })).toBe(false);
    // passage b's text changed: the deleted question would not fit it
    expect(stillApplies(history[0]!, { records: [], passages: [passages[0]!, { id: 'b', text: 'Another text.' }] })).toBe(false);
    // while all is as it was, both steps stand
    expect(liveHistory(history, { records: [q1], passages })).toHaveLength(2);
  });

  it('keeps at most the newest HISTORY_LIMIT steps', () => {
    let history: QuestionEdit[] = [];
    for (let i = 0; i < HISTORY_LIMIT + 5; i++) history = pushEdit(history, { kind: 'add', record: q(`a-${i}`, 'a', `Q${i}?`) });
    expect(history).toHaveLength(HISTORY_LIMIT);
    expect(describeEdit(history[0]!).question).toBe('Q5?');
  });
});
