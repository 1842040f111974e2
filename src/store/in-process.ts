// The in-process store, tidemark's default: sessions, logbooks and event streams in this process's
// memory, with an optional snapshot file so a restart loses nothing. Commits are synchronous under
// the hood, so version checks are exact within one process. Each logbook scope is one LogbookIndex.

import { existsSync, mkdirSync, readFileSync, renameSync, writeFileSync } from 'node:fs';
import { dirname } from 'node:path';
import type { VectorIndexOptions } from '../archive/index.js';
import type { DeprecatedStoreOptions } from '../deprecated.js';
import { ConfigError, ErrorCodes, StoreError } from '../errors.js';
import { LogbookIndex, type LogbookQuery, type LogbookSearchParams, type LogbookSearchResult } from '../logbook/index.js';
import { SlotTable } from '../memory/slots.js';
import type { LogbookEntry, LogbookScope, SessionRef, StoredEvent } from '../types.js';
import { applyRetention } from './retention.js';
import type { CommitRequest, CommitResult, EraseReport, EraseTarget, ListLogbookOptions, SessionSnapshot, Store } from './store.js';

export interface InProcessStoreOptions extends DeprecatedStoreOptions {
  /** File to write snapshots to and restore from at start; none when unset. @default undefined */
  snapshotPath?: string;
  /** Write a snapshot this often (ms) when something changed; 0 writes only on `save()`/`close()`. @default 5000 */
  snapshotIntervalMs?: number;
  /** Events kept per session (oldest dropped first). @default 1000 */
  maxEvents?: number;
  /** Options of each logbook scope's vector index (exact scan, HNSW past a size). */
  vectorIndex?: VectorIndexOptions;
}

export const IN_PROCESS_STORE_DEFAULTS: Required<Pick<InProcessStoreOptions, 'snapshotIntervalMs' | 'maxEvents'>> = {
  snapshotIntervalMs: 5000,
  maxEvents: 1000,
};

interface SessionEntry {
  version: number;
  clock: number;
  turns: number;
  table: SlotTable;
  events: StoredEvent[];
  user?: string;
  /** Ids of the last commits applied, to recognise a resend. */
  commitIds?: string[];
}

const SNAPSHOT_FORMAT = 'tidemark-memory-snapshot';
const SNAPSHOT_VERSION = 2;

