// What the rooms of the middleware share: the store, embedder and extractor, the resolved options,
// the embedding cache, the per-session write chains, the small memos that let a write reuse what its
// turn's read loaded, id hashing for events, and error reporting. No memory math here.

import { createHmac, randomBytes } from 'node:crypto';
import type { EventEmitter } from 'eventemitter3';
import { EmbeddingCache } from '../embed/cache.js';
import type { Embedder } from '../embed/embedder.js';
import { EmbedderError, ErrorCodes, StoreError, TidemarkError, isTidemarkError } from '../errors.js';
import type { Extractor } from '../memory/extract.js';
import type { MemoryParams } from '../memory/params.js';
import { forgetSlotTerms } from '../memory/rank.js';
import type { ErasureFence, ErasureMarks, SessionSnapshot, Store } from '../store/store.js';
import type { LogbookEntry, MemoryContext, SessionRef } from '../types.js';
import type { SessionEventBase, TidemarkEvents } from './events.js';
import type { ResolvedOptions } from './options.js';
import { validateTurn, type Turn } from './validate.js';

export const refOf = (t: Turn): SessionRef => ({ tenant: t.tenant, session: t.session, ...(t.user ? { user: t.user } : {}) });
export const keyOf = (r: SessionRef): string => `${r.tenant}\u0000${r.session}`;
export const errMessage = (err: unknown): string => (err instanceof Error ? err.message : String(err));
export const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms).unref?.());
/** Microseconds since an origin from performance.now(). */
export const usSince = (t0: number): number => (performance.now() - t0) * 1000;

/**
 * An event payload: `base`'s fields, then `fields`. Not `{ ...base, ...fields }` written out: V8 in
 * Node 20 adds each field that follows a leading spread on a slow path, about 1.5 µs a field, so a
 * 13-field event cost 15–20 µs (measured here; this form, about 0.2 µs), and a commit emits several.
 */
export function payload<T extends object>(base: SessionEventBase, fields: T): SessionEventBase & T {
  return Object.assign({ sessionHash: base.sessionHash, tenant: base.tenant, atMs: base.atMs }, fields);
}

const sameMarks = (a: ErasureMarks | undefined, b: ErasureMarks | undefined): boolean =>
  a !== undefined && b !== undefined && a.session === b.session && a.user === b.user;

/**
 * The error as events carry it: same class, code, message and details, without `cause` — a driver's
 * error there can hold the command it failed, with keys naming raw session and user ids.
 */
function withoutCause(err: TidemarkError): TidemarkError {
  if (err.cause === undefined) return err;
  const copy = Object.create(Object.getPrototypeOf(err) as object) as TidemarkError;
  Object.defineProperties(copy, {
    name: { value: err.name, writable: true, configurable: true },
    message: { value: err.message, writable: true, configurable: true },
    stack: { value: err.stack, writable: true, configurable: true },
    code: { value: err.code, enumerable: true },
    details: { value: err.details, enumerable: true },
  });
  return copy;
}

/** Bounded insertion-ordered map: the oldest key goes when full. */
function remember<K, V>(m: Map<K, V>, k: K, v: V, max: number): void {
  m.delete(k);
  if (m.size >= max) m.delete(m.keys().next().value as K);
  m.set(k, v);
}

export class Core {
  readonly cache: EmbeddingCache;
  /** Tail of each session's write chain: writes of one session apply in order. */
  readonly queues = new Map<string, Promise<void>>();
  /** The snapshot each session's last read loaded, for its write to plan on (bounded, used once). */
  private readonly lastRead = new Map<string, SessionSnapshot>();
  /** Logbook values recently returned by reads, per session, so a write can promote them (bounded). */
  private readonly recalled = new Map<string, Map<string, LogbookEntry>>();
  /** Texts of each session's last written turns, newest first (bounded): context for the next write. */
  private readonly said = new Map<string, string[]>();
  private readonly hashes = new Map<string, string>();
  /** The erasure fence each read was made under, for the turn's write. */
  private readonly readFences = new WeakMap<MemoryContext, ErasureFence>();
  /** The fence of each session's last read, to check that values recalled then may still be promoted (bounded). */
  private readonly recalledFence = new Map<string, ErasureFence>();
  private readonly hashKey: string;
  /** Whether turn vectors go into the logbook (and a dense list into reads). */
  readonly dense: boolean;

