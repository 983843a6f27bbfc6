// defines: QuestionEdit, EditHistory helpers (pushEdit, stillApplies, liveHistory,
// undoEdit, describeEdit) — undo in several steps for the questions a user adds, edits
// and deletes by hand. An edit is undone only while it still applies to the dataset as
// it is now:
//   add     the question is still there, unchanged since it was added
//   edit    the question is still as the edit left it
//   delete  its id is still free and its passage is still there with the same text
// Anything else (an import, a clear, the same question edited again by other means)
// makes the entry void, and liveHistory drops it, so an undo never restores a question
// into a dataset it no longer fits, and never silently.
import type { QARecord } from '../data/record.js';

export type QuestionEdit =
  | { kind: 'add'; record: QARecord }
  | { kind: 'edit'; before: QARecord; after: QARecord }
  | { kind: 'delete'; record: QARecord; /** its place in the records, to put it back there */ index: number };

/** Steps kept; older ones fall off. */
export const HISTORY_LIMIT = 50;

/** What undo needs to see of the dataset. */
export interface EditTarget {
  records: readonly QARecord[];
  passages: ReadonlyArray<{ id: string; text: string }>;
}

function sameRecord(a: QARecord, b: QARecord): boolean {
  return JSON.stringify(a) === JSON.stringify(b);
}

/** The history with `edit` as its newest step (newest last). */
export function pushEdit(history: readonly QuestionEdit[], edit: QuestionEdit): QuestionEdit[] {
  return [...history, edit].slice(-HISTORY_LIMIT);
}

/** Whether undoing `edit` still makes sense for the dataset as it is now. */
export function stillApplies(edit: QuestionEdit, target: EditTarget): boolean {
  if (edit.kind === 'delete') {
    const passage = target.passages.find((p) => p.id === edit.record.passageId);
    return passage !== undefined && passage.text === edit.record.context && !target.records.some((r) => r.id === edit.record.id);
  }
  const now = target.records.find((r) => r.id === (edit.kind === 'add' ? edit.record.id : edit.after.id));
  return now !== undefined && sameRecord(now, edit.kind === 'add' ? edit.record : edit.after);
}

/** The records with `edit` undone (the caller checked that it applies). */
function undoOne(edit: QuestionEdit, records: readonly QARecord[]): QARecord[] {
  if (edit.kind === 'add') return records.filter((r) => r.id !== edit.record.id);
  if (edit.kind === 'edit') return records.map((r) => (r.id === edit.after.id ? edit.before : r));
  const out = [...records];
  out.splice(Math.min(edit.index, out.length), 0, edit.record);
  return out;
}

/**
 * The steps that can still be undone, oldest first. Undo goes newest first, so each step
 * is checked against the dataset as the newer steps' undoing would leave it; a step that
 * does not apply there is dropped together with every step before it — undoing those
 * would reach past a change the history does not know.
 */
export function liveHistory(history: readonly QuestionEdit[], target: EditTarget): QuestionEdit[] {
  let records = target.records;
  for (let i = history.length - 1; i >= 0; i--) {
    if (!stillApplies(history[i]!, { records, passages: target.passages })) return history.slice(i + 1);
    records = undoOne(history[i]!, records);
  }
  return [...history];
}

/** The records with the newest step undone, and the history without it; null when nothing can be undone. */
export function undoEdit(
  history: readonly QuestionEdit[],
  target: EditTarget,
): { records: QARecord[]; history: QuestionEdit[]; undone: QuestionEdit } | null {
  const live = liveHistory(history, target);
  const last = live.at(-1);
  if (!last) return null;
  return { records: undoOne(last, target.records), history: live.slice(0, -1), undone: last };
}

/** A step as the undo note names it: what was done to which question. */
export function describeEdit(edit: QuestionEdit): { verb: 'added' | 'edited' | 'deleted'; question: string; passageId: string } {
  const record = edit.kind === 'edit' ? edit.after : edit.record;
  const verb = edit.kind === 'add' ? 'added' : edit.kind === 'edit' ? 'edited' : 'deleted';
  return { verb, question: record.question, passageId: record.passageId };
}
