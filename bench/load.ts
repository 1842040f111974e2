// `npm run bench -- load --store memory|redis|cluster --sessions N --turns M --concurrency C [--json]`:
// simulated users on many sessions, each turn read -> streamed reply -> write, through `tm.wrap()`.
// `--auto-pipeline` runs the bench's Redis client with ioredis auto-pipelining (a what-if for the adapter).
// `--idle N` instead fills Redis with N idle sessions and reports what they hold (see idleRun;
// `--in-flight N` commits at once, default 64; commands wait for Redis unless `--command-timeout MS`).
// `--user-sessions K` gives every K consecutive sessions one user, so reads search the user's logbook.
// `--rate R --seconds S` is fixed-rate (open-loop) load instead, optionally by a fleet of processes
// (`--processes N`); see lib/load-rate.ts. Every mode: `--cache-sessions N` (the store's per-process
// cache), `--cluster-seeds host:port,...` (any Cluster), `--own-redis` (a redis-server of the run's
// own, so Redis INFO deltas are the run's alone), `--save` (also write to the committed results).
// Figures: turns/s, read/write/turn p50/p95/p99 (HDR-style histograms), errors, RSS, bytes per session.
//
// How a turn is timed. `wrap()` starts the memory write after the reply stream ends and returns no
// handle on it, and `flush()` waits for every session's writes, so neither can time one turn. Each
// simulated user instead registers a resolver under its session's hash before the turn, and the
// `commit` event (which carries that hash) resolves it. A user runs one turn at a time, so at most one
// write per session is in flight and the hash identifies the turn's own write. So:
//   read  = the read's own duration (`ctx.memory.trace.durationUs`, the same figure the `read` event has)
//   write = end of the stream -> `commit` event (queue wait, extract, embed, plan, store round trips)
//   turn  = the wrapped call -> stream consumed -> `commit` event, end to end
// A turn whose write failed resolves from the `error` event (stage write) and counts as an error.
// Over 400 lines: the closed-loop driver, the store backends (shared by every bench) and the idle fill
// share their helpers here; the fixed-rate driver lives in lib/fixed-rate.ts and lib/load-rate.ts.

import { execFileSync } from 'node:child_process';
import { loadavg } from 'node:os';
import { createHistogram, type RecordableHistogram } from 'node:perf_hooks';
import type { Redis as RedisType } from 'ioredis';
import { progressBar } from '../cli/progress.js';
import { createTidemark, type Tidemark, type WrapContext, type WrapInput } from '../src/middleware/tidemark.js';
import type { SlotTable } from '../src/memory/slots.js';
import { InProcessStore, scopeOf } from '../src/store/in-process.js';
import type { CommitRequest, Store } from '../src/store/store.js';
import type { RedisClient, RedisSlotStore } from '../adapters/redis/index.js';
import { deltaOf, describeDeltas, redisVersions, snapshot, totalPerTurn, type InfoDelta } from './lib/redis-info.js';
import { asciiTable, barChart, writeResult } from './lib/results.js';
import { generateScenario } from './lib/scenario.js';
import { machine, parseArgs, percentile, round } from './lib/stats.js';

const TENANT = 'bench';
const DIM = 384;

export type StoreKind = 'memory' | 'redis' | 'cluster';

/** Latency summary of one histogram, in µs. */
export interface Lat {
  p50: number;
  p95: number;
  p99: number;
  max: number;
}

interface LoadFigures {
  store: StoreKind;
  sessions: number;
  turns_per_session: number;
  concurrency: number;
  /** Sessions per simulated user (0 = none). */
  user_sessions: number;
  turns: number;
  seconds: number;
  turns_per_s: number;
  read_us: Lat;
  write_us: Lat;
  turn_us: Lat;
  errors: number;
  degraded_reads: number;
  outbox_queued: number;
  rss_mb: number;
  bytes_per_session: number;
  bytes_method: string;
  /** INFO deltas per master over the timed part (Redis runs). */
  redis_info: InfoDelta[];
  redis_per_turn: InfoDelta['per_turn'] | null;
}

// ------------------------------------------------------------------ histograms

