// defines: Problem, ProblemCode, validateRecords, validateQARecords, summarise — the checks
// every question passes before it reaches training, and the report of what failed.
//
// Validation never throws on bad data: it returns the records that passed (repaired
// where a repair is safe) and one Problem per fault. A record with any error is left
// out of `records`; warnings keep it. Checks, per record:
//   1. types and presence: id, context, question (non-empty strings), answers (a list
//      of {text, start}), unanswerable (true/false), passage id; the field is named.
//   2. line breaks: CRLF and lone CR inside text become LF, and answer starts move
//      left by the CRLFs before them (see normaliseLineBreaks) — one warning per file.
//   3. each answer: start in range (0 ≤ start < context length) and
//      `context.slice(start, start + text.length) === text`. When it is not, but the
//      text occurs exactly once, the start moves there with a warning; otherwise error.
//      An answer without a start is placed where its text occurs exactly once.
//      With `answers: 'texts'` (for scoring gold files only) an answer that cannot be
//      placed is kept by its text at start −1, with a warning, as the SQuAD 2.0 script reads it.
//   4. unanswerable questions have no answers; answerable ones have at least one.
// and across records: duplicate ids (error), one passage id with two different
// contexts (error), the same question twice on one passage (warning).
// Offsets are UTF-16 code units into the context as stored (after step 2); no Unicode
// normalisation is applied, so combining marks and emoji keep their code units.
import type { Answer, QARecord } from './record.js';
import { PLAIN_NAMES, isObject, type FieldNames, type RawRecord } from './formats/raw.js';
import { contextPassageId } from './passage-id.js';

export type Severity = 'error' | 'warning';

/** A stable name for each kind of problem, so tools and tests need not read messages. */
export type ProblemCode =
  | 'unreadable' // bytes are not text: bad encoding, NUL characters
  | 'syntax' // JSON or CSV syntax
  | 'layout' // the file is not laid out as its format says (no `data` list, missing column)
  | 'unknown-field' // warning: a field Spanwright does not read
  | 'missing-field'
  | 'wrong-type'
  | 'empty-text'
  | 'nul-character'
  | 'offset-out-of-range'
  | 'answer-mismatch' // text not at its start, and not found exactly once
  | 'answer-not-found' // no start given, and the text does not occur exactly once
  | 'answer-repaired' // warning: start moved to the text's only occurrence
  | 'answer-scored-by-text' // warning, with answers: 'texts': the answer could not be placed and is kept by its text
  | 'line-breaks-normalised' // warning: CR/CRLF became LF, offsets moved
  | 'unanswerable-with-answers'
  | 'answerable-without-answers'
  | 'duplicate-id'
  | 'passage-conflict'
  | 'duplicate-question' // warning
  | 'question-without-words' // warning: no letter or digit, so the reader sees no question
  | 'unknown-format' // the name gives no format and the text looks like none
  | 'already-present'; // warning, on import into a dataset: this very question is there already; skipped

/** Problem kinds that are repairs: the record was changed and kept. */
export const REPAIR_CODES: ReadonlySet<ProblemCode> = new Set<ProblemCode>(['answer-repaired', 'line-breaks-normalised']);

/** One fault found in a data file (contract in DEVELOPERS.md; `code` is an addition). */
export interface Problem {
  severity: Severity;
  file: string;
  /** the question's index in the file (0-based; messages count from 1, see recordNumber); -1 when it concerns the whole file */
  record: number;
  id?: string;
  /** the field as the file names it ('' for the whole file) */
  field: string;
  message: string;
  code?: ProblemCode;
}

export interface ValidationResult {
  /** records that passed, repaired where a warning says so, in file order */
  records: QARecord[];
  /** each passed record's index in the file (Problem.record), parallel to `records` */
  indices: number[];
  problems: Problem[];
}

export interface ValidateOptions {
  /** called every few thousand records and at the end, for a progress bar */
  onProgress?: (done: number, total: number) => void;
  /**
   * 'texts' keeps an answer whose start is wrong, missing or out of range, or whose text is
   * not in the context, with a warning ('answer-scored-by-text') and start −1: how the
   * SQuAD 2.0 evaluation script reads gold answers (it compares texts only). For scoring
   * gold files (`score`); anything that trains or checks stays 'strict' (the default).
   */
  answers?: 'strict' | 'texts';
}

