// The attention read over a session's slots. Scores
//   z_i = beta * cos(q, K_i) + gamma * lexical_i(q) + delta * ln(s_i)
// (additive scoring as in Bahdanau et al. 2015; dot-product similarity of unit vectors as in Vaswani
// et al. 2017), weights a = softmax(z / tau), then top-k selection with a minimum weight and a mass
// cut. lexical_i is Okapi BM25 over slot text normalised by the best score of this read. Optional
// multi-hop reads follow End-To-End Memory Networks (Sukhbaatar et al. 2015): q' = normalize(q + sum a_i v_i).

import { bm25ScoresFrom, docStats, postingsInsert, postingsOf, postingsRemove, type DocStats, type Postings } from './bm25.js';
import { decayed } from './decay.js';
import type { ReadParams } from './params.js';
import type { SlotTable } from './slots.js';
import { STOPWORDS, contentWords, tokenize } from './text.js';
import { dot, dotSparse, pushTopK, sparseOf } from './vector.js';

/** Per-slot results of one read; arrays are indexed by slot (length = capacity). */
export interface AttentionResult {
  cosine: Float64Array;
  /** BM25 normalised to [0, 1] by the best slot of this read. */
  lexical: Float64Array;
  /** Raw BM25. */
  lexicalRaw: Float64Array;
  strength: Float64Array;
  score: Float64Array;
  weight: Float64Array;
  /** Selected slot indices, best first. */
  selected: number[];
  used: number;
  topCosine: number;
  topWeight: number;
  entropy: number;
  /** Whether the best relevant slot passes the hit threshold. */
  hit: boolean;
}

/** Query terms for BM25: content words of the query (all words when it has none). */
export function queryTerms(text: string): string[] {
  return queryTermsOf(tokenize(text));
}

/** `queryTerms` of a text already tokenised (`tokenize`). */
export function queryTermsOf(words: readonly string[]): string[] {
  const content = words.filter((w) => !STOPWORDS.has(w));
  return content.length > 0 ? content : words.slice();
}

/** BM25 statistics of a slot's (or logbook entry's) text: the content words of its key and value. */
export function textStats(keyText: string, value: string): DocStats {
  return docStats(contentWords(`${keyText} ${value}`));
}

interface LexEntry {
  ids: string[];
  stats: Array<DocStats | null>;
  /** Built from `stats` on the first read, then kept in step slot by slot. */
  postings: Postings | null;
}

// Token statistics per slot, cached per table and validated by revision id, so a read tokenises only
// slots written since the last read, and the term postings move only the slots that changed. Held
// weakly: an erased or dropped table takes its text with it.
const lexCache = new WeakMap<SlotTable, LexEntry>();

function lexEntry(table: SlotTable): LexEntry {
  let e = lexCache.get(table);
  if (!e) {
    e = { ids: new Array<string>(table.capacity).fill(''), stats: new Array<DocStats | null>(table.capacity).fill(null), postings: null };
    lexCache.set(table, e);
  }
  // A slot that changed since the last read moves in the postings (when they are built) by itself.
  const post = e.postings;
  for (let i = 0; i < table.capacity; i++) {
    const old = e.stats[i] ?? null;
    if (!table.isUsed(i)) {
      if (old !== null && post) postingsRemove(post, i, old);
      e.stats[i] = null;
      e.ids[i] = '';
      continue;
    }
    if (e.ids[i] !== table.ids[i] || old === null) {
      e.ids[i] = table.ids[i]!;
      const d = textStats(table.keyText[i]!, table.value[i]!);
      e.stats[i] = d;
      if (post) {
        if (old !== null) postingsRemove(post, i, old);
        postingsInsert(post, i, d);
      }
    }
  }
  return e;
}

/** BM25 document statistics of every slot (null for free slots), from the cache when still valid. */
export function slotDocStats(table: SlotTable): Array<DocStats | null> {
  return lexEntry(table).stats;
}

/** Term postings over the slots' statistics, kept in step with the slots. */
export function slotPostings(table: SlotTable): Postings {
  const e = lexEntry(table);
  return (e.postings ??= postingsOf(e.stats));
}

/** Numerically stable softmax of `z / tau` over the entries where `mask[i]` is true. */
export function softmaxMasked(z: Float64Array, mask: (i: number) => boolean, tau: number, out: Float64Array): void {
  let max = -Infinity;
  for (let i = 0; i < z.length; i++) if (mask(i) && z[i]! > max) max = z[i]!;
  out.fill(0);
  if (max === -Infinity) return;
  let sum = 0;
  for (let i = 0; i < z.length; i++) {
    if (!mask(i)) continue;
    const e = Math.exp((z[i]! - max) / tau);
    out[i] = e;
    sum += e;
  }
  for (let i = 0; i < z.length; i++) out[i] = out[i]! / sum;
}

