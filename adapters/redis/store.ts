// Over ~400 lines on purpose: every Store method against Redis and its per-process cache, in one place; split after the reliability work lands.
// The Redis store: sessions, logbooks and event streams in Redis or Redis Cluster, shared by every bot
// process. A read is one EVALSHA for the slots (answered with just the version when this process's
// cached copy is current) and one per logbook slice for what is new since this process last looked;
// a commit is one EVALSHA that checks the version and applies the whole turn atomically. Each process
// keeps a LogbookIndex per scope it serves, extended incrementally, so a search costs no more Redis
// traffic than the entries added since the last one.
// Over 400 lines: the store's methods share its caches (sessions, scopes, links) and its Lua calling
// conventions; splitting the logbook scope cache into its own file is the natural next cut.

import { randomBytes } from 'node:crypto';
import type { VectorIndexOptions } from '../../src/vectors/index.js';
import type { DeprecatedStoreOptions } from '../../src/deprecated-fields.js';
import { logbookIndexFor } from '../../src/store/in-process.js';
import { ConfigError, ErrorCodes, StoreError, describeValue } from '../../src/errors.js';
import { LogbookIndex, type LogbookQuery, type LogbookSearchParams, type LogbookSearchResult } from '../../src/logbook/index.js';
import { SlotTable } from '../../src/memory/slots.js';
import { listEntries } from '../../src/store/in-process.js';
import type { CommitRequest, CommitResult, EraseReport, EraseTarget, ErasureMarks, FleetRecord, ListLogbookOptions, SessionSnapshot, Store, StoreStats, SweepReport, SweepRequest } from '../../src/store/store.js';
import type { LogbookEntry, LogbookScope, SessionRef, StoredEvent } from '../../src/types.js';
import { connectUrl, ensureReady, ioredisInstalled, isCluster, runScript, unavailable, type RedisClient } from './client.js';
import { corrupt, decodeLogbook, decodeRecord, decodeSlot, encodeRecord, encodeSlot, joinBlock, sealBlock, sealTail, splitBlock, type KeyFormat, type RawRecord, type RecordHome } from './codec.js';
import { turnEntryId } from '../../src/middleware/write.js';
import { KeySpace, type SessionKeys } from './keys.js';
import { COMMIT, ERASE, LINK, LOAD, LOG_DELETE, LOG_FETCH, LOG_QUARANTINE, LOG_REWRITE, QUARANTINE, RESTAT, SEAL, SEAL_TAIL, STATS_KEYS, SWEEP, TRIM, USER_CAP, USER_ERASE, type LuaScript } from './scripts.js';

export interface RedisSlotStoreOptions extends DeprecatedStoreOptions {
  /**
   * An ioredis `Redis` or `Cluster` instance, or a `redis://` URL (the store then creates a client with
   * `REDIS_CLIENT_OPTIONS` and closes it on `close()`; a client you pass stays yours to close).
   * Do not set ioredis `keyPrefix` on it: use `prefix`.
   * @default 'redis://127.0.0.1:6379'
   */
  redis?: RedisClient | string;
  /** Prepended to every key; must not contain `{` or `}` (they would move the hash tag). @default 'tidemark:' */
  prefix?: string;
  /**
   * Seconds of inactivity after which a session's keys (slots, events, its logbook entries) expire; every
   * commit refreshes it. 0 keeps sessions until erased. @default 2592000 (30 days)
   */
  idleTtlSeconds?: number;
  /**
   * How slot and logbook vectors are stored: `int8` (1 byte per dimension plus a per-vector scale; about a
   * quarter of the memory, component error below 0.005 for unit vectors) or `float32` (exact).
   * @default 'int8'
   */
  keyFormat?: KeyFormat;
  /**
   * Events kept per session stream (`XADD … MAXLEN ~ N`: Redis trims whole stream nodes, so a stream
   * may hold up to one node — 100 entries by default — more). 0 stores no events. @default 1000
   */
  maxEvents?: number;
  /**
   * Sessions whose decoded slot table this process keeps, keyed by version (least recently used out);
   * a read of an unchanged session then transfers only its version. Also bounds the logbook scopes kept
   * indexed. 0 disables both caches. @default 1000
   */
  cacheSessions?: number;
  /** How long the first call waits for the initial connection (ms); later calls never wait. @default 2000 */
  connectTimeoutMs?: number;
  /** Options of each logbook scope's vector index (exact scan, HNSW past a size). */
  vectorIndex?: VectorIndexOptions;
  /**
   * Seconds an erase tombstone (a time, no data) and an applied commit id are kept. A write older than
   * this — waiting in some process's outbox — could no longer be told from a new one, so it must stay
   * above the middleware's `outbox.maxAgeMs` (1 day by default). @default 604800 (7 days)
   */
  fenceTtlSeconds?: number;
  /**
   * Ms after this process's last commit to a logbook slice at which it compresses the slice's open
   * block (merged with the block before it when they fit one), so a session at rest holds no
   * uncompressed entries — a short session's only block included. Off the commit's path: two round
   * trips per pause of a session, none per turn. 0 leaves open blocks as written. @default 60000
   */
  sealIdleMs?: number;
}

export const REDIS_SLOT_STORE_DEFAULTS = {
  redis: 'redis://127.0.0.1:6379',
  prefix: 'tidemark:',
  idleTtlSeconds: 30 * 24 * 3600,
  keyFormat: 'int8' as KeyFormat,
  maxEvents: 1000,
  cacheSessions: 1000,
  connectTimeoutMs: 2000,
  fenceTtlSeconds: 7 * 24 * 3600,
  sealIdleMs: 60_000,
} as const satisfies Omit<Required<RedisSlotStoreOptions>, 'vectorIndex' | keyof DeprecatedStoreOptions>;

type Resolved = Omit<Required<RedisSlotStoreOptions>, 'redis' | 'vectorIndex' | keyof DeprecatedStoreOptions> & { vectorIndex?: VectorIndexOptions } & DeprecatedStoreOptions;

interface CachedSession {
  epoch: string;
  version: number;
  clock: number;
  turns: number;
  table: SlotTable;
}

interface ScopeSession {
  /** Logbook epoch of the session slice (moves on delete and on re-creation). */
  epoch: string;
  /** Absolute log positions applied: [head, end). */
  head: number;
  end: number;
  /** Entry id at each position from `head` ('' for a deleted entry). */
  ids: string[];
}

interface ScopeCache {
  sessions: Map<string, ScopeSession>;
  index: LogbookIndex;
  /** Refreshes of one scope run one after another, so replies are applied in the order they were asked. */
  lock: Promise<unknown>;
}

/** The entry id of a log element `atMs:id` (0.1 logs hold bare ids). */
const elementId = (e: string): string => {
  const m = /^-?\d+:/.exec(e);
  return m ? e.slice(m[0].length) : e;
};

const token = (): string => randomBytes(8).toString('hex');
/** The logbook's age cutoff a commit applies (ms; 0 = no age limit). */
const ageCutoff = (req: CommitRequest): number => {
  const policy = req.retention?.policy;
  return policy && policy.maxAgeMs > 0 ? Math.floor(req.retention!.nowMs - policy.maxAgeMs) : 0;
};
/** The whole-ms time a logbook entry is filed under in its block (as encodeRecord files it). */
const fileTime = (atMs: number): number => (Number.isSafeInteger(atMs) && atMs >= 0 ? atMs : Math.max(0, Math.floor(Number.isFinite(atMs) ? atMs : 0)));
/** First byte of a logbook block element, open or sealed (codec.ts, BLOCK_MARK and SEALED_MARK). */
const isBlock = (el: Buffer): boolean => el[0] === 0 || el[0] === 1;
/** The entries a block element holds, as the scripts count them (bcount): open, its count; sealed, count less dead. */
const blockCount = (el: Buffer): number => (el[0] === 0 ? (el[1] ?? 0) : Math.max(0, (el[1] ?? 0) - (el[2] ?? 0)));
/** A block's base time as written (digits only; '' when unreadable), to name it when kept aside. */
const blockBase = (el: Buffer): string => /^\d*/.exec(el.toString('latin1', el[0] === 0 ? 2 : 3, Math.min(el.length, 40)))![0];
/** null where a decode finds the bytes corrupt (STORE_CORRUPT); other errors go on up. */
function decodeOrNull<T>(decode: () => T): T | null {
  try {
    return decode();
  } catch (err) {
    if (err instanceof StoreError && err.code === ErrorCodes.STORE_CORRUPT) return null;
    throw err;
  }
}
/** A block's live records, or null when the block cannot be read (corrupt). */
const readBlock = (el: Buffer): ReturnType<typeof splitBlock> | null => decodeOrNull(() => splitBlock(el, 'logbook block'));
/** A record's entry id, or null when its body fails its check. */
const recordId = (rec: RawRecord, home: RecordHome): string | null => decodeOrNull(() => decodeRecord(rec.body, rec.at, 'logbook record', home, turnEntryId).id);
const str = (b: unknown): string => (Buffer.isBuffer(b) ? b.toString('utf8') : String(b));

