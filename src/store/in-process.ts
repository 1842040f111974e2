// The in-process store, tidemark's default: sessions, logbooks and event streams in this process's
// memory, with an optional snapshot file so a restart loses nothing. Commits are synchronous under
// the hood, so version checks are exact within one process. Each logbook scope is one LogbookIndex.
// The snapshot file's format, writing and reading are in snapshot.ts.

import type { VectorIndexOptions } from '../vectors/index.js';
import { vectorIndexOptionsOf, type DeprecatedStoreOptions } from '../deprecated-fields.js';
import { ConfigError, ErrorCodes, StoreError } from '../errors.js';
import { LogbookIndex, type LogbookQuery, type LogbookSearchParams, type LogbookSearchResult } from '../logbook/index.js';
import { SlotTable } from '../memory/slots.js';
import type { LogbookEntry, LogbookScope, SessionRef, StoredEvent } from '../types.js';
import { applyRetention } from './retention.js';
import { readSnapshot, restoreSnapshot, sessionKey, userKey, writeSnapshot, type SessionEntry } from './snapshot.js';
import type { CommitRequest, CommitResult, EraseReport, EraseTarget, ErasureFence, ErasureMarks, FleetRecord, ListLogbookOptions, SessionSnapshot, Store, StoreStats, SweepReport, SweepRequest } from './store.js';

export interface InProcessStoreOptions extends DeprecatedStoreOptions {
  /** File to write snapshots to and restore from at start; none when unset. @default undefined */
  snapshotPath?: string;
  /** Write a snapshot this often (ms) when something changed; 0 writes only on `save()`/`close()`. @default 5000 */
  snapshotIntervalMs?: number;
  /** Events kept per session (oldest dropped first). @default 1000 */
  maxEvents?: number;
  /** Options of each logbook scope's vector index (exact scan, HNSW past a size). */
  vectorIndex?: VectorIndexOptions;
  /**
   * Sessions held at most; past it the least recently used one is dropped with its logbook entries
   * (counted in `evicted.cap`). A session of 64 slots × 384 dims is about 100 KB. @default 10000
   */
  maxSessions?: number;
  /**
   * A session neither read nor written for this long (ms) is dropped with its logbook entries, by a
   * sweep every minute (counted in `evicted.idle`); the Redis store's `idleTtlSeconds` does the same.
   * 0 keeps sessions until erased. @default 2592000000 (30 days)
   */
  idleTtlMs?: number;
}

export const IN_PROCESS_STORE_DEFAULTS: Required<Pick<InProcessStoreOptions, 'snapshotIntervalMs' | 'maxEvents' | 'maxSessions' | 'idleTtlMs'>> = {
  snapshotIntervalMs: 5000,
  maxEvents: 1000,
  maxSessions: 10_000,
  idleTtlMs: 30 * 24 * 3600 * 1000,
};

export function scopeKey(scope: LogbookScope): string {
  return 'user' in scope ? `u\u0000${scope.tenant}\u0000${scope.user}` : `s\u0000${scope.tenant}\u0000${scope.session}`;
}
/** The logbook scope of a session: its user's when it has one, else its own. */
export function scopeOf(ref: SessionRef): LogbookScope {
  return ref.user ? { tenant: ref.tenant, user: ref.user } : { tenant: ref.tenant, session: ref.session };
}

/** Entries of an index, newest first, filtered and cut (shared by the stores' `listLogbook`). */
export function listEntries(index: LogbookIndex | undefined, options: ListLogbookOptions = {}): LogbookEntry[] {
  if (!index) return [];
  const kinds = options.kinds ? new Set(options.kinds) : null;
  const out = [...index.all()].filter((e) => !kinds || kinds.has(e.kind));
  out.sort((x, y) => y.atMs - x.atMs || y.seq - x.seq || y.clock - x.clock);
  return out.slice(0, options.limit ?? 100);
}

export class InProcessStore implements Store {
  readonly name = 'memory';
  private readonly sessions = new Map<string, SessionEntry>();
  private readonly logbooks = new Map<string, LogbookIndex>();
  private readonly userSessions = new Map<string, Set<string>>();
  private readonly o: InProcessStoreOptions & typeof IN_PROCESS_STORE_DEFAULTS;
  /** Erase tombstones: key -> time (ms) of the latest erase of a session (`s` + key) or user (`u` + key). */
  private readonly tombstones = new Map<string, number>();
  private dirty = false;
  private timer: NodeJS.Timeout | undefined;
  private sweeper: NodeJS.Timeout | undefined;
  /** Sessions dropped by the bounds, by reason (for metrics): over `maxSessions`, idle past `idleTtlMs`. */
  readonly evicted = { cap: 0, idle: 0 };
  /** Published dashboard buckets by instance (one process: usually one entry). */
  private readonly fleet = new Map<string, FleetRecord & { expiresMs: number }>();
  /** Store-wide counters per tenant, from commits' `counters` (kept in the snapshot file too). */
  private readonly counters = new Map<string, Record<string, number>>();

