// Test helpers for the vector index suites: seeded random unit vectors and recall@k against exact search.

import type { VectorMatch } from '../../src/vectors/vector-index.js';
import { rng } from '../../bench/lib/stats.js';
/** mulberry32, seeded (see bench/lib/stats.ts). */
export const prng = rng;


/** `n` unit vectors uniform on the sphere: normalised standard Gaussians (Box–Muller). */
export function unitVectors(n: number, dim: number, seed: number): Float32Array[] {
  const rand = prng(seed);
  const out: Float32Array[] = [];
  for (let i = 0; i < n; i++) {
    const v = new Float32Array(dim);
    let s = 0;
    for (let j = 0; j < dim; j++) {
      const g = Math.sqrt(-2 * Math.log(1 - rand())) * Math.cos(2 * Math.PI * rand());
      v[j] = g;
      s += g * g;
    }
    const inv = 1 / Math.sqrt(s);
    for (let j = 0; j < dim; j++) v[j] = v[j]! * inv;
    out.push(v);
  }
  return out;
}

/**
 * recall@k with ties: an approximate result counts when its cosine reaches the exact k-th best (within
 * float32 rounding) — the distance-threshold definition ANN-Benchmarks uses (Aumüller et al. 2018, from
 * memory) — so two items at the same distance ranked the other way round are not a miss.
 */
export function recallAtK(approx: VectorMatch[][], exact: VectorMatch[][], k: number): number {
  let found = 0;
  let total = 0;
  for (let i = 0; i < exact.length; i++) {
    const want = Math.min(k, exact[i]!.length);
    if (want === 0) continue;
    const kth = exact[i]![want - 1]!.cosine - 1e-5;
    total += want;
    found += Math.min(want, approx[i]!.slice(0, k).filter((m) => m.cosine >= kth).length);
  }
  return total === 0 ? 1 : found / total;
}

export function dot(a: Float32Array, b: Float32Array): number {
  let s = 0;
  for (let j = 0; j < a.length; j++) s += a[j]! * b[j]!;
  return s;
}
