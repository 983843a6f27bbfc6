// defines: mergeRecords, alreadyPresentSummary — the questions of one more file joined to
// a dataset that holds some already: what is added, what is skipped, and why.
//
// Per incoming record, in file order:
//   1. its id is there with the very same question (passage, context, question, answers,
//      unanswerable): already present, skipped — importing a file twice changes nothing.
//      One warning each ('already-present'), which people see summed up in one line.
//   2. its id is there with another question: error 'duplicate-id', not added.
//   3. its passage id is there with another text: error 'passage-conflict', not added.
//   4. otherwise it is added; when its passage already asks the same question under
//      another id (validate.ts's questionKey), a warning 'duplicate-question' — a file
//      exported again with new ids would otherwise double the questions unnoticed.
import type { QARecord } from './record.js';
import { questionKey, type Problem } from './validate.js';

/** A passage as a dataset keeps it: only id and text matter here. */
export interface MergePassage {
  id: string;
  text: string;
}

export interface MergeResult {
  /** the records to add, in file order */
  added: QARecord[];
  /** the passages the added records use that the dataset lacked, in first use */
  newPassages: MergePassage[];
  /** one warning per record skipped as already present (step 1) */
  alreadyPresent: Problem[];
  /** the errors and warnings of steps 2–4 */
  problems: Problem[];
}

/**
 * Joins `incoming` (the records that passed validation of `file`) to `dataset`.
 * `indices` are their indices in the file (LoadResult.indices), for the messages;
 * without them the records count as the file's records 0, 1, 2, …
 */
export function mergeRecords(
  dataset: { records: readonly QARecord[]; passages: readonly MergePassage[] },
  incoming: readonly QARecord[],
  file: string,
  indices?: readonly number[],
): MergeResult {
  const byId = new Map(dataset.records.map((r) => [r.id, r]));
  const passages = new Map(dataset.passages.map((p) => [p.id, p.text]));
  const questions = new Map(dataset.records.map((r) => [questionKey(r.passageId, r.question), r.id]));
  const result: MergeResult = { added: [], newPassages: [], alreadyPresent: [], problems: [] };

  incoming.forEach((r, n) => {
    const record = indices?.[n] ?? n;
    const problem = (severity: Problem['severity'], code: Problem['code'], field: string, message: string): Problem => ({
      severity,
      file,
      record,
      id: r.id,
      field,
      message,
      code,
    });
    // 1, 2. the id
    const known = byId.get(r.id);
    if (known) {
      if (sameQuestion(known, r)) {
        result.alreadyPresent.push(
          problem('warning', 'already-present', 'id', `id "${r.id}" is already in the dataset with this question; skipped`),
        );
      } else {
        result.problems.push(
          problem(
            'error',
            'duplicate-id',
            'id',
            `id "${r.id}" is already in the dataset with another question; this question was not added`,
          ),
        );
      }
      return;
    }
    // 3. the passage
    const text = passages.get(r.passageId);
    if (text !== undefined && text !== r.context) {
      result.problems.push(
        problem(
          'error',
          'passage-conflict',
          'context',
          `passage "${r.passageId}" is already in the dataset with a different text; this question was not added`,
        ),
      );
      return;
    }
    // 4. added, with a warning for the same question under another id
    const key = questionKey(r.passageId, r.question);
    const twin = questions.get(key);
    if (twin !== undefined) {
      result.problems.push(
        problem(
          'warning',
          'duplicate-question',
          'question',
          `the same question is already in the dataset for this passage under id "${twin}"; added under the new id "${r.id}"`,
        ),
      );
    } else questions.set(key, r.id);
    if (text === undefined) {
      passages.set(r.passageId, r.context);
      result.newPassages.push({ id: r.passageId, text: r.context });
    }
    byId.set(r.id, r);
    result.added.push(r);
  });
  return result;
}

/** "502 questions already present, skipped" — the one line people read for step 1 ('' for none). */
export function alreadyPresentSummary(skipped: number): string {
  if (skipped === 0) return '';
  return `${skipped} question${skipped === 1 ? '' : 's'} already present, skipped`;
}

function sameQuestion(a: QARecord, b: QARecord): boolean {
  return (
    a.passageId === b.passageId &&
    a.context === b.context &&
    a.question === b.question &&
    a.unanswerable === b.unanswerable &&
    a.answers.length === b.answers.length &&
    a.answers.every((x, i) => x.text === b.answers[i]!.text && x.start === b.answers[i]!.start)
  );
}
