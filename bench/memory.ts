// `npm run bench -- memory [--lengths 10,200,1000,2000,5000] [--sessions 4] [--long-sessions 1] [--store redis|cluster] [--json]`:
// Redis bytes per session by conversation length and by tier. Each session gets its exchanges (a user
// message and the bot's reply) through tidemark's own write path on the Redis store, then MEMORY USAGE
// is read per key: meta, slots (working memory), events, and the logbook (every turn kept, plus
// demoted values, in blocks of entries; logs written before blocks keep a hash of payloads and an
// arrival log, counted here too). Redis holds no logbook index: each process builds its own from the
// blocks. The logbook is set beside the raw UTF-8 bytes of the turns it keeps, twice: right after the
// writes ("active": each session's tail block still open) and at rest, after the seal a store runs once a
// session pauses (sealIdleMs; run here at once with sealIdle). Its record bytes are split by kind (turns;
// demoted slot values, which carry their key vectors) and by part (text, vectors, metadata, block headers,
// what compression saved, Redis's overhead). Commands never time out here (a 5,000-exchange
// session is a long run, not an outage), and every key is deleted afterwards, on error or Ctrl-C too.

import { createTidemark } from '../src/middleware/tidemark.js';
import type { RedisSlotStore } from '../adapters/redis/index.js';
import { BLOCK_MARK, SEALED_MARK, decodeRecord, encodeRecord, splitBlock } from '../adapters/redis/codec.js';
import { turnEntryId } from '../src/middleware/write.js';
import { loadAverage, openBackend, scripts, type StoreKind } from './load.js';
import { deltaOf, describeDeltas, redisVersions, snapshot, totalPerTurn, type InfoDelta } from './lib/redis-info.js';
import { asciiTable, lineChart, writeResult } from './lib/results.js';
import { parseArgs, percentile, round } from './lib/stats.js';

/** Per key, mean bytes per session (MEMORY USAGE, SAMPLES 0 = every element). */
export interface MemoryPoint {
  exchanges: number;
  sessions: number;
  messages_kept: number;
  raw_text_bytes: number;
  bytes: { meta: number; slots: number; events: number; logbook_entries: number; logbook_index: number; total: number };
  /** (logbook entries + index) / raw UTF-8 bytes of the turns kept; the target is ≤ 1.5. */
  logbook_ratio: number;
  /** The same right after the writes, before the idle seal compresses each session's open tail block. */
  logbook_ratio_active: number;
  /** Record bytes in the blocks by kind, per session: turns, and demoted slot values (with their vectors). */
  records: { turns: number; turn_bytes: number; demoted: number; demoted_bytes: number };
  seconds: number;
  /** Where the logbook's bytes go, per session at rest. */
  breakdown: Breakdown;
}

/**
 * Per session, summed over its logbook lists. Records as written (before compression): `text` (value,
 * key text and speaker, UTF-8), `vector` (a record's encoded key), `metadata` (the rest: length, time,
 * check, flags, seq, string lengths, dates). Elements: `headers` (a block's mark, counts, base time and,
 * sealed, its records' times), `saved` (record bytes deflate took out of sealed blocks). `overhead`:
 * what Redis adds to the element bytes (key, list and node structures, allocator rounding).
 */
export interface Breakdown {
  records: number;
  blocks: number;
  sealed_blocks: number;
  text: number;
  vector: number;
  metadata: number;
  headers: number;
  saved: number;
  overhead: number;
}