/** perf_hooks histograms record integers: we record nanoseconds and report µs. */
export const histogram = (): RecordableHistogram => createHistogram({ lowest: 1, highest: 600e9, figures: 3 });
export const recordUs = (h: RecordableHistogram, us: number): void => h.record(Math.max(1, Math.round(us * 1000)));
export const lat = (h: RecordableHistogram): Lat => ({
  p50: round(h.percentile(50) / 1000, 1),
  p95: round(h.percentile(95) / 1000, 1),
  p99: round(h.percentile(99) / 1000, 1),
  max: round(h.max / 1000, 1),
});

// ------------------------------------------------------------------ conversations

/** Per simulated session: the user texts and the replies to stream, from the scenario generator. */
export interface Script {
  user: string[];
  reply: string[];
}

/** `count` scripts of `turns` exchanges each, cycling over generated scenario sessions. */
export function scripts(count: number, turns: number, seed = 7): Script[] {
  const pool = Math.min(count, 64);
  // The generator plans each session's facts over its length, so it needs a few hundred turns to
  // place them; shorter scripts use the first `turns` exchanges (turns past the script wrap around).
  const len = Math.max(2 * turns, 300);
  const sc = generateScenario({ seed, sessions: pool, minTurns: len, maxTurns: len + 1 });
  const by = new Map<string, Script>();
  for (const t of sc.turns) {
    let s = by.get(t.session);
    if (!s) by.set(t.session, (s = { user: [], reply: [] }));
    (t.role === 'user' ? s.user : s.reply).push(t.text);
  }
  const list = [...by.values()];
  return Array.from({ length: count }, (_, i) => list[i % list.length]!);
}

/** A reply streamed word by word, without delays: the benchmark times memory, not a model. */
export async function* words(text: string): AsyncGenerator<string> {
  for (const w of text.split(/(?<= )/)) yield w;
}

// ------------------------------------------------------------------ stores

export interface Backend {
  kind: StoreKind;
  /** A fresh store for one run (on Redis: under a key prefix of its own). */
  open(): Promise<{ store: Store; prefix?: string }>;
  /** Bytes a session holds in the store (Redis: MEMORY USAGE summed over its keys; memory: an estimate). */
  bytesOf(store: Store, sessions: readonly string[]): Promise<{ bytes: number; method: string }>;
  /** Deletes a run's keys (Redis), returning how many were removed. */
  cleanup(prefix?: string): Promise<number>;
  client?: RedisClient;
  close(): Promise<void>;
}

const runId = (): string => `${process.pid.toString(36)}${Math.floor(Math.random() * 36 ** 6).toString(36)}`;

/** Sums MEMORY USAGE over a session's keys in one round trip (they share a hash tag, so one slot). */
const MEMORY_OF_KEYS = `local s = 0
for i = 1, #KEYS do
  local m = redis.call('MEMORY', 'USAGE', KEYS[i], 'SAMPLES', '0')
  if m then s = s + m end
end
return s`;

async function waitReady(c: RedisClient): Promise<void> {
  if (c.status === 'ready') return;
  await new Promise<void>((resolve, reject) => {
    const t = setTimeout(() => reject(new Error(`redis not ready after 5 s (status ${c.status})`)), 5000);
    c.once('ready', () => {
      clearTimeout(t);
      resolve();
    });
  });
}

/** Deletes every key under `prefix` (SCAN + UNLINK per key: on Cluster keys of different slots cannot share a command). */
export async function deletePrefix(client: RedisClient, prefix: string): Promise<number> {
  if (!/^[A-Za-z0-9:._-]+$/.test(prefix)) throw new RangeError(`refusing to delete under an unusual prefix ${JSON.stringify(prefix)}`);
  const nodes = (client as { isCluster?: boolean }).isCluster ? (client as import('ioredis').Cluster).nodes('master') : [client as RedisType];
  let n = 0;
  for (const node of nodes) {
    let cursor = '0';
    do {
      const [next, keys] = await node.scan(cursor, 'MATCH', `${prefix}*`, 'COUNT', 2000);
      cursor = next;
      if (keys.length > 0) {
        const p = node.pipeline();
        for (const k of keys) p.unlink(k);
        const res = await p.exec();
        for (const [err, v] of res ?? []) if (!err) n += Number(v);
      }
    } while (cursor !== '0');
  }
  return n;
}

