// The Store extension point: where sessions' slots, logbook entries and event streams persist.
// The core loads a versioned snapshot, plans a turn's changes as slot operations plus the logbook
// entries the turn adds, and commits them against the version it read; a store applies a commit
// atomically or refuses it as a conflict.

import type { LogbookQuery, LogbookSearchParams, LogbookSearchResult } from '../logbook/index.js';
import type { SlotTable } from '../memory/slots.js';
import type { LogbookScope, LogbookEntry, LogbookKind, SessionRef, SlotRecord, StoredEvent } from '../types.js';

/** A session's state as loaded. */
export interface SessionSnapshot {
  /** Bumped by every successful commit; 0 means the session has never been committed. */
  version: number;
  /** Session clock (turns seen, or seconds) as of the last commit. */
  clock: number;
  /** Turns observed in this session so far (used to number generated turn ids). */
  turns: number;
  /**
   * The slots. Callers must treat it as read-only: a store may hand out its own copy (the
   * in-process store does) and a later commit may change it in place.
   */
  table: SlotTable;
  /**
   * Slots whose stored payload failed its check on this load and were moved aside (kept, not used):
   * the session goes on with the rest. The middleware reports them (`error` event, STORE_CORRUPT).
   */
  quarantined?: number;
}

/** Sets slot `index` to `slot`, or frees it when `slot` is null. */
export interface SlotOp {
  index: number;
  slot: SlotRecord | null;
}

/** Everything one turn changes, applied all-or-nothing. */
export interface CommitRequest {
  /** The version the plan was made against; a store refuses the commit when its version differs. */
  expectedVersion: number;
  /** Session clock after this commit. */
  clock: number;
  /** Turns observed after this commit. */
  turns: number;
  /** Table shape; a store resizes its copy when these change (the ops free any slot beyond it). */
  capacity: number;
  dim: number;
  ops: SlotOp[];
  /**
   * Logbook entries this commit adds: the turns it keeps and the values it demotes (superseded or
   * evicted). An entry with the id of one already in the scope replaces it (so a resent commit adds
   * nothing twice).
   */
  logbook: LogbookEntry[];
  /**
   * The retention policy to apply to the scope's logbook after adding, with the time it is applied
   * at (the turn's time, so a replay of old transcripts ages them as they were lived). Dropped entries
   * are counted in the result.
   */
  retention?: { policy: RetentionPolicy; nowMs: number };
  /** Appended to the session's capped event stream. */
  events: StoredEvent[];
  /**
   * Stable id of the write this commit carries: the same across conflict re-plans and outbox retries
   * of one write. A store that already applied a commit with this id (among the session's recent
   * commits) reports it applied instead of applying it again, so a commit whose reply was lost is
   * never applied twice. Up to 128 chars, no spaces.
   */
  commitId?: string;
  /**
   * The erasure fence the turn was accepted under (from `Store.fence`, taken when the turn was
   * read or accepted). A store refuses the commit with `{ ok: false, erased: true }` when the session
   * or its user was erased after that fence, so no write planned before an erase — a reply still
   * streaming, a retry from any process's outbox, a promotion of an erased value — lands after it.
   * Unset: the commit is not fenced (admin operations on a live session).
   */
  fence?: ErasureFence;
  /**
   * Increments to the tenant's store-wide counters, applied in the same atomic step as the commit (and
   * not again for a commit id already applied): the slot survival counts (`survival.reached.<age>`,
   * `survival.ended.<age>`, see src/metrics/survival.ts). Returned by `stats()` under `counters`.
   */
  counters?: Record<string, number>;
}

/** Times (ms, the store's clock; 0 = never) of the latest erase of a session and of its user. */
export interface ErasureMarks {
  session: number;
  user: number;
}

