// defines: DataFormat, formatFromName, detectFormat, ACCEPTED_FORMATS, unknownFormatMessage —
// which reader a file needs.
//
// The extension decides: .json → SQuAD, .jsonl/.ndjson → JSONL, .csv → CSV, .tsv → TSV.
// Any other name (notes.txt, a name without extension) is judged by content:
//   1. text starting with `{` whose first line is a whole JSON object is JSONL, other
//      text starting with `{` is SQuAD JSON;
//   2. a first line naming the `context` and `question` columns, split by tabs, is TSV;
//      split by commas, CSV;
//   3. anything else is no format (null): plain prose is not a table of questions, and
//      reading it as CSV would only report a header it never had.

export type DataFormat = 'squad' | 'jsonl' | 'csv' | 'tsv';

export const DATA_FORMATS: readonly DataFormat[] = ['squad', 'jsonl', 'csv', 'tsv'];

/** The formats a person can give, for messages. */
export const ACCEPTED_FORMATS = 'SQuAD 1.1/2.0 JSON (.json), JSONL (.jsonl, .ndjson), CSV (.csv) or TSV (.tsv)';

/** The format an extension names, or null for an extension of no format. */
export function formatFromName(name: string): DataFormat | null {
  const ext = /\.([A-Za-z0-9]+)$/.exec(name)?.[1]?.toLowerCase();
  switch (ext) {
    case 'json':
      return 'squad';
    case 'jsonl':
    case 'ndjson':
      return 'jsonl';
    case 'csv':
      return 'csv';
    case 'tsv':
      return 'tsv';
    default:
      return null;
  }
}

/** By extension, else by content (see the header); null when neither tells. */
export function detectFormat(name: string, text: string): DataFormat | null {
  const byName = formatFromName(name);
  if (byName) return byName;
  const start = text.trimStart();
  const firstLine = start.split('\n', 1)[0]!.trim();
  // 1. JSON
  if (start.startsWith('{')) {
    try {
      const v: unknown = JSON.parse(firstLine);
      return typeof v === 'object' && v !== null && !('data' in v) ? 'jsonl' : 'squad';
    } catch {
      return 'squad';
    }
  }
  // 2. a header row of question columns
  for (const [delimiter, format] of [
    ['\t', 'tsv'],
    [',', 'csv'],
  ] as const) {
    const columns = firstLine.split(delimiter).map((c) => c.trim().replace(/^"|"$/g, '').toLowerCase());
    if (columns.includes('context') && columns.includes('question')) return format;
  }
  // 3. none
  return null;
}

/** The error for a file detectFormat finds no format in (formatProblem puts the file's name before it). */
export function unknownFormatMessage(name: string): string {
  const ext = /\.([A-Za-z0-9]+)$/.exec(name)?.[1];
  const why = ext ? `the name ends in .${ext}, which is no question format` : 'the name has no extension';
  return (
    `cannot tell the format: ${why}, and the text is neither JSON nor a table whose header names ` +
    `context and question columns; accepted formats are ${ACCEPTED_FORMATS}`
  );
}