function num(b: unknown, what: string, integer: boolean): number {
  const s = str(b);
  const n = Number(s);
  if (s === '' || !Number.isFinite(n) || (integer && (!Number.isInteger(n) || n < 0))) throw corrupt(what, `not a number: ${describeValue(s)}`);
  return n;
}

function scopeKeyOf(scope: LogbookScope): string {
  return 'user' in scope ? `u\u0000${scope.tenant}\u0000${scope.user}` : `s\u0000${scope.tenant}\u0000${scope.session}`;
}

export class RedisSlotStore implements Store {
  readonly name: string;
  private client: RedisClient | undefined;
  private readonly clientReady: Promise<RedisClient>;
  private readonly ownsClient: boolean;
  private readonly o: Resolved;
  private readonly keys: KeySpace;
  private readonly cache = new Map<string, CachedSession>();
  private readonly scopes = new Map<string, ScopeCache>();
  /** Sessions this process has added to their user's set (see commit()). */
  private readonly linked = new Set<string>();
  /** One id per CommitRequest object, so a re-sent commit is recognised as already applied. */
  private readonly commitIds = new WeakMap<CommitRequest, string>();
  private closed = false;
  /** This store's mark in Redis (see watchResets); '' until first connected. */
  private marker = '';
  private readonly resetListeners: Array<(e: { atMs: number }) => void> = [];
  private readonly quarantineListeners: Array<(e: { tenant: string; session: string; entries: number }) => void> = [];
  private readonly watched = new WeakSet<object>();
  /** Where the Cluster sweep of each tenant goes on from: master index and SCAN cursor. */
  private readonly sweepAt = new Map<string, { node: number; cursor: string }>();
  /** Seals in flight (see seal()); close() waits for them. */
  private readonly sealing = new Set<Promise<unknown>>();
  /** Logbook slices waiting for their idle seal (see sealIdleMs): log key -> its timer. */
  private readonly idle = new Map<string, ReturnType<typeof setTimeout>>();
  /** Blocks sealed by this process (compressed after a commit closed them, or at rest). */
  sealed = 0;
  /** Times the server was found empty after an outage (its marker key gone). */
  resets = 0;
  /** Slot payloads moved aside after failing their check (see `SessionSnapshot.quarantined`). */
  quarantined = 0;
  /** Logbook payloads moved aside after failing their check (see `watchQuarantine`). */
  quarantinedEntries = 0;