/** Estimated bytes of one in-process session: typed arrays exactly, strings at 1 B/char + 16 B (V8 one-byte strings; from memory). */
function tableBytes(t: SlotTable): number {
  const str = (s: string | undefined): number => (s === undefined ? 0 : 16 + s.length);
  let b = t.keys.byteLength + t.capacity * (6 * 8 + 4 + 1) + 5 * 8 * t.capacity + 6 * 64;
  for (let i = 0; i < t.capacity; i++) {
    if (!t.isUsed(i)) continue;
    b += str(t.ids[i]) + str(t.keyText[i]) + str(t.value[i]) + str(t.previous[i]);
    const prov = t.provenance[i]!;
    b += 16 + 8 * prov.length;
    for (const p of prov) b += str(p);
  }
  return b;
}

/** Limits and targets of a backend that used to be fixed in code. */
export interface BackendOptions {
  /** `host:port,...` of any Redis Cluster (default: the repo's own, started if need be). */
  clusterSeeds?: string;
  /** The store's per-process cache of sessions and logbook scopes (RedisSlotStore `cacheSessions`). */
  cacheSessions?: number;
  /** ioredis `commandTimeout` in ms (the store's default is 1,000); 0 waits for ever. */
  commandTimeoutMs?: number;
  /** A key prefix to share (a fleet's processes use one key space); default: a fresh one per run. */
  prefix?: string;
}

/** `autoPipeline` turns on ioredis `enableAutoPipelining` (commands of one tick share one socket write). */
export async function openBackend(kind: StoreKind, redisUrl: string, autoPipeline = false, extra: BackendOptions = {}): Promise<Backend> {
  if (kind === 'memory') {
    return {
      kind,
      open: async () => ({ store: new InProcessStore() }),
      async bytesOf(store, sessions) {
        let total = 0;
        for (const s of sessions) {
          const ref = { tenant: TENANT, session: s };
          const snap = await store.load(ref);
          if (snap) total += tableBytes(snap.table);
          for (const a of await store.listLogbook(scopeOf(ref), { limit: 100_000 })) {
            total += 64 + (a.key?.byteLength ?? 0) + 16 * 5 + a.id.length + a.keyText.length + a.value.length + a.provenance.reduce((x, p) => x + 24 + p.length, 0);
          }
          // Event objects: about 6 fields of 8 B plus headers (from memory, rough).
          total += (await store.readEvents(ref, 100_000)).length * 96;
        }
        return { bytes: Math.round(total / Math.max(1, sessions.length)), method: 'estimate from slot tables, logbook entries and events' };
      },
      cleanup: async () => 0,
      close: async () => undefined,
    };
  }
  const { Redis, Cluster } = await import('ioredis');
  const { RedisSlotStore, REDIS_CLIENT_OPTIONS, REDIS_CLUSTER_OPTIONS } = await import('../adapters/redis/index.js');
  let client: RedisClient;
  let stopCluster = false;
  const clusterScript = new URL('../scripts/redis-cluster.sh', import.meta.url).pathname;
  const nodeOptions = { ...REDIS_CLIENT_OPTIONS, ...(extra.commandTimeoutMs !== undefined ? { commandTimeout: extra.commandTimeoutMs || undefined } : {}) };
  if (kind === 'redis') {
    client = new Redis(redisUrl, { ...nodeOptions, enableAutoPipelining: autoPipeline });
  } else {
    let seeds: Array<{ host: string; port: number }>;
    if (extra.clusterSeeds) {
      seeds = parseSeeds(extra.clusterSeeds);
    } else {
      let ports: string;
      try {
        ports = execFileSync('bash', [clusterScript, 'status'], { encoding: 'utf8' });
      } catch {
        ports = execFileSync('bash', [clusterScript, 'start'], { encoding: 'utf8' });
        stopCluster = true;
      }
      seeds = ports.trim().split(/\s+/).filter(Boolean).map((p) => ({ host: '127.0.0.1', port: Number(p) }));
    }
    client = new Cluster(seeds, { ...REDIS_CLUSTER_OPTIONS, redisOptions: nodeOptions, enableAutoPipelining: autoPipeline });
  }
  client.on('error', () => undefined);
  await waitReady(client);
  const c = client;
  return {
    kind,
    client: c,
    async open() {
      const prefix = extra.prefix ?? `tidemark-bench:${runId()}:`;
      return { store: new RedisSlotStore({ redis: c, prefix, ...(extra.cacheSessions !== undefined ? { cacheSessions: extra.cacheSessions } : {}) }), prefix };
    },
    async bytesOf(store, sessions) {
      const rs = store as RedisSlotStore;
      const each = await Promise.all(
        sessions.map((s) => {
          const keys = rs.sessionKeys(TENANT, s).all;
          return c.eval(MEMORY_OF_KEYS, keys.length, ...keys);
        }),
      );
      const total = each.reduce<number>((a, v) => a + Number(v), 0);
      return { bytes: Math.round(total / Math.max(1, sessions.length)), method: `MEMORY USAGE summed over each session's keys, mean of ${sessions.length} sessions` };
    },
    cleanup: (prefix) => (prefix ? deletePrefix(c, prefix) : Promise.resolve(0)),
    async close() {
      c.disconnect();
      if (stopCluster) execFileSync('bash', [clusterScript, 'stop'], { stdio: 'ignore' });
    },
  };
}

