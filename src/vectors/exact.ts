// Exact nearest-neighbour search by a linear scan of float32 vectors; the right choice for small
// logbooks, where it is both exact and faster than building a graph index.

import type { VectorIndex, VectorMatch } from './vector-index.js';
import { dot, pushTopK } from '../memory/vector.js';

export class ExactVectorIndex implements VectorIndex {
  readonly dim: number;
  private vectors: Float32Array;
  private idsByRow: string[] = [];
  private rowById = new Map<string, number>();

  constructor(dim: number, initialCapacity = 64) {
    this.dim = dim;
    this.vectors = new Float32Array(Math.max(1, initialCapacity) * dim);
  }

  get size(): number {
    return this.idsByRow.length;
  }

  has(id: string): boolean {
    return this.rowById.has(id);
  }

  add(id: string, vector: Float32Array): void {
    if (vector.length !== this.dim) throw new RangeError(`vector has ${vector.length} dims, the index holds ${this.dim}`);
    let row = this.rowById.get(id);
    if (row === undefined) {
      row = this.idsByRow.length;
      if ((row + 1) * this.dim > this.vectors.length) {
        const grown = new Float32Array(this.vectors.length * 2);
        grown.set(this.vectors);
        this.vectors = grown;
      }
      this.idsByRow.push(id);
      this.rowById.set(id, row);
    }
    this.vectors.set(vector, row * this.dim);
  }

  remove(id: string): boolean {
    const row = this.rowById.get(id);
    if (row === undefined) return false;
    // Move the last row into the hole so the scan stays dense.
    const last = this.idsByRow.length - 1;
    if (row !== last) {
      const lastId = this.idsByRow[last]!;
      this.vectors.copyWithin(row * this.dim, last * this.dim, (last + 1) * this.dim);
      this.idsByRow[row] = lastId;
      this.rowById.set(lastId, row);
    }
    this.vectors.fill(0, last * this.dim, (last + 1) * this.dim);
    this.idsByRow.pop();
    this.rowById.delete(id);
    return true;
  }

  search(query: Float32Array, k: number): VectorMatch[] {
    const n = this.idsByRow.length;
    if (n === 0 || k <= 0) return [];
    const dim = this.dim;
    const v = this.vectors;
    const bestIdx: number[] = [];
    const bestScore: number[] = [];
    for (let r = 0; r < n; r++) {
      pushTopK(bestIdx, bestScore, r, dot(query, v, r * dim, dim), k);
    }
    return bestIdx.map((r, i) => ({ id: this.idsByRow[r]!, cosine: bestScore[i]! }));
  }

  clear(): void {
    this.vectors.fill(0);
    this.idsByRow = [];
    this.rowById.clear();
  }
}