  constructor(options: RedisSlotStoreOptions = {}) {
    // An option given as undefined means "the default", as documented, not "no value".
    const given = Object.fromEntries(Object.entries(options).filter(([, v]) => v !== undefined)) as RedisSlotStoreOptions;
    const o = { ...REDIS_SLOT_STORE_DEFAULTS, ...given };
    const fail = (name: string, value: unknown, expected: string): never => {
      throw new ConfigError(`redis store: ${name} must be ${expected}, got ${describeValue(value)}`, { details: { option: name } });
    };
    if (typeof o.prefix !== 'string' || /[{}]/.test(o.prefix)) fail('prefix', o.prefix, 'a string without { or }');
    if (!Number.isInteger(o.idleTtlSeconds) || o.idleTtlSeconds < 0) fail('idleTtlSeconds', o.idleTtlSeconds, 'an integer >= 0 (0 = no TTL)');
    if (o.keyFormat !== 'int8' && o.keyFormat !== 'float32') fail('keyFormat', o.keyFormat, "'int8' or 'float32'");
    if (!Number.isInteger(o.maxEvents) || o.maxEvents < 0) fail('maxEvents', o.maxEvents, 'an integer >= 0');
    if (!Number.isInteger(o.cacheSessions) || o.cacheSessions < 0) fail('cacheSessions', o.cacheSessions, 'an integer >= 0');
    if (!Number.isFinite(o.connectTimeoutMs) || o.connectTimeoutMs <= 0) fail('connectTimeoutMs', o.connectTimeoutMs, 'a number of ms > 0');
    if (!Number.isInteger(o.fenceTtlSeconds) || o.fenceTtlSeconds < 60) fail('fenceTtlSeconds', o.fenceTtlSeconds, 'an integer >= 60');
    if (!Number.isInteger(o.sealIdleMs) || o.sealIdleMs < 0) fail('sealIdleMs', o.sealIdleMs, 'an integer number of ms >= 0 (0 = never)');
    const { redis, ...rest } = o;
    this.o = rest;
    this.keys = new KeySpace(o.prefix);
    if (typeof redis === 'string') {
      if (!/^rediss?:\/\//.test(redis)) fail('redis', redis, 'an ioredis Redis/Cluster instance or a redis:// URL');
      // Without ioredis every turn would degrade and every write pile up in the outbox: say so now.
      if (!ioredisInstalled()) {
        throw new ConfigError('redis store: the ioredis package is not installed; run `npm install ioredis` (or pass a client)', { details: { option: 'redis' } });
      }
      this.name = 'redis';
      this.ownsClient = true;
      this.clientReady = connectUrl(redis).then((c) => {
        // Errors reach callers through rejected commands; without a listener ioredis would also log them.
        c.on('error', () => undefined);
        this.client = c;
        return c;
      });
      this.clientReady.catch(() => undefined);
    } else {
      if (typeof redis !== 'object' || redis === null || typeof (redis as RedisClient).callBuffer !== 'function') {
        fail('redis', redis, 'an ioredis Redis/Cluster instance or a redis:// URL');
      }
      const prefix = (redis as { options?: { keyPrefix?: string } }).options?.keyPrefix;
      if (prefix) fail('redis', `a client with keyPrefix ${prefix}`, 'a client without ioredis keyPrefix (use the prefix option)');
      this.name = isCluster(redis) ? 'cluster' : 'redis';
      this.ownsClient = false;
      this.client = redis;
      this.clientReady = Promise.resolve(redis);
    }
  }

  /** The key names of a session (for tests and operational tooling). */
  sessionKeys(tenant: string, session: string): SessionKeys {
    return this.keys.session(tenant, session);
  }

  /** The key of a user's session set. */
  userSessionsKey(tenant: string, user: string): string {
    return this.keys.userSessions(tenant, user);
  }

  /** The underlying client (connects a URL-created one on first call). */
  async redis(): Promise<RedisClient> {
    return this.conn('connect');
  }

  async load(ref: SessionRef, retried = false): Promise<SessionSnapshot | null> {
    const k = this.keys.session(ref.tenant, ref.session);
    const cached = this.cache.get(k.meta);
    let reply: unknown;
    try {
      const c = await this.conn('load');
      reply = await runScript(c, LOAD, [k.meta, k.slots], [cached ? `${cached.epoch}:${cached.version}` : '']);
    } catch (err) {
      throw unavailable('load', err);
    }
    if (reply === null) {
      this.cache.delete(k.meta);
      return null;
    }
    const r = reply as unknown[];
    const version = num(r[0], 'session version', true);
    const epoch = str(r[1]);
    if (r.length === 2) {
      // Unchanged since `cached` was sent; a commit from this process may since have moved it forward in place.
      if (!cached) throw corrupt('load reply', 'unchanged without a cached copy');
      this.touch(k.meta, cached);
      return { version: cached.version, clock: cached.clock, turns: cached.turns, table: cached.table };
    }
    const clock = num(r[2], 'session clock', false);
    const turns = num(r[3], 'session turns', true);
    const capacity = num(r[4], 'session capacity', true);
    const dim = num(r[5], 'session dim', true);
    if (capacity < 1 || capacity > 1 << 16 || dim < 1 || dim > 1 << 16) throw corrupt('session shape', `capacity ${capacity}, dim ${dim}`);
    const table = new SlotTable(capacity, dim);
    const flat = r[6] as Buffer[];
    const bad: Buffer[] = [];
    for (let i = 0; i + 1 < flat.length; i += 2) {
      try {
        const index = num(flat[i], 'slot index', true);
        if (index >= capacity) throw corrupt(`slot ${index}`, `index beyond capacity ${capacity}`);
        const rec = decodeSlot(flat[i + 1]!, `slot ${index} payload`);
        if (rec.key.length !== dim) throw corrupt(`slot ${index} payload`, `key has ${rec.key.length} dims, session has ${dim}`);
        table.set(index, rec);
      } catch (err) {
        if (!(err instanceof StoreError) || err.code !== ErrorCodes.STORE_CORRUPT) throw err;
        bad.push(flat[i]!, flat[i + 1]!);
      }
    }
    if (bad.length > 0) {
      // Kept aside, not trusted and not fatal: the session goes on with its good slots.
      if (retried) throw corrupt('session slots', 'payloads still failing after being moved aside');
      let moved: number;
      try {
        const c = await this.conn('quarantine');
        moved = Number(await this.counted(c, ref.tenant, QUARANTINE, [k.meta, k.slots, k.quarantine, k.arch, k.uarch, k.alog, k.ualog, k.born], [Math.max(this.o.idleTtlSeconds, this.o.fenceTtlSeconds), ...bad]));
      } catch (err) {
        throw unavailable('quarantine', err);
      }
      this.quarantined += moved;
      this.cache.delete(k.meta);
      const snap = await this.load(ref, true);
      return snap ? { ...snap, quarantined: bad.length / 2 } : null;
    }
    const entry: CachedSession = { epoch, version, clock, turns, table };
    if (this.o.cacheSessions > 0) this.touch(k.meta, entry);
    return { version, clock, turns, table };
  }

  async fence(ref: SessionRef): Promise<ErasureMarks> {
    try {
      const c = await this.conn('fence');
      // Two keys under two hash tags: two commands (one round trip each, side by side).
      const [s, u] = await Promise.all([
        c.get(this.keys.session(ref.tenant, ref.session).gone),
        ref.user ? c.get(this.keys.userGone(ref.tenant, ref.user)) : Promise.resolve(null),
      ]);
      return { session: Number(s ?? 0), user: Number(u ?? 0) };
    } catch (err) {
      throw unavailable('fence', err);
    }
  }

  async commit(ref: SessionRef, req: CommitRequest): Promise<CommitResult> {
    const k = this.keys.session(ref.tenant, ref.session);
    const { args, keys } = this.commitArgs(ref, req);
    const maxEntries = req.retention?.policy.maxEntries ?? 0;
    let capping: Promise<string[]> | undefined;
    let reply: unknown;
    try {
      const c = await this.conn('commit');
      if (ref.user) {
        // The user's set lives under another hash tag, so it cannot join the commit script on Cluster.
        // LINK adds the session *before* the commit, refusing a write fenced before a user erase; it and
        // the erase's first step (USER_ERASE) run on the same tag, so a session is either in the set the
        // erase reads (and erased, its tombstone then refusing the commit) or refused here. A crash
        // between LINK and COMMIT leaves a set member without a session (harmless). A new session
        // (expected version 0, also after an erase) always links again.
        const lk = `${k.meta}\u0000${ref.user}`;
        const f = req.fence;
        if (req.expectedVersion === 0 || !this.linked.has(lk) || (f && !f.seen)) {
          const ok = await runScript(c, LINK, [this.keys.userSessions(ref.tenant, ref.user), this.keys.userGone(ref.tenant, ref.user)], [ref.session, f?.seen ? f.seen.user : '', f ? f.acceptedMs : '']);
          if (Number(ok) !== 1) return { ok: false, erased: true, version: req.expectedVersion };
          if (this.linked.size > 100_000) this.linked.clear();
          this.linked.add(lk);
        }
      }
      const sent = this.counted(c, ref.tenant, COMMIT, k.script, args);
      // The user's cap goes out in the same tick, so it rides the commit's round trip (pipelined on
      // one connection, in parallel on a Cluster); its index entries are taken back if the commit is refused.
      if (ref.user && maxEntries > 0 && req.logbook.length > 0) capping = this.capUser(c, ref, req, maxEntries);
      reply = await sent;
    } catch (err) {
      throw unavailable('commit', err);
    }
    const r = reply as unknown[];
    const status = Number(r[0]);
    const version = Number(r[1]);
    const epoch = str(r[2]);
    if (capping && (status === 0 || status === 3)) await this.uncapUser(ref, req, capping);
    if (status === 0) return { ok: false, conflict: true, version };
    if (status === 3) {
      this.cache.delete(k.meta);
      return { ok: false, erased: true, version };
    }
    if (status === 2) {
      // Already applied by an earlier send of this same request; this process's copy may be behind.
      this.cache.delete(k.meta);
      return { ok: true, version };
    }
    this.applyToCache(k.meta, req, epoch, version, keys);
    const closed = r[5];
    if (Buffer.isBuffer(closed) && closed.length > 0) this.seal(ref.user ? k.ualog : k.alog, closed);
    if (req.logbook.length > 0) this.sealWhenIdle(ref.user ? k.ualog : k.alog);
    const dropped = { age: Number(r[3] ?? 0), count: Number(r[4] ?? 0) };
    if (ref.user && dropped.age > 0) await this.unindexAged(ref.tenant, ref.user, ageCutoff(req));
    if (capping) dropped.count += await this.trimUser(ref.tenant, await capping);
    return dropped.age > 0 || dropped.count > 0 ? { ok: true, version, dropped } : { ok: true, version };
  }

  /**
   * `logbook.maxEntries` over the user's whole scope: USER_CAP indexes the commit's entries on the
   * user's hash tag and names the oldest past the cap; TRIM deletes them from their sessions. It runs
   * beside the commit, on other hash tags, so the scope may exceed the cap by the entries of commits
   * in flight at that moment (one commit's per writing process), never more. A failure here leaves the
   * commit as it is; the next commit of the user applies the cap again. Resolves to the entries named.
   */
  private capUser(c: RedisClient, ref: SessionRef, req: CommitRequest, maxEntries: number): Promise<string[]> {
    const user = ref.user!;
    const f = req.fence;
    const pairs: (string | number)[] = [];
    for (const e of req.logbook) pairs.push(fileTime(e.atMs), `${ref.session} ${e.id}`);
    return runScript(c, USER_CAP, [this.keys.userEntries(ref.tenant, user), this.keys.userGone(ref.tenant, user)], [maxEntries, f?.seen ? f.seen.user : '', f ? Math.floor(f.acceptedMs) : '', ...pairs]).then(
      (over) => (over as Buffer[]).map(str),
      () => [],
      // Members and times alternate (ZPOPMIN): "session id", time, ...
    );
  }

  /**
   * Entries that retention deleted by age leave the user's cap index too (scored by turn time, so one
   * range covers every session of the user), or the cap would later count them and pay a slice read to
   * find each gone. Entries of the user's other sessions not swept yet leave the index a little early:
   * the cap then counts fewer than the scope holds, until the sweep reaches them. A failure leaves the
   * index as it was (the cap deletes a missing entry as a no-op).
   */
  private async unindexAged(tenant: string, user: string, cutoffMs: number): Promise<void> {
    if (cutoffMs <= 0) return;
    try {
      const c = await this.conn('sweep');
      await c.zremrangebyscore(this.keys.userEntries(tenant, user), '-inf', `(${cutoffMs}`);
    } catch {
      // Left as it is; see above.
    }
  }

  /** A refused commit's entries leave the user's index again (they were never stored). */
  private async uncapUser(ref: SessionRef, req: CommitRequest, capping: Promise<string[]>): Promise<void> {
    await capping;
    try {
      const c = await this.conn('commit');
      await c.zrem(this.keys.userEntries(ref.tenant, ref.user!), ...req.logbook.map((e) => `${ref.session} ${e.id}`));
    } catch {
      // Left as it is: an entry the index names but no session holds is deleted as a no-op when it is the oldest.
    }
  }

  /**
   * Deletes the entries USER_CAP named (TRIM per session, by time at the head of the session's user
   * log; any TRIM did not find there is taken out of its block as a delete is); resolves to how many went.
   */
  private async trimUser(tenant: string, over: string[]): Promise<number> {
    if (over.length === 0) return 0;
    try {
      const c = await this.conn('commit');
      const bySession = new Map<string, Array<string | number>>();
      for (let i = 0; i + 1 < over.length; i += 2) {
        const m = over[i]!;
        const at = m.indexOf(' ');
        const s = m.slice(0, at);
        if (!bySession.has(s)) bySession.set(s, []);
        bySession.get(s)!.push(Number(over[i + 1]), m.slice(at + 1));
      }
      const counts = await Promise.all(
        [...bySession].map(async ([s, pairs]) => {
          const k = this.keys.session(tenant, s);
          const r = (await this.counted(c, tenant, TRIM, [k.meta, k.slots, k.arch, k.uarch, k.alog, k.ualog, k.born], [token(), ...pairs])) as unknown[];
          const rest = ((r[1] as Buffer[] | undefined) ?? []).map(str);
          const user = rest.length > 0 ? await c.hget(k.meta, 'u') : null;
          const more = user ? await this.deleteFromBlocks(c, { tenant, user }, s, rest) : 0;
          return Number(r[0]) + more;
        }),
      );
      return counts.reduce<number>((n, x) => n + x, 0);
    } catch {
      return 0;
    }
  }

  async searchLogbook(scope: LogbookScope, query: LogbookQuery, params: LogbookSearchParams): Promise<LogbookSearchResult> {
    const sc = await this.refreshScope(scope);
    return sc.index.search(query, params);
  }

  async listLogbook(scope: LogbookScope, options: ListLogbookOptions = {}): Promise<LogbookEntry[]> {
    const sc = await this.refreshScope(scope);
    return listEntries(sc.index, options);
  }

  async deleteLogbook(scope: LogbookScope, ids: readonly string[]): Promise<number> {
    if (ids.length === 0) return 0;
    try {
      const c = await this.conn('deleteLogbook');
      const user = 'user' in scope;
      const sessions = user ? await c.smembers(this.keys.userSessions(scope.tenant, scope.user)) : [scope.session];
      if (user) {
        const members = sessions.flatMap((s) => ids.map((id) => `${s} ${id}`));
        if (members.length > 0) await c.zrem(this.keys.userEntries(scope.tenant, scope.user), ...members);
      }
      const counts = await Promise.all(
        sessions.map(async (s) => {
          const k = this.keys.session(scope.tenant, s);
          const hk = user ? k.uarch : k.arch;
          const log = user ? k.ualog : k.alog;
          // Entries of logs written before blocks (hash payloads), then those in blocks.
          const old = Number(await this.counted(c, scope.tenant, LOG_DELETE, [k.meta, k.slots, k.arch, k.uarch, k.alog, k.ualog, k.born, hk, log], [user ? 'au' : 'as', token(), user ? 'aun' : 'an', ...ids]));
          return old + (await this.deleteFromBlocks(c, scope, s, ids));
        }),
      );
      return counts.reduce<number>((sum, n) => sum + n, 0);
    } catch (err) {
      throw unavailable('deleteLogbook', err);
    }
  }

  /**
   * Takes records out of a slice's blocks: fetch the log, drop the records with these ids, send the
   * changed blocks with the bytes they were seen with (LOG_REWRITE refuses if any moved meanwhile;
   * then fetch again). Deletes are rare (a promotion, an edit), never per turn.
   */
  private async deleteFromBlocks(c: RedisClient, scope: LogbookScope, session: string, ids: readonly string[]): Promise<number> {
    const user = 'user' in scope ? scope.user : undefined;
    const k = this.keys.session(scope.tenant, session);
    const log = user !== undefined ? k.ualog : k.alog;
    const want = new Set(ids);
    const home: RecordHome = { tenant: scope.tenant, session, ...(user !== undefined ? { user } : {}) };
    const [ef, hf, cf] = user !== undefined ? ['au', 'auh', 'aun'] : ['as', 'ah', 'an'];
    for (let attempt = 0; attempt < 8; attempt++) {
      const r = (await runScript(c, LOG_FETCH, [k.meta, user !== undefined ? k.uarch : k.arch, log], [ef, hf, '', 0, cf])) as unknown[] | null;
      if (r === null || r.length < 6) return 0;
      const triples: (string | number | Buffer)[] = [];
      let removed = 0;
      (r[4] as Buffer[]).forEach((el, i) => {
        if (!isBlock(el)) return;
        const blk = readBlock(el);
        if (!blk) return; // unreadable: left for the quarantine (a search moves it aside)
        const keep = blk.records.filter((rec) => !want.has(recordId(rec, home) ?? ''));
        if (keep.length === blk.records.length) return;
        removed += blk.records.length - keep.length;
        triples.push(i, el, keep.length > 0 ? joinBlock(blk.header, keep) : '');
      });
      if (removed === 0) return 0;
      const n = Number(await this.counted(c, scope.tenant, LOG_REWRITE, [k.meta, k.slots, k.arch, k.uarch, k.alog, k.ualog, k.born, log], [ef, token(), cf, removed, ...triples]));
      if (n >= 0) return n;
    }
    throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, 'redis store: deleteLogbook: the log kept changing; try again');
  }