/**
 * What a writer knew of erasures when its turn was accepted. A store refuses the write when a
 * tombstone of the session or user is newer than the one the writer saw (`seen`), or not older than
 * the moment the turn was accepted (`acceptedMs`, the writer's clock: it covers an erase between
 * acceptance and the look, and a look that could not be made). Clocks of the bot and the store are
 * assumed to agree within the skew NTP keeps.
 */
export interface ErasureFence {
  seen?: ErasureMarks;
  acceptedMs: number;
}

/**
 * How long the logbook keeps entries: up to an age and up to a number per scope, oldest dropped first.
 * 0 turns a limit off.
 */
export interface RetentionPolicy {
  /** Entries older than this (by `atMs`) are deleted. @default 0 (no age limit) */
  maxAgeMs: number;
  /** At most this many entries per scope; past it the oldest are deleted. @default 100000 */
  maxEntries: number;
}

/** Entries a retention pass deleted, by reason. */
export interface RetentionDropped {
  age: number;
  count: number;
}

export type CommitResult =
  | { ok: true; version: number; dropped?: RetentionDropped }
  | { ok: false; conflict: true; version: number }
  | { ok: false; erased: true; version: number };

/** What to erase: a whole session, or everything of one user (all their sessions and logbook). */
export type EraseTarget = { tenant: string; session: string } | { tenant: string; user: string };

/** What an erase removed. */
export interface EraseReport {
  sessions: number;
  slots: number;
  /** Logbook entries removed (turns and demoted values). */
  logbookEntries: number;
  events: number;
}

/** Which logbook entries to list. */
export interface ListLogbookOptions {
  /** @default 100 */
  limit?: number;
  /** Only these kinds; all when unset. */
  kinds?: readonly LogbookKind[];
}

/**
 * Figures a store keeps atomically with its commits and erasures, per tenant, so every process of a
 * fleet reads the same truth (not a per-process cache).
 */
export interface StoreStats {
  /** Sessions holding state. */
  sessions: number;
  /** Slots in use over all sessions. */
  slots: number;
  /** Logbook entries over all scopes. */
  logbookEntries: number;
  /** `counters`: kept by the commit/erase scripts; `scan`: counted on demand (Redis Cluster, where no key spans hash slots). */
  source: 'counters' | 'scan';
  /** The sums of every commit's `counters` increments (absent where the store cannot keep them: Redis Cluster). */
  counters?: Record<string, number>;
}

/** One process's published dashboard buckets (see `putFleet`). */
export interface FleetRecord {
  /** The instance name the process publishes under. */
  instance: string;
  /** When it was written (ms). */
  atMs: number;
  /** Opaque JSON the dashboard wrote. */
  payload: string;
}

/** One pass of the retention sweep (see `Store.sweep`). */
export interface SweepRequest {
  tenant: string;
  /** Slots created (`createdMs`) before this time (ms) are deleted; 0 deletes none. */
  slotCutoffMs: number;
  /** Logbook entries of every scope with `atMs` before this time (ms) are deleted; 0 deletes none. */
  logbookCutoffMs: number;
  /** Sessions to visit in this pass at most (a pass resumes where the last stopped). @default 1000 */
  budget?: number;
}

/** What one sweep pass deleted. */
export interface SweepReport {
  /** Sessions visited. */
  sessions: number;
  /** Slots deleted (their session's version moves on). */
  slots: number;
  /** Logbook entries deleted, from the session and user scopes. */
  logbookEntries: number;
  /** Whether the pass reached the end of the store's sessions (false: the next pass goes on from here). */
  done: boolean;
}

