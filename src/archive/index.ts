// The vector index's front: `createVectorIndex(dim, options)` is what stores call; it returns an
// adaptive index (exact scan while small, HNSW past `hnswThreshold`). The strategies are exported for
// tests and for callers who want one of them outright.

import { AdaptiveArchive, ADAPTIVE_ARCHIVE_DEFAULTS, type AdaptiveArchiveOptions } from './adaptive.js';

/** Options of a vector index; every field is documented on AdaptiveArchiveOptions and HnswArchiveOptions. */
export type VectorIndexOptions = AdaptiveArchiveOptions;

/** Defaults of every vector index option. */
export const VECTOR_INDEX_DEFAULTS: Readonly<Required<VectorIndexOptions>> = ADAPTIVE_ARCHIVE_DEFAULTS;

/** A new, empty vector index for vectors of `dim` dimensions. Options are validated here. */
export function createVectorIndex(dim: number, options: VectorIndexOptions = {}): AdaptiveArchive {
  return new AdaptiveArchive(dim, options);
}

// Old names for code inside the repo that has not moved yet (src/logbook, the stores); the public
// deprecated aliases live in src/deprecated.ts.
/** @deprecated since 0.2: use `VectorIndexOptions`. */
export type ArchiveOptions = VectorIndexOptions;
/** @deprecated since 0.2: use `createVectorIndex`. */
export const createArchive = createVectorIndex;

export type { VectorIndex, VectorMatch } from './archive.js';
export { ExactArchive } from './exact.js';
export { HnswArchive, HNSW_ARCHIVE_DEFAULTS, hnswAvailable, type HnswArchiveOptions } from './hnsw.js';
export { AdaptiveArchive, ADAPTIVE_ARCHIVE_DEFAULTS, type AdaptiveArchiveOptions } from './adaptive.js';