  async readEvents(ref: SessionRef, limit = 100): Promise<StoredEvent[]> {
    if (limit <= 0) return [];
    let entries: [string, string[]][];
    try {
      const c = await this.conn('readEvents');
      entries = (await c.xrevrange(this.keys.session(ref.tenant, ref.session).events, '+', '-', 'COUNT', limit)) as [string, string[]][];
    } catch (err) {
      throw unavailable('readEvents', err);
    }
    const out: StoredEvent[] = [];
    for (let i = entries.length - 1; i >= 0; i--) {
      const fields = entries[i]![1];
      const at = fields.indexOf('e');
      try {
        out.push(JSON.parse(fields[at + 1]!) as StoredEvent);
      } catch {
        throw corrupt('event stream entry', 'not valid JSON');
      }
    }
    return out;
  }

  async erase(target: EraseTarget): Promise<EraseReport> {
    const report: EraseReport = { sessions: 0, slots: 0, logbookEntries: 0, events: 0 };
    const ttl = this.o.fenceTtlSeconds;
    try {
      const c = await this.conn('erase');
      let sessions: string[];
      let userSet: string | undefined;
      let at = 0;
      if ('user' in target) {
        // First the user's tombstone (LINK refuses writes fenced before it from here on), then every
        // session in the set as it stands at that moment: together they cover every session any
        // process wrote for this user before the erase.
        userSet = this.keys.userSessions(target.tenant, target.user);
        const r = (await runScript(c, USER_ERASE, [userSet, this.keys.userGone(target.tenant, target.user), this.keys.userEntries(target.tenant, target.user)], [ttl])) as unknown[];
        at = Number(str(r[0]));
        sessions = (r[1] as Buffer[]).map(str);
        this.dropScope(scopeKeyOf({ tenant: target.tenant, user: target.user }));
      } else {
        sessions = [target.session];
      }
      for (const s of sessions) {
        const k = this.keys.session(target.tenant, s);
        const r = (await this.counted(c, target.tenant, ERASE, [...k.script, k.quarantine], [ttl, at])) as unknown[];
        report.sessions += Number(r[0]);
        report.slots += Number(r[1]);
        report.logbookEntries += Number(r[2]);
        report.events += Number(r[3]);
        const user = str(r[4]);
        this.forget(target.tenant, s, k, user);
        if (user && !userSet) {
          await c.srem(this.keys.userSessions(target.tenant, user), s);
          // The user's entry index no longer names the session's entries (O(user's entries); erase is rare).
          const idx = this.keys.userEntries(target.tenant, user);
          const mine = (await c.zrange(idx, 0, -1)).filter((m) => m.startsWith(`${s} `));
          if (mine.length > 0) await c.zrem(idx, ...mine);
        }
      }
      // Only the members erased leave the set: a session linked since (a write fenced after the
      // tombstone, i.e. a new conversation) stays findable by the next erase.
      if (userSet && sessions.length > 0) await c.srem(userSet, ...sessions);
    } catch (err) {
      throw unavailable('erase', err);
    }
    return report;
  }

