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
import type { SessionSnapshot, Store } from '../store/store.js';
import type { LogbookEntry, SessionRef } from '../types.js';
import type { TidemarkEvents } from './events.js';
import type { ResolvedOptions } from './options.js';
import { validateTurn, type Turn } from './validate.js';

export const refOf = (t: Turn): SessionRef => ({ tenant: t.tenant, session: t.session, ...(t.user ? { user: t.user } : {}) });
export const keyOf = (r: SessionRef): string => `${r.tenant}\u0000${r.session}`;
export const errMessage = (err: unknown): string => (err instanceof Error ? err.message : String(err));
export const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms).unref?.());
/** Microseconds since an origin from performance.now(). */
export const usSince = (t0: number): number => (performance.now() - t0) * 1000;

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
    return { sessionHash: this.hashSession(ref.tenant, ref.session), tenant: ref.tenant, atMs: Date.now() };
  }

  validate(input: unknown): Turn {
    return validateTurn(input, { tenant: this.o.tenant, maxTextBytes: this.o.maxTextBytes, truncate: this.o.truncate });
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
      this.events.emit('error', { stage, error, ...(ref ? { sessionHash: this.hashSession(ref.tenant, ref.session) } : {}) });
    }
    return error;
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
    return ids.map((id) => m?.get(id)).filter((x): x is LogbookEntry => x !== undefined);
  }

  /** Remembers the texts a write just committed, as the next write's context. */
  rememberSaid(ref: SessionRef, texts: readonly string[]): void {
    remember(this.said, keyOf(ref), texts.slice().reverse().slice(0, 4), 10_000);
  }

  /** What was said just before in this session, newest first, as far as this process saw it. */
  saidBefore(ref: SessionRef): string[] {
    return this.said.get(keyOf(ref)) ?? [];
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
  }
}
