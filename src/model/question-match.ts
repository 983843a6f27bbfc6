// defines: withQuestionMatch — a reader's weights and config with word-match token types
// turned on (ReaderConfig.questionMatch): the token-type table grows to the rows the
// level needs, each new row a copy of the context row it refines, so the reader reads exactly as
// before until training tells the rows apart. Used when a stage first trains a reader
// with the features.
import type { NamedTensors } from '../io/tensors.js';
import { MATCH_TYPES, validateConfig, type QuestionMatch, type ReaderConfig } from './config.js';

const TYPES = 'bert.embeddings.token_type_embeddings.weight';

export function withQuestionMatch(
  config: ReaderConfig,
  named: NamedTensors,
  level: QuestionMatch,
): { config: ReaderConfig; named: NamedTensors } {
  const need = MATCH_TYPES[level];
  if (config.questionMatch === level && config.typeVocabSize >= need) return { config, named };
  const table = named.get(TYPES) ?? named.get(TYPES.replace(/^bert\./, ''));
  if (!table) throw new Error(`question match: the weights have no ${TYPES}`);
  const [rows, H] = table.shape as [number, number];
  if (rows < 2) throw new Error(`question match: ${TYPES} has ${rows} row(s); the context row 1 is needed`);
  const total = Math.max(need, rows);
  const data = new Float32Array(total * H);
  data.set(table.data.subarray(0, rows * H));
  // a new row starts as the context row it refines: 3 (best sentence) as 1, 4 (matched, best
  // sentence) as 2 when there is one; 5–8 (of the asked kind) as 1–4 when they exist
  const refines = (r: number): number => (r >= 5 ? (r - 4 < rows ? r - 4 : refines(r - 4)) : r === 4 && rows > 2 ? 2 : 1);
  for (let r = rows; r < total; r++) {
    const from = refines(r);
    data.set(table.data.subarray(from * H, (from + 1) * H), r * H);
  }
  const out: NamedTensors = new Map(named);
  out.delete(TYPES.replace(/^bert\./, ''));
  out.set(TYPES, { shape: [total, H], data });
  const next: ReaderConfig = { ...config, typeVocabSize: total, questionMatch: level };
  validateConfig(next);
  return { config: next, named: out };
}