const sessionKey = (tenant: string, session: string): string => `${tenant}\u0000${session}`;
const userKey = (tenant: string, user: string): string => `${tenant}\u0000${user}`;
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
  private dirty = false;
  private timer: NodeJS.Timeout | undefined;

  constructor(options: InProcessStoreOptions = {}) {
    this.o = { ...IN_PROCESS_STORE_DEFAULTS, ...options };
    if (!Number.isInteger(this.o.maxEvents) || this.o.maxEvents < 0) {
      throw new ConfigError(`in-process store: maxEvents must be an integer >= 0, got ${String(this.o.maxEvents)}`);
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
    const e = this.sessions.get(sessionKey(ref.tenant, ref.session));
    if (!e) return null;
    return { version: e.version, clock: e.clock, turns: e.turns, table: e.table };
  }

  async commit(ref: SessionRef, req: CommitRequest): Promise<CommitResult> {
    const key = sessionKey(ref.tenant, ref.session);
    let e = this.sessions.get(key);
    const current = e?.version ?? 0;
    if (req.commitId && e?.commitIds?.includes(req.commitId)) return { ok: true, version: current };
    if (current !== req.expectedVersion) return { ok: false, conflict: true, version: current };
    for (const op of req.ops) {
      if (op.index < 0 || op.index >= req.capacity) {
        throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, `commit op for slot ${op.index} outside capacity ${req.capacity}`);
      }
    }
    if (!e) {
      e = { version: 0, clock: 0, turns: 0, table: new SlotTable(req.capacity, req.dim), events: [] };
      this.sessions.set(key, e);
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
      const e = this.sessions.get(key);
      if (e) {
        report.sessions++;
        report.slots += e.table.count();
        report.events += e.events.length;
        // Zero the vectors and text before letting go, so nothing lingers in a shared buffer.
        for (let i = 0; i < e.table.capacity; i++) e.table.clear(i);
        this.sessions.delete(key);
        if (e.user) this.userSessions.get(userKey(target.tenant, e.user))?.delete(s);
        // Entries this session put into its user's logbook go too.
        if (e.user && !('user' in target)) {
          const index = this.logbook({ tenant: target.tenant, user: e.user }, false);
          if (index) {
            const ids = [...index.all()].filter((x) => x.session === s).map((x) => x.id);
            for (const id of ids) if (index.remove(id)) report.logbookEntries++;
          }
        }
      }
      report.logbookEntries += this.dropLogbook({ tenant: target.tenant, session: s });
    }
    this.dirty = true;
    // Erasure must reach the snapshot file at once, not at the next interval.
    if (this.o.snapshotPath) this.save();
    return report;
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

  async close(): Promise<void> {
    if (this.timer) clearInterval(this.timer);
    this.timer = undefined;
    if (this.o.snapshotPath && this.dirty) this.save();
  }

  /** Writes the snapshot file now (atomically: temp file, then rename). */
  save(): void {
    const path = this.o.snapshotPath;
    if (!path) return;
    const b64 = (v: Float32Array): string => Buffer.from(v.buffer, v.byteOffset, v.byteLength).toString('base64');
    const sessions = [...this.sessions.entries()].map(([key, e]) => {
      const [tenant, session] = key.split('\u0000') as [string, string];
      const slots = [];
      for (let i = 0; i < e.table.capacity; i++) {
        const rec = e.table.get(i);
        if (rec) slots.push({ index: i, ...rec, key: b64(rec.key) });
      }
      return { tenant, session, user: e.user, version: e.version, clock: e.clock, turns: e.turns, capacity: e.table.capacity, dim: e.table.dim, slots, events: e.events };
    });
    const logbook = [...this.logbooks.entries()].flatMap(([skey, index]) =>
      [...index.all()].map((entry) => ({ scope: skey, ...entry, ...(entry.key ? { key: b64(entry.key) } : {}) })),
    );
    const doc = { format: SNAPSHOT_FORMAT, version: SNAPSHOT_VERSION, savedAt: new Date().toISOString(), sessions, logbook };
    mkdirSync(dirname(path), { recursive: true });
    const tmp = `${path}.${process.pid}.tmp`;
    writeFileSync(tmp, JSON.stringify(doc));
    renameSync(tmp, path);
    this.dirty = false;
  }

  private restore(path: string): void {
    if (!existsSync(path)) return;
    let doc: any;
    try {
      doc = JSON.parse(readFileSync(path, 'utf8'));
    } catch (cause) {
      throw new StoreError(ErrorCodes.STORE_CORRUPT, `snapshot ${path} is not valid JSON; move it aside to start empty`, { cause });
    }
    if (doc?.format !== SNAPSHOT_FORMAT || doc.version !== SNAPSHOT_VERSION) {
      throw new StoreError(
        ErrorCodes.STORE_CORRUPT,
        `snapshot ${path} has format ${String(doc?.format)} v${String(doc?.version)}, expected ${SNAPSHOT_FORMAT} v${SNAPSHOT_VERSION}`,
      );
    }
    const vec = (s: string): Float32Array => {
      const buf = Buffer.from(s, 'base64');
      return new Float32Array(buf.buffer.slice(buf.byteOffset, buf.byteOffset + buf.byteLength));
    };
    for (const s of doc.sessions) {
      const table = new SlotTable(s.capacity, s.dim);
      for (const rec of s.slots) table.set(rec.index, { ...rec, key: vec(rec.key) });
      this.sessions.set(sessionKey(s.tenant, s.session), {
        version: s.version, clock: s.clock, turns: s.turns, table, events: s.events ?? [], user: s.user,
      });
      if (s.user) {
        const uk = userKey(s.tenant, s.user);
        if (!this.userSessions.has(uk)) this.userSessions.set(uk, new Set());
        this.userSessions.get(uk)!.add(s.session);
      }
    }
    for (const raw of doc.logbook) {
      const { scope, ...rest } = raw;
      const entry: LogbookEntry = { ...rest, ...(typeof raw.key === 'string' ? { key: vec(raw.key) } : {}) };
      let index = this.logbooks.get(scope);
      if (!index) this.logbooks.set(scope, (index = this.newIndex()));
      index.add(entry);
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

/** The default store (see InProcessStoreOptions). */
export function inProcessStore(options?: InProcessStoreOptions): InProcessStore {
  return new InProcessStore(options);
}

/** A new logbook index with the store's vector index options. */
export function logbookIndexFor(o: { vectorIndex?: VectorIndexOptions } & DeprecatedStoreOptions): LogbookIndex {
  const vectorIndex = o.vectorIndex ?? o.archive; // the deprecated name (src/deprecated.ts) until 0.3
  return new LogbookIndex(vectorIndex ? { vectorIndex } : {});
}
