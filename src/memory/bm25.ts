// Okapi BM25 (Robertson & Zaragoza 2009, "The Probabilistic Relevance Framework: BM25 and Beyond")
// over the slots' text, so names and rare words count even when the embedder is weak. IDF is the
// non-negative form ln(1 + (N - n + 0.5) / (n + 0.5)) used by Lucene, so a term in every slot
// scores slightly above zero instead of below.

/** Term statistics of one document. */
export interface DocStats {
  tf: Map<string, number>;
  len: number;
}

export function docStats(tokens: readonly string[]): DocStats {
  const tf = new Map<string, number>();
  for (const t of tokens) tf.set(t, (tf.get(t) ?? 0) + 1);
  return { tf, len: tokens.length };
}

export interface Bm25Params {
  /** Term-frequency saturation. @default 1.2 */
  k1: number;
  /** Length normalisation. @default 0.75 */
  b: number;
}

export const BM25_DEFAULTS: Bm25Params = { k1: 1.2, b: 0.75 };

/** BM25's IDF in the non-negative form Lucene uses: ln(1 + (N − n + 0.5) / (n + 0.5)); 0 for an unseen term. */
export const bm25Idf = (n: number, df: number): number => (df > 0 ? Math.log(1 + (n - df + 0.5) / (df + 0.5)) : 0);

/** The BM25 term score of one document: its IDF, saturated by term frequency, normalised by length. */
export function bm25Term(idf: number, tf: number, len: number, avg: number, k1: number, b: number): number {
  return (idf * (tf * (k1 + 1))) / (tf + k1 * (1 - b + (b * len) / (avg || 1)));
}

/**
 * BM25 score of each document for a query. `docs[i]` may be null (a free slot): its score is 0 and
 * it does not count toward N or the average length. Writes into `out` (length docs.length).
 */
export function bm25Scores(
  queryTerms: readonly string[],
  docs: ReadonlyArray<DocStats | null>,
  out: Float64Array,
  p: Bm25Params = BM25_DEFAULTS,
): void {
  out.fill(0);
  let n = 0;
  let total = 0;
  for (const d of docs) {
    if (d) {
      n++;
      total += d.len;
    }
  }
  if (n === 0 || queryTerms.length === 0) return;
  const avg = total / n || 1;
  const seen = new Set<string>();
  for (const term of queryTerms) {
    if (seen.has(term)) continue;
    seen.add(term);
    let df = 0;
    for (const d of docs) if (d && d.tf.has(term)) df++;
    if (df === 0) continue;
    const idf = bm25Idf(n, df);
    for (let i = 0; i < docs.length; i++) {
      const d = docs[i];
      if (!d) continue;
      const f = d.tf.get(term);
      if (!f) continue;
      out[i]! += bm25Term(idf, f, d.len, avg, p.k1, p.b);
    }
  }
}

/**
 * Term -> documents holding it (ascending), over a fixed set of documents: what `bm25Scores` finds by
 * asking every document about every query term, built once per set instead of once per query.
 */
export interface Postings {
  docs: ReadonlyArray<DocStats | null>;
  byTerm: Map<string, number[]>;
  /** Documents present (non-null) and their total length. */
  n: number;
  total: number;
}

export function postingsOf(docs: ReadonlyArray<DocStats | null>): Postings {
  const byTerm = new Map<string, number[]>();
  let n = 0;
  let total = 0;
  for (let i = 0; i < docs.length; i++) {
    const d = docs[i];
    if (!d) continue;
    n++;
    total += d.len;
    for (const t of d.tf.keys()) {
      const list = byTerm.get(t);
      if (list) list.push(i);
      else byTerm.set(t, [i]);
    }
  }
  return { docs, byTerm, n, total };
}

/** Takes document `i` (with statistics `d`) out of the postings. */
export function postingsRemove(post: Postings, i: number, d: DocStats): void {
  post.n--;
  post.total -= d.len;
  for (const t of d.tf.keys()) {
    const list = post.byTerm.get(t)!;
    list.splice(list.indexOf(i), 1);
    if (list.length === 0) post.byTerm.delete(t);
  }
}

/** Puts document `i` (with statistics `d`) into the postings, keeping each list ascending. */
export function postingsInsert(post: Postings, i: number, d: DocStats): void {
  post.n++;
  post.total += d.len;
  for (const t of d.tf.keys()) {
    const list = post.byTerm.get(t);
    if (!list) {
      post.byTerm.set(t, [i]);
      continue;
    }
    let at = list.length;
    while (at > 0 && list[at - 1]! > i) at--;
    list.splice(at, 0, i);
  }
}

/** `bm25Scores` over postings: the same sums in the same order, so the same bits. */
export function bm25ScoresFrom(queryTerms: readonly string[], post: Postings, out: Float64Array, p: Bm25Params = BM25_DEFAULTS): void {
  out.fill(0);
  const { n, total, docs } = post;
  if (n === 0 || queryTerms.length === 0) return;
  const avg = total / n || 1;
  const seen = new Set<string>();
  for (const term of queryTerms) {
    if (seen.has(term)) continue;
    seen.add(term);
    const list = post.byTerm.get(term);
    if (!list) continue;
    const idf = bm25Idf(n, list.length);
    for (const i of list) {
      const d = docs[i]!;
      out[i]! += bm25Term(idf, d.tf.get(term)!, d.len, avg, p.k1, p.b);
    }
  }
}
