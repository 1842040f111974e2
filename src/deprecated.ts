// Deprecated names of the root entry (`tidemark`), kept for one minor version (from 0.2 until 0.3):
// the only place the old names live. Each points to its new name; none has behaviour of its own.
// The root entry re-exports all of this module, so `import { MemoryStore } from 'tidemark'` keeps
// working; old fields of options and output live in src/deprecated-fields.ts.

import { DURATION_BUCKETS_SECONDS as DURATION_BUCKETS, PROMETHEUS_METRICS_DEFAULTS as METRICS_DEFAULTS } from './metrics/prometheus.js';
import type { TidemarkEventSource } from './metrics/source.js';
import type { DemoteEvent } from './middleware/events.js';
import { IN_PROCESS_STORE_DEFAULTS, InProcessStore, inProcessStore, type InProcessStoreOptions } from './store/in-process.js';
import { VECTOR_INDEX_DEFAULTS, createVectorIndex, type VectorIndexOptions } from './vectors/index.js';
import type { VectorIndex, VectorMatch } from './vectors/vector-index.js';
import type { DemotionReason, LogbookEntry, LogbookScope, LogbookVectorHit } from './types.js';

// ------------------------------------------------------------------ the in-process store

/** @deprecated since 0.2: use `InProcessStore`. */
export const MemoryStore = InProcessStore;
/** @deprecated since 0.2: use `InProcessStore`. */
export type MemoryStore = InProcessStore;
/** @deprecated since 0.2: use `InProcessStoreOptions`. */
export type MemoryStoreOptions = InProcessStoreOptions;
/** @deprecated since 0.2: use `inProcessStore`. */
export const memoryStore = inProcessStore;
/** @deprecated since 0.2: use `IN_PROCESS_STORE_DEFAULTS`. */
export const MEMORY_STORE_DEFAULTS = IN_PROCESS_STORE_DEFAULTS;

// ------------------------------------------------------------------ the long-term tier is the logbook

/** @deprecated since 0.2: use `LogbookScope`. */
export type ArchiveScope = LogbookScope;
/** @deprecated since 0.2: the archive became the logbook (`LogbookEntry`), which also keeps every turn. */
export type ArchiveItem = LogbookEntry;
/** @deprecated since 0.2: use `LogbookVectorHit`. */
export type ArchiveHit = LogbookVectorHit;
/** @deprecated since 0.2: use `VectorIndex`. */
export type Archive = VectorIndex;
/** @deprecated since 0.2: use `VectorMatch`. */
export type ArchiveMatch = VectorMatch;
/** @deprecated since 0.2: use `VectorIndexOptions`. */
export type ArchiveOptions = VectorIndexOptions;
/** @deprecated since 0.2: use `createVectorIndex`. */
export const createArchive = createVectorIndex;
/** @deprecated since 0.2: use `VECTOR_INDEX_DEFAULTS`. */
export const ARCHIVE_DEFAULTS = VECTOR_INDEX_DEFAULTS;
/** @deprecated since 0.2: use `DemotionReason`. */
export type ArchiveReason = DemotionReason;
/** @deprecated since 0.2: use `DemoteEvent` (the `archive` event is now `demote`). */
export type ArchiveEvent = DemoteEvent;

// ------------------------------------------------------------------ options and output fields

export type { DeprecatedTidemarkOptions, DeprecatedStoreOptions } from './deprecated-fields.js';

// ------------------------------------------------------------------ metrics moved to `tidemark/prometheus`
// The root entry's declarations must not name prom-client's types (a TypeScript user without the
// optional peer would fail `tsc` inside our types), so these wrappers are typed structurally.

/** What the deprecated root `prometheusMetrics` returns; `tidemark/prometheus` types it in full. */
export interface DeprecatedPrometheusMetrics {
  /** prom-client's `Registry` the metrics are on. */
  readonly registry: unknown;
  readonly contentType: string;
  metrics(): Promise<string>;
  stop(): void;
}

/** @deprecated since 0.2: `import { prometheusMetrics } from 'tidemark/prometheus'`. */
export async function prometheusMetrics(
  tm: TidemarkEventSource & { readonly outboxDepth?: number },
  options: { registry?: unknown; client?: unknown; prefix?: string; activeWindowMs?: number; maxTrackedSessions?: number; durationBuckets?: readonly number[] } = {},
): Promise<DeprecatedPrometheusMetrics> {
  const m = await import('./metrics/prometheus.js');
  return m.prometheusMetrics(tm, options as Parameters<typeof m.prometheusMetrics>[1]);
}
/** @deprecated since 0.2: import it from `tidemark/prometheus`. */
export const DURATION_BUCKETS_SECONDS: readonly number[] = DURATION_BUCKETS;
/** @deprecated since 0.2: import it from `tidemark/prometheus`. */
export const PROMETHEUS_METRICS_DEFAULTS: { readonly prefix: string; readonly activeWindowMs: number; readonly maxTrackedSessions: number; readonly durationBuckets: readonly number[] } =
  METRICS_DEFAULTS;
