// The in-process store, tidemark's default: sessions, archive and event streams in this process's
// memory, with an optional snapshot file so a restart loses nothing. Commits are synchronous under
// the hood, so version checks are exact within one process.

import { existsSync, mkdirSync, readFileSync, renameSync, writeFileSync } from 'node:fs';
import { dirname } from 'node:path';
import type { Archive } from '../archive/archive.js';
import { createArchive, type ArchiveOptions } from '../archive/index.js';
import { ConfigError, ErrorCodes, StoreError } from '../errors.js';
import { SlotTable } from '../memory/slots.js';
import type { ArchiveHit, ArchiveItem, ArchiveScope, SessionRef, StoredEvent } from '../types.js';
import type { CommitRequest, CommitResult, EraseReport, EraseTarget, SessionSnapshot, Store } from './store.js';

export interface MemoryStoreOptions {
  /** File to write snapshots to and restore from at start; none when unset. @default undefined */
  snapshotPath?: string;
  /** Write a snapshot this often (ms) when something changed; 0 writes only on `save()`/`close()`. @default 5000 */
  snapshotIntervalMs?: number;
  /** Events kept per session (oldest dropped first). @default 1000 */
  maxEvents?: number;
  /** Options for each archive index (exact scan, HNSW past a size). */
  archive?: ArchiveOptions;
}