const PROGRESS_EVERY = 2000;

/** Checks raw records from a format reader; see the header for the rules. */
export function validateRecords(raw: RawRecord[], file: string, options: ValidateOptions = {}): ValidationResult {
  const records: QARecord[] = [];
  const indices: number[] = [];
  const problems: Problem[] = [];
  const idOwner = new Map<string, RawRecord>();
  const passageOwner = new Map<string, { context: string; raw: RawRecord }>();
  const questionOwner = new Map<string, RawRecord>();
  let lineBreakRecords = 0;
  let firstLineBreak: RawRecord | null = null;

  raw.forEach((r, n) => {
    const checked = checkRecord(r, file, problems, options.answers ?? 'strict');
    if (checked.hadCarriageReturn) {
      lineBreakRecords++;
      firstLineBreak ??= r;
    }
    let keep = checked.record !== null;
    const report = (severity: Severity, code: ProblemCode, field: string, message: string): void => {
      problems.push(problem(severity, code, file, r, field, message, checked.id));
    };

    if (checked.id !== undefined) {
      const owner = idOwner.get(checked.id);
      if (owner) {
        report('error', 'duplicate-id', r.names.id, `id ${quote(checked.id)} is already used by ${describe(owner)}`);
        keep = false;
      } else idOwner.set(checked.id, r);
    }
    const rec = checked.record;
    if (keep && rec) {
      const passage = passageOwner.get(rec.passageId);
      if (passage && passage.context !== rec.context) {
        report(
          'error',
          'passage-conflict',
          r.names.context,
          `passage ${quote(rec.passageId)} already has a different context (${describe(passage.raw)}); give this passage its own id`,
        );
        keep = false;
      } else if (!passage) passageOwner.set(rec.passageId, { context: rec.context, raw: r });
    }
    if (keep && rec) {
      const key = questionKey(rec.passageId, rec.question);
      const owner = questionOwner.get(key);
      if (owner) {
        report('warning', 'duplicate-question', r.names.question, `the same question is asked of this passage by ${describe(owner)}`);
      } else questionOwner.set(key, r);
      records.push(rec);
      indices.push(r.index);
    }
    if (options.onProgress && ((n + 1) % PROGRESS_EVERY === 0 || n + 1 === raw.length)) options.onProgress(n + 1, raw.length);
  });

  if (firstLineBreak) {
    const r: RawRecord = firstLineBreak;
    problems.push(
      problem(
        'warning',
        'line-breaks-normalised',
        file,
        r,
        r.names.context,
        `${lineBreakRecords} record(s), the first here, had CR or CRLF line breaks inside their text; ` +
          'they became LF and answer starts moved to match',
        undefined,
      ),
    );
  }
  return { records, indices, problems };
}

/** Checks records made in memory (labelled in the page, or built by code). */
export function validateQARecords(records: QARecord[], file: string, options: ValidateOptions = {}): ValidationResult {
  const raw = records.map((r, index): RawRecord => ({
    index,
    where: '',
    names: PLAIN_NAMES,
    id: r.id,
    passageId: r.passageId,
    context: r.context,
    question: r.question,
    answers: r.answers.map((a) => ({ text: a.text, start: a.start })),
    unanswerable: r.unanswerable,
  }));
  return validateRecords(raw, file, options);
}

export interface DatasetSummary {
  records: number;
  passages: number;
  unanswerable: number;
  errors: number;
  warnings: number;
  repairs: number;
}

/** Counts for a report: records and passages that passed, problems by kind. */
export function summarise(result: ValidationResult): DatasetSummary {
  const errors = result.problems.filter((p) => p.severity === 'error').length;
  return {
    records: result.records.length,
    passages: new Set(result.records.map((r) => r.passageId)).size,
    unanswerable: result.records.filter((r) => r.unanswerable).length,
    errors,
    warnings: result.problems.length - errors,
    repairs: result.problems.filter((p) => p.code !== undefined && REPAIR_CODES.has(p.code)).length,
  };
}

