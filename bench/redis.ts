// Redis store benchmark: bot turns (read + write through createTidemark) at concurrency 64 on sessions
// of 64 slots x 384 dims with the built-in embedder, on a single Redis and on a local 3-master Cluster,
// beside the raw ioredis ceiling: the same round trips with the same payload sizes, in the same run.
//   npm run bench -- redis [--json] [--turns N] [--no-cluster] [--cluster]
// REDIS_URL picks the single server (default redis://127.0.0.1:6379).

import { execFileSync } from 'node:child_process';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Cluster, Redis } from 'ioredis';
import { REDIS_CLIENT_OPTIONS, REDIS_CLUSTER_OPTIONS, RedisSlotStore, redisSlotStore } from '../adapters/redis/index.js';
import { encodeRecord, encodeSlot } from '../adapters/redis/codec.js';
import { turnEntryId } from '../src/middleware/write.js';
import { createTidemark } from '../src/index.js';
import type { Store } from '../src/store/store.js';
import { barChart, writeResult } from './lib/results.js';

const CONCURRENCY = 64;
const CAPACITY = 64;
const root = join(dirname(fileURLToPath(import.meta.url)), '..');

interface Figures {
  turns_per_s: number;
  read_ms_p50: number;
  read_ms_p99: number;
  commit_ms_p50: number;
  commit_ms_p99: number;
  bytes_per_session: number | null;
  [extra: string]: unknown;
}

const pct = (xs: number[], p: number): number => {
  if (xs.length === 0) return NaN;
  const s = xs.slice().sort((a, b) => a - b);
  return s[Math.min(s.length - 1, Math.floor((p / 100) * s.length))]!;
};
const r3 = (x: number): number => Math.round(x * 1000) / 1000;