/** `host:port,host:port` -> seed list; a bad entry names itself. */
export function parseSeeds(text: string): Array<{ host: string; port: number }> {
  return text.split(',').map((hp) => {
    const m = /^\[?([^\]]+?)\]?:(\d{1,5})$/.exec(hp.trim());
    if (!m || Number(m[2]) < 1 || Number(m[2]) > 65535) throw new RangeError(`--cluster-seeds expects host:port,host:port,..., got ${JSON.stringify(hp)}`);
    return { host: m[1]!, port: Number(m[2]) };
  });
}

// ------------------------------------------------------------------ one load run

interface RunOptions {
  sessions: number;
  turns: number;
  concurrency: number;
  /** Sessions per simulated user (0 = no user): sessions k·K … k·K + K − 1 belong to user k, so reads search the user's logbook. */
  userSessions: number;
  warmup: number;
  capacity: number;
  progress: boolean;
}

type Outcome = 'commit' | 'error';

/** Drives `sessions` simulated users for `turns` turns each with `concurrency` in flight. */
async function runLoad(backend: Backend, o: RunOptions): Promise<LoadFigures> {
  const { store, prefix } = await backend.open();
  const tm = createTidemark({ store, tenant: TENANT, capacity: o.capacity, hashKey: 'load-bench' });
  const read = histogram();
  const write = histogram();
  const turn = histogram();
  let errors = 0;
  let degraded = 0;
  let outboxQueued = 0;
  const pending = new Map<string, (r: Outcome) => void>();
  const settle = (hash: string | undefined, r: Outcome): void => {
    if (hash === undefined) return;
    const f = pending.get(hash);
    if (f) {
      pending.delete(hash);
      f(r);
    }
  };
  tm.on('commit', (e) => settle(e.sessionHash, 'commit'));
  tm.on('error', (e) => {
    errors++;
    if (e.stage === 'write' || e.stage === 'outbox') settle(e.sessionHash, 'error');
  });
  tm.on('outbox', (e) => {
    if (e.change === 'queued') outboxQueued++;
  });
  tm.on('degraded', (e) => {
    if (e.stage === 'read') degraded++;
  });
  // The wrapped bot: notes the read's duration and streams the scripted reply.
  const wrapped = tm.wrap((input: WrapInput, ctx: WrapContext) => {
    (input.onMemory as (us: number) => void)(ctx.memory.trace.durationUs);
    return words(input.reply as string);
  });

  const oneTurn = async (session: string, hash: string, text: string, reply: string, timed: boolean, user?: string): Promise<void> => {
    const done = new Promise<Outcome>((r) => pending.set(hash, r));
    let readUs = 0;
    const t0 = performance.now();
    try {
      const stream = await wrapped({ session, text, reply, onMemory: (us: number) => (readUs = us), ...(user !== undefined ? { user } : {}) });
      for await (const _chunk of stream) {
        // consumed as a client would
      }
    } catch {
      errors++;
      pending.delete(hash);
      return;
    }
    const t1 = performance.now();
    const outcome = await done;
    const t2 = performance.now();
    if (!timed || outcome !== 'commit') return;
    recordUs(read, readUs);
    recordUs(write, (t2 - t1) * 1000);
    recordUs(turn, (t2 - t0) * 1000);
  };

  const drive = async (names: string[], convo: Script[], turns: number, timed: boolean, tick?: (n: number) => void): Promise<number> => {
    const hashes = names.map((s) => tm.hashSession(TENANT, s));
    const c = Math.min(o.concurrency, names.length);
    let done = 0;
    const t0 = performance.now();
    // Worker w owns sessions w, w + c, ...: one turn at a time per session, rounds interleaved so
    // every session's history grows alongside the others'.
    await Promise.all(
      Array.from({ length: c }, async (_, w) => {
        for (let t = 0; t < turns; t++) {
          for (let i = w; i < names.length; i += c) {
            const sc = convo[i]!;
            const user = o.userSessions > 0 ? `u${Math.floor(i / o.userSessions)}` : undefined;
            await oneTurn(names[i]!, hashes[i]!, sc.user[t % sc.user.length]!, sc.reply[t % sc.reply.length]!, timed, user);
            done++;
            tick?.(done);
          }
        }
      }),
    );
    return (performance.now() - t0) / 1000;
  };

  // Warm the JIT (and the connection) on sessions of their own first (common practice).
  const warmNames = Array.from({ length: Math.max(1, Math.min(o.sessions, 200)) }, (_, i) => `warm-${i}`);
  const warmTurns = Math.max(1, Math.ceil(o.warmup / warmNames.length));
  if (o.warmup > 0) await drive(warmNames, scripts(warmNames.length, warmTurns, 11), warmTurns, false);
  errors = 0;
  degraded = 0;
  outboxQueued = 0;

  const names = Array.from({ length: o.sessions }, (_, i) => `user-${i}`);
  const info0 = backend.client ? await snapshot(backend.client) : [];
  const convo = scripts(o.sessions, o.turns);
  let rss = process.memoryUsage().rss;
  const sampler = setInterval(() => (rss = Math.max(rss, process.memoryUsage().rss)), 200);
  sampler.unref();
  const total = o.sessions * o.turns;
  const bar = o.progress ? progressBar(total, `load ${backend.kind}`) : { tick: () => undefined, done: () => undefined };
  const seconds = await drive(names, convo, o.turns, true, (n) => bar.tick(n));
  bar.done();
  clearInterval(sampler);
  rss = Math.max(rss, process.memoryUsage().rss);
  await tm.flush();
  const redisInfo = backend.client ? deltaOf(info0, await snapshot(backend.client), o.sessions * o.turns) : [];
  const sample = names.filter((_, i) => i % Math.max(1, Math.floor(names.length / 200)) === 0).slice(0, 200);
  const bytes = await backend.bytesOf(store, sample);
  await tm.close();
  await backend.cleanup(prefix);
  return {
    store: backend.kind,
    sessions: o.sessions,
    turns_per_session: o.turns,
    concurrency: Math.min(o.concurrency, o.sessions),
    user_sessions: o.userSessions,
    turns: total,
    seconds: round(seconds, 3),
    turns_per_s: Math.round(total / seconds),
    read_us: lat(read),
    write_us: lat(write),
    turn_us: lat(turn),
    errors,
    degraded_reads: degraded,
    outbox_queued: outboxQueued,
    rss_mb: round(rss / 2 ** 20, 1),
    bytes_per_session: bytes.bytes,
    bytes_method: bytes.method,
    redis_info: redisInfo,
    redis_per_turn: redisInfo.length > 0 ? totalPerTurn(redisInfo) : null,
  };
}

