// defines: hashDataset, canonicalDataset — one SHA-256 that names a dataset's content, for
// checkpoints and model cards.
//
// The hash is ORDER-INDEPENDENT: it covers the set of records, so reordering a file, or
// converting it between SQuAD, JSONL and CSV, keeps the hash. (The passage split, split.ts,
// is order-independent the same way, so hash + seed fix the split.) Every field counts,
// answer order included. The canonical text is:
//   "spanwright-dataset-v1\n" + sorted lines, each line
//   JSON.stringify([id, passageId, context, question, unanswerable, [[text, start], ...]])
// joined by "\n", encoded as UTF-8. JSON.stringify escapes lone surrogates (ES2019), so two
// different strings never encode alike.
import type { QARecord } from './record.js';

export const DATASET_HASH_VERSION = 'spanwright-dataset-v1';

/** The text hashDataset hashes (see the header). */
export function canonicalDataset(records: readonly QARecord[]): string {
  const lines = records.map((r) =>
    JSON.stringify([r.id, r.passageId, r.context, r.question, r.unanswerable, r.answers.map((a) => [a.text, a.start])]),
  );
  lines.sort((a, b) => (a < b ? -1 : a > b ? 1 : 0));
  return `${DATASET_HASH_VERSION}\n${lines.join('\n')}`;
}

/** SHA-256 of canonicalDataset(records), as 64 lower-case hex digits. */
export async function hashDataset(records: readonly QARecord[]): Promise<string> {
  const bytes = new TextEncoder().encode(canonicalDataset(records));
  const digest = await globalThis.crypto.subtle.digest('SHA-256', bytes);
  return [...new Uint8Array(digest)].map((b) => b.toString(16).padStart(2, '0')).join('');
}