  async listSessions(tenant: string, limit = 1000): Promise<string[]> {
    const out: string[] = [];
    const pattern = this.keys.metaPattern(tenant);
    try {
      const c = await this.conn('listSessions');
      const nodes = isCluster(c) ? c.nodes('master') : [c];
      for (const node of nodes) {
        let cursor = '0';
        do {
          const [next, keys] = await node.scan(cursor, 'MATCH', pattern, 'COUNT', 1000);
          cursor = next;
          for (const key of keys) {
            const s = this.keys.sessionOfMeta(tenant, key);
            if (s !== null && out.length < limit) out.push(s);
          }
        } while (cursor !== '0' && out.length < limit);
      }
    } catch (err) {
      throw unavailable('listSessions', err);
    }
    return out;
  }

  // ---------------------------------------------------------------- retention sweep

  /**
   * One pass of the retention sweep. On a single Redis the commit scripts keep two age indexes per
   * tenant (each session by its oldest slot and by its oldest logbook entry), so a pass visits only
   * sessions holding something expired: O(expired). It first counts again the sessions the due set
   * says have expired by TTL, so the counters lose what Redis dropped. On Cluster no key may span hash
   * slots: a pass SCANs the masters for the tenant's sessions, `budget` at a time, resuming from a
   * cursor. Each session is swept by one script (SWEEP), idempotent, so processes may sweep together.
   */
  async sweep(req: SweepRequest): Promise<SweepReport> {
    const budget = req.budget ?? 1000;
    const slotCut = Math.max(0, Math.floor(req.slotCutoffMs));
    const logCut = Math.max(0, Math.floor(req.logbookCutoffMs));
    const out: SweepReport = { sessions: 0, slots: 0, logbookEntries: 0, done: true };
    try {
      const c = await this.conn('sweep');
      const visit = async (k: SessionKeys, session: string): Promise<void> => {
        const r = (await this.counted(c, req.tenant, SWEEP, [k.meta, k.slots, k.arch, k.uarch, k.alog, k.ualog, k.born], [slotCut, logCut])) as unknown[];
        out.sessions++;
        const slots = Number(r[0]);
        const items = Number(r[1]);
        out.slots += slots;
        out.logbookEntries += items;
        if (slots > 0) this.cache.delete(k.meta);
        if (items > 0) {
          // This process's indexes let the entries go now, not at their next search.
          this.scopes.delete(scopeKeyOf({ tenant: req.tenant, session }));
          const user = r[2] ? str(r[2]) : '';
          if (user) {
            this.scopes.delete(scopeKeyOf({ tenant: req.tenant, user }));
            await this.unindexAged(req.tenant, user, logCut);
          }
        }
      };
      const sessionOf = (base: string): string | null => this.keys.sessionOfMeta(req.tenant, `${base}:meta`);
      if (!isCluster(c)) {
        const [, , due, oldSlot, oldLog] = this.statsKeys(req.tenant);
        const expired = (await c.zrangebyscore(due, '-inf', Date.now(), 'LIMIT', 0, budget)) as string[];
        for (const b of expired) {
          const k = this.keys.sessionOfBase(b);
          await this.counted(c, req.tenant, RESTAT, [k.meta, k.slots, k.arch, k.uarch, k.alog, k.ualog, k.born], []);
          this.cache.delete(k.meta);
        }
        const bases = new Set<string>();
        if (slotCut > 0) for (const b of (await c.zrangebyscore(oldSlot, '-inf', `(${slotCut}`, 'LIMIT', 0, budget)) as string[]) bases.add(b);
        if (logCut > 0) for (const b of (await c.zrangebyscore(oldLog, '-inf', `(${logCut}`, 'LIMIT', 0, budget)) as string[]) bases.add(b);
        for (const b of bases) {
          const s = sessionOf(b);
          if (s !== null) await visit(this.keys.sessionOfBase(b), s);
        }
        out.done = expired.length < budget && bases.size < budget;
        return out;
      }
      if (slotCut === 0 && logCut === 0) return out;
      const masters = c.nodes('master');
      let at = this.sweepAt.get(req.tenant) ?? { node: 0, cursor: '0' };
      while (out.sessions < budget && at.node < masters.length) {
        const [next, keys] = await masters[at.node]!.scan(at.cursor, 'MATCH', this.keys.metaPattern(req.tenant), 'COUNT', Math.min(1000, budget));
        for (const meta of keys) {
          const s = this.keys.sessionOfMeta(req.tenant, meta);
          if (s !== null) await visit(this.keys.session(req.tenant, s), s);
        }
        at = next === '0' ? { node: at.node + 1, cursor: '0' } : { node: at.node, cursor: next };
      }
      out.done = at.node >= masters.length;
      if (out.done) this.sweepAt.delete(req.tenant);
      else this.sweepAt.set(req.tenant, at);
      return out;
    } catch (err) {
      throw unavailable('sweep', err);
    }
  }

  // ---------------------------------------------------------------- operator figures (stats, fleet)

  /**
   * A tenant's counters hash (standalone Redis only) and fleet hash, under the tenant's own hash tag with
   * an empty session (`prefix{tenant:}:stats`), which no session key can take (ids are 1+ characters).
   */
  private statsKey(tenant: string): string {
    return `${this.keys.sessionBase(tenant, '')}:stats`;
  }
  private fleetKey(tenant: string): string {
    return `${this.keys.sessionBase(tenant, '')}:fleet`;
  }

  /** The tenant's [stats] keys (see scripts.ts, statsLua): counters, tally, due, oldest slot, oldest logbook entry. */
  private statsKeys(tenant: string): string[] {
    const b = this.keys.sessionBase(tenant, '');
    return [`${b}:stats`, `${b}:tally`, `${b}:due`, `${b}:oldslot`, `${b}:oldlog`];
  }

  /** Runs a script with the tenant's [stats] keys appended when the server is a single Redis (see scripts.ts, statsLua). */
  private counted(c: RedisClient, tenant: string, s: LuaScript, keys: readonly string[], args: readonly (string | Buffer | number)[]): Promise<unknown> {
    if (isCluster(c)) return runScript(c, s, keys, args);
    return runScript(c, { ...s, keys: s.keys + STATS_KEYS }, [...keys, ...this.statsKeys(tenant)], args);
  }

  async ping(): Promise<void> {
    try {
      const c = await this.conn('ping');
      await c.ping();
    } catch (err) {
      throw unavailable('ping', err);
    }
  }

