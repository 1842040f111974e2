// Deprecated fields of options and of public output, kept for one minor version (from 0.2 until 0.3).
// Until then every event and replay summary carries each old field beside its new one, the
// `archive` event fires beside `demote`, and the old option names still work. With src/deprecated.ts
// (the old export names) this is the only place the old spellings live. Types and small pure
// functions only, no value imports, so any module of the core may use it without an import cycle.

import type { DemoteEvent } from './middleware/events.js';
import type { VectorIndexOptions } from './vectors/index.js';

// ------------------------------------------------------------------ options

/** Options of `createTidemark` under their old names; `TidemarkOptions` extends this. */
export interface DeprecatedTidemarkOptions {
  /** @deprecated since 0.2: use `hashKey`; when both are set, `hashKey` wins. */
  secret?: string;
}

/** Options of both stores under their old names; `InProcessStoreOptions` and `RedisSlotStoreOptions` extend this. */
export interface DeprecatedStoreOptions {
  /** @deprecated since 0.2: use `vectorIndex`; when both are set, `vectorIndex` wins. */
  archive?: VectorIndexOptions;
}

/** The id-hashing key from the new option or its deprecated name. */
export function hashKeyOf(options: { hashKey?: string } & DeprecatedTidemarkOptions): string | undefined {
  return options.hashKey ?? options.secret;
}

/** The vector index options from the new store option or its deprecated name. */
export function vectorIndexOptionsOf(options: { vectorIndex?: VectorIndexOptions } & DeprecatedStoreOptions): VectorIndexOptions | undefined {
  return options.vectorIndex ?? options.archive;
}

// ------------------------------------------------------------------ events

/** The `read` event's old field. */
export interface DeprecatedReadEventFields {
  /** @deprecated since 0.2: the same as `logbookItems`. */
  archiveItems?: number;
}

/** The `evict` event's old field. */
export interface DeprecatedEvictEventFields {
  /** @deprecated since 0.2: the same as `logged`. */
  archived?: boolean;
}

/** The `commit` event's old field. */
export interface DeprecatedCommitEventFields {
  /** @deprecated since 0.2: the same as `demoted`. */
  archived?: number;
}

/** Old event names; `TidemarkEvents` extends this. */
export interface DeprecatedEvents {
  /** @deprecated since 0.2: listen to `demote` (the same payload, emitted at the same moment). */
  archive: (e: DemoteEvent) => void;
}

/** The old name of the `demote` event, emitted beside it. */
export const DEPRECATED_DEMOTE_EVENT = 'archive' satisfies keyof DeprecatedEvents;

/** A `read` payload with its old field, added to `e` (a payload just built; a copy would cost more than the event, see `payload`). */
export function withDeprecatedReadFields<T extends { logbookItems: number }>(e: T): T & DeprecatedReadEventFields {
  return Object.assign(e, { archiveItems: e.logbookItems });
}

/** An `evict` payload with its old field, added to `e` (a payload just built). */
export function withDeprecatedEvictFields<T extends { logged: boolean }>(e: T): T & DeprecatedEvictEventFields {
  return Object.assign(e, { archived: e.logged });
}

/** A `commit` payload with its old field, added to `e` (a payload just built). */
export function withDeprecatedCommitFields<T extends { demoted: number }>(e: T): T & DeprecatedCommitEventFields {
  return Object.assign(e, { archived: e.demoted });
}

// ------------------------------------------------------------------ replay figures (`tidemark replay --json`)

/** The replay summary's old field. */
export interface DeprecatedReplayFields {
  /** @deprecated since 0.2: the same as `demoted_items`. */
  archive_items?: number;
}

/** A replay summary with its old field. */
export function withDeprecatedReplayFields<T extends { demoted_items: number }>(s: T): T & DeprecatedReplayFields {
  return { ...s, archive_items: s.demoted_items };
}