  constructor(options: InProcessStoreOptions = {}) {
    this.o = { ...IN_PROCESS_STORE_DEFAULTS, ...options };
    if (!Number.isInteger(this.o.maxEvents) || this.o.maxEvents < 0) {
      throw new ConfigError(`in-process store: maxEvents must be an integer >= 0, got ${String(this.o.maxEvents)}`);
    }
    if (!Number.isInteger(this.o.maxSessions) || this.o.maxSessions < 1) {
      throw new ConfigError(`in-process store: maxSessions must be an integer >= 1, got ${String(this.o.maxSessions)}`, { details: { option: 'maxSessions' } });
    }
    if (!Number.isFinite(this.o.idleTtlMs) || this.o.idleTtlMs < 0) {
      throw new ConfigError(`in-process store: idleTtlMs must be a number of ms >= 0 (0 = none), got ${String(this.o.idleTtlMs)}`, { details: { option: 'idleTtlMs' } });
    }
    if (this.o.idleTtlMs > 0) {
      this.sweeper = setInterval(() => this.sweepIdle(), Math.min(60_000, this.o.idleTtlMs));
      this.sweeper.unref();
    }
    if (this.o.snapshotPath) {
      this.restore(this.o.snapshotPath);
      if (this.o.snapshotIntervalMs > 0) {
        this.timer = setInterval(() => {
          if (this.dirty) this.save();
        }, this.o.snapshotIntervalMs);
        this.timer.unref();
      }
    }
  }

  async load(ref: SessionRef): Promise<SessionSnapshot | null> {
    const e = this.use(ref.tenant, ref.session);
    if (!e) return null;
    return { version: e.version, clock: e.clock, turns: e.turns, table: e.table };
  }

  async fence(ref: SessionRef): Promise<ErasureMarks> {
    return {
      session: this.tombstones.get(`s${sessionKey(ref.tenant, ref.session)}`) ?? 0,
      user: ref.user ? this.tombstones.get(`u${userKey(ref.tenant, ref.user)}`) ?? 0 : 0,
    };
  }