// ------------------------------------------------------------------ idle sessions

interface IdleFigures {
  store: StoreKind;
  idle_sessions: number;
  turns_per_session: number;
  slots_per_session: number;
  create_seconds: number;
  sessions_per_s: number;
  memory_usage_bytes_per_session: number;
  memory_usage_total_mb: number;
  used_memory_delta_mb: number;
  used_memory_delta_bytes_per_session: number;
  /** MEMORY USAGE per session by key (meta, slots, events, arch, alog), mean over the sample. */
  bytes_by_key: Record<string, number>;
  keys_deleted: number;
  used_memory_after_delete_delta_mb: number;
}

async function usedMemory(client: RedisClient): Promise<number> {
  const nodes = (client as { isCluster?: boolean }).isCluster ? (client as import('ioredis').Cluster).nodes('master') : [client as RedisType];
  let sum = 0;
  for (const n of nodes) {
    const info = await n.info('memory');
    sum += Number(/used_memory:(\d+)/.exec(info)?.[1] ?? 0);
  }
  return sum;
}

/**
 * Fills the store with `count` idle sessions and reports their size. Each is a copy of one of 64
 * template sessions that really had `turns` exchanges through tidemark (slots, logbook entries and
 * event stream as the core left them), committed through the store with many commits in flight
 * (ioredis pipelines them on its connection). Afterwards every key is deleted.
 */