  constructor(
    readonly store: Store,
    readonly embedder: Embedder,
    readonly extractor: Extractor,
    readonly params: MemoryParams,
    readonly o: ResolvedOptions,
    readonly events: EventEmitter<TidemarkEvents>,
    hashKey: string | undefined,
  ) {
    this.cache = new EmbeddingCache(o.embedCacheSize);
    this.hashKey = hashKey ?? randomBytes(16).toString('hex');
    this.dense = o.logbook.vectors === 'auto' ? embedder.semantic === true : o.logbook.vectors;
    store.watchQuarantine?.(({ tenant, session, entries }) => {
      this.emitError('store', new StoreError(ErrorCodes.STORE_CORRUPT, `store ${store.name}: ${entries} logbook entries of this session failed their check and were moved aside; searches continue without them`, { details: { quarantined: entries, tier: 'logbook' } }), { tenant, session });
    });
  }

  /** Keyed hash of a session id as it appears in events and metrics (12 hex chars). */
  hashSession(tenant: string, session: string): string {
    const k = `${tenant}\u0000${session}`;
    let h = this.hashes.get(k);
    if (h === undefined) {
      h = createHmac('sha256', this.hashKey).update(k).digest('hex').slice(0, 12);
      if (this.hashes.size >= 10_000) this.hashes.clear();
      this.hashes.set(k, h);
    }
    return h;
  }

  base(ref: SessionRef): { sessionHash: string; tenant: string; atMs: number } {
    return { sessionHash: this.hashSession(ref.tenant, ref.session), tenant: this.hashTenant(ref.tenant), atMs: Date.now() };
  }

  /** Keyed hash of a tenant id as it appears in events (12 hex chars). */
  hashTenant(tenant: string): string {
    return this.hashSession(tenant, '\u0000tenant');
  }

  validate(input: unknown, role?: Turn['role']): Turn {
    return validateTurn(input, { tenant: this.o.tenant, maxTextBytes: this.o.maxTextBytes, truncate: this.o.truncate, ...(role ? { role } : {}) });
  }

  /** The session clock at `atMs`: turns seen, or seconds (never moving backwards). */
  clockFor(snap: SessionSnapshot | null, atMs: number): number {
    if (this.params.decayUnit === 'seconds') return Math.max(snap?.clock ?? 0, atMs / 1000);
    return snap?.clock ?? 0;
  }

  dimError(ref: SessionRef, stored: number): EmbedderError {
    return new EmbedderError(
      ErrorCodes.EMBED_DIM,
      `session #${this.hashSession(ref.tenant, ref.session)} was stored with ${stored} dims, embedder ${this.embedder.id} gives ${this.embedder.dim}; use the same embedder or call migrate(session)`,
      { details: { stored, embedder: this.embedder.dim } },
    );
  }

