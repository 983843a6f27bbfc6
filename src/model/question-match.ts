// defines: withQuestionMatch — a reader's weights and config with the question-match token
// type turned on (ReaderConfig.questionMatch): the token-type table gains row 2, a copy of
// the context row 1, so the reader reads exactly as before until training tells the two
// rows apart. Used when a stage first trains a reader with the feature.
import type { NamedTensors } from '../io/tensors.js';
import { validateConfig, type ReaderConfig } from './config.js';

const TYPES = 'bert.embeddings.token_type_embeddings.weight';

export function withQuestionMatch(config: ReaderConfig, named: NamedTensors): { config: ReaderConfig; named: NamedTensors } {
  if (config.questionMatch) return { config, named };
  const table = named.get(TYPES) ?? named.get(TYPES.replace(/^bert\./, ''));
  if (!table) throw new Error(`question match: the weights have no ${TYPES}`);
  const [rows, H] = table.shape as [number, number];
  if (rows < 2) throw new Error(`question match: ${TYPES} has ${rows} row(s); the context row 1 is needed`);
  const data = new Float32Array(Math.max(3, rows) * H);
  data.set(table.data.subarray(0, rows * H));
  if (rows < 3) data.set(table.data.subarray(H, 2 * H), 2 * H); // row 2 = row 1
  const out: NamedTensors = new Map(named);
  out.delete(TYPES.replace(/^bert\./, ''));
  out.set(TYPES, { shape: [Math.max(3, rows), H], data });
  const next: ReaderConfig = { ...config, typeVocabSize: Math.max(3, rows), questionMatch: true };
  validateConfig(next);
  return { config: next, named: out };
}