// Invented words so every fact has its own topic (no overwrites): consonant-vowel syllables from a seeded PRNG.
function words(seed: number): () => string {
  let a = seed >>> 0;
  const rnd = (): number => {
    a = (a + 0x6d2b79f5) >>> 0; // mulberry32, common practice for seeded benchmarks
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  const c = 'bdfgklmnprstvz';
  const v = 'aeiou';
  return () => Array.from({ length: 3 }, () => c[Math.floor(rnd() * c.length)]! + v[Math.floor(rnd() * v.length)]!).join('');
}

/** Wraps a store to time load/commit/search and size commit payloads, without changing behaviour. */
class TimedStore {
  loads: number[] = [];
  commits: number[] = [];
  searches = 0;
  commitBytes = 0;
  sized = 0;
  constructor(readonly inner: RedisSlotStore) {}
  store(): Store {
    const s = this.inner;
    const self = this;
    return new Proxy(s, {
      get(target, prop, recv) {
        if (prop === 'load') {
          return async (ref: Parameters<Store['load']>[0]) => {
            const t0 = performance.now();
            try { return await target.load(ref); } finally { self.loads.push(performance.now() - t0); }
          };
        }
        if (prop === 'commit') {
          return async (ref: Parameters<Store['commit']>[0], req: Parameters<Store['commit']>[1]) => {
            // Sizing re-encodes the payloads, so only the first 200 timed commits are sized.
            if (self.sized < 200) {
              self.sized++;
              for (const op of req.ops) self.commitBytes += op.slot ? encodeSlot(op.slot, 'int8').payload.length : 1;
              for (const it of req.logbook) self.commitBytes += encodeRecord(it, ref.user, 'int8', ref, turnEntryId).body.length;
            }
            const t0 = performance.now();
            try { return await target.commit(ref, req); } finally { self.commits.push(performance.now() - t0); }
          };
        }
        if (prop === 'searchLogbook') {
          return (...args: Parameters<Store['searchLogbook']>) => {
            self.searches++;
            return target.searchLogbook(...args);
          };
        }
        const v = Reflect.get(target, prop, recv);
        return typeof v === 'function' ? v.bind(target) : v;
      },
    }) as Store;
  }
}

async function sessionBytes(client: Redis | Cluster, store: RedisSlotStore, tenant: string, session: string): Promise<{ working: number; total: number }> {
  const k = store.sessionKeys(tenant, session);
  let working = 0;
  let total = 0;
  for (const key of k.all) {
    const b = Number((await client.memory('USAGE', key, 'SAMPLES', 0)) ?? 0);
    total += b;
    if (key === k.meta || key === k.slots) working += b;
  }
  return { working, total };
}

async function phase(name: string, client: Redis | Cluster, turnsPerSession: number, concurrency = CONCURRENCY): Promise<Figures & { shape: { loads: number; commits: number; searches: number; commitBytes: number } }> {
  const prefix = `tidemark-bench:${name}-${process.pid}-${Date.now().toString(36)}:`;
  const inner = redisSlotStore({ redis: client, prefix, idleTtlSeconds: 3600 });
  const timed = new TimedStore(inner);
  const tm = createTidemark({ store: timed.store(), tenant: 'bench', capacity: CAPACITY });
  let outboxQueued = 0;
  tm.on('outbox', (e) => {
    if (e.change === 'queued') outboxQueued++;
  });
  const next = words(7);
  const sessions = Array.from({ length: concurrency }, (_, i) => `shop-${i}`);
  // Fill every session to capacity first (not timed).
  await Promise.all(sessions.map((session) => tm.write(Array.from({ length: CAPACITY }, () => ({ session, text: `My ${next()} is ${next()}.` })))));
  timed.loads = [];
  timed.commits = [];
  timed.searches = 0;
  timed.commitBytes = 0;
  timed.sized = 0;
  const reads: number[] = [];
  const t0 = performance.now();
  await Promise.all(sessions.map(async (session) => {
    for (let t = 0; t < turnsPerSession; t++) {
      const text = `My ${next()} is ${next()}.`;
      const r0 = performance.now();
      await tm.read({ session, text });
      reads.push(performance.now() - r0);
      await tm.write({ session, text });
    }
  }));
  const elapsed = (performance.now() - t0) / 1000;
  const turns = concurrency * turnsPerSession;
  let working = 0;
  let total = 0;
  const sample = sessions.slice(0, 8);
  for (const s of sample) {
    const b = await sessionBytes(client, inner, 'bench', s);
    working += b.working / sample.length;
    total += b.total / sample.length;
  }
  const shape = { loads: timed.loads.length / turns, commits: timed.commits.length / turns, searches: timed.searches / turns, commitBytes: timed.commitBytes / Math.max(1, timed.sized) };
  // Flush first: a commit that timed out under load waits in the outbox and would land after an erase.
  const outboxed = outboxQueued;
  await tm.flush({ timeoutMs: 30_000 });
  for (const s of sessions) await inner.erase({ tenant: 'bench', session: s });
  await tm.close();
  return {
    turns_per_s: Math.round(turns / elapsed),
    read_ms_p50: r3(pct(reads, 50)),
    read_ms_p99: r3(pct(reads, 99)),
    commit_ms_p50: r3(pct(timed.commits, 50)),
    commit_ms_p99: r3(pct(timed.commits, 99)),
    bytes_per_session: Math.round(working),
    bytes_per_session_with_events_and_logbook: Math.round(total),
    store_load_ms_p50: r3(pct(timed.loads, 50)),
    store_load_ms_p99: r3(pct(timed.loads, 99)),
    turns,
    writes_sent_to_outbox: outboxed,
    shape,
  };
}

/** Raw ioredis doing what a turn costs the store: the same count of round trips, same payload sizes. */
async function ceiling(client: Redis, turnsPerSession: number, shape: { loads: number; commits: number; searches: number; commitBytes: number }, logbookItemBytes: number): Promise<Figures> {
  const prefix = `tidemark-bench:ceiling-${process.pid}-${Date.now().toString(36)}:`;
  const commitPayload = Buffer.alloc(Math.round(shape.commitBytes), 7);
  const small = Buffer.alloc(24, 1); // an unchanged-session reply: version + epoch
  const item = Buffer.alloc(logbookItemBytes, 3);
  const reads: number[] = [];
  const commits: number[] = [];
  await Promise.all(Array.from({ length: CONCURRENCY }, async (_, i) => {
    await client.set(`${prefix}{s${i}}:v`, small);
    await client.set(`${prefix}{s${i}}:a`, item);
  }));
  const t0 = performance.now();
  await Promise.all(Array.from({ length: CONCURRENCY }, async (_, i) => {
    // A turn's read is one load plus its logbook searches; its write is the remaining loads plus the commit.
    const L = Math.round(shape.loads);
    const S = Math.round(shape.searches);
    const C = Math.round(shape.commits);
    for (let t = 0; t < turnsPerSession; t++) {
      const r0 = performance.now();
      if (L > 0) await client.getBuffer(`${prefix}{s${i}}:v`);
      for (let n = 0; n < S; n++) await client.getBuffer(`${prefix}{s${i}}:a`);
      reads.push(performance.now() - r0);
      for (let n = 1; n < L; n++) await client.getBuffer(`${prefix}{s${i}}:v`);
      for (let n = 0; n < C; n++) {
        const c0 = performance.now();
        await client.set(`${prefix}{s${i}}:c`, commitPayload);
        commits.push(performance.now() - c0);
      }
    }
  }));
  const elapsed = (performance.now() - t0) / 1000;
  for (let i = 0; i < CONCURRENCY; i++) await client.del(`${prefix}{s${i}}:v`, `${prefix}{s${i}}:a`, `${prefix}{s${i}}:c`);
  return {
    turns_per_s: Math.round((CONCURRENCY * turnsPerSession) / elapsed),
    read_ms_p50: r3(pct(reads, 50)),
    read_ms_p99: r3(pct(reads, 99)),
    commit_ms_p50: r3(pct(commits, 50)),
    commit_ms_p99: r3(pct(commits, 99)),
    bytes_per_session: null,
    commit_payload_bytes: commitPayload.length,
  };
}

async function coreOnly(turnsPerSession: number): Promise<number> {
  const tm = createTidemark({ tenant: 'bench', capacity: CAPACITY });
  const next = words(7);
  const sessions = Array.from({ length: CONCURRENCY }, (_, i) => `shop-${i}`);
  await Promise.all(sessions.map((session) => tm.write(Array.from({ length: CAPACITY }, () => ({ session, text: `My ${next()} is ${next()}.` })))));
  const t0 = performance.now();
  await Promise.all(sessions.map(async (session) => {
    for (let t = 0; t < turnsPerSession; t++) {
      const text = `My ${next()} is ${next()}.`;
      await tm.read({ session, text });
      await tm.write({ session, text });
    }
  }));
  const rate = Math.round((CONCURRENCY * turnsPerSession) / ((performance.now() - t0) / 1000));
  await tm.close();
  return rate;
}

export default async function main(argv: string[]): Promise<void> {
  const json = argv.includes('--json');
  const turnsArg = argv.indexOf('--turns');
  const turnsPerSession = turnsArg >= 0 ? Number(argv[turnsArg + 1]) : 40;
  const url = process.env.REDIS_URL ?? 'redis://127.0.0.1:6379';
  const log = (s: string): void => {
    if (!json) console.log(s);
    else console.error(s);
  };
  const single = new Redis(url, { ...REDIS_CLIENT_OPTIONS, lazyConnect: true });
  await single.connect(); // with enableOfflineQueue: false nothing may be sent before the connection is ready
  log(`redis bench: ${CONCURRENCY} sessions in flight, ${CAPACITY} slots x 384 dims (hashing embedder), ${turnsPerSession} turns each, ${url}`);
  const one = await phase('single', single, turnsPerSession);
  log(`single: ${JSON.stringify(one)}`);
  const item = encodeRecord({
    id: 'r0123456789ab', kind: 'capacity', tenant: 'bench', session: 'shop-0', key: new Float32Array(384).fill(1 / Math.sqrt(384)), keyText: 'my zobaki',
    value: 'tevomu', provenance: ['t100'], strength: 0.3, halfLife: 200, clock: 100, seq: 0, createdMs: Date.now(), atMs: Date.now(),
  }, undefined, 'int8', { tenant: 'bench', session: 'shop-0' }, turnEntryId).body.length;
  const ceil = await ceiling(single, turnsPerSession, one.shape, item);
  // Latency without queueing: one session, turns one after another.
  const sequential = await phase('sequential', single, Math.max(50, turnsPerSession * 4), 1);
  log(`sequential (concurrency 1): ${JSON.stringify(sequential)}`);
  // The core alone, on the in-process store, same workload: how much of a turn is not the store.
  const core = await coreOnly(turnsPerSession);
  log(`core on the in-process store: ${core} turns/s`);
  log(`ceiling (raw ioredis, same round trips and payload sizes): ${JSON.stringify(ceil)}`);
  single.disconnect();

  let cluster: Figures | null = null;
  if (!argv.includes('--no-cluster')) {
    const script = join(root, 'scripts', 'redis-cluster.sh');
    let started = false;
    try {
      try {
        execFileSync('bash', [script, 'status'], { stdio: 'ignore' });
      } catch {
        started = true;
      }
      const ports = execFileSync('bash', [script, 'start'], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'ignore'] }).trim().split(/\s+/).map(Number);
      const c = new Cluster(ports.map((port) => ({ host: '127.0.0.1', port })), { ...REDIS_CLUSTER_OPTIONS });
      await new Promise((res, rej) => { c.once('ready', res); c.once('error', rej); });
      cluster = await phase('cluster', c, turnsPerSession);
      log(`cluster (3 local masters): ${JSON.stringify(cluster)}`);
      c.disconnect();
    } catch (err) {
      log(`cluster: skipped (${(err as Error).message})`);
      if (argv.includes('--cluster')) throw err;
    } finally {
      if (started) execFileSync('bash', [script, 'stop'], { stdio: 'ignore' });
    }
  }
  const { shape, ...figures } = one;
  const { shape: _s, ...seq } = sequential;
  const out = {
    ...figures,
    sequential: { read_ms_p50: seq.read_ms_p50, read_ms_p99: seq.read_ms_p99, commit_ms_p50: seq.commit_ms_p50, commit_ms_p99: seq.commit_ms_p99, store_load_ms_p50: seq.store_load_ms_p50, turns_per_s: seq.turns_per_s },
    core_memory_store_turns_per_s: core,
    round_trips_per_turn: { loads: r3(shape.loads), commits: r3(shape.commits), logbook_searches: r3(shape.searches) },
    cluster,
    ceiling: { ...ceil, overhead_ratio: r3(ceil.turns_per_s / one.turns_per_s) },
    targets: { turns_per_s: 10_000, commit_ms_p99: 2, bytes_per_session: 40_960 },
    note: 'loopback Redis 7 on a 2-core machine shared with other work; client, server and embedder share the cores',
  };
  const svg = barChart({
    title: 'Redis store, one session at a time (ms)', yLabel: 'ms', groups: ['read p50', 'read p99', 'commit p50', 'commit p99'],
    series: [{ name: 'sequential', values: [seq.read_ms_p50, seq.read_ms_p99, seq.commit_ms_p50, seq.commit_ms_p99] }],
  });
  const paths = writeResult('redis', out, svg, ['redis', ...argv]);
  if (json) {
    console.error(`wrote ${paths.json}`);
    console.log(JSON.stringify(out));
  } else {
    console.log(JSON.stringify(out, null, 2));
    console.log(`wrote ${paths.json} and ${paths.svg}`);
  }
}