/** Persistence for sessions. Every implementation passes `test/store/conformance.ts`. */
export interface Store {
  /** Short name for logs and metrics labels (`memory`, `redis`, `cluster`). */
  readonly name: string;
  /**
   * Loads a session; resolves to null when it has never been committed. Resolves quickly or rejects
   * with a `StoreError` (`TIDEMARK_E_STORE_UNAVAILABLE`, `TIDEMARK_E_STORE_CORRUPT`).
   */
  load(ref: SessionRef): Promise<SessionSnapshot | null>;
  /**
   * Applies a commit atomically if the stored version equals `expectedVersion`, bumping it by one;
   * otherwise applies nothing and reports a conflict with the current version. Logbook entries in the
   * commit are indexed for `searchLogbook` in the scope of `ref` (user when `ref.user` is set).
   */
  commit(ref: SessionRef, req: CommitRequest): Promise<CommitResult>;
  /**
   * Ranks a scope's logbook for an analysed query (see `LogbookIndex.search`; every store keeps the
   * same index, so rankings agree across stores).
   */
  searchLogbook(scope: LogbookScope, query: LogbookQuery, params: LogbookSearchParams): Promise<LogbookSearchResult>;
  /** Logbook entries of a scope, newest first. */
  listLogbook(scope: LogbookScope, options?: ListLogbookOptions): Promise<LogbookEntry[]>;
  /** Deletes logbook entries by id from a scope; resolves to how many were removed. */
  deleteLogbook(scope: LogbookScope, ids: readonly string[]): Promise<number>;
  /** The session's event stream, oldest first, up to the last `limit`. */
  readEvents(ref: SessionRef, limit?: number): Promise<StoredEvent[]>;
  /**
   * Removes every trace of a session or user: slots, logbook entries and their index entries, event
   * stream entries, snapshots. Nothing erased may be returned by any later call.
   */
  erase(target: EraseTarget): Promise<EraseReport>;
  /** Session ids of a tenant that currently hold state (for inspect and the dashboard). */
  listSessions(tenant: string, limit?: number): Promise<string[]>;
  /**
   * The erasure marks of a session now (see `CommitRequest.fence`): the time of the latest erase of
   * the session and of `ref.user`, as the store keeps them (tombstones). Optional for stores of
   * your own: without it the middleware sends no fence and erasure is only as strong as one
   * process's write chain.
   */
  fence?(ref: SessionRef): Promise<ErasureMarks>;
  /**
   * Calls `listener` whenever the store is found to have come back empty after an outage (a Redis
   * restart without persistence): sessions it held now read as new. Optional.
   */
  watchResets?(listener: (e: { atMs: number }) => void): void;
  /**
   * Calls `listener` when logbook entries whose stored payload failed its check were moved aside
   * (kept under a quarantine key, not used): searches of the scope go on without them. Corrupt slot
   * payloads are reported through `SessionSnapshot.quarantined` instead. Optional.
   */
  watchQuarantine?(listener: (e: { tenant: string; session: string; entries: number }) => void): void;
  /**
   * Deletes what retention no longer allows from every tier — slots, logbook entries and their
   * vector-index entries, in session and user scopes — without waiting for the sessions' next commit.
   * Safe to run from several processes at once. Optional: without it expiry happens at commits only.
   */
  sweep?(req: SweepRequest): Promise<SweepReport>;
  /** Releases connections, timers and files. */
  close(): Promise<void>;
  /** Resolves when the store answers a trivial command; rejects with a `StoreError` otherwise. */
  ping?(): Promise<void>;
  /** A tenant's truth figures over the whole store (see `StoreStats`). */
  stats?(tenant: string): Promise<StoreStats>;
  /**
   * Bytes held by a random sample of at most `sample` of a tenant's sessions (slots, events and the
   * session's logbook), one figure per session sampled; bounded cost whatever the number of sessions.
   * Redis: `MEMORY USAGE` of each sampled session's keys; in-process: an estimate from its contents.
   */
  sampleSessionBytes?(tenant: string, sample: number): Promise<number[]>;
  /** Publishes one process's dashboard buckets for a tenant under `instance`, kept for `ttlMs`. */
  putFleet?(tenant: string, instance: string, payload: string, ttlMs: number): Promise<void>;
  /** Every instance's latest published buckets for a tenant (expired ones left out). */
  listFleet?(tenant: string): Promise<FleetRecord[]>;
}
