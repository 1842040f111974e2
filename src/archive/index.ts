// The archive's front: `createArchive(dim, options)` is what stores call; it returns an adaptive
// archive (exact scan while small, HNSW past `hnswThreshold`). The strategies are exported for tests
// and for callers who want one of them outright.

import { AdaptiveArchive, ADAPTIVE_ARCHIVE_DEFAULTS, type AdaptiveArchiveOptions } from './adaptive.js';

/** Options of an archive index; every field is documented on AdaptiveArchiveOptions and HnswArchiveOptions. */
export type ArchiveOptions = AdaptiveArchiveOptions;

/** Defaults of every archive option. */
export const ARCHIVE_DEFAULTS: Readonly<Required<ArchiveOptions>> = ADAPTIVE_ARCHIVE_DEFAULTS;

/** A new, empty archive index for vectors of `dim` dimensions. Options are validated here. */
export function createArchive(dim: number, options: ArchiveOptions = {}): AdaptiveArchive {
  return new AdaptiveArchive(dim, options);
}

export type { Archive, ArchiveMatch } from './archive.js';
export { ExactArchive } from './exact.js';
export { HnswArchive, HNSW_ARCHIVE_DEFAULTS, hnswAvailable, type HnswArchiveOptions } from './hnsw.js';
export { AdaptiveArchive, ADAPTIVE_ARCHIVE_DEFAULTS, type AdaptiveArchiveOptions } from './adaptive.js';