  async commit(ref: SessionRef, req: CommitRequest): Promise<CommitResult> {
    const key = sessionKey(ref.tenant, ref.session);
    let e = this.use(ref.tenant, ref.session);
    const current = e?.version ?? 0;
    if (req.fence && fencedOut(req.fence, await this.fence(ref))) return { ok: false, erased: true, version: current };
    if (req.commitId && e?.commitIds?.includes(req.commitId)) return { ok: true, version: current };
    if (current !== req.expectedVersion) return { ok: false, conflict: true, version: current };
    for (const op of req.ops) {
      if (op.index < 0 || op.index >= req.capacity) {
        throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, `commit op for slot ${op.index} outside capacity ${req.capacity}`);
      }
    }
    if (!e) {
      e = { version: 0, clock: 0, turns: 0, table: new SlotTable(req.capacity, req.dim), events: [], usedMs: Date.now() };
      this.sessions.set(key, e);
      while (this.sessions.size > this.o.maxSessions) {
        const [oldest] = this.sessions.keys();
        this.drop(oldest!);
        this.evicted.cap++;
      }
    } else if (e.table.capacity !== req.capacity || e.table.dim !== req.dim) {
      e.table = e.table.dim === req.dim ? e.table.clone(req.capacity) : new SlotTable(req.capacity, req.dim);
    }
    for (const op of req.ops) {
      if (op.slot) e.table.set(op.index, op.slot);
      else e.table.clear(op.index);
    }
    if (ref.user) {
      e.user = ref.user;
      const uk = userKey(ref.tenant, ref.user);
      let set = this.userSessions.get(uk);
      if (!set) this.userSessions.set(uk, (set = new Set()));
      set.add(ref.session);
    }
    let dropped: { age: number; count: number } | undefined;
    if (req.logbook.length > 0 || req.retention) {
      const index = this.logbook(scopeOf(ref), true)!;
      for (const entry of req.logbook) index.add(entry);
      if (req.retention) dropped = applyRetention(index, req.retention.policy, req.retention.nowMs);
    }
    if (req.events.length > 0 && this.o.maxEvents > 0) {
      e.events.push(...req.events);
      if (e.events.length > this.o.maxEvents) e.events.splice(0, e.events.length - this.o.maxEvents);
    }
    e.clock = req.clock;
    e.turns = req.turns;
    e.version = current + 1;
    if (req.commitId) {
      (e.commitIds ??= []).push(req.commitId);
      if (e.commitIds.length > 16) e.commitIds.shift();
    }
    if (req.counters) {
      let c = this.counters.get(ref.tenant);
      if (!c) this.counters.set(ref.tenant, (c = {}));
      for (const [field, n] of Object.entries(req.counters)) if (Number.isFinite(n)) c[field] = (c[field] ?? 0) + n;
    }
    this.dirty = true;
    return dropped && (dropped.age > 0 || dropped.count > 0) ? { ok: true, version: e.version, dropped } : { ok: true, version: e.version };
  }

  async searchLogbook(scope: LogbookScope, query: LogbookQuery, params: LogbookSearchParams): Promise<LogbookSearchResult> {
    return (this.logbook(scope, false) ?? EMPTY).search(query, params);
  }

  async listLogbook(scope: LogbookScope, options: ListLogbookOptions = {}): Promise<LogbookEntry[]> {
    return listEntries(this.logbook(scope, false), options);
  }

  async deleteLogbook(scope: LogbookScope, ids: readonly string[]): Promise<number> {
    const index = this.logbook(scope, false);
    if (!index) return 0;
    let n = 0;
    for (const id of ids) if (index.remove(id)) n++;
    if (n > 0) this.dirty = true;
    return n;
  }

  async readEvents(ref: SessionRef, limit = 100): Promise<StoredEvent[]> {
    const e = this.sessions.get(sessionKey(ref.tenant, ref.session));
    return e ? e.events.slice(-limit) : [];
  }

  async erase(target: EraseTarget): Promise<EraseReport> {
    const report: EraseReport = { sessions: 0, slots: 0, logbookEntries: 0, events: 0 };
    const sessions: string[] = [];
    const at = this.tombstone('user' in target ? `u${userKey(target.tenant, target.user)}` : `s${sessionKey(target.tenant, target.session)}`, 0);
    if ('user' in target) {
      const uk = userKey(target.tenant, target.user);
      sessions.push(...(this.userSessions.get(uk) ?? []));
      this.userSessions.delete(uk);
      report.logbookEntries += this.dropLogbook({ tenant: target.tenant, user: target.user });
    } else {
      sessions.push(target.session);
    }
    for (const s of sessions) {
      const key = sessionKey(target.tenant, s);
      this.tombstone(`s${key}`, at);
      const d = this.drop(key);
      report.sessions += d.sessions;
      report.slots += d.slots;
      report.events += d.events;
      report.logbookEntries += d.logbookEntries;
    }
    this.dirty = true;
    // Erasure must reach the snapshot file at once, not at the next interval.
    if (this.o.snapshotPath) this.save();
    return report;
  }

  /**
   * The retention sweep (see `Store.sweep`): one pass over the tenant's sessions and logbook scopes,
   * in this process's memory (O(sessions + expired)). A session that loses a slot moves its version on,
   * so a plan made before the sweep is re-planned. The vectors and text of a deleted slot are zeroed.
   */
  async sweep(req: SweepRequest): Promise<SweepReport> {
    const out: SweepReport = { sessions: 0, slots: 0, logbookEntries: 0, done: true };
    const prefix = `${req.tenant}\u0000`;
    if (req.slotCutoffMs > 0) {
      for (const [key, e] of this.sessions) {
        if (!key.startsWith(prefix)) continue;
        out.sessions++;
        let n = 0;
        for (let i = 0; i < e.table.capacity; i++) {
          if (e.table.get(i) && e.table.createdMs[i]! < req.slotCutoffMs) {
            e.table.clear(i);
            n++;
          }
        }
        if (n > 0) {
          e.version++;
          out.slots += n;
        }
      }
    }
    if (req.logbookCutoffMs > 0) {
      for (const [key, index] of this.logbooks) {
        if (!key.startsWith(`s\u0000${prefix}`) && !key.startsWith(`u\u0000${prefix}`)) continue;
        // Every entry, not only a run from the front: a user scope interleaves its sessions' turns.
        const expired = [...index.all()].filter((e) => e.atMs < req.logbookCutoffMs);
        for (const e of expired) if (index.remove(e.id)) out.logbookEntries++;
      }
    }
    if (out.slots > 0 || out.logbookEntries > 0) {
      this.dirty = true;
      // Deletion must reach the snapshot file at once, as an erase does.
      if (this.o.snapshotPath) this.save();
    }
    return out;
  }

  /** A session's entry, marked as just used (most recent in the LRU order); an idle-expired one is dropped. */
  private use(tenant: string, session: string): SessionEntry | undefined {
    const key = sessionKey(tenant, session);
    const e = this.sessions.get(key);
    if (!e) return undefined;
    const now = Date.now();
    if (this.o.idleTtlMs > 0 && now - e.usedMs > this.o.idleTtlMs) {
      this.drop(key);
      this.evicted.idle++;
      return undefined;
    }
    e.usedMs = now;
    this.sessions.delete(key);
    this.sessions.set(key, e);
    return e;
  }

  /** Drops sessions idle past `idleTtlMs` (oldest first in the LRU order, so it stops at the first live one). */
  private sweepIdle(): void {
    const cutoff = Date.now() - this.o.idleTtlMs;
    for (const [key, e] of this.sessions) {
      if (e.usedMs > cutoff) break;
      this.drop(key);
      this.evicted.idle++;
    }
  }

  /**
   * Removes a session: slots (zeroed first), events, its logbook scope and the entries it put in its
   * user's logbook. Used by erase and by the bounds.
   */
  private drop(key: string): EraseReport {
    const [tenant, session] = key.split('\u0000') as [string, string];
    const out: EraseReport = { sessions: 0, slots: 0, logbookEntries: 0, events: 0 };
    const e = this.sessions.get(key);
    if (e) {
      out.sessions = 1;
      out.slots = e.table.count();
      out.events = e.events.length;
      // Zero the vectors and text before letting go, so nothing lingers in a shared buffer.
      for (let i = 0; i < e.table.capacity; i++) e.table.clear(i);
      this.sessions.delete(key);
      if (e.user) {
        this.userSessions.get(userKey(tenant, e.user))?.delete(session);
        const index = this.logbook({ tenant, user: e.user }, false);
        if (index) {
          const ids = [...index.all()].filter((x) => x.session === session).map((x) => x.id);
          for (const id of ids) if (index.remove(id)) out.logbookEntries++;
        }
      }
    }
    out.logbookEntries += this.dropLogbook({ tenant, session });
    this.dirty = true;
    return out;
  }

  /** Moves a tombstone to max(now, at, previous + 1) and returns it. */
  private tombstone(key: string, at: number): number {
    const t = Math.max(Date.now(), at, (this.tombstones.get(key) ?? 0) + 1);
    this.tombstones.delete(key);
    this.tombstones.set(key, t);
    // Bounded: past the cap the oldest tombstones go (the Redis store keeps them for fenceTtlSeconds).
    if (this.tombstones.size > 100_000) this.tombstones.delete(this.tombstones.keys().next().value!);
    return t;
  }

  async listSessions(tenant: string, limit = 1000): Promise<string[]> {
    const out: string[] = [];
    const prefix = `${tenant}\u0000`;
    for (const key of this.sessions.keys()) {
      if (key.startsWith(prefix)) out.push(key.slice(prefix.length));
      if (out.length >= limit) break;
    }
    return out;
  }

  async ping(): Promise<void> {}

  /** Exact: counted from the maps under the same single thread that commits. */
  async stats(tenant: string): Promise<StoreStats> {
    let sessions = 0;
    let slots = 0;
    for (const [key, e] of this.sessions) {
      if (!key.startsWith(`${tenant}\u0000`)) continue;
      sessions++;
      slots += e.table.count();
    }
    let logbookEntries = 0;
    for (const [key, index] of this.logbooks) if (key.startsWith(`s\u0000${tenant}\u0000`) || key.startsWith(`u\u0000${tenant}\u0000`)) logbookEntries += index.size;
    return { sessions, slots, logbookEntries, source: 'counters', counters: { ...this.counters.get(tenant) } };
  }

  /**
   * An estimate, not a measurement: typed arrays by their byte length, strings at 2 bytes a character
   * (UTF-16), events as their JSON, the session's logbook entries by value and key; object overheads
   * left out. A sample of `sample` sessions picked at random from the tenant's (reservoir sampling).
   */
  async sampleSessionBytes(tenant: string, sample: number): Promise<number[]> {
    const picked: Array<[string, SessionEntry]> = [];
    let seen = 0;
    for (const [key, e] of this.sessions) {
      if (!key.startsWith(`${tenant}\u0000`)) continue;
      seen++;
      if (picked.length < sample) picked.push([key, e]);
      else {
        const j = Math.floor(Math.random() * seen);
        if (j < sample) picked[j] = [key, e];
      }
    }
    return picked.map(([key, e]) => {
      const t = e.table;
      let bytes = t.keys.byteLength + t.capacity * (6 * 8 + 4 + 2);
      for (let i = 0; i < t.capacity; i++) {
        if (!t.isUsed(i)) continue;
        bytes += 2 * (t.ids[i]!.length + t.keyText[i]!.length + t.value[i]!.length + t.provenance[i]!.join('').length);
      }
      bytes += 2 * JSON.stringify(e.events).length;
      const session = key.slice(tenant.length + 1);
      for (const entry of listEntries(this.logbook(scopeOf({ tenant, session }), false), { limit: Number.MAX_SAFE_INTEGER })) {
        bytes += 2 * (entry.id.length + entry.value.length + entry.keyText.length) + (entry.key ? entry.key.length * 4 : 0);
      }
      return bytes;
    });
  }

  async putFleet(tenant: string, instance: string, payload: string, ttlMs: number): Promise<void> {
    const atMs = Date.now();
    this.fleet.set(`${tenant}\u0000${instance}`, { instance, atMs, payload, expiresMs: atMs + ttlMs });
  }

  async listFleet(tenant: string): Promise<FleetRecord[]> {
    const now = Date.now();
    const out: FleetRecord[] = [];
    for (const [k, r] of this.fleet) {
      if (r.expiresMs < now) this.fleet.delete(k);
      else if (k.startsWith(`${tenant}\u0000`)) out.push({ instance: r.instance, atMs: r.atMs, payload: r.payload });
    }
    return out;
  }

  async close(): Promise<void> {
    if (this.timer) clearInterval(this.timer);
    if (this.sweeper) clearInterval(this.sweeper);
    this.timer = undefined;
    this.sweeper = undefined;
    if (this.o.snapshotPath && this.dirty) this.save();
  }

  /** Writes the snapshot file now (atomically: temp file, then rename). */
  save(): void {
    const path = this.o.snapshotPath;
    if (!path) return;
    writeSnapshot(path, this.sessions, this.logbooks, this.counters);
    this.dirty = false;
  }

  private restore(path: string): void {
    const doc = readSnapshot(path);
    if (!doc) return;
    try {
      restoreSnapshot(doc, { sessions: this.sessions, logbooks: this.logbooks, userSessions: this.userSessions, counters: this.counters }, () => this.newIndex());
    } catch (cause) {
      // A file of the right format but the wrong shape (hand-edited, truncated by another tool):
      // nothing half-restored is kept.
      this.sessions.clear();
      this.logbooks.clear();
      this.userSessions.clear();
      this.counters.clear();
      throw new StoreError(ErrorCodes.STORE_CORRUPT, `snapshot ${path} has the right format but a malformed body (${cause instanceof Error ? cause.message : String(cause)}); move it aside to start empty`, { cause });
    }
  }

  private newIndex(): LogbookIndex {
    return logbookIndexFor(this.o);
  }

  private logbook(scope: LogbookScope, create: boolean): LogbookIndex | undefined {
    const key = scopeKey(scope);
    let index = this.logbooks.get(key);
    if (!index && create) this.logbooks.set(key, (index = this.newIndex()));
    return index;
  }

  private dropLogbook(scope: LogbookScope): number {
    const key = scopeKey(scope);
    const index = this.logbooks.get(key);
    if (!index) return 0;
    const n = index.size;
    index.clear();
    this.logbooks.delete(key);
    return n;
  }
}

const EMPTY = new LogbookIndex();

/**
 * Whether an erase happened after a writer's fence (see ErasureFence). An erase in the very millisecond
 * the turn was accepted counts as later (`>=`): the order cannot be told, and the erase must win.
 */
export function fencedOut(fence: ErasureFence, now: ErasureMarks): boolean {
  const s = fence.seen;
  if (s && (now.session > s.session || now.user > s.user)) return true;
  return now.session >= fence.acceptedMs || now.user >= fence.acceptedMs;
}

/** The default store (see InProcessStoreOptions). */
export function inProcessStore(options?: InProcessStoreOptions): InProcessStore {
  return new InProcessStore(options);
}

/** A new logbook index with the store's vector index options. */
export function logbookIndexFor(o: { vectorIndex?: VectorIndexOptions } & DeprecatedStoreOptions): LogbookIndex {
  const vectorIndex = vectorIndexOptionsOf(o);
  return new LogbookIndex(vectorIndex ? { vectorIndex } : {});
}
