// Posting lists of the logbook's inverted index: per term, the documents holding it (ascending) and
// the term's frequency in each, and the galloping lookup that finds a document in one.

/**
 * The first index i in [from, n) with docs[i] >= d (n when none), for ascending `docs`: an
 * exponential probe then a binary search (galloping; Bentley & Yao 1976), so a run of lookups in
 * ascending order costs O(m log(n / m)).
 */
export function gallop(docs: Int32Array, from: number, n: number, d: number): number {
  if (from >= n || docs[from]! >= d) return from;
  let step = 1;
  let lo = from; // docs[lo] < d
  let hi = from + 1;
  while (hi < n && docs[hi]! < d) {
    lo = hi;
    step *= 2;
    hi = from + step;
  }
  if (hi > n) hi = n;
  // docs[lo] < d, and docs[hi] >= d or hi == n
  while (hi - lo > 1) {
    const mid = (lo + hi) >>> 1;
    if (docs[mid]! < d) lo = mid;
    else hi = mid;
  }
  return hi;
}

export interface Posting {
  docs: Int32Array;
  tfs: Uint16Array;
  n: number;
}