/**
 * One read over the table at clock `now`. `q` must be unit length. A query with few non-zero entries
 * (the hashing embedder's) is scored against the keys at those entries only; a dense one (a model's)
 * costs one pass over capacity x dim floats. Both give the same cosines bit for bit. Plus BM25 over
 * the query terms.
 */
export function attend(table: SlotTable, now: number, q: Float32Array, terms: readonly string[], p: ReadParams): AttentionResult {
  const cap = table.capacity;
  const dim = table.dim;
  const keys = table.keys;
  // Six per-slot arrays in one allocation (an array this size lives off the V8 heap: one backing store, not six).
  const buf = new Float64Array(6 * cap);
  const cosine = buf.subarray(0, cap);
  const strength = buf.subarray(cap, 2 * cap);
  const score = buf.subarray(2 * cap, 3 * cap);
  const weight = buf.subarray(3 * cap, 4 * cap);
  const lexicalRaw = buf.subarray(4 * cap, 5 * cap);
  const lexical = buf.subarray(5 * cap, 6 * cap);
  const sq = sparseOf(q);
  bm25ScoresFrom(terms, slotPostings(table), lexicalRaw);
  let maxLex = 0;
  for (let i = 0; i < cap; i++) if (lexicalRaw[i]! > maxLex) maxLex = lexicalRaw[i]!;
  let used = 0;
  let topCosine = -1;
  for (let i = 0; i < cap; i++) {
    if (!table.isUsed(i)) continue;
    used++;
    const d = sq ? dotSparse(sq, keys, i * dim) : dot(q, keys, i * dim, dim);
    cosine[i] = d;
    if (d > topCosine) topCosine = d;
    const s = table.isPinned(i) ? Math.max(table.strength[i]!, 1e-9) : Math.max(decayed(table.strength[i]!, table.stamp[i]!, table.halfLife[i]!, now), 1e-9);
    strength[i] = s;
    lexical[i] = maxLex > 0 ? lexicalRaw[i]! / maxLex : 0;
    score[i] = p.beta * d + p.gamma * lexical[i]! + p.delta * Math.log(s);
  }
  const isUsed = (i: number): boolean => table.isUsed(i);
  softmaxMasked(score, isUsed, p.temperature, weight);
  let topWeight = 0;
  let entropy = 0;
  for (let i = 0; i < cap; i++) {
    const w = weight[i]!;
    if (w > topWeight) topWeight = w;
    if (w > 0) entropy -= w * Math.log(w);
  }
  // Keep the k best relevant slots by weight (ties by cosine) without sorting all of them.
  const order: number[] = [];
  const orderKey: number[] = [];
  for (let i = 0; i < cap; i++) {
    if (!table.isUsed(i) || (cosine[i]! < p.minCosine && lexicalRaw[i]! < p.minLexical)) continue;
    pushTopK(order, orderKey, i, weight[i]! + cosine[i]! * 1e-12, p.k);
  }
  const selected: number[] = [];
  let mass = 0;
  for (const i of order) {
    if (selected.length >= p.k) break;
    if (selected.length > 0 && weight[i]! < p.minWeight) break;
    selected.push(i);
    mass += weight[i]!;
    if (mass >= p.maxMass) break;
  }
  const best = selected[0];
  const hit = best !== undefined && (cosine[best]! >= p.hitCosine || lexicalRaw[best]! >= p.minLexical);
  // On a miss the relevant items are still returned (the caller also searches the logbook): a weak
  // match is better context than none, and the trace says it was a miss.
  return { cosine, lexical, lexicalRaw, strength, score, weight, selected, used, topCosine, topWeight, entropy, hit };
}

/**
 * Multi-hop query update (Sukhbaatar et al. 2015): q' = normalize(q + sum_i a_i v_i) over the
 * selected slots, with v_i the value vectors.
 */
export function nextQuery(q: Float32Array, r: AttentionResult, valueVec: (slot: number) => Float32Array): Float32Array {
  const out = Float32Array.from(q);
  for (const i of r.selected) {
    const v = valueVec(i);
    const a = r.weight[i]!;
    for (let j = 0; j < out.length; j++) out[j] = out[j]! + a * v[j]!;
  }
  let s = 0;
  for (let j = 0; j < out.length; j++) s += out[j]! * out[j]!;
  const inv = s > 0 ? 1 / Math.sqrt(s) : 0;
  for (let j = 0; j < out.length; j++) out[j] = out[j]! * inv;
  return out;
}