  /**
   * On a single Redis: the counters the commit and erase scripts keep. On Cluster no key may span hash
   * slots, so the figures are counted by SCAN over the masters (O(sessions); `source: 'scan'`).
   * Sessions that expire by `idleTtlSeconds` leave the counters without a script seeing them.
   */
  async stats(tenant: string): Promise<StoreStats> {
    try {
      const c = await this.conn('stats');
      if (!isCluster(c)) {
        const all = await c.hgetall(this.statsKey(tenant));
        const counters: Record<string, number> = {};
        for (const [field, n] of Object.entries(all)) if (field.startsWith('survival.')) counters[field] = Number(n);
        return { sessions: Number(all.sessions ?? 0), slots: Number(all.slots ?? 0), logbookEntries: Number(all.logbook ?? 0), source: 'counters', counters };
      }
      const out: StoreStats = { sessions: 0, slots: 0, logbookEntries: 0, source: 'scan' };
      for (const node of c.nodes('master')) {
        let cursor = '0';
        do {
          const [next, keys] = await node.scan(cursor, 'MATCH', this.keys.metaPattern(tenant), 'COUNT', 1000);
          cursor = next;
          for (const meta of keys) {
            const base = meta.slice(0, -':meta'.length);
            const [slots, arch, uarch, counts] = await Promise.all([node.hlen(`${base}:slots`), node.hlen(`${base}:arch`), node.hlen(`${base}:uarch`), node.hmget(meta, 'an', 'aun')]);
            out.sessions += 1;
            out.slots += slots;
            // Entries in blocks are counted in meta (an / aun); logs from before blocks, by their hashes.
            out.logbookEntries += (counts[0] !== null ? Number(counts[0]) : arch) + (counts[1] !== null ? Number(counts[1]) : uarch);
          }
        } while (cursor !== '0');
      }
      return out;
    } catch (err) {
      throw unavailable('stats', err);
    }
  }

  /**
   * `MEMORY USAGE` (Redis's own estimate of a key's bytes, samples of nested values included) summed over
   * each sampled session's data keys. Sessions come from SCAN pages started at a random cursor, at most
   * 20 pages of 100 keys per master: the cost is bounded by `sample`, not by the number of sessions.
   */
  async sampleSessionBytes(tenant: string, sample: number): Promise<number[]> {
    try {
      const c = await this.conn('sampleSessionBytes');
      const nodes = isCluster(c) ? c.nodes('master') : [c];
      const out: number[] = [];
      for (const node of nodes) {
        // From a random cursor to the end of the table, then once from its start (a key may come twice).
        let cursor = String(Math.floor(Math.random() * 2 ** 16));
        let wrapped = cursor === '0';
        const seen = new Set<string>();
        for (let page = 0; page < 20 && out.length < sample; page++) {
          const [next, metas] = await node.scan(cursor, 'MATCH', this.keys.metaPattern(tenant), 'COUNT', 100);
          for (const meta of metas) {
            if (out.length >= sample || seen.has(meta)) continue;
            seen.add(meta);
            const k = this.keys.sessionOfBase(meta.slice(0, -':meta'.length));
            const p = node.pipeline();
            for (const key of [...k.all, k.cids]) p.call('MEMORY', 'USAGE', key);
            const res = (await p.exec()) ?? [];
            out.push(res.reduce((n: number, [, v]: [Error | null, unknown]) => n + (Number(v) || 0), 0));
          }
          cursor = next;
          if (cursor === '0') {
            if (wrapped) break;
            wrapped = true;
          }
        }
      }
      return out;
    } catch (err) {
      throw unavailable('sampleSessionBytes', err);
    }
  }

  async putFleet(tenant: string, instance: string, payload: string, ttlMs: number): Promise<void> {
    try {
      const c = await this.conn('putFleet');
      const rec = JSON.stringify({ atMs: Date.now(), ttlMs, payload });
      await c.hset(this.fleetKey(tenant), instance, rec);
    } catch (err) {
      throw unavailable('putFleet', err);
    }
  }

  async listFleet(tenant: string): Promise<FleetRecord[]> {
    try {
      const c = await this.conn('listFleet');
      const all = await c.hgetall(this.fleetKey(tenant));
      const now = Date.now();
      const out: FleetRecord[] = [];
      const stale: string[] = [];
      for (const [instance, raw] of Object.entries(all)) {
        try {
          const r = JSON.parse(raw) as { atMs: number; ttlMs: number; payload: string };
          if (r.atMs + r.ttlMs < now) stale.push(instance);
          else out.push({ instance, atMs: r.atMs, payload: r.payload });
        } catch {
          stale.push(instance);
        }
      }
      if (stale.length > 0) await c.hdel(this.fleetKey(tenant), ...stale);
      return out;
    } catch (err) {
      throw unavailable('listFleet', err);
    }
  }

  async close(): Promise<void> {
    if (this.closed) return;
    for (const t of this.idle.values()) clearTimeout(t);
    this.idle.clear();
    await Promise.all([...this.sealing]);
    this.closed = true;
    this.cache.clear();
    this.scopes.clear();
    if (!this.ownsClient) return;
    const c = await this.clientReady.catch(() => undefined);
    if (!c) return;
    try {
      if (c.status === 'ready') await c.quit();
      else c.disconnect();
    } catch {
      c.disconnect();
    }
  }

