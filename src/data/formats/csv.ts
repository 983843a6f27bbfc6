// defines: parseCsv, writeCsv, CSV_COLUMNS — questions as a table with a header row.
//
// Columns (the header names them; order is free; `.tsv` files use tabs):
//   id            required, unique per question
//   passage_id    optional: when empty, derived from the context (see passage-id.ts)
//   context       required, the passage text (quote it when it holds commas or line breaks)
//   question      required
//   answer        the answer text; empty for an unanswerable question
//   answer_start  optional: UTF-16 offset of the answer in the context; when empty, the
//                 answer is placed where its text occurs exactly once (else an error)
//   unanswerable  optional: true/false, yes/no or 1/0; empty means false
// A question with several answers takes one row per answer, with the same id and the
// same passage, context, question and unanswerable cells; such rows merge into one
// record. Rows with the same id that differ are reported as duplicate ids.
// Parsing is papaparse's; the writer quotes as RFC 4180 says and ends rows with LF.
import Papa from 'papaparse';
import type { QARecord } from '../record.js';
import type { Problem } from '../validate.js';
import { lineColumn } from '../text-position.js';
import { fileProblem, type FieldNames, type ParseResult, type RawAnswer, type RawRecord } from './raw.js';

export const CSV_COLUMNS = ['id', 'passage_id', 'context', 'question', 'answer', 'answer_start', 'unanswerable'] as const;
const REQUIRED = ['id', 'context', 'question', 'answer'];

const NAMES: FieldNames = {
  id: 'id',
  passageId: 'passage_id',
  context: 'context',
  question: 'question',
  answers: 'answer',
  unanswerable: 'unanswerable',
  answer: (_i, part) => (part === 'text' ? 'answer' : 'answer_start'),
};

export function parseCsv(text: string, file: string, delimiter: ',' | '\t' = ','): ParseResult {
  const problems: Problem[] = [];
  const parsed = Papa.parse<Record<string, string | undefined>>(text, {
    header: true,
    delimiter,
    skipEmptyLines: 'greedy',
    transformHeader: (h) => h.trim(),
  });
  const columns = parsed.meta.fields ?? [];
  const missing = REQUIRED.filter((c) => !columns.includes(c));
  if (missing.length > 0) {
    const other = delimiter === ',' ? [';', '\t'].find((d) => columns.length === 1 && columns[0]!.includes(d)) : undefined;
    problems.push(
      fileProblem(
        file,
        'layout',
        `the header row lacks the column(s) ${missing.join(', ')}; it has ${columns.map((c) => JSON.stringify(c)).join(', ') || 'nothing'}` +
          (other ? `; the columns look separated by ${JSON.stringify(other)}, not commas` : ''),
        missing[0],
      ),
    );
    return { raw: [], problems };
  }
  for (const c of columns) {
    if (!(CSV_COLUMNS as readonly string[]).includes(c)) {
      problems.push({
        ...fileProblem(file, 'unknown-field', `column ${JSON.stringify(c)} is not read; the columns are ${CSV_COLUMNS.join(', ')}`, c),
        severity: 'warning',
      });
    }
  }

  // rows papaparse could not take apart: reported, then left out
  const badRows = new Set<number>();
  for (const e of parsed.errors) {
    if (e.code === 'UndetectableDelimiter') continue;
    // papaparse counts the header in `row` for quote errors, not for field-count errors
    const row = e.type === 'Quotes' ? Math.max(0, (e.row ?? 1) - 1) : (e.row ?? 0);
    if (badRows.has(row)) continue;
    badRows.add(row);
    const at = e.index !== undefined ? lineColumn(text, e.index) : null;
    const detail =
      e.type === 'Quotes'
        ? `a quoted cell is not closed properly${at ? ` (line ${at.line}, column ${at.column})` : ''}; the rest of the file was read into it`
        : `${e.message.replace(/^Too/, 'too')}; is a cell holding a comma or line break unquoted?`;
    problems.push({ severity: 'error', file, record: row, field: '', message: `row ${row + 2}: ${detail}`, code: 'syntax' });
  }

  // rows → records, merging rows that give more answers to one question
  const raw: RawRecord[] = [];
  const byKey = new Map<string, { record: RawRecord; rows: number[] }>();
  parsed.data.forEach((row, i) => {
    if (badRows.has(i)) return;
    const cell = (c: string): string => row[c] ?? '';
    const id = cell('id').trim();
    const answerText = cell('answer');
    const answers: RawAnswer[] = answerText === '' ? [] : [{ text: answerText, start: readStart(cell('answer_start')) }];
    const key = JSON.stringify([id, cell('passage_id'), cell('context'), cell('question'), cell('unanswerable')]);
    const same = id !== '' ? byKey.get(key) : undefined;
    if (same) {
      (same.record.answers as RawAnswer[]).push(...answers);
      same.rows.push(i + 2);
      same.record.where = `rows ${same.rows.join(', ')}`;
      return;
    }
    const record: RawRecord = {
      index: i,
      where: `row ${i + 2}`,
      names: NAMES,
      id: id === '' ? undefined : id,
      passageId: cell('passage_id').trim() === '' ? undefined : cell('passage_id').trim(),
      context: row['context'],
      question: row['question'],
      answers,
      unanswerable: readFlag(cell('unanswerable')),
    };
    byKey.set(key, { record, rows: [i + 2] });
    raw.push(record);
  });
  return { raw, problems };
}

/** A whole number, undefined for an empty cell, or the cell itself (a wrong type). */
function readStart(cell: string): unknown {
  const t = cell.trim();
  if (t === '') return undefined;
  return /^-?\d+$/.test(t) ? Number(t) : cell;
}

function readFlag(cell: string): unknown {
  const t = cell.trim().toLowerCase();
  if (t === '') return undefined;
  if (t === 'true' || t === 'yes' || t === '1') return true;
  if (t === 'false' || t === 'no' || t === '0') return false;
  return cell;
}

/** One row per answer (one for an unanswerable question), columns as CSV_COLUMNS. */
export function writeCsv(records: readonly QARecord[], delimiter: ',' | '\t' = ','): string {
  const rows: string[][] = [];
  for (const r of records) {
    const base = [r.id, r.passageId, r.context, r.question];
    if (r.answers.length === 0) rows.push([...base, '', '', String(r.unanswerable)]);
    for (const a of r.answers) rows.push([...base, a.text, String(a.start), String(r.unanswerable)]);
  }
  return `${Papa.unparse({ fields: [...CSV_COLUMNS], data: rows }, { delimiter, newline: '\n' })}\n`;
}
