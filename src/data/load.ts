// defines: loadDataset, parseDataset, writeDataset — from a file's bytes to checked records
// and back: decode (decode.ts), pick the format (formats/detect.ts), read it
// (formats/*.ts), validate (validate.ts).
import type { QARecord } from './record.js';
import { decodeText } from './decode.js';
import { detectFormat, unknownFormatMessage, type DataFormat } from './formats/detect.js';
import { fileProblem, type ParseResult } from './formats/raw.js';
import { parseSquad, writeSquad } from './formats/squad.js';
import { parseJsonl, writeJsonl } from './formats/jsonl.js';
import { parseCsv, writeCsv } from './formats/csv.js';
import { validateRecords, type Problem, type ValidateOptions } from './validate.js';

export interface LoadOptions extends ValidateOptions {
  /** skip detection */
  format?: DataFormat;
}

export interface LoadResult {
  /** null when the bytes are not text, or the file names no format and its text shows none */
  format: DataFormat | null;
  /** the records that passed, repaired where a warning says so */
  records: QARecord[];
  /** each passed record's index in the file (Problem.record), parallel to `records` */
  indices: number[];
  /** file-level problems first, then by record */
  problems: Problem[];
}

/** Bytes of a data file → checked records. Never throws on bad data. */
export function loadDataset(bytes: Uint8Array, file: string, options: LoadOptions = {}): LoadResult {
  const decoded = decodeText(bytes);
  if (!decoded.ok) return { format: null, records: [], indices: [], problems: [fileProblem(file, 'unreadable', decoded.message)] };
  return parseDataset(decoded.text, file, options);
}

/** Already-decoded text of a data file → checked records. */
export function parseDataset(text: string, file: string, options: LoadOptions = {}): LoadResult {
  const format = options.format ?? detectFormat(file, text);
  if (format === null)
    return { format, records: [], indices: [], problems: [fileProblem(file, 'unknown-format', unknownFormatMessage(file))] };
  const parsed = readFormat(format, text, file);
  if (parsed.raw.length === 0 && parsed.problems.length === 0) {
    parsed.problems.push(fileProblem(file, 'layout', `the file holds no questions (read as ${format})`));
  }
  const checked = validateRecords(parsed.raw, file, options);
  const problems = [...parsed.problems, ...checked.problems]
    .map((p, order) => ({ p, order }))
    .sort((a, b) => a.p.record - b.p.record || a.order - b.order)
    .map(({ p }) => p);
  return { format, records: checked.records, indices: checked.indices, problems };
}

function readFormat(format: DataFormat, text: string, file: string): ParseResult {
  switch (format) {
    case 'squad':
      return parseSquad(text, file);
    case 'jsonl':
      return parseJsonl(text, file);
    case 'csv':
      return parseCsv(text, file, ',');
    case 'tsv':
      return parseCsv(text, file, '\t');
  }
}

/** Records → the text of a file in `format` (UTF-8 when encoded; no byte-order mark). */
export function writeDataset(records: readonly QARecord[], format: DataFormat): string {
  switch (format) {
    case 'squad':
      return writeSquad(records);
    case 'jsonl':
      return writeJsonl(records);
    case 'csv':
      return writeCsv(records, ',');
    case 'tsv':
      return writeCsv(records, '\t');
  }
}