  /** Runs a store call, turning a non-tidemark failure into `STORE_UNAVAILABLE` naming what failed. */
  async storeCall<T>(fn: () => Promise<T>, what: string): Promise<T> {
    try {
      return await fn();
    } catch (err) {
      if (isTidemarkError(err)) throw err;
      throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, `store ${this.store.name} failed (${what}): ${errMessage(err)}`, { cause: err });
    }
  }

  emitError(stage: 'read' | 'write' | 'handler' | 'outbox' | 'store', err: unknown, ref?: SessionRef): TidemarkError {
    const error = isTidemarkError(err) ? (err as TidemarkError) : new StoreError(ErrorCodes.STORE_UNAVAILABLE, errMessage(err), { cause: err });
    if (this.events.listenerCount('error') > 0) {
      this.events.emit('error', { stage, error: withoutCause(error), ...(ref ? { sessionHash: this.hashSession(ref.tenant, ref.session) } : {}) });
    }
    return error;
  }

  /** The fence of a turn accepted at `acceptedMs`: the store's erasure marks now, when it answers. */
  async fenceNow(ref: SessionRef, acceptedMs: number): Promise<ErasureFence | undefined> {
    if (!this.store.fence) return undefined;
    try {
      return { seen: await this.store.fence(ref), acceptedMs };
    } catch {
      return { acceptedMs };
    }
  }

  /** Records the fence a read was made under (and the session's recalled values with it). */
  rememberFence(ref: SessionRef, memory: MemoryContext, fence: ErasureFence): void {
    this.readFences.set(memory, fence);
    const key = keyOf(ref);
    const before = this.recalledFence.get(key)?.seen;
    // The tombstones moved since this process last read the session: another process erased it (or
    // its user). What this process derived from the erased text goes now, not when its caches fill.
    if (before && fence.seen && !sameMarks(before, fence.seen)) this.forgetSession(ref);
    remember(this.recalledFence, key, fence, 10_000);
  }

  /** Drops every memo of one session, and the ranking's cached word counts (an erase seen). */
  forgetSession(ref: SessionRef): void {
    const key = keyOf(ref);
    this.lastRead.delete(key);
    this.recalled.delete(key);
    this.said.delete(key);
    forgetSlotTerms();
  }

  fenceOf(memory: MemoryContext): ErasureFence | undefined {
    return this.readFences.get(memory);
  }

  /** Whether values recalled by the session's last read were recalled under `fence` (no erase since). */
  recalledUnder(ref: SessionRef, fence: ErasureFence | undefined): boolean {
    return fence === undefined ? !this.store.fence : sameMarks(this.recalledFence.get(keyOf(ref))?.seen, fence.seen);
  }

  /** Reports slots a load moved aside (corrupt payloads): an `error` event, the session goes on. */
  noteQuarantine(ref: SessionRef, snap: SessionSnapshot | null): void {
    if (!snap?.quarantined) return;
    this.emitError('store', new StoreError(ErrorCodes.STORE_CORRUPT, `store ${this.store.name}: ${snap.quarantined} slot payloads of this session failed their check and were moved aside; the session continues without them`, { details: { quarantined: snap.quarantined } }), ref);
  }

  /** Runs `fn` after the session's previous write settles; writes of one session apply in order. */
  chain<T>(key: string, fn: () => Promise<T>): Promise<T> {
    const job = (this.queues.get(key) ?? Promise.resolve()).then(fn);
    const tail = job.then(
      () => undefined,
      () => undefined,
    );
    this.queues.set(key, tail);
    void tail.then(() => {
      if (this.queues.get(key) === tail) this.queues.delete(key);
    });
    return job;
  }

  rememberSnapshot(ref: SessionRef, snap: SessionSnapshot): void {
    remember(this.lastRead, keyOf(ref), snap, 10_000);
  }

  /** The snapshot the session's last read loaded, once (undefined when none). */
  takeSnapshot(ref: SessionRef): SessionSnapshot | undefined {
    const key = keyOf(ref);
    const snap = this.lastRead.get(key);
    if (snap) this.lastRead.delete(key);
    return snap;
  }

  /** Remembers logbook values a read returned, for promotion by the turn's write. */
  rememberRecalled(ref: SessionRef, entry: LogbookEntry): void {
    if (!this.o.promote || entry.kind === 'turn' || entry.kind === 'superseded') return;
    const key = keyOf(ref);
    let m = this.recalled.get(key);
    if (!m) remember(this.recalled, key, (m = new Map()), 1000);
    remember(m, entry.id, entry, 32);
  }

  /** The remembered logbook values of a session with these ids. */
  recalledEntries(ref: SessionRef, ids: readonly string[]): LogbookEntry[] {
    const m = this.recalled.get(keyOf(ref));
    // With the retention sweep on (wall clock), a value past logbook.maxAgeMs is deleted or about to
    // be, by some process: it is not promoted back into a slot from this process's memory.
    const age = this.o.retention.sweepMs > 0 ? this.o.logbook.maxAgeMs : 0;
    const cutoff = age > 0 ? Date.now() - age : -Infinity;
    return ids.map((id) => m?.get(id)).filter((x): x is LogbookEntry => x !== undefined && x.atMs >= cutoff);
  }

  /** Remembers the texts a write just committed, as the next write's context. */
  rememberSaid(ref: SessionRef, texts: readonly string[]): void {
    remember(this.said, keyOf(ref), texts.slice().reverse().slice(0, 4), 10_000);
  }

  /** What was said just before in this session, newest first, as far as this process saw it. */
  saidBefore(ref: SessionRef): string[] {
    return this.said.get(keyOf(ref)) ?? [];
  }

  /** Drops remembered logbook values older than `cutoffMs` (deleted by retention; never promoted back). */
  forgetRecalledBefore(cutoffMs: number): void {
    for (const m of this.recalled.values()) for (const [id, e] of m) if (e.atMs < cutoffMs) m.delete(id);
  }

  forgetRecalled(ref: SessionRef): void {
    this.recalled.get(keyOf(ref))?.clear();
  }

  /** Drops every memo that holds session text (erasure). */
  clearMemos(): void {
    this.cache.clear();
    this.recalled.clear();
    this.lastRead.clear();
    this.said.clear();
    this.recalledFence.clear();
    forgetSlotTerms();
  }
}
