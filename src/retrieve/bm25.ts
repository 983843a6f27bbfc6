// defines: retrievalTokens, ENGLISH_STOP_WORDS, Bm25Index — Okapi BM25 ranking of
// passages for a question, so `ask` can find the passages worth reading.
//
// Scoring, as Robertson & Zaragoza 2009 ("The Probabilistic Relevance Framework: BM25
// and Beyond") write it, summed over the distinct terms t of the query:
//
//   score(D, Q) = Σ_t IDF(t) · tf(t, D) · (k1 + 1) / (tf(t, D) + k1 · (1 − b + b · |D| / avgdl))
//
//   tf(t, D)  occurrences of t in passage D;  |D| its length in tokens
//   avgdl     mean passage length in tokens over the collection
//   IDF(t)    ln(1 + (N − n(t) + 0.5) / (n(t) + 0.5))  — Lucene's variant of the
//             Robertson–Spärck Jones weight: the added 1 keeps it positive even for a
//             term in more than half the passages; N passages, n(t) containing t
//   k1 = 1.2, b = 0.75  common practice (Lucene's defaults)
//
// A query term repeated in the question counts once (no query-term-frequency factor).
// Passages that share no term with the query are not returned.

/**
 * Tokens for retrieval: NFC-normalised, lowercased, runs of letters, combining marks and
 * digits (any script); everything else separates. Stop words are dropped when given.
 */
export function retrievalTokens(text: string, stopWords?: ReadonlySet<string>): string[] {
  const tokens =
    text
      .normalize('NFC')
      .toLowerCase()
      .match(/[\p{L}\p{M}\p{N}]+/gu) ?? [];
  return stopWords ? tokens.filter((t) => !stopWords.has(t)) : tokens;
}

/** A short list of very common English function words (our own choice; optional). */
export const ENGLISH_STOP_WORDS: ReadonlySet<string> = new Set(
  (
    'a an and are as at be been but by did do does for from had has have he her his how i ' +
    'if in into is it its me my no not of on or our she so than that the their them then ' +
    'there these they this those to was we were what when where which who whom why will ' +
    'with you your'
  ).split(' '),
);

export interface Passage {
  id: string;
  text: string;
}

export interface Bm25Options {
  /** term-frequency saturation; 1.2 is common practice */
  k1?: number;
  /** length normalisation, 0 (none) to 1 (full); 0.75 is common practice */
  b?: number;
  /** tokens to ignore in passages and queries; none by default */
  stopWords?: ReadonlySet<string>;
}

export interface SearchHit {
  passageId: string;
  score: number;
}

/** An inverted index over passages, scored by BM25. Build once, search many times. */
export class Bm25Index {
  readonly k1: number;
  readonly b: number;
  private readonly stopWords: ReadonlySet<string> | undefined;
  private readonly ids: string[] = [];
  /** passage index → length in tokens */
  private readonly lengths: number[] = [];
  /** term → postings: passage index and term frequency */
  private readonly postings = new Map<string, Array<{ doc: number; tf: number }>>();
  private readonly avgdl: number;

  constructor(passages: readonly Passage[], options: Bm25Options = {}) {
    this.k1 = options.k1 ?? 1.2;
    this.b = options.b ?? 0.75;
    this.stopWords = options.stopWords;
    if (!(this.k1 >= 0) || !Number.isFinite(this.k1)) throw new Error(`BM25 k1 must be ≥ 0, got ${options.k1}`);
    if (!(this.b >= 0 && this.b <= 1)) throw new Error(`BM25 b must be in [0, 1], got ${options.b}`);

    const seen = new Set<string>();
    let totalLength = 0;
    passages.forEach((p, doc) => {
      if (seen.has(p.id)) throw new Error(`passage ${doc}: id "${p.id}" appears twice`);
      seen.add(p.id);
      const tokens = retrievalTokens(p.text, this.stopWords);
      this.ids.push(p.id);
      this.lengths.push(tokens.length);
      totalLength += tokens.length;
      const counts = new Map<string, number>();
      for (const t of tokens) counts.set(t, (counts.get(t) ?? 0) + 1);
      for (const [term, tf] of counts) {
        let list = this.postings.get(term);
        if (!list) this.postings.set(term, (list = []));
        list.push({ doc, tf });
      }
    });
    this.avgdl = passages.length > 0 ? totalLength / passages.length : 0;
  }

  /** Number of passages indexed. */
  get size(): number {
    return this.ids.length;
  }

  /** Lucene's IDF: ln(1 + (N − n + 0.5) / (n + 0.5)), for a term as `retrievalTokens` yields it. */
  idf(term: string): number {
    const n = this.postings.get(term)?.length ?? 0;
    const N = this.ids.length;
    return Math.log(1 + (N - n + 0.5) / (n + 0.5));
  }

  /** The `topK` passages by BM25 score, best first (ties: earlier passage first). */
  search(query: string, topK = 10): SearchHit[] {
    if (!Number.isInteger(topK) || topK < 0) throw new Error(`search: topK must be a whole number ≥ 0, got ${topK}`);
    const scores = new Map<number, number>();
    for (const term of new Set(retrievalTokens(query, this.stopWords))) {
      const list = this.postings.get(term);
      if (!list) continue;
      const idf = this.idf(term);
      for (const { doc, tf } of list) {
        // avgdl > 0 whenever a term has postings
        const norm = this.k1 * (1 - this.b + (this.b * this.lengths[doc]!) / this.avgdl);
        const part = (idf * tf * (this.k1 + 1)) / (tf + norm);
        scores.set(doc, (scores.get(doc) ?? 0) + part);
      }
    }
    return [...scores.entries()]
      .sort((x, y) => y[1] - x[1] || x[0] - y[0])
      .slice(0, topK)
      .map(([doc, score]) => ({ passageId: this.ids[doc]!, score }));
  }
}
