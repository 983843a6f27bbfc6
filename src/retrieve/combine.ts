// defines: minMaxNormalize, combineScores — one ranking from two scores: how well the
// retriever (BM25) matched a passage and how confident the reader is in its span there.
//
// The two scores live on unrelated scales (BM25 grows with query length and term
// rarity; the reader's start + end logit is unbounded), so each is first mapped to [0, 1]
// by min–max normalisation over the candidates being compared, then mixed linearly:
//
//   combined = w · (r − r_min) / (r_max − r_min) + (1 − w) · (s − s_min) / (s_max − s_min)
//
//   r  retriever score, s  reader score (start logit + end logit of the span)
//   w  retriever weight, default 0.5: a neutral starting point, not a tuned value;
//      linear interpolation of retriever and reader scores is common practice, and the
//      weight is best tuned on validation questions.
// When every candidate has the same value of one score, that score cannot separate them
// and counts as 1 for all.

export interface ScoredCandidate {
  /** BM25 score of the passage for the question */
  retrieverScore: number;
  /** the reader's span score in that passage (start logit + end logit) */
  readerScore: number;
}

export interface CombineOptions {
  /** weight of the retriever score in [0, 1]; the reader gets 1 − weight; default 0.5 */
  retrieverWeight?: number;
}

/** Maps values to [0, 1]: (x − min) / (max − min); all 1 when they are all equal. */
export function minMaxNormalize(values: readonly number[]): number[] {
  let min = Infinity;
  let max = -Infinity;
  for (const v of values) {
    if (!Number.isFinite(v)) throw new Error(`minMaxNormalize: ${v} is not a finite score`);
    if (v < min) min = v;
    if (v > max) max = v;
  }
  const range = max - min;
  return values.map((v) => (range > 0 ? (v - min) / range : 1));
}

/** The candidates with a `combinedScore`, best first (ties keep input order). */
export function combineScores<T extends ScoredCandidate>(
  candidates: readonly T[],
  options: CombineOptions = {},
): Array<T & { combinedScore: number }> {
  const w = options.retrieverWeight ?? 0.5;
  if (!(w >= 0 && w <= 1)) throw new Error(`combineScores: retrieverWeight must be in [0, 1], got ${w}`);
  const retriever = minMaxNormalize(candidates.map((c) => c.retrieverScore));
  const reader = minMaxNormalize(candidates.map((c) => c.readerScore));
  return candidates
    .map((c, i) => ({ c, i, combinedScore: w * retriever[i]! + (1 - w) * reader[i]! }))
    .sort((x, y) => y.combinedScore - x.combinedScore || x.i - y.i)
    .map(({ c, combinedScore }) => ({ ...c, combinedScore }));
}