/**
 * When two questions count as the same: one passage, and the question text equal after
 * trimming, collapsing white space and lower-casing.
 */
export function questionKey(passageId: string, question: string): string {
  return `${passageId}\u0000${question.trim().replace(/\s+/g, ' ').toLowerCase()}`;
}

/** How a person counts records: from 1 (Problem.record, for tools, counts from 0). */
export function recordNumber(index: number): number {
  return index + 1;
}

/** One line for a person: `file: record 4 (id q4), answers[0].start: message` (the record counted from 1). */
export function formatProblem(p: Problem): string {
  const parts: string[] = [];
  if (p.record >= 0) parts.push(`record ${recordNumber(p.record)}${p.id !== undefined ? ` (id ${p.id})` : ''}`);
  if (p.field) parts.push(p.field);
  return `${[p.file, parts.join(', ')].filter((s) => s !== '').join(': ')}: ${p.severity}: ${p.message}`;
}

// ---------------------------------------------------------------------------

interface Checked {
  record: QARecord | null;
  /** the id when it is usable, for the duplicate check even if the record fails */
  id?: string;
  hadCarriageReturn: boolean;
}

function checkRecord(r: RawRecord, file: string, problems: Problem[], answerRule: 'strict' | 'texts'): Checked {
  const names = r.names;
  let failed = false;
  let id: string | undefined;
  const report = (severity: Severity, code: ProblemCode, field: string, message: string): void => {
    if (severity === 'error') failed = true;
    problems.push(problem(severity, code, file, r, field, message, id));
  };

  // 1. types and presence
  if (typeof r.id === 'string' && r.id.trim() !== '') id = r.id;
  else if (typeof r.id === 'number' && Number.isSafeInteger(r.id)) id = String(r.id);
  else if (r.id === undefined || r.id === null || r.id === '') report('error', 'missing-field', names.id, 'the id is missing');
  else report('error', 'wrong-type', names.id, `the id must be a string, not ${describeValue(r.id)}`);

  let context = textField(r.context, names.context, 'context', report);
  let question = textField(r.question, names.question, 'question', report);

  let unanswerable = false;
  if (typeof r.unanswerable === 'boolean') unanswerable = r.unanswerable;
  else if (r.unanswerable !== undefined && r.unanswerable !== null) {
    report('error', 'wrong-type', names.unanswerable, `the unanswerable flag must be true or false, not ${describeValue(r.unanswerable)}`);
  }

  let answers: Array<{ text: string | null; start: number | null }> = [];
  let answersReadable = true;
  if (Array.isArray(r.answers)) {
    answers = r.answers.map((a, i) => readAnswer(a, i, names, report));
  } else if (r.answers !== undefined && r.answers !== null) {
    report('error', 'wrong-type', names.answers, `the answers must be a list, not ${describeValue(r.answers)}`);
    answersReadable = false;
  }

  // 2. line breaks: offsets move by the CRLFs before them
  let hadCarriageReturn = false;
  if (context !== null && context.includes('\r')) {
    hadCarriageReturn = true;
    const ctx = context;
    answers = answers.map((a) => ({
      text: a.text,
      start: a.start === null || a.start < 0 || a.start > ctx.length ? a.start : a.start - crlfBefore(ctx, a.start),
    }));
    context = normaliseLineBreaks(context);
  }
  if (question !== null && question.includes('\r')) [hadCarriageReturn, question] = [true, normaliseLineBreaks(question)];
  // zero-width or punctuation-only text passes the emptiness check but tokenizes to nothing useful
  if (question !== null && question.trim() !== '' && !/[\p{L}\p{N}]/u.test(question)) {
    report(
      'warning',
      'question-without-words',
      names.question,
      'the question has no letter or digit (only spaces, punctuation or invisible characters), so the reader sees no question',
    );
  }
  for (const a of answers) {
    if (a.text !== null && a.text.includes('\r')) [hadCarriageReturn, a.text] = [true, normaliseLineBreaks(a.text)];
  }

  let passageId: string | null = null;
  if (typeof r.passageId === 'string' && r.passageId.trim() !== '') passageId = r.passageId;
  else if (typeof r.passageId === 'number' && Number.isSafeInteger(r.passageId)) passageId = String(r.passageId);
  else if (r.passageId === undefined || r.passageId === null || r.passageId === '') {
    if (context !== null) passageId = contextPassageId(context);
  } else report('error', 'wrong-type', names.passageId, `the passage id must be a string, not ${describeValue(r.passageId)}`);

  // 3. each answer's span
  const placed: Answer[] = [];
  if (context !== null) {
    answers.forEach((a, i) => {
      if (a.text === null) return;
      const at = placeAnswer(context!, a.text, a.start, i, answers.length, names, report, answerRule);
      if (at === UNPLACED) placed.push({ text: a.text, start: -1 });
      else if (at !== null) placed.push({ text: a.text, start: at });
    });
  }

  // 4. answerable or not
  if (unanswerable && answers.length > 0) {
    report(
      'error',
      'unanswerable-with-answers',
      names.answers,
      `the question is marked unanswerable but has ${answers.length} answer(s); remove them or unmark it`,
    );
  } else if (!unanswerable && answers.length === 0 && answersReadable) {
    report(
      'error',
      'answerable-without-answers',
      names.answers,
      `the question has no answer; give one, or mark it unanswerable (${names.unanswerable})`,
    );
  }

  if (failed || id === undefined || context === null || question === null || passageId === null) {
    return { record: null, id, hadCarriageReturn };
  }
  return { record: { id, passageId, context, question, answers: placed, unanswerable }, id, hadCarriageReturn };
}