const MEMORY_OF = `local s = 0
for i = 1, #KEYS do
  local m = redis.call('MEMORY', 'USAGE', KEYS[i], 'SAMPLES', '0')
  if m then s = s + m end
end
return s`;

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  const kind = (args.values.get('store') ?? 'redis') as StoreKind;
  if (kind !== 'redis' && kind !== 'cluster') throw new RangeError(`--store must be redis or cluster, got ${kind}`);
  const lengths = (args.values.get('lengths') ?? '10,200,1000,2000,5000').split(',').map(Number);
  if (lengths.some((n) => !Number.isInteger(n) || n < 1)) throw new RangeError(`--lengths must be positive integers, got ${args.values.get('lengths')}`);
  const sessions = Number(args.values.get('sessions') ?? 4);
  const longSessions = Number(args.values.get('long-sessions') ?? 1);
  const longFrom = Number(args.values.get('long-from') ?? 2000);
  const capacity = Number(args.values.get('capacity') ?? 64);
  const json = args.flags.has('json');
  const redisUrl = args.values.get('redis') ?? process.env.REDIS_URL ?? 'redis://127.0.0.1:6379';
  const backend = await openBackend(kind, redisUrl, false, {
    commandTimeoutMs: 0,
    ...(args.values.has('cluster-seeds') ? { clusterSeeds: args.values.get('cluster-seeds')! } : {}),
  });
  const client = backend.client!;
  const prefixes: string[] = [];
  const used: string[] = [];
  let cleaned = 0;
  const cleanup = async (): Promise<void> => {
    for (const p of prefixes.splice(0)) cleaned += await backend.cleanup(p);
  };
  const onSignal = (): void => {
    void cleanup().finally(() => process.exit(130));
  };
  process.once('SIGINT', onSignal);
  process.once('SIGTERM', onSignal);
  const points: MemoryPoint[] = [];
  let leftover = -1;
  const info0 = await snapshot(client);
  let info: InfoDelta[] = [];
  try {
    for (const n of lengths) {
      const count = n >= longFrom ? longSessions : sessions;
      const { store, prefix } = await backend.open();
      prefixes.push(prefix!);
      used.push(prefix!);
      const tm = createTidemark({ store, tenant: 'bench', capacity, hashKey: 'memory-bench' });
      const convo = scripts(count, n, 31);
      let raw = 0;
      const t0 = performance.now();
      await Promise.all(
        convo.map(async (sc, i) => {
          for (let t = 0; t < n; t++) {
            const user = sc.user[t % sc.user.length]!;
            const reply = sc.reply[t % sc.reply.length]!;
            raw += Buffer.byteLength(user) + Buffer.byteLength(reply);
            await tm.write([{ session: `m${i}`, text: user }, { session: `m${i}`, text: reply, role: 'assistant' }]);
          }
        }),
      );
      await tm.flush();
      const rs = store as RedisSlotStore;
      await rs.settled();
      const seconds = (performance.now() - t0) / 1000;
      // Measured twice: right after the writes (each session's tail block still open) and at rest,
      // after the idle seal the store runs once a session pauses (sealIdleMs; here at once).
      const active = await measure(client, rs, count);
      await rs.sealIdle();
      const rest = await measure(client, rs, count);
      await tm.close();
      const per = (x: number): number => Math.round(x / count);
      const { sum, kept, recs, parts } = rest;
      const bytes = { meta: per(sum.meta), slots: per(sum.slots), events: per(sum.events), logbook_entries: per(sum.logbook_entries), logbook_index: per(sum.logbook_index), total: 0 };
      bytes.total = bytes.meta + bytes.slots + bytes.events + bytes.logbook_entries + bytes.logbook_index;
      const ratio = (logbook: number): number => round(logbook / Math.max(1, per(raw)), 2);
      points.push({
        exchanges: n, sessions: count, messages_kept: per(kept), raw_text_bytes: per(raw), bytes,
        logbook_ratio: ratio(bytes.logbook_entries + bytes.logbook_index),
        logbook_ratio_active: ratio(per(active.sum.logbook_entries + active.sum.logbook_index)),
        seconds: round(seconds, 1),
        records: { turns: per(recs.turns), turn_bytes: per(recs.turn_bytes), demoted: per(recs.demoted), demoted_bytes: per(recs.demoted_bytes) },
        breakdown: Object.fromEntries(Object.entries(parts).map(([key, v]) => [key, per(v)])) as unknown as Breakdown,
      });
      await cleanup();
      if (!json) console.error(`  ${n} exchanges x ${count} sessions: ${round(bytes.total / 1024, 1)} KB per session (${round(seconds, 1)} s)`);
    }
  } finally {
    process.off('SIGINT', onSignal);
    process.off('SIGTERM', onSignal);
    await cleanup();
    // What is left under the run's prefixes (must be 0).
    leftover = 0;
    for (const p of used) leftover += await countPrefix(client, p);
  }
  // Over the whole sweep, per exchange written (writes only: this run never reads).
  info = deltaOf(info0, await snapshot(client), points.reduce((a, p) => a + p.exchanges * p.sessions, 0));
  const versions = await redisVersions(client);
  await backend.close();

  console.log(`Redis bytes per session by length (${kind}, ${capacity} slots; MEMORY USAGE per key, mean over the sessions of each point; an exchange = a user message + the reply)`);
  console.log(asciiTable(
    ['exchanges', 'sessions', 'kept', 'raw text B', 'meta', 'slots', 'events', 'logbook', 'total KB', 'logbook / raw', 'active', 'turn records B', 'demoted (n)', 'demoted records B'],
    points.map((p) => [p.exchanges, p.sessions, p.messages_kept, p.raw_text_bytes, p.bytes.meta, p.bytes.slots, p.bytes.events, p.bytes.logbook_entries + p.bytes.logbook_index, round(p.bytes.total / 1024, 1), p.logbook_ratio, p.logbook_ratio_active, p.records.turn_bytes, p.records.demoted, p.records.demoted_bytes]),
  ));
  console.log('Logbook bytes per session at rest, by part (records as written, then what blocks and Redis add or take out; logbook = text + vector + metadata + headers - saved + overhead)');
  console.log(asciiTable(
    ['exchanges', 'records', 'blocks', 'sealed', 'text', 'vector', 'metadata', 'headers', 'saved', 'overhead', 'logbook'],
    points.map((p) => {
      const b = p.breakdown;
      return [p.exchanges, b.records, b.blocks, b.sealed_blocks, b.text, b.vector, b.metadata, b.headers, -b.saved, b.overhead, p.bytes.logbook_entries + p.bytes.logbook_index];
    }),
  ));
  const mean = percentile(points.map((p) => p.raw_text_bytes / Math.max(1, p.messages_kept)), 50);
  console.log(`keys deleted afterwards: ${cleaned}, keys left: ${leftover}; mean text per kept message ≈ ${round(mean, 1)} B; target logbook / raw ≤ 1.5 at rest (logbook = its blocks in Redis; the search index is built in each process; active = before the idle seal)`);
  console.log(describeDeltas(info));
  const out = { store: kind, capacity, points, keys_deleted: cleaned, keys_left: leftover, redis_info: info, redis_per_write: totalPerTurn(info), load: loadAverage() };
  const xs = points.map((p) => p.exchanges);
  const svg = lineChart({
    title: `Redis bytes per session by length (${kind})`, xLabel: 'exchanges per session', yLabel: 'bytes per session', logX: true, logY: true,
    series: (['slots', 'events', 'logbook_entries', 'logbook_index', 'total'] as const).map((k) => ({ name: k.replace('_', ' '), x: xs, y: points.map((p) => Math.max(1, p.bytes[k])) })),
  });
  const paths = writeResult(`memory-${kind}`, out, svg, ['memory', ...argv], { redis: versions });
  console.log(`wrote ${paths.json} and ${paths.svg}`);
  if (json) console.log(JSON.stringify(out));
}