  private async conn(op: string): Promise<RedisClient> {
    if (this.closed) throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, `redis store: ${op} after close()`);
    const c = this.client ?? (await this.clientReady);
    await ensureReady(c, this.o.connectTimeoutMs);
    if (!this.watched.has(c)) {
      this.watched.add(c);
      await this.checkMarker(c);
      c.on('ready', () => void this.checkMarker(c).catch(() => undefined));
    }
    return c;
  }

  watchQuarantine(listener: (e: { tenant: string; session: string; entries: number }) => void): void {
    this.quarantineListeners.push(listener);
  }

  watchResets(listener: (e: { atMs: number }) => void): void {
    this.resetListeners.push(listener);
  }

  /**
   * A server that comes back without the marker key this store set when it first connected has lost
   * its data (a restart without persistence, a flush): reported to `watchResets` listeners, counted
   * in `resets`, and the marker set again. Processes sharing a prefix share the marker.
   */
  private async checkMarker(c: RedisClient): Promise<void> {
    const key = `${this.o.prefix}marker`;
    const mine = this.marker || token();
    const set = await c.set(key, mine, 'NX');
    if (!this.marker) {
      this.marker = set === 'OK' ? mine : ((await c.get(key)) ?? mine);
      return;
    }
    if (set === 'OK') {
      this.resets++;
      this.cache.clear();
      this.scopes.clear();
      this.linked.clear();
      for (const l of this.resetListeners) l({ atMs: Date.now() });
    }
  }

  private commitArgs(ref: SessionRef, req: CommitRequest): { args: (string | Buffer | number)[]; keys: (Float32Array | null)[] } {
    if (!Number.isInteger(req.capacity) || req.capacity < 1 || !Number.isInteger(req.dim) || req.dim < 1) {
      throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, `commit with capacity ${req.capacity} and dim ${req.dim}; both must be integers >= 1`);
    }
    // The commit id makes a resend harmless. The version check alone already stops a second apply of
    // the *same* request; the id also stops a re-planned retry of a write whose first commit landed
    // but whose reply was lost (ioredis reports "Connection is closed" or a timeout, the core queues
    // it in the outbox, reloads and plans again on top of its own result). The core passes one
    // `commitId` per write for that; without one, each request object gets its own id.
    const given = (req as { commitId?: unknown }).commitId;
    let id = typeof given === 'string' && /^[^\s=]{1,128}$/.test(given) ? given : this.commitIds.get(req);
    if (!id) this.commitIds.set(req, (id = token()));
    const kf = this.o.keyFormat;
    const cutoff = ageCutoff(req);
    const f = req.fence;
    // A user's slice is held to \`maxEntries\` by the user's cap over the whole scope (capUser), which
    // takes the oldest from the head of the slices; the commit trimming its slice as well would leave
    // the cap index naming entries already gone (each then looked for through the whole slice).
    const maxEntries = ref.user && req.logbook.length > 0 ? 0 : (req.retention?.policy.maxEntries ?? 0);
    const args: (string | Buffer | number)[] = [
      req.expectedVersion, id, token(), String(req.clock), String(req.turns), req.capacity, req.dim, ref.user ?? '',
      this.o.idleTtlSeconds, this.o.maxEvents, maxEntries, cutoff, req.ops.length, req.logbook.length, req.events.length,
      f?.seen ? f.seen.session : '', f ? Math.floor(f.acceptedMs) : '', this.o.fenceTtlSeconds,
    ];
    const keys: (Float32Array | null)[] = [];
    for (const op of req.ops) {
      if (!Number.isInteger(op.index) || op.index < 0 || op.index >= req.capacity) {
        throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, `commit op for slot ${op.index} outside capacity ${req.capacity}`);
      }
      if (op.slot) {
        if (op.slot.key.length !== req.dim) throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, `commit op for slot ${op.index} has ${op.slot.key.length} dims, commit says ${req.dim}`);
        const enc = encodeSlot(op.slot, kf);
        const born = Number.isFinite(op.slot.createdMs) ? Math.floor(op.slot.createdMs) : 0;
        args.push(String(op.index), enc.payload, born);
        keys.push(enc.key);
      } else {
        args.push(String(op.index), '', 0);
        keys.push(null);
      }
    }
    const home: RecordHome = { tenant: ref.tenant, session: ref.session, ...(ref.user !== undefined ? { user: ref.user } : {}) };
    for (const e of req.logbook) {
      const rec = encodeRecord(e, ref.user, kf, home, turnEntryId);
      args.push(String(rec.at), rec.body);
    }
    for (const ev of req.events) args.push(JSON.stringify(ev));
    // [stats] Counter increments (field, delta) close the list; the script adds them on a single Redis.
    for (const [field, n] of Object.entries(req.counters ?? {})) if (Number.isInteger(n) && n !== 0) args.push(field, n);
    return { args, keys };
  }

  /** Moves this process's cached copy forward by the ops just committed, when it was the version committed against. */
  private applyToCache(metaKey: string, req: CommitRequest, epoch: string, version: number, keys: (Float32Array | null)[]): void {
    if (this.o.cacheSessions === 0) return;
    let entry = this.cache.get(metaKey);
    if (req.expectedVersion === 0) {
      entry = { epoch, version: 0, clock: 0, turns: 0, table: new SlotTable(req.capacity, req.dim) };
    } else if (!entry || entry.epoch !== epoch || entry.version !== req.expectedVersion) {
      this.cache.delete(metaKey);
      return;
    }
    if (entry.table.capacity !== req.capacity || entry.table.dim !== req.dim) {
      entry.table = entry.table.dim === req.dim ? entry.table.clone(req.capacity) : new SlotTable(req.capacity, req.dim);
    }
    req.ops.forEach((op, i) => {
      // The cached copy holds what any other process would decode (quantised keys), not the caller's floats.
      if (op.slot) entry!.table.set(op.index, { ...op.slot, key: keys[i]! });
      else entry!.table.clear(op.index);
    });
    entry.version = version;
    entry.clock = req.clock;
    entry.turns = req.turns;
    this.touch(metaKey, entry);
  }

  private touch(metaKey: string, entry: CachedSession): void {
    if (this.o.cacheSessions === 0) return;
    this.cache.delete(metaKey);
    this.cache.set(metaKey, entry);
    if (this.cache.size > this.o.cacheSessions) this.cache.delete(this.cache.keys().next().value!);
  }

  /**
   * Brings the scope's index up to date. Every call asks Redis, for each session slice of the scope,
   * for the entries appended since this process last looked (one round trip; a user scope adds one
   * SMEMBERS first); entries that retention trimmed from the head of a slice leave the index; a
   * delete moves the slice's epoch and forces a full fetch. So a search sees every entry committed
   * before it started, and costs O(new entries) in transfer.
   */
  private refreshScope(scope: LogbookScope): Promise<ScopeCache> {
    const key = scopeKeyOf(scope);
    let sc = this.scopes.get(key);
    if (!sc) {
      sc = { sessions: new Map(), index: logbookIndexFor(this.o), lock: Promise.resolve() };
      if (this.o.cacheSessions > 0) {
        this.scopes.set(key, sc);
        if (this.scopes.size > this.o.cacheSessions) this.scopes.delete(this.scopes.keys().next().value!);
      }
    } else {
      this.scopes.delete(key);
      this.scopes.set(key, sc);
    }
    const cache = sc;
    const run = cache.lock.then(() => this.refreshNow(scope, cache));
    cache.lock = run.catch(() => undefined);
    return run;
  }

  private async refreshNow(scope: LogbookScope, sc: ScopeCache): Promise<ScopeCache> {
    const user = 'user' in scope ? scope.user : undefined;
    let sessions: string[];
    let replies: unknown[];
    try {
      const c = await this.conn('searchLogbook');
      const fetch = (s: string): Promise<unknown> => {
        const k = this.keys.session(scope.tenant, s);
        const cached = sc.sessions.get(s);
        const keys = user !== undefined ? [k.meta, k.uarch, k.ualog] : [k.meta, k.arch, k.alog];
        return runScript(c, LOG_FETCH, keys, [user !== undefined ? 'au' : 'as', user !== undefined ? 'auh' : 'ah', cached ? `=${cached.epoch}` : '', cached ? cached.end : 0, user !== undefined ? 'aun' : 'an']);
      };
      if (user === undefined) {
        sessions = [(scope as { session: string }).session];
        replies = [await fetch(sessions[0]!)];
      } else {
        // The slices this process already holds are fetched beside SMEMBERS (one round trip when the
        // user's sessions are unchanged); a session new to the set is fetched after it. Every fetch
        // starts after the search did, so each sees what was committed before.
        const known = [...sc.sessions.keys()];
        const [members, ...early] = await Promise.all([c.smembers(this.keys.userSessions(scope.tenant, user)), ...known.map(fetch)]);
        sessions = members as string[];
        const got = new Map<string, unknown>(known.map((s, i) => [s, early[i]]));
        const missing = sessions.filter((s) => !got.has(s));
        const late = await Promise.all(missing.map(fetch));
        missing.forEach((s, i) => got.set(s, late[i]));
        replies = sessions.map((s) => got.get(s));
      }
    } catch (err) {
      throw unavailable('searchLogbook', err);
    }
    const live = new Set(sessions);
    /** Payloads that failed their check, per session: (id, payload) pairs to move aside. */
    const bad = new Map<string, { pairs: Array<string | Buffer>; blocks: boolean }>();
    for (const s of [...sc.sessions.keys()]) if (!live.has(s)) this.dropScopeSession(sc, s);
    sessions.forEach((s, i) => {
      const r = replies[i] as unknown[] | null;
      if (r === null) {
        this.dropScopeSession(sc, s);
        return;
      }
      const epoch = str(r[0]);
      const head = num(r[1], 'logbook head', true);
      const end = num(r[2], 'logbook end', true);
      let cached = sc.sessions.get(s);
      const delta = r.length > 3 && str(r[3]) === 'd' && cached !== undefined;
      if (r.length === 3 || delta) {
        // Entries trimmed from the head since the last look leave the index.
        if (cached && head > cached.head) {
          for (const id of cached.ids.splice(0, head - cached.head)) if (id) this.dropEntry(sc, id, s);
          cached.head = head;
        }
        if (r.length === 3) {
          if (cached) cached.end = end;
          return;
        }
      } else {
        this.dropScopeSession(sc, s);
        cached = undefined;
      }
      const els = r[4] as Buffer[];
      const vals = r[5] as Array<Buffer | null | false>;
      let skip = delta ? num(r[6] ?? 0, 'logbook skip', true) : 0;
      const entry: ScopeSession = cached ?? { epoch, head, end: head, ids: [] };
      const fresh: LogbookEntry[] = [];
      const home: RecordHome = { tenant: scope.tenant, session: s, ...(user !== undefined ? { user } : {}) };
      const take = (e: LogbookEntry | null, id: string): void => {
        if (!e || (user !== undefined && e.user !== user)) {
          entry.ids.push('');
          return;
        }
        entry.ids.push(id);
        fresh.push(e);
      };
      // A record or payload that fails its check is not trusted and not fatal: the scope is searched
      // without it, and it is moved aside below (quarantineLog).
      const spoilt = (): void => {
        if (!bad.has(s)) bad.set(s, { pairs: [], blocks: false });
        bad.get(s)!.blocks = true;
      };
      els.forEach((el, j) => {
        if (isBlock(el)) {
          const blk = readBlock(el);
          if (!blk) {
            // Unreadable as a whole: its positions stay (as the script counts them), its entries unknown.
            spoilt();
            for (let n = blockCount(el); n > 0; n--) {
              if (skip > 0) skip--;
              else entry.ids.push('');
            }
            return;
          }
          for (const rec of blk.records) {
            if (skip > 0) {
              skip--;
              continue;
            }
            const e = decodeOrNull(() => decodeRecord(rec.body, rec.at, 'logbook record', home, turnEntryId));
            if (e === null) {
              spoilt();
              entry.ids.push('');
            } else take(e, e.id);
          }
          return;
        }
        const id = elementId(str(el));
        const v = vals[j];
        if (skip > 0) {
          skip--;
          return;
        }
        if (!v) {
          entry.ids.push('');
          return;
        }
        const e = decodeOrNull(() => decodeLogbook(v as Buffer, 'logbook entry payload', { tenant: scope.tenant, session: s, id }));
        if (e === null) {
          if (!bad.has(s)) bad.set(s, { pairs: [], blocks: false });
          bad.get(s)!.pairs.push(id, v as Buffer);
          entry.ids.push('');
          return;
        }
        take(e, id);
      });
      // A full fetch comes in log order already; neighbours link by seq either way.
      for (const e of fresh) sc.index.add(e);
      entry.epoch = epoch;
      entry.end = end;
      sc.sessions.set(s, entry);
    });
    for (const [s, b] of bad) await this.quarantineLog(scope, s, b.pairs, b.blocks);
    return sc;
  }

  /**
   * Moves logbook records that failed their check aside (LOG_QUARANTINE) and tells the listeners:
   * payloads of a log written before blocks as the reader saw them; for blocks, the slice is fetched
   * in full and every block holding a bad record is sent as seen and without it (the script changes
   * only blocks still as seen; one changed meanwhile is left for the next search to find).
   */
  private async quarantineLog(scope: LogbookScope, session: string, pairs: Array<string | Buffer>, blocks: boolean): Promise<void> {
    const tenant = scope.tenant;
    const user = 'user' in scope ? scope.user : undefined;
    const k = this.keys.session(tenant, session);
    let moved: number;
    try {
      const c = await this.conn('quarantine');
      const quads: Array<string | number | Buffer> = [];
      if (blocks) {
        const log = user !== undefined ? k.ualog : k.alog;
        const args = user !== undefined ? ['au', 'auh', '', 0, 'aun'] : ['as', 'ah', '', 0, 'an'];
        const r = (await runScript(c, LOG_FETCH, [k.meta, user !== undefined ? k.uarch : k.arch, log], args)) as unknown[] | null;
        const home: RecordHome = { tenant, session, ...(user !== undefined ? { user } : {}) };
        ((r?.[4] as Buffer[] | undefined) ?? []).forEach((el, i) => {
          if (!isBlock(el)) return;
          const blk = readBlock(el);
          if (!blk) {
            quads.push(i, el, '', 1, `block${blockBase(el)}`, el);
            return;
          }
          const keep = blk.records.filter((rec) => recordId(rec, home) !== null);
          if (keep.length === blk.records.length) return;
          const kept = blk.records.filter((rec) => !keep.includes(rec));
          quads.push(i, el, keep.length > 0 ? joinBlock(blk.header, keep) : '', kept.length);
          kept.forEach((rec, j) => quads.push(`at${rec.at}.${j}`, rec.raw));
        });
      }
      if (pairs.length === 0 && quads.length === 0) return;
      const ttl = Math.max(this.o.idleTtlSeconds, this.o.fenceTtlSeconds);
      moved = Number(await this.counted(c, tenant, LOG_QUARANTINE, [k.meta, k.slots, k.arch, k.uarch, k.alog, k.ualog, k.born, k.quarantine], [user !== undefined ? 'u' : 's', ttl, token(), pairs.length / 2, ...pairs, ...quads]));
    } catch (err) {
      throw unavailable('quarantine', err);
    }
    if (moved === 0) return;
    this.quarantinedEntries += moved;
    for (const l of this.quarantineListeners) l({ tenant, session, entries: moved });
  }

  private dropEntry(sc: ScopeCache, id: string, session: string): void {
    if (sc.index.get(id)?.session === session) sc.index.remove(id);
  }

  private dropScopeSession(sc: ScopeCache, session: string): void {
    const entry = sc.sessions.get(session);
    if (!entry) return;
    for (const id of entry.ids) if (id) this.dropEntry(sc, id, session);
    sc.sessions.delete(session);
  }

  /** Lets go of a scope's index at once (erasure): its entries are cleared, not left for the collector. */
  private dropScope(key: string): void {
    const sc = this.scopes.get(key);
    if (!sc) return;
    this.scopes.delete(key);
    sc.index.clear();
    sc.sessions.clear();
  }

  /**
   * Compresses a block a commit just closed and puts it in place of the open form, if still there
   * (SEAL compares bytes). Off the commit's path: the turn does not wait; a failure leaves the block
   * open, which reads the same.
   */
  private seal(log: string, closed: Buffer): void {
    let sealedForm: Buffer;
    try {
      sealedForm = sealBlock(closed, 'closed logbook block');
    } catch {
      return;
    }
    if (sealedForm.length >= closed.length) return;
    const p = this.conn('seal')
      .then((c) => runScript(c, SEAL, [log], [closed, sealedForm]))
      .then((n) => {
        if (Number(n) === 1) this.sealed++;
      })
      .catch(() => undefined);
    this.sealing.add(p);
    void p.finally(() => this.sealing.delete(p));
  }

  /** Resolves when the seals this process started have settled (benchmarks measure after them). */
  async settled(): Promise<void> {
    while (this.sealing.size > 0) await Promise.all([...this.sealing]);
  }

  /** (Re)starts the idle timer of a slice this process just wrote to; a timer that runs out seals its tail. */
  private sealWhenIdle(log: string): void {
    if (this.o.sealIdleMs === 0) return;
    const running = this.idle.get(log);
    if (running) {
      running.refresh();
      return;
    }
    const timer = setTimeout(() => {
      this.idle.delete(log);
      this.sealAtRest(log);
    }, this.o.sealIdleMs);
    timer.unref();
    this.idle.set(log, timer);
  }

  /**
   * Seals now the slices waiting for their idle seal, and resolves when those seals have settled: the
   * sessions are then as they will be at rest (benchmarks measure them so; tests).
   */
  async sealIdle(): Promise<void> {
    for (const [log, timer] of this.idle) {
      clearTimeout(timer);
      this.sealAtRest(log);
    }
    this.idle.clear();
    await this.settled();
  }

  /**
   * Compresses a slice's open tail block, merged with the block before it when they fit one (codec.ts,
   * sealTail): fetches the last two elements, then SEAL_TAIL swaps them if both are still as fetched.
   * Off the commit's path; a failure, or a commit in between, leaves the tail open, which reads the same.
   */
  private sealAtRest(log: string): void {
    const p = this.conn('seal')
      .then(async (c) => {
        const els = await c.lrangeBuffer(log, -2, -1);
        const tail = els[els.length - 1];
        if (!tail) return;
        const prev = els.length === 2 ? els[0] : undefined;
        const form = decodeOrNull(() => sealTail(prev, tail, 'logbook tail'));
        if (!form) return;
        const n = await runScript(c, SEAL_TAIL, [log], [tail, form.merged ? prev! : '', form.block]);
        if (Number(n) === 1) this.sealed++;
      })
      .catch(() => undefined);
    this.sealing.add(p);
    void p.finally(() => this.sealing.delete(p));
  }

  private forget(tenant: string, session: string, k: SessionKeys, user: string): void {
    this.cache.delete(k.meta);
    this.dropScope(scopeKeyOf({ tenant, session }));
    if (user) {
      this.dropScope(scopeKeyOf({ tenant, user }));
      this.linked.delete(`${k.meta}\u0000${user}`);
    }
  }
}

/** A Store on Redis or Redis Cluster (see RedisSlotStoreOptions). */
export function redisSlotStore(options?: RedisSlotStoreOptions): RedisSlotStore {
  return new RedisSlotStore(options);
}