async function idleRun(backend: Backend, count: number, turns: number, capacity: number, progress: boolean, inFlight: number): Promise<IdleFigures> {
  if (!backend.client) throw new Error('--idle needs --store redis or --store cluster');
  // Templates: real conversations on the in-process store.
  const tmpl = new InProcessStore();
  const tt = createTidemark({ store: tmpl, tenant: TENANT, capacity });
  const convo = scripts(64, turns, 23);
  for (let i = 0; i < 64; i++) {
    for (let t = 0; t < turns; t++) {
      await tt.write([
        { session: `t${i}`, text: convo[i]!.user[t]! },
        { session: `t${i}`, text: convo[i]!.reply[t]!, role: 'assistant' },
      ]);
    }
  }
  const reqs: CommitRequest[] = [];
  let slots = 0;
  for (let i = 0; i < 64; i++) {
    const ref = { tenant: TENANT, session: `t${i}` };
    const snap = (await tmpl.load(ref))!;
    const ops = [];
    for (let s = 0; s < snap.table.capacity; s++) {
      const rec = snap.table.get(s);
      if (rec) ops.push({ index: s, slot: rec });
    }
    slots += ops.length;
    reqs.push({
      expectedVersion: 0, clock: snap.clock, turns: snap.turns, capacity: snap.table.capacity, dim: DIM, ops,
      logbook: (await tmpl.listLogbook(scopeOf(ref), { limit: 100_000 })).reverse(), events: await tmpl.readEvents(ref, 100_000),
    });
  }
  await tt.close();

  const { store, prefix } = await backend.open();
  const client = backend.client;
  const before = await usedMemory(client);
  const bar = progress ? progressBar(count, 'idle sessions') : { tick: () => undefined, done: () => undefined };
  const t0 = performance.now();
  let next = 0;
  await Promise.all(
    Array.from({ length: inFlight }, async () => {
      while (next < count) {
        const i = next++;
        const r = reqs[i % reqs.length]!;
        // A new request object per session: the store keys its commit id by request.
        const res = await store.commit({ tenant: TENANT, session: `idle-${i}` }, { ...r });
        if (!res.ok) throw new Error(`idle session ${i}: unexpected conflict`);
        bar.tick(i + 1);
      }
    }),
  );
  const seconds = (performance.now() - t0) / 1000;
  bar.done();
  const after = await usedMemory(client);
  const sample = Array.from({ length: Math.min(1000, count) }, (_, n) => `idle-${Math.floor((n * count) / Math.min(1000, count))}`);
  const bytes = await backend.bytesOf(store, sample);
  const byKey: Record<string, number> = {};
  for (const part of ['meta', 'slots', 'events', 'arch', 'alog'] as const) {
    const each = await Promise.all(sample.map((s) => client.eval(MEMORY_OF_KEYS, 1, (store as RedisSlotStore).sessionKeys(TENANT, s)[part])));
    byKey[part] = Math.round(each.reduce<number>((a, v) => a + Number(v ?? 0), 0) / sample.length);
  }
  await store.close();
  const deleted = await backend.cleanup(prefix);
  const afterDelete = await usedMemory(client);
  return {
    store: backend.kind,
    idle_sessions: count,
    turns_per_session: turns,
    slots_per_session: round(slots / 64, 1),
    create_seconds: round(seconds, 2),
    sessions_per_s: Math.round(count / seconds),
    memory_usage_bytes_per_session: bytes.bytes,
    memory_usage_total_mb: round((bytes.bytes * count) / 2 ** 20, 1),
    bytes_by_key: byKey,
    used_memory_delta_mb: round((after - before) / 2 ** 20, 1),
    used_memory_delta_bytes_per_session: Math.round((after - before) / count),
    keys_deleted: deleted,
    used_memory_after_delete_delta_mb: round((afterDelete - before) / 2 ** 20, 1),
  };
}