type Report = (severity: Severity, code: ProblemCode, field: string, message: string) => void;

function textField(v: unknown, field: string, what: string, report: Report): string | null {
  if (v === undefined || v === null) {
    report('error', 'missing-field', field, `the ${what} is missing`);
    return null;
  }
  if (typeof v !== 'string') {
    report('error', 'wrong-type', field, `the ${what} must be a string, not ${describeValue(v)}`);
    return null;
  }
  if (v.trim() === '') {
    report('error', 'empty-text', field, `the ${what} is empty`);
    return null;
  }
  const nul = v.indexOf('\u0000');
  if (nul >= 0) {
    report('error', 'nul-character', field, `the ${what} holds a NUL character (U+0000) at offset ${nul}`);
    return null;
  }
  return v;
}

function readAnswer(a: unknown, i: number, names: FieldNames, report: Report): { text: string | null; start: number | null } {
  if (!isObject(a)) {
    report('error', 'wrong-type', `${names.answers}[${i}]`, `an answer must be an object with text and start, not ${describeValue(a)}`);
    return { text: null, start: null };
  }
  let text: string | null = null;
  const t = a['text'];
  if (t === undefined || t === null) report('error', 'missing-field', names.answer(i, 'text'), 'the answer text is missing');
  else if (typeof t !== 'string')
    report('error', 'wrong-type', names.answer(i, 'text'), `the answer text must be a string, not ${describeValue(t)}`);
  else if (t.trim() === '') report('error', 'empty-text', names.answer(i, 'text'), 'the answer text is empty');
  else text = t;

  let start: number | null = null;
  const s = a['start'];
  if (typeof s === 'number' && Number.isInteger(s)) start = s;
  else if (s !== undefined && s !== null && s !== '') {
    report('error', 'wrong-type', names.answer(i, 'start'), `the answer start must be a whole number, not ${describeValue(s)}`);
    text = null; // nothing to check it against
  }
  return { text, start };
}

/** placeAnswer's answer when a texts-only report took its error: kept by its text, at no start. */
const UNPLACED = -1;

