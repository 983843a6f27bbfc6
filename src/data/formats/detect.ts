// defines: DataFormat, formatFromName, detectFormat — which reader a file needs.
//
// The extension decides: .json → SQuAD, .jsonl/.ndjson → JSONL, .csv → CSV, .tsv → TSV.
// Any other name is judged by content: text starting with `{` whose first line is a
// whole JSON object is JSONL, other text starting with `{` is SQuAD JSON, and the rest
// is CSV.

export type DataFormat = 'squad' | 'jsonl' | 'csv' | 'tsv';

export const DATA_FORMATS: readonly DataFormat[] = ['squad', 'jsonl', 'csv', 'tsv'];

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

/** By extension, else by content (see the header). */
export function detectFormat(name: string, text: string): DataFormat {
  const byName = formatFromName(name);
  if (byName) return byName;
  const start = text.trimStart();
  if (!start.startsWith('{')) return 'csv';
  const firstLine = start.split('\n', 1)[0]!.trim();
  try {
    const v: unknown = JSON.parse(firstLine);
    return typeof v === 'object' && v !== null && !('data' in v) ? 'jsonl' : 'squad';
  } catch {
    return 'squad';
  }
}
