// Typed lifecycle events of a tidemark instance (on eventemitter3). Payloads carry numbers, codes and
// a keyed hash of the session id — never message text or raw ids — so they are safe to log and to
// feed metrics. Emitting with no listener costs one check.

import type { DeprecatedCommitEventFields, DeprecatedEvents, DeprecatedEvictEventFields, DeprecatedReadEventFields } from '../deprecated-fields.js';
import type { TidemarkError } from '../errors.js';
import type { DemotionReason, EvictReason, ReadResult, WriteOutcome } from '../types.js';

/** Fields common to every per-session event. */
export interface SessionEventBase {
  /** Keyed hash of tenant + session id (see `Tidemark.hashSession`); stable for one `hashKey`. */
  sessionHash: string;
  /** Keyed hash of the tenant id (12 hex chars, same key as `sessionHash`): events never carry raw ids. */
  tenant: string;
  /** Wall-clock ms. */
  atMs: number;
}

export interface ReadEvent extends SessionEventBase, DeprecatedReadEventFields {
  result: ReadResult;
  /** Items returned (slots + logbook entries). */
  items: number;
  slotItems: number;
  logbookItems: number;
  scanned: number;
  slotsInUse: number;
  capacity: number;
  /** Logbook entries of the scope searched. */
  logbookSize: number;
  topWeight: number;
  /** Entropy (nats) of the slot attention weights. */
  entropy: number;
  topCosine: number;
  /** Coverage of the top item (a hit at `read.hitCoverage`). */
  topCoverage: number;
  durationUs: number;
  /** Microseconds in the logbook search (part of `durationUs`). */
  searchUs: number;
  embedUs: number;
}

export interface WriteEvent extends SessionEventBase {
  outcome: Exclude<WriteOutcome, 'gated_out'>;
  slot: number;
  /** Revision id now in the slot. */
  id: string;
  /** Session clock (turns or seconds) at the write. */
  clock: number;
  /** Gate score of the candidate (1 for reinforcements). */
  gate: number;
  strength: number;
  halfLife: number;
  slotsInUse: number;
  capacity: number;
  /** An update kept beside the values it may replace (they were not overwritten). */
  ambiguous?: boolean;
}

export interface OverwriteEvent extends SessionEventBase {
  slot: number;
  /** Revision id now in the slot. */
  id: string;
  /** Revision id moved to the logbook as superseded. */
  supersededId: string;
  /** Cosine between the new key and the slot's key. */
  cosine: number;
}

export interface EvictEvent extends SessionEventBase, DeprecatedEvictEventFields {
  slot: number;
  id: string;
  reason: EvictReason;
  /** Where the evicted value went: kept in the logbook (true), or deleted (erased, expired). */
  logged: boolean;
  /** Lifetime in session clock units (turns or seconds) and in wall-clock ms. */
  lifetime: number;
  lifetimeMs: number;
  halfLife: number;
  strength: number;
}

export interface GateEvent extends SessionEventBase {
  /** Gate score in [0, 1]. */
  score: number;
  threshold: number;
  passed: boolean;
  /** Feature values that produced the score (no text). */
  features: Record<string, number>;
}

export interface CommitEvent extends SessionEventBase, DeprecatedCommitEventFields {
  ops: number;
  /** Values demoted to the logbook (superseded or evicted). */
  demoted: number;
  /** Logbook entries added: turns kept plus values demoted. */
  logbook: number;
  /** Conflicts retried before success. */
  retries: number;
  durationUs: number;
  /** Write work (extract, gate, address) excluding store time. */
  planUs: number;
  embedUs: number;
  slotsInUse: number;
  capacity: number;
  /** Slot lifetimes of live slots are not in here; see `inspect()` for censored observations. */
  version: number;
}

export interface DegradedEvent extends SessionEventBase {
  stage: 'read' | 'write';
  code: string;
}

export interface ErrorEvent {
  stage: 'read' | 'write' | 'handler' | 'outbox' | 'store';
  error: TidemarkError;
  sessionHash?: string;
}

export interface OutboxEvent {
  /** Pending writes waiting for the store. */
  depth: number;
  /**
   * `queued`: a failed write was queued; `drained`: one was committed; `overflow`: one was refused;
   * `retry`: a conflict (another writer kept winning) left one queued for another pass — a store
   * still unreachable leaves it queued without an event; `erased`: one was accepted before an erase of
   * its session or user and is not stored; `expired`: one waited past `outbox.maxAgeMs`; `failed`: the
   * store refused one for good (reported in an `error` event); `abandoned`: `close()` ran out of time
   * with it still queued, or its commit failed after `close()` stopped the outbox.
   */
  change: 'queued' | 'drained' | 'overflow' | 'retry' | 'erased' | 'expired' | 'failed' | 'abandoned';
  sessionHash?: string;
}

/** A value left working memory for the logbook (superseded, or evicted and kept). */
export interface DemoteEvent extends SessionEventBase {
  reason: DemotionReason;
  id: string;
}

/** What one commit did to the logbook. */
export interface LogbookEvent extends SessionEventBase {
  /** Turns kept. */
  turns: number;
  /** Values demoted from working memory. */
  demoted: number;
  /** Entries the retention policy deleted: past the maximum age, and past the maximum count. */
  droppedAge: number;
  droppedCount: number;
}

/**
 * The store came back empty after an outage (a Redis restart without persistence): sessions this
 * process knew now read as new. `resets` counts them since start (also `Tidemark.storeResets`).
 */
export interface StoreResetEvent {
  store: string;
  resets: number;
  atMs: number;
}

/**
 * A retention sweep deleted what had expired (`reason: 'expired'`): slots past `write.maxAgeMs` and
 * logbook entries past `logbook.maxAgeMs`, over the tenant's sessions. No session ids, no text.
 */
export interface SweepEvent {
  /** Keyed hash of the tenant swept. */
  tenant: string;
  atMs: number;
  reason: 'expired';
  /** Sessions visited. */
  sessions: number;
  slots: number;
  logbookEntries: number;
}

/** `close()` ran out of time with writes still queued: they are not stored. */
export interface ClosedEvent {
  abandoned: number;
}

/** Event name -> listener signature, for `tidemark.on(name, listener)`. */
export interface TidemarkEvents extends DeprecatedEvents {
  read: (e: ReadEvent) => void;
  write: (e: WriteEvent) => void;
  overwrite: (e: OverwriteEvent) => void;
  evict: (e: EvictEvent) => void;
  gate: (e: GateEvent) => void;
  commit: (e: CommitEvent) => void;
  demote: (e: DemoteEvent) => void;
  logbook: (e: LogbookEvent) => void;
  degraded: (e: DegradedEvent) => void;
  outbox: (e: OutboxEvent) => void;
  error: (e: ErrorEvent) => void;
  storeReset: (e: StoreResetEvent) => void;
  sweep: (e: SweepEvent) => void;
  closed: (e: ClosedEvent) => void;
}