/** Step 3: the checked start of one answer, or null after reporting why not (UNPLACED when the report kept it). */
function placeAnswer(
  context: string,
  text: string,
  start: number | null,
  i: number,
  count: number,
  names: FieldNames,
  strictReport: Report,
  rule: 'strict' | 'texts',
): number | null {
  // under 'texts' an answer that cannot be placed is kept by its text, with a warning
  const report: Report = (severity, code, field, message) =>
    rule === 'texts' && severity === 'error'
      ? strictReport('warning', 'answer-scored-by-text', field, `${message}; scored by its text, as the SQuAD 2.0 evaluation does`)
      : strictReport(severity, code, field, message);
  const unplaced = rule === 'texts' ? UNPLACED : null;
  const which = count > 1 ? `answer ${i + 1} ` : 'the answer ';
  if (start === null) {
    const { first, count: seen } = occurrences(context, text);
    if (seen === 1) return first;
    report(
      'error',
      'answer-not-found',
      names.answer(i, 'start'),
      seen === 0
        ? `${which}${snippet(text)} has no start and does not occur in the context`
        : `${which}${snippet(text)} has no start and occurs ${seen} times in the context; give its start`,
    );
    return unplaced;
  }
  if (start < 0 || start >= context.length) {
    report(
      'error',
      'offset-out-of-range',
      names.answer(i, 'start'),
      `${which}start ${start} is outside the context (0 to ${context.length - 1})`,
    );
    return unplaced;
  }
  const found = context.slice(start, start + text.length);
  if (found === text) return start;
  const { first, count: seen } = occurrences(context, text);
  if (seen === 1) {
    report(
      'warning',
      'answer-repaired',
      names.answer(i, 'start'),
      `${which}${snippet(text)} is not at ${start} (the context there reads ${snippet(found)}); ` +
        `it occurs once, at ${first}, and was moved there`,
    );
    return first;
  }
  report(
    'error',
    'answer-mismatch',
    names.answer(i, 'start'),
    `${which}${snippet(text)} is not at ${start} (the context there reads ${snippet(found)}) and ` +
      (seen === 0 ? 'does not occur in the context' : `occurs ${seen} times, so its place is unclear`),
  );
  return unplaced;
}

/** Where `text` first occurs in `context` and how often (counting stops at 2). */
function occurrences(context: string, text: string): { first: number; count: number } {
  const first = context.indexOf(text);
  if (first < 0) return { first, count: 0 };
  return { first, count: context.indexOf(text, first + 1) < 0 ? 1 : 2 };
}

/** CRLF → LF, then lone CR → LF. */
export function normaliseLineBreaks(text: string): string {
  return text.replace(/\r\n?/g, '\n');
}

/** How many CRLF pairs start before `offset`: what normaliseLineBreaks removes there. */
function crlfBefore(text: string, offset: number): number {
  let n = 0;
  for (let i = text.indexOf('\r'); i >= 0 && i < offset; i = text.indexOf('\r', i + 1)) {
    if (text.charCodeAt(i + 1) === 0x0a) n++;
  }
  return n;
}

function problem(
  severity: Severity,
  code: ProblemCode,
  file: string,
  r: RawRecord,
  field: string,
  detail: string,
  id: string | undefined,
): Problem {
  const message = r.where ? `${r.where}: ${detail}` : detail;
  const p: Problem = { severity, file, record: r.index, field, message, code };
  if (id !== undefined) p.id = id;
  return p;
}

function describe(r: RawRecord): string {
  const n = recordNumber(r.index);
  return r.where ? `record ${n} (${r.where})` : `record ${n}`;
}

function quote(s: string): string {
  return JSON.stringify(s);
}

/** A short quoted view of a text: JSON quoting shows stray spaces and line breaks. */
function snippet(s: string): string {
  return JSON.stringify(s.length > 40 ? `${s.slice(0, 37)}...` : s);
}

/** "a string (\"12\")", "a number (3.5)", "a list", "an object", "true". */
export function describeValue(v: unknown): string {
  if (v === null) return 'null';
  if (Array.isArray(v)) return 'a list';
  switch (typeof v) {
    case 'string':
      return `a string (${snippet(v)})`;
    case 'number':
      return `a number (${v})`;
    case 'boolean':
      return String(v);
    case 'object':
      return 'an object';
    default:
      return typeof v;
  }
}
