// The old names of 0.1 keep working for one minor version: each is the new thing under its old
// spelling (the same class, function or constant), and the `secret` option still keys the id hash.

import { createHmac } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { EventEmitter } from 'eventemitter3';
import * as client from 'prom-client';
import { describe, expect, it } from 'vitest';
import { replayCli } from '../cli/replay-cli.js';
import { vectorIndexOptionsOf } from '../src/deprecated-fields.js';
import * as root from '../src/index.js';
import * as redis from '../adapters/redis/index.js';
import * as prometheus from '../src/metrics/prometheus.js';
import type { TidemarkEvents } from '../src/middleware/events.js';
import { TINY_PROBES, TINY_TRANSCRIPT } from './cli/fixtures.js';
import { emitTurn } from './metrics/synthetic.js';

/** The documented hash: HMAC-SHA-256 (node:crypto) of tenant NUL session, first 12 hex chars. */
const hmac = (key: string, tenant: string, session: string): string =>
  createHmac('sha256', key).update(`${tenant}\u0000${session}`).digest('hex').slice(0, 12);

describe('deprecated names of the root entry', () => {
  it('the in-process store under its old names is the same class, factory and defaults', () => {
    expect(root.MemoryStore).toBe(root.InProcessStore);
    expect(root.memoryStore).toBe(root.inProcessStore);
    expect(root.MEMORY_STORE_DEFAULTS).toBe(root.IN_PROCESS_STORE_DEFAULTS);
    expect(root.memoryStore()).toBeInstanceOf(root.InProcessStore);
  });

  it('the vector index under its old names is the same factory and defaults', () => {
    expect(root.createArchive).toBe(root.createVectorIndex);
    expect(root.ARCHIVE_DEFAULTS).toBe(root.VECTOR_INDEX_DEFAULTS);
  });

  it('the store option `archive` still sets the vector index options, and `vectorIndex` wins when both are set', () => {
    const old = { hnswThreshold: 7 };
    const now = { hnswThreshold: 9 };
    expect(root.inProcessStore({ archive: old })).toBeInstanceOf(root.InProcessStore);
    expect(vectorIndexOptionsOf({ archive: old })).toBe(old);
    expect(vectorIndexOptionsOf({ archive: old, vectorIndex: now })).toBe(now);
  });

  it('`secret` still keys the session-id hash, and `hashKey` wins when both are set', () => {
    expect(root.createTidemark({ hashKey: 'k1' }).hashSession('default', 's1')).toBe(hmac('k1', 'default', 's1'));
    expect(root.createTidemark({ secret: 'k1' }).hashSession('default', 's1')).toBe(hmac('k1', 'default', 's1'));
    expect(root.createTidemark({ secret: 'k1', hashKey: 'k2' }).hashSession('default', 's1')).toBe(hmac('k2', 'default', 's1'));
  });

  it('prometheusMetrics from the root entry registers the same metrics as tidemark/prometheus', async () => {
    expect(root.DURATION_BUCKETS_SECONDS).toBe(prometheus.DURATION_BUCKETS_SECONDS);
    expect(root.PROMETHEUS_METRICS_DEFAULTS).toBe(prometheus.PROMETHEUS_METRICS_DEFAULTS);
    const bus = new EventEmitter<TidemarkEvents>();
    const oldWay = await root.prometheusMetrics(bus, { registry: new client.Registry() });
    const newWay = await prometheus.prometheusMetrics(bus, { registry: new client.Registry() });
    emitTurn(bus, { sessionHash: 'h1', result: 'slot', readUs: 1500 });
    const names = (text: string): string[] => text.split('\n').filter((l) => l.startsWith('# TYPE')).sort();
    const oldText = await oldWay.metrics();
    expect(oldText).toMatch(/^tidemark_reads_total\{result="slot"\} 1$/m);
    expect(names(oldText)).toEqual(names(await newWay.metrics()));
    oldWay.stop();
    newWay.stop();
  });
});

describe('deprecated fields of events and output', () => {
  it('emits `archive` beside `demote`, and each old event field beside its new one with the same value', async () => {
    const tm = root.createTidemark({ capacity: 1, hashKey: 'k' });
    const seen: Record<string, unknown[]> = { demote: [], archive: [], evict: [], commit: [], read: [] };
    for (const name of Object.keys(seen) as Array<keyof root.TidemarkEvents>) tm.on(name, (e: unknown) => void seen[name]!.push(e));
    await tm.write({ session: 's', text: 'My name is Dana' });
    await tm.write({ session: 's', text: 'I am allergic to chain wax.' }); // capacity 1: the name is evicted
    await tm.read({ session: 's', text: 'what is my name?' });
    expect(seen.demote).toHaveLength(1);
    expect(seen.archive).toEqual(seen.demote);
    expect(seen.evict).toEqual([expect.objectContaining({ reason: 'capacity', logged: true, archived: true })]);
    expect(seen.commit.map((e) => [(e as root.CommitEvent).demoted, (e as root.CommitEvent).archived])).toEqual([[0, 0], [1, 1]]);
    const read = seen.read[0] as root.ReadEvent;
    expect(read.archiveItems).toBe(read.logbookItems);
    await tm.close();
  });

  it('`tidemark replay --json` prints `archive_items` beside `demoted_items`', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tidemark-deprecated-'));
    try {
      writeFileSync(join(dir, 't.jsonl'), TINY_TRANSCRIPT);
      writeFileSync(join(dir, 'p.jsonl'), TINY_PROBES);
      const out: string[] = [];
      const io = { stdout: (s: string) => void out.push(s), stderr: { write: () => true, isTTY: false } };
      expect(await replayCli(join(dir, 't.jsonl'), { probes: join(dir, 'p.jsonl'), json: true }, io)).toBe(0);
      const { summary } = JSON.parse(out.join('')) as { summary: { demoted_items: number; archive_items: number } };
      expect(summary.demoted_items).toBe(1);
      expect(summary.archive_items).toBe(summary.demoted_items);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});

describe('deprecated names of tidemark/redis', () => {
  it('RedisStore, redisStore, REDIS_STORE_DEFAULTS are the slot store under its old names', () => {
    expect(redis.RedisStore).toBe(redis.RedisSlotStore);
    expect(redis.redisStore).toBe(redis.redisSlotStore);
    expect(redis.REDIS_STORE_DEFAULTS).toBe(redis.REDIS_SLOT_STORE_DEFAULTS);
  });
});
