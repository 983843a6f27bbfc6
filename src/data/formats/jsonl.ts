// defines: parseJsonl, writeJsonl — Spanwright's own JSONL shape, one question per line.
//
// Each line is one JSON object (blank lines are skipped):
//   {"id": "q1",                 string, unique in the file (a whole number is accepted)
//    "passage_id": "harbour/p0", string, optional: when absent, derived from the context
//                                (`ctx-` + FNV-1a 64 of the text, see passage-id.ts)
//    "context": "...",           string, the passage text
//    "question": "...",          string
//    "answers": [{"text": "...", "start": 12}],
//                                list; `start` counts UTF-16 code units (JavaScript string
//                                indices) into `context`; optional per answer: an answer
//                                without `start` is placed where its text occurs exactly once
//    "unanswerable": false}      optional, default false; when true, `answers` is []
// The writer emits every field, in this order, LF line ends, so reading back what it
// wrote gives the same records. Fields not listed are reported (one warning per name).
import type { QARecord } from '../record.js';
import { parseJson } from '../json-syntax.js';
import type { Problem } from '../validate.js';
import { PLAIN_NAMES, isObject, type ParseResult, type RawRecord } from './raw.js';

const RECORD_FIELDS = new Set(['id', 'passage_id', 'context', 'question', 'answers', 'unanswerable']);
const ANSWER_FIELDS = new Set(['text', 'start']);

export function parseJsonl(text: string, file: string): ParseResult {
  const raw: RawRecord[] = [];
  const problems: Problem[] = [];
  const unknown = new Map<string, { record: number; line: number; count: number }>();
  const noteUnknown = (field: string, record: number, line: number): void => {
    const seen = unknown.get(field);
    if (seen) seen.count++;
    else unknown.set(field, { record, line, count: 1 });
  };

  const lines = text.split('\n');
  let index = 0;
  lines.forEach((rawLine, li) => {
    const line = rawLine.endsWith('\r') ? rawLine.slice(0, -1) : rawLine;
    if (line.trim() === '') return;
    const where = `line ${li + 1}`;
    const record = index++;
    const parsed = parseJson(line);
    if (!parsed.ok) {
      problems.push({
        severity: 'error',
        file,
        record,
        field: '',
        message: `${where}, column ${parsed.column}: JSON syntax error: ${parsed.message}`,
        code: 'syntax',
      });
      return;
    }
    const obj = parsed.value;
    if (!isObject(obj)) {
      problems.push({
        severity: 'error',
        file,
        record,
        field: '',
        message: `${where}: each line must be one JSON object (one question)`,
        code: 'layout',
      });
      return;
    }
    for (const key of Object.keys(obj)) if (!RECORD_FIELDS.has(key)) noteUnknown(key, record, li + 1);
    const answers = obj['answers'];
    raw.push({
      index: record,
      where,
      names: PLAIN_NAMES,
      id: obj['id'],
      passageId: obj['passage_id'],
      context: obj['context'],
      question: obj['question'],
      answers: Array.isArray(answers)
        ? answers.map((a) => {
            if (!isObject(a)) return a;
            for (const key of Object.keys(a)) if (!ANSWER_FIELDS.has(key)) noteUnknown(`answers[].${key}`, record, li + 1);
            return { text: a['text'], start: a['start'] };
          })
        : answers,
      unanswerable: obj['unanswerable'],
    });
  });

  for (const [field, seen] of unknown) {
    problems.push({
      severity: 'warning',
      file,
      record: seen.record,
      field,
      message:
        `line ${seen.line}: field ${JSON.stringify(field)} is not part of the JSONL shape and was ignored` +
        (seen.count > 1 ? ` (on ${seen.count} lines)` : '') +
        `; the fields are ${[...RECORD_FIELDS].join(', ')}, and text, start in answers`,
      code: 'unknown-field',
    });
  }
  return { raw, problems };
}

export function writeJsonl(records: readonly QARecord[]): string {
  return records
    .map(
      (r) =>
        `${JSON.stringify({
          id: r.id,
          passage_id: r.passageId,
          context: r.context,
          question: r.question,
          answers: r.answers.map((a) => ({ text: a.text, start: a.start })),
          unanswerable: r.unanswerable,
        })}\n`,
    )
    .join('');
}