type Client = NonNullable<Awaited<ReturnType<typeof openBackend>>['client']>;

/** MEMORY USAGE by tier summed over the sessions m0..m(count-1), the entries kept, and the logbook by kind and part. */
async function measure(client: Client, rs: RedisSlotStore, count: number) {
  const sum = { meta: 0, slots: 0, events: 0, logbook_entries: 0, logbook_index: 0 };
  const recs = { turns: 0, turn_bytes: 0, demoted: 0, demoted_bytes: 0 };
  const parts: Breakdown = { records: 0, blocks: 0, sealed_blocks: 0, text: 0, vector: 0, metadata: 0, headers: 0, saved: 0, overhead: 0 };
  let kept = 0;
  const usage = async (...keys: string[]): Promise<number> => Number(await client.eval(MEMORY_OF, keys.length, ...keys));
  for (let i = 0; i < count; i++) {
    const home = { tenant: 'bench', session: `m${i}` };
    const k = rs.sessionKeys('bench', `m${i}`);
    sum.meta += await usage(k.meta);
    sum.slots += await usage(k.slots);
    sum.events += await usage(k.events);
    // Blocks, and the payload hashes and arrival logs of logs written before blocks.
    const logbook = await usage(k.alog, k.ualog, k.arch, k.uarch);
    sum.logbook_entries += logbook;
    const [an, aun] = await client.hmget(k.meta, 'an', 'aun');
    kept += (an !== null ? Number(an) : await client.hlen(k.arch)) + (aun !== null ? Number(aun) : await client.hlen(k.uarch));
    let elements = 0;
    for (const log of [k.alog, k.ualog]) {
      for (const el of await client.lrangeBuffer(log, 0, -1)) {
        elements += el.length;
        if (el[0] !== BLOCK_MARK && el[0] !== SEALED_MARK) continue;
        const { records } = splitBlock(el, 'block');
        const recordBytes = records.reduce((a, r) => a + r.raw.length, 0);
        parts.blocks++;
        if (el[0] === SEALED_MARK) {
          parts.sealed_blocks++;
          const times = records.reduce((a, r) => a + (r.raw.length - r.body.length - lengthPrefix(r.raw)), 0);
          const header = el.indexOf(0x3a) + 1 + times;
          parts.headers += header;
          parts.saved += recordBytes - (el.length - header);
        } else parts.headers += el.indexOf(0x3a) + 1;
        for (const r of records) {
          const e = decodeRecord(r.body, r.at, 'record', home, turnEntryId);
          const text = Buffer.byteLength(e.value) + Buffer.byteLength(e.keyText) + Buffer.byteLength(e.speaker ?? '');
          const vector = e.key ? r.body.length - encodeRecord({ ...e, key: undefined }, e.user, 'int8', home, turnEntryId).body.length : 0;
          parts.records++;
          parts.text += text;
          parts.vector += vector;
          parts.metadata += r.raw.length - text - vector;
          if (e.kind === 'turn') {
            recs.turns++;
            recs.turn_bytes += r.raw.length;
          } else {
            recs.demoted++;
            recs.demoted_bytes += r.raw.length;
          }
        }
      }
    }
    parts.overhead += logbook - elements;
  }
  return { sum, kept, recs, parts };
}

/** Bytes of a record's leading varint(length). */
function lengthPrefix(raw: Buffer): number {
  let i = 0;
  while (raw[i]! & 0x80) i++;
  return i + 1;
}

async function countPrefix(client: Client, prefix: string): Promise<number> {
  const nodes = client.isCluster ? (client as import('ioredis').Cluster).nodes('master') : [client as import('ioredis').Redis];
  let n = 0;
  for (const node of nodes) {
    let cursor = '0';
    do {
      const [next, keys] = await node.scan(cursor, 'MATCH', `${prefix}*`, 'COUNT', 1000);
      cursor = next;
      n += keys.length;
    } while (cursor !== '0');
  }
  return n;
}