export const MEMORY_STORE_DEFAULTS: Required<Pick<MemoryStoreOptions, 'snapshotIntervalMs' | 'maxEvents'>> = {
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

interface ArchiveEntry {
  items: Map<string, ArchiveItem>;
  index: Archive | null;
}

const SNAPSHOT_FORMAT = 'tidemark-memory-snapshot';
const SNAPSHOT_VERSION = 1;

const sessionKey = (tenant: string, session: string): string => `${tenant}\u0000${session}`;
const userKey = (tenant: string, user: string): string => `${tenant}\u0000${user}`;
export function scopeKey(scope: ArchiveScope): string {
  return 'user' in scope ? `u\u0000${scope.tenant}\u0000${scope.user}` : `s\u0000${scope.tenant}\u0000${scope.session}`;
}
/** The archive scope of a session: its user's when it has one, else its own. */
export function scopeOf(ref: SessionRef): ArchiveScope {
  return ref.user ? { tenant: ref.tenant, user: ref.user } : { tenant: ref.tenant, session: ref.session };
}

export class MemoryStore implements Store {
  readonly name = 'memory';
  private readonly sessions = new Map<string, SessionEntry>();
  private readonly archives = new Map<string, ArchiveEntry>();
  private readonly userSessions = new Map<string, Set<string>>();
  private readonly o: MemoryStoreOptions & typeof MEMORY_STORE_DEFAULTS;
  private dirty = false;
  private timer: NodeJS.Timeout | undefined;

  constructor(options: MemoryStoreOptions = {}) {
    this.o = { ...MEMORY_STORE_DEFAULTS, ...options };
    if (!Number.isInteger(this.o.maxEvents) || this.o.maxEvents < 0) {
      throw new ConfigError(`memory store: maxEvents must be an integer >= 0, got ${String(this.o.maxEvents)}`);
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
    if (!e) {
      e = { version: 0, clock: 0, turns: 0, table: new SlotTable(req.capacity, req.dim), events: [] };
      this.sessions.set(key, e);
    } else if (e.table.capacity !== req.capacity || e.table.dim !== req.dim) {
      e.table = e.table.dim === req.dim ? e.table.clone(req.capacity) : new SlotTable(req.capacity, req.dim);
    }
    for (const op of req.ops) {
      if (op.index < 0 || op.index >= e.table.capacity) {
        throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, `commit op for slot ${op.index} outside capacity ${e.table.capacity}`);
      }
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
    if (req.archive.length > 0) {
      const a = this.archiveEntry(scopeOf(ref), true)!;
      for (const item of req.archive) {
        a.items.set(item.id, item);
        this.indexOf(a, item.key.length).add(item.id, item.key);
      }
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
    return { ok: true, version: e.version };
  }

  async searchArchive(scope: ArchiveScope, query: Float32Array, k: number): Promise<ArchiveHit[]> {
    const a = this.archiveEntry(scope, false);
    if (!a || !a.index || a.index.dim !== query.length) return [];
    const hits: ArchiveHit[] = [];
    for (const m of a.index.search(query, k)) {
      const item = a.items.get(m.id);
      if (item) hits.push({ item, cosine: m.cosine });
    }
    return hits;
  }

  async listArchive(scope: ArchiveScope, limit = 100): Promise<ArchiveItem[]> {
    const a = this.archiveEntry(scope, false);
    if (!a) return [];
    return [...a.items.values()].sort((x, y) => y.archivedMs - x.archivedMs || y.clock - x.clock).slice(0, limit);
  }

  async deleteArchive(scope: ArchiveScope, ids: readonly string[]): Promise<number> {
    const a = this.archiveEntry(scope, false);
    if (!a) return 0;
    let n = 0;
    for (const id of ids) {
      if (a.items.delete(id)) {
        a.index?.remove(id);
        n++;
      }
    }
    if (n > 0) this.dirty = true;
    return n;
  }

  async readEvents(ref: SessionRef, limit = 100): Promise<StoredEvent[]> {
    const e = this.sessions.get(sessionKey(ref.tenant, ref.session));
    return e ? e.events.slice(-limit) : [];
  }

  async erase(target: EraseTarget): Promise<EraseReport> {
    const report: EraseReport = { sessions: 0, slots: 0, archiveItems: 0, events: 0 };
    const sessions: string[] = [];
    if ('user' in target) {
      const uk = userKey(target.tenant, target.user);
      sessions.push(...(this.userSessions.get(uk) ?? []));
      this.userSessions.delete(uk);
      report.archiveItems += this.dropArchive({ tenant: target.tenant, user: target.user });
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
        // Items this session demoted into its user's archive go too.
        if (e.user && !('user' in target)) {
          const a = this.archiveEntry({ tenant: target.tenant, user: e.user }, false);
          if (a) {
            for (const [id, item] of a.items) {
              if (item.session === s) {
                a.items.delete(id);
                a.index?.remove(id);
                report.archiveItems++;
              }
            }
          }
        }
      }
      report.archiveItems += this.dropArchive({ tenant: target.tenant, session: s });
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
    const archive = [...this.archives.entries()].flatMap(([skey, a]) =>
      [...a.items.values()].map((item) => ({ scope: skey, ...item, key: b64(item.key) })),
    );
    const doc = { format: SNAPSHOT_FORMAT, version: SNAPSHOT_VERSION, savedAt: new Date().toISOString(), sessions, archive };
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
    for (const raw of doc.archive) {
      const { scope, ...rest } = raw;
      const item: ArchiveItem = { ...rest, key: vec(raw.key) };
      let a = this.archives.get(scope);
      if (!a) this.archives.set(scope, (a = { items: new Map(), index: null }));
      a.items.set(item.id, item);
      this.indexOf(a, item.key.length).add(item.id, item.key);
    }
  }

  private archiveEntry(scope: ArchiveScope, create: boolean): ArchiveEntry | undefined {
    const key = scopeKey(scope);
    let a = this.archives.get(key);
    if (!a && create) this.archives.set(key, (a = { items: new Map(), index: null }));
    return a;
  }

  private indexOf(a: ArchiveEntry, dim: number): Archive {
    if (!a.index || a.index.dim !== dim) {
      a.index = createArchive(dim, this.o.archive);
      for (const item of a.items.values()) if (item.key.length === dim) a.index.add(item.id, item.key);
    }
    return a.index;
  }

  private dropArchive(scope: ArchiveScope): number {
    const key = scopeKey(scope);
    const a = this.archives.get(key);
    if (!a) return 0;
    const n = a.items.size;
    a.index?.clear();
    this.archives.delete(key);
    return n;
  }
}

/** The default store (see MemoryStoreOptions). */
export function memoryStore(options?: MemoryStoreOptions): MemoryStore {
  return new MemoryStore(options);
}
