// The vector index's front: `createVectorIndex(dim, options)` is what stores call; it returns an
// adaptive index (exact scan while small, HNSW past `hnswThreshold`). The strategies are exported for
// tests and for callers who want one of them outright.

import { AdaptiveVectorIndex, ADAPTIVE_VECTOR_INDEX_DEFAULTS, type AdaptiveVectorIndexOptions } from './adaptive.js';

/** Options of a vector index; every field is documented on AdaptiveVectorIndexOptions and HnswVectorIndexOptions. */
export type VectorIndexOptions = AdaptiveVectorIndexOptions;

/** Defaults of every vector index option. */
export const VECTOR_INDEX_DEFAULTS: Readonly<Required<VectorIndexOptions>> = ADAPTIVE_VECTOR_INDEX_DEFAULTS;

/** A new, empty vector index for vectors of `dim` dimensions. Options are validated here. */
export function createVectorIndex(dim: number, options: VectorIndexOptions = {}): AdaptiveVectorIndex {
  return new AdaptiveVectorIndex(dim, options);
}

export type { VectorIndex, VectorMatch } from './vector-index.js';
export { ExactVectorIndex } from './exact.js';
export { HnswVectorIndex, HNSW_VECTOR_INDEX_DEFAULTS, hnswAvailable, type HnswVectorIndexOptions } from './hnsw.js';
export { AdaptiveVectorIndex, ADAPTIVE_VECTOR_INDEX_DEFAULTS, type AdaptiveVectorIndexOptions } from './adaptive.js';
