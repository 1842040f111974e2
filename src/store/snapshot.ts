// The in-process store's snapshot file: every session's slots and events and every logbook scope's
// entries as one JSON document (vectors in base64), written atomically (temp file, then rename) and
// read back at start. A file of another format or version is refused, never half-read.

import { existsSync, mkdirSync, readFileSync, renameSync, writeFileSync } from 'node:fs';
import { dirname } from 'node:path';
import { ErrorCodes, StoreError } from '../errors.js';
import type { LogbookIndex } from '../logbook/index.js';
import { SlotTable } from '../memory/slots.js';
import type { LogbookEntry, StoredEvent } from '../types.js';

/** One session of the in-process store. */
export interface SessionEntry {
  version: number;
  clock: number;
  turns: number;
  table: SlotTable;
  events: StoredEvent[];
  user?: string;
  /** Last read or write (Date.now()), for idle eviction. */
  usedMs: number;
  /** Ids of the last commits applied, to recognise a resend. */
  commitIds?: string[];
}

const SNAPSHOT_FORMAT = 'tidemark-memory-snapshot';
const SNAPSHOT_VERSION = 2;

export const sessionKey = (tenant: string, session: string): string => `${tenant}\u0000${session}`;
export const userKey = (tenant: string, user: string): string => `${tenant}\u0000${user}`;

/** What a snapshot restores into: the store's maps, keyed as the store keys them. */
export interface SnapshotTarget {
  readonly sessions: Map<string, SessionEntry>;
  readonly logbooks: Map<string, LogbookIndex>;
  readonly userSessions: Map<string, Set<string>>;
  /** Store-wide counters per tenant (slot survival counts). */
  readonly counters: Map<string, Record<string, number>>;
}

/** Writes the snapshot of `sessions`, `logbooks` and the store-wide `counters` to `path` atomically. */
export function writeSnapshot(
  path: string,
  sessions: ReadonlyMap<string, SessionEntry>,
  logbooks: ReadonlyMap<string, LogbookIndex>,
  counters: ReadonlyMap<string, Record<string, number>>,
): void {
  const b64 = (v: Float32Array): string => Buffer.from(v.buffer, v.byteOffset, v.byteLength).toString('base64');
  const docSessions = [...sessions.entries()].map(([key, e]) => {
    const [tenant, session] = key.split('\u0000') as [string, string];
    const slots = [];
    for (let i = 0; i < e.table.capacity; i++) {
      const rec = e.table.get(i);
      if (rec) slots.push({ index: i, ...rec, key: b64(rec.key) });
    }
    return { tenant, session, user: e.user, version: e.version, clock: e.clock, turns: e.turns, capacity: e.table.capacity, dim: e.table.dim, slots, events: e.events };
  });
  const logbook = [...logbooks.entries()].flatMap(([skey, index]) =>
    [...index.all()].map((entry) => ({ scope: skey, ...entry, ...(entry.key ? { key: b64(entry.key) } : {}) })),
  );
  const doc = { format: SNAPSHOT_FORMAT, version: SNAPSHOT_VERSION, savedAt: new Date().toISOString(), sessions: docSessions, logbook, counters: Object.fromEntries(counters) };
  mkdirSync(dirname(path), { recursive: true });
  const tmp = `${path}.${process.pid}.tmp`;
  writeFileSync(tmp, JSON.stringify(doc));
  renameSync(tmp, path);
}

/** The parsed snapshot at `path` (format and version checked), or null when there is no file. */
export function readSnapshot(path: string): any {
  if (!existsSync(path)) return null;
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
  return doc;
}

/** Restores a parsed snapshot into the store's maps; throws on a malformed body (the caller clears). */
export function restoreSnapshot(doc: any, into: SnapshotTarget, newIndex: () => LogbookIndex): void {
  if (!Array.isArray(doc.sessions) || !Array.isArray(doc.logbook)) throw new Error('sessions and logbook must be arrays');
  const vec = (s: string): Float32Array => {
    if (typeof s !== 'string') throw new Error('a vector is not a base64 string');
    const buf = Buffer.from(s, 'base64');
    return new Float32Array(buf.buffer.slice(buf.byteOffset, buf.byteOffset + buf.byteLength));
  };
  for (const s of doc.sessions) {
    const table = new SlotTable(s.capacity, s.dim);
    for (const rec of s.slots) table.set(rec.index, { ...rec, key: vec(rec.key) });
    into.sessions.set(sessionKey(s.tenant, s.session), {
      version: s.version, clock: s.clock, turns: s.turns, table, events: s.events ?? [], user: s.user, usedMs: Date.now(),
    });
    if (s.user) {
      const uk = userKey(s.tenant, s.user);
      if (!into.userSessions.has(uk)) into.userSessions.set(uk, new Set());
      into.userSessions.get(uk)!.add(s.session);
    }
  }
  // Store-wide counters (absent in snapshots written before they existed).
  if (doc.counters && typeof doc.counters === 'object') {
    for (const [tenant, c] of Object.entries(doc.counters as Record<string, Record<string, unknown>>)) {
      const kept: Record<string, number> = {};
      for (const [field, n] of Object.entries(c ?? {})) if (typeof n === 'number' && Number.isFinite(n)) kept[field] = n;
      into.counters.set(tenant, kept);
    }
  }
  for (const raw of doc.logbook) {
    const { scope, ...rest } = raw;
    const entry: LogbookEntry = { ...rest, ...(typeof raw.key === 'string' ? { key: vec(raw.key) } : {}) };
    let index = into.logbooks.get(scope);
    if (!index) into.logbooks.set(scope, (index = newIndex()));
    index.add(entry);
  }
}
