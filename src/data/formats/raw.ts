// defines: RawRecord, FieldNames, ParseResult — what a format reader hands to validation.
//
// A reader only takes a file apart; it does not judge values. Each question becomes a
// RawRecord whose fields are still `unknown`, together with the format's own names for
// those fields, so that validate.ts can report "data[0].paragraphs[2].qas[1].answers[0]
// .answer_start" for SQuAD and "answer_start" (row 7) for CSV.
import type { Problem } from '../validate.js';

/** The format's own name for each field of a record, as the user wrote it. */
export interface FieldNames {
  id: string;
  passageId: string;
  context: string;
  question: string;
  answers: string;
  unanswerable: string;
  /** the field holding answer `index`'s text or start */
  answer(index: number, part: 'text' | 'start'): string;
}

/** One answer as read: `start` is undefined when the file gives none (locate it). */
export interface RawAnswer {
  text: unknown;
  start: unknown;
}

/** One question as read, before any check. */
export interface RawRecord {
  /** Problem.record: the question's index in its file (0-based); for CSV, the data row */
  index: number;
  /** where it is, in the format's terms, for messages: "line 4", "row 7"; may be '' */
  where: string;
  names: FieldNames;
  id: unknown;
  /** undefined: derive one from the context (passage-id.ts) */
  passageId: unknown;
  context: unknown;
  question: unknown;
  /** RawAnswer[] when the file holds a list; anything else is reported as a wrong type */
  answers: unknown;
  /** undefined: answerable */
  unanswerable: unknown;
}

/** Records a reader found, and problems with the file as a whole or its layout. */
export interface ParseResult {
  raw: RawRecord[];
  problems: Problem[];
}

/** The field names of JSONL and of records made in memory. */
export const PLAIN_NAMES: FieldNames = {
  id: 'id',
  passageId: 'passage_id',
  context: 'context',
  question: 'question',
  answers: 'answers',
  unanswerable: 'unanswerable',
  answer: (i, part) => `answers[${i}].${part}`,
};

/** A file-level error (record -1): the file cannot be read as this format at all. */
export function fileProblem(file: string, code: Problem['code'], message: string, field = ''): Problem {
  return { severity: 'error', file, record: -1, field, message, code };
}

/** Is `v` a plain object (not an array, not null)? */
export function isObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}
