// The index the logbook uses: an exact scan while it is small, switched once and for good to an
// HNSW graph when it passes `hnswThreshold` entries. Callers see one VectorIndex either way; without
// hnswlib-node installed it simply stays exact.

import type { VectorIndex, VectorMatch } from './vector-index.js';
import { ExactVectorIndex } from './exact.js';
import { HnswVectorIndex, hnswAvailable, resolveHnswOptions, HNSW_VECTOR_INDEX_DEFAULTS, type HnswVectorIndexOptions } from './hnsw.js';
import { ConfigError, describeValue } from '../errors.js';

export interface AdaptiveVectorIndexOptions extends HnswVectorIndexOptions {
  /**
   * Switch from the exact scan to HNSW once the index holds more than this many entries; `Infinity`
   * never switches, 0 starts on HNSW with the first entry. Measured on this project's 2-core machine at
   * dim 384 (uniform random vectors, ef 64): the exact scan costs 1–2 µs a row (0.11 ms at 64 rows,
   * 0.50 ms at 256, 2.1 ms at 1024); an HNSW search about 0.08 ms fixed (copying the query into the
   * addon, building the result) plus a slow rise (0.11 ms at 64, 0.15 ms at 256, 0.25 ms at 1024). They
   * tie near 64–128 entries; at 256 HNSW is 3× faster with recall@10 still 1.0. The switch builds the
   * graph in one synchronous pass (0.15–0.4 ms an entry), so switching at 256 rather than at the tie
   * buys a clear speed-up for a pause of about 50–100 ms, once per index.
   * @default 256
   */
  hnswThreshold?: number;
}

export const ADAPTIVE_VECTOR_INDEX_DEFAULTS: Required<AdaptiveVectorIndexOptions> = {
  ...HNSW_VECTOR_INDEX_DEFAULTS,
  hnswThreshold: 256,
};

export class AdaptiveVectorIndex implements VectorIndex {
  readonly dim: number;
  private readonly o: Required<AdaptiveVectorIndexOptions>;
  private exact: ExactVectorIndex | null;
  private hnsw: HnswVectorIndex | null = null;
  /**
   * Copies of the vectors while exact, to build the graph from at the switch (ExactVectorIndex does not
   * hand its rows out). Null when hnswlib-node is missing: there will be no switch.
   */
  private copies: Map<string, Float32Array> | null;
  private failure: unknown;

  constructor(dim: number, options: AdaptiveVectorIndexOptions = {}) {
    if (!Number.isInteger(dim) || dim < 1 || dim > 65_536) {
      throw new ConfigError(`vector index: dim must be an integer in [1, 65536], got ${describeValue(dim)}`, {
        details: { option: 'dim', value: dim, expected: 'integer in [1, 65536]' },
      });
    }
    const t = options.hnswThreshold ?? ADAPTIVE_VECTOR_INDEX_DEFAULTS.hnswThreshold;
    if (typeof t !== 'number' || !(t === Infinity || (Number.isInteger(t) && t >= 0))) {
      throw new ConfigError(`vector index: hnswThreshold must be an integer >= 0 or Infinity, got ${describeValue(t)}`, {
        details: { option: 'hnswThreshold', value: t, expected: 'integer >= 0 or Infinity' },
      });
    }
    // Validate the HNSW options now, not at the switch, so a bad value fails at construction.
    this.o = { ...resolveHnswOptions(options), hnswThreshold: t };
    this.dim = dim;
    this.exact = new ExactVectorIndex(dim);
    this.copies = this.canSwitch() ? new Map() : null;
  }

  /** Which index answers searches now (for metrics). */
  get strategy(): 'exact' | 'hnsw' {
    return this.hnsw ? 'hnsw' : 'exact';
  }

  /** Why the switch to HNSW failed, if it did (the index then stays exact); undefined otherwise. */
  get switchError(): unknown {
    return this.failure;
  }

  get size(): number {
    return this.hnsw ? this.hnsw.size : this.exact!.size;
  }

  has(id: string): boolean {
    return this.hnsw ? this.hnsw.has(id) : this.exact!.has(id);
  }

  add(id: string, vector: Float32Array): void {
    if (this.hnsw) {
      this.hnsw.add(id, vector);
      return;
    }
    this.exact!.add(id, vector);
    if (!this.copies) return;
    this.copies.set(id, Float32Array.from(vector));
    if (this.exact!.size > this.o.hnswThreshold) this.switchToHnsw();
  }

  remove(id: string): boolean {
    if (this.hnsw) return this.hnsw.remove(id);
    this.copies?.delete(id);
    return this.exact!.remove(id);
  }

  search(query: Float32Array, k: number): VectorMatch[] {
    return this.hnsw ? this.hnsw.search(query, k) : this.exact!.search(query, k);
  }

  /** Drops every entry and starts over on the exact scan. */
  clear(): void {
    this.hnsw = null;
    this.exact = new ExactVectorIndex(this.dim);
    this.copies = this.canSwitch() ? new Map() : null;
  }

  private canSwitch(): boolean {
    return this.o.hnswThreshold !== Infinity && this.failure === undefined && hnswAvailable();
  }

  private switchToHnsw(): void {
    const copies = this.copies!;
    let capacity = this.o.initialCapacity;
    while (capacity < copies.size * 2) capacity *= 2;
    try {
      const hnsw = new HnswVectorIndex(this.dim, { ...this.o, initialCapacity: capacity });
      for (const [id, v] of copies) hnsw.add(id, v);
      this.hnsw = hnsw;
      this.exact = null;
    } catch (err) {
      // A failed build (say, out of memory) must not lose the index: keep answering exactly.
      this.failure = err;
    }
    this.copies = null;
  }
}
