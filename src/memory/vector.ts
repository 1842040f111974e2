// Small vector helpers used on hot paths: plain loops over typed arrays, no allocation per element.

/**
 * Dot product of `a` with `n` entries of `b` starting at `bOffset`. Unrolled by four with separate
 * accumulators: about 1.6x faster than the plain loop on V8 (Node 20, measured here), which matters
 * because a read is one such product per slot.
 */
export function dot(a: Float32Array, b: Float32Array, bOffset = 0, n = a.length): number {
  let d0 = 0, d1 = 0, d2 = 0, d3 = 0;
  let j = 0;
  for (; j + 3 < n; j += 4) {
    const o = bOffset + j;
    d0 += a[j]! * b[o]!;
    d1 += a[j + 1]! * b[o + 1]!;
    d2 += a[j + 2]! * b[o + 2]!;
    d3 += a[j + 3]! * b[o + 3]!;
  }
  let s = d0 + d1 + d2 + d3;
  for (; j < n; j++) s += a[j]! * b[bOffset + j]!;
  return s;
}

/** L2-normalises `v` in place; returns its original norm (0 leaves it untouched). */
export function normalizeInPlace(v: Float32Array): number {
  let s = 0;
  for (let j = 0; j < v.length; j++) s += v[j]! * v[j]!;
  const norm = Math.sqrt(s);
  if (norm > 0) for (let j = 0; j < v.length; j++) v[j] = v[j]! / norm;
  return norm;
}

/** Cosine of two vectors of any length (not assumed normalised). */
export function cosine(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let ab = 0, aa = 0, bb = 0;
  for (let j = 0; j < a.length; j++) {
    ab += a[j]! * b[j]!;
    aa += a[j]! * a[j]!;
    bb += b[j]! * b[j]!;
  }
  return aa === 0 || bb === 0 ? 0 : ab / Math.sqrt(aa * bb);
}

/**
 * Whether the item at rank `j` stays ahead of a newcomer (`i`, `s`): a higher score, or an equal one
 * unless later items win ties and the newcomer is later. A top-level function, not a closure made per
 * push: pushTopK runs once per candidate of every search.
 */
function keepsPlace(idx: readonly number[], score: readonly number[], j: number, i: number, s: number, laterWins: boolean): boolean {
  const t = score[j]!;
  return t > s || (t === s && !(laterWins && idx[j]! < i));
}

/**
 * Keeps the k best (index, score) pairs in two parallel arrays sorted best first. Insertion into a
 * short sorted array beats a heap for the small k used here. On equal scores the pair offered first
 * wins, or, with `laterWins`, the higher index (the logbook's newer entry).
 */
export function pushTopK(idx: number[], score: number[], i: number, s: number, k: number, laterWins = false): void {
  if (k <= 0) return;
  if (score.length === k && keepsPlace(idx, score, k - 1, i, s, laterWins)) return;
  let p = score.length < k ? score.length : k - 1;
  if (score.length < k) {
    idx.push(i);
    score.push(s);
  }
  while (p > 0 && !keepsPlace(idx, score, p - 1, i, s, laterWins)) {
    idx[p] = idx[p - 1]!;
    score[p] = score[p - 1]!;
    p--;
  }
  idx[p] = i;
  score[p] = s;
}

/**
 * The non-zero entries of a query vector, when there are few enough that scoring them beats a dense
 * scan. A hashing embedder's text touches a few dozen of its dimensions; a model embedding touches
 * all of them and gets `null` (the dense path).
 */
export interface SparseVector {
  /** Dimensions with a non-zero entry, ascending. */
  idx: Int32Array;
  /** The entries at those dimensions. */
  val: Float64Array;
  /** Entries below `split` fall in the unrolled part of `dot` (n rounded down to a multiple of 4). */
  split: number;
}

/** At most this share of non-zero entries takes the sparse path (a sparse product costs ~2x per entry). */
const SPARSE_SHARE = 0.25;

export function sparseOf(v: Float32Array): SparseVector | null {
  const n = v.length;
  let nnz = 0;
  for (let j = 0; j < n; j++) if (v[j] !== 0) nnz++;
  if (nnz > n * SPARSE_SHARE) return null;
  const idx = new Int32Array(nnz);
  const val = new Float64Array(nnz);
  const tail = n - (n % 4);
  let split = 0;
  for (let j = 0, k = 0; j < n; j++) {
    if (v[j] === 0) continue;
    idx[k] = j;
    val[k] = v[j]!;
    k++;
    if (j < tail) split = k;
  }
  return { idx, val, split };
}

/**
 * `dot(a, b, bOffset, n)` for the sparse form of `a`, bit for bit: products go to the same four
 * accumulators in the same order as the unrolled dense loop, the tail after their sum, and a zero
 * entry adds nothing to a sum. So a ranking cannot tell which path scored it.
 */
export function dotSparse(a: SparseVector, b: Float32Array, bOffset: number): number {
  const idx = a.idx;
  const val = a.val;
  let d0 = 0, d1 = 0, d2 = 0, d3 = 0;
  const split = a.split;
  let k = 0;
  for (; k < split; k++) {
    const j = idx[k]!;
    const p = val[k]! * b[bOffset + j]!;
    switch (j & 3) {
      case 0: d0 += p; break;
      case 1: d1 += p; break;
      case 2: d2 += p; break;
      default: d3 += p;
    }
  }
  let s = d0 + d1 + d2 + d3;
  for (; k < idx.length; k++) s += val[k]! * b[bOffset + idx[k]!]!;
  return s;
}