// ------------------------------------------------------------------ main

const median = (xs: readonly number[]): number => percentile(xs, 50);

function medianLat(xs: readonly Lat[]): Lat {
  return { p50: median(xs.map((x) => x.p50)), p95: median(xs.map((x) => x.p95)), p99: median(xs.map((x) => x.p99)), max: median(xs.map((x) => x.max)) };
}

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  const num = (name: string, def: number, min = 1): number => {
    const raw = args.values.get(name);
    const v = raw === undefined ? def : Number(raw);
    if (!Number.isInteger(v) || v < min) throw new RangeError(`--${name} must be an integer >= ${min}, got ${raw}`);
    return v;
  };
  const kind = (args.values.get('store') ?? 'memory') as StoreKind;
  if (!['memory', 'redis', 'cluster'].includes(kind)) throw new RangeError(`--store must be memory, redis or cluster, got ${kind}`);
  if (args.values.has('rate')) {
    const { loadAtRate } = await import('./lib/load-rate.js');
    return loadAtRate(argv, args, num);
  }
  const json = args.flags.has('json');
  // --own-redis: a redis-server of the run's own on a free port, so its INFO deltas are the run's alone.
  const own = args.flags.has('own-redis') && !args.values.has('rate') ? await (await import('./soak.js')).throwawayRedis() : undefined;
  const redisUrl = own?.url ?? args.values.get('redis') ?? process.env.REDIS_URL ?? 'redis://127.0.0.1:6379';
  const capacity = num('capacity', 64);
  const progress = process.stderr.isTTY === true && !json;
  const autoPipeline = args.flags.has('auto-pipeline');
  const extra: BackendOptions = {};
  if (args.values.has('cache-sessions')) extra.cacheSessions = num('cache-sessions', 1000, 0);
  if (args.values.has('cluster-seeds')) extra.clusterSeeds = args.values.get('cluster-seeds')!;
  // Filling idle sessions is not an outage: commands wait as long as Redis needs unless told otherwise.
  if (args.values.has('command-timeout') || args.values.has('idle')) extra.commandTimeoutMs = num('command-timeout', 0, 0);
  const backend = await openBackend(kind, redisUrl, autoPipeline, extra);
  try {
    if (args.values.has('idle')) {
      const f = await idleRun(backend, num('idle', 100_000), num('idle-turns', 10), capacity, progress, num('in-flight', 64));
      console.log(`idle sessions on ${kind}: ${f.idle_sessions} sessions of ${f.turns_per_session} exchanges (${f.slots_per_session} slots each on average)`);
      console.log(asciiTable(['figure', 'value'], [
        ['created in (s)', f.create_seconds],
        ['sessions/s (pipelined commits)', f.sessions_per_s],
        ['MEMORY USAGE per session (B)', f.memory_usage_bytes_per_session],
        ['MEMORY USAGE x sessions (MB)', f.memory_usage_total_mb],
        ['  of which per key (B)', Object.entries(f.bytes_by_key).map(([k, v]) => `${k} ${v}`).join(', ')],
        ['INFO used_memory delta (MB)', f.used_memory_delta_mb],
        ['used_memory delta per session (B)', f.used_memory_delta_bytes_per_session],
        ['keys deleted afterwards', f.keys_deleted],
        ['used_memory delta after delete (MB)', f.used_memory_after_delete_delta_mb],
      ]));
      const svg = barChart({
        title: `${f.idle_sessions} idle sessions on ${kind}: bytes per session`, yLabel: 'bytes per session',
        groups: ['MEMORY USAGE', 'used_memory delta'], series: [{ name: kind, values: [f.memory_usage_bytes_per_session, f.used_memory_delta_bytes_per_session] }],
      });
      const out = { ...f, machine: machine() };
      const paths = writeResult(`load-idle-${kind}`, out, svg, ['load', ...argv]);
      console.log(`wrote ${paths.json} and ${paths.svg}`);
      if (json) console.log(JSON.stringify(out));
      return;
    }
    const o: RunOptions = {
      sessions: num('sessions', 1000),
      turns: num('turns', 20),
      concurrency: num('concurrency', 64),
      userSessions: num('user-sessions', 0, 0),
      warmup: num('warmup', 2000, 0),
      capacity,
      progress,
    };
    const repeat = num('repeat', 1);
    const runs: LoadFigures[] = [];
    for (let r = 0; r < repeat; r++) runs.push(await runLoad(backend, o));
    const f: LoadFigures = {
      ...runs[0]!,
      seconds: median(runs.map((x) => x.seconds)),
      turns_per_s: median(runs.map((x) => x.turns_per_s)),
      read_us: medianLat(runs.map((x) => x.read_us)),
      write_us: medianLat(runs.map((x) => x.write_us)),
      turn_us: medianLat(runs.map((x) => x.turn_us)),
      errors: runs.reduce((a, x) => a + x.errors, 0),
      degraded_reads: runs.reduce((a, x) => a + x.degraded_reads, 0),
      outbox_queued: runs.reduce((a, x) => a + x.outbox_queued, 0),
      rss_mb: Math.max(...runs.map((x) => x.rss_mb)),
      bytes_per_session: median(runs.map((x) => x.bytes_per_session)),
      redis_per_turn: runs[0]!.redis_per_turn ? {
        commands: median(runs.map((x) => x.redis_per_turn!.commands)), cpu_us: median(runs.map((x) => x.redis_per_turn!.cpu_us)),
        net_in_bytes: median(runs.map((x) => x.redis_per_turn!.net_in_bytes)), net_out_bytes: median(runs.map((x) => x.redis_per_turn!.net_out_bytes)),
      } : null,
    };
    console.log(`load on ${kind}: ${f.sessions} sessions x ${f.turns_per_session} turns, concurrency ${f.concurrency}${f.user_sessions ? `, ${f.user_sessions} sessions per user` : ''}, capacity ${capacity}${repeat > 1 ? `, median of ${repeat} runs` : ''}`);
    console.log(asciiTable(['µs', 'p50', 'p95', 'p99', 'max'], [
      ['read', f.read_us.p50, f.read_us.p95, f.read_us.p99, f.read_us.max],
      ['write', f.write_us.p50, f.write_us.p95, f.write_us.p99, f.write_us.max],
      ['turn', f.turn_us.p50, f.turn_us.p95, f.turn_us.p99, f.turn_us.max],
    ]));
    console.log(`turns/s ${f.turns_per_s}${repeat > 1 ? ` (runs: ${runs.map((x) => x.turns_per_s).join(', ')})` : ''}; errors ${f.errors}; degraded reads ${f.degraded_reads}; outbox queued ${f.outbox_queued}`);
    console.log(`peak RSS ${f.rss_mb} MB; ${f.bytes_per_session} bytes per session in the store (${f.bytes_method})`);
    if (f.redis_info.length > 0) console.log(describeDeltas(f.redis_info));
    const svg = barChart({
      title: `load on ${kind}: ${f.turns_per_s} turns/s at concurrency ${f.concurrency}`, yLabel: 'latency (µs, log scale)', logY: true,
      groups: ['read', 'write', 'turn'],
      series: (['p50', 'p95', 'p99'] as const).map((p) => ({ name: p, values: [f.read_us[p], f.write_us[p], f.turn_us[p]] })),
    });
    const out = { ...f, auto_pipeline: autoPipeline, runs: runs.map((x) => ({ turns_per_s: x.turns_per_s, turn_us_p50: x.turn_us.p50, turn_us_p99: x.turn_us.p99, ...(x.redis_per_turn ?? {}) })), load: loadAverage(), machine: machine() };
    const versions = backend.client ? await redisVersions(backend.client) : [];
    const paths = writeResult(`load-${kind}${autoPipeline ? '-autopipeline' : ''}`, out, svg, ['load', ...argv], { redis: versions });
    console.log(`wrote ${paths.json} and ${paths.svg}`);
    if (json) console.log(JSON.stringify(out));
  } finally {
    await backend.close();
    await own?.stop();
  }
}

/** The 1-minute load average when the run ended: other work on the machine skews figures. */
export const loadAverage = (): number => round(loadavg()[0] ?? NaN);
