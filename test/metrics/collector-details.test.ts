// The dashboard collector's figures checked against the traffic that made them: latency percentiles per
// bucket against hdr-histogram-js fed the same events' durations (outside reference: a port of Gil
// Tene's HdrHistogram), occupancy bins and the busiest table against the sessions written, the fleet
// rows against the buckets, and the limits that keep it bounded.

import { afterEach, describe, expect, it, vi } from 'vitest';
import * as hdr from 'hdr-histogram-js';
import { EventEmitter } from 'eventemitter3';
import { CURVE_POINTS, DashboardCollector, FLEET_COLUMNS, downsample } from '../../src/metrics/collector.js';
import { ErrorCodes } from '../../src/errors.js';
import type { CommitEvent, ReadEvent, TidemarkEvents } from '../../src/middleware/events.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { ControlledStore } from '../middleware/helpers.js';

const T0 = 1_700_000_000_000; // a 5 s bucket boundary
const HIGHEST_US = 600_000_000;

afterEach(() => {
  vi.useRealTimers();
});

/** p50/p95/p99 in ms of microsecond samples as the collector records them (rounded, at least 1 µs, at most 10 min). */
function reference(us: readonly number[]): { p50: number; p95: number; p99: number } {
  const h = hdr.build({ numberOfSignificantValueDigits: 3 });
  for (const v of us) h.recordValue(Math.min(HIGHEST_US, Math.max(1, Math.round(v))));
  return { p50: h.getValueAtPercentile(50) / 1000, p95: h.getValueAtPercentile(95) / 1000, p99: h.getValueAtPercentile(99) / 1000 };
}

function close(got: number | null, want: number): void {
  expect(got).not.toBeNull();
  // Both keep 3 significant digits: within 0.2 %.
  expect(Math.abs(got! - want)).toBeLessThanOrEqual(want * 0.002 + 1e-9);
}

describe('DashboardCollector: latency from the real middleware', () => {
  it('gives read and commit percentiles per bucket and over the window, null where a bucket had none', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    const tm = createTidemark({ capacity: 4 });
    const c = new DashboardCollector({ bucketMs: 5_000, windowMs: 15_000 });
    c.attach(tm);
    const reads: ReadEvent[] = [];
    const commits: CommitEvent[] = [];
    tm.on('read', (e) => reads.push(e));
    tm.on('commit', (e) => commits.push(e));
    vi.setSystemTime(T0 + 1_000);
    for (const text of ['My name is Ilse.', 'My fern is a maidenhair.', 'My pots are terracotta.']) {
      await tm.read({ session: 'n', text });
      await tm.write({ session: 'n', text, role: 'user' });
    }
    const first = { reads: reads.length, commits: commits.length };
    vi.setSystemTime(T0 + 11_000); // bucket 2: reads only
    for (const text of ['What is my name?', 'Which fern do I have?']) await tm.read({ session: 'n', text });
    const s = c.snapshot(T0 + 14_999);
    expect(s.t).toEqual([T0, T0 + 5_000, T0 + 10_000]);

    const r0 = reference(reads.slice(0, first.reads).map((e) => e.durationUs));
    close(s.latency.read.p50[0]!, r0.p50);
    close(s.latency.read.p95[0]!, r0.p95);
    close(s.latency.read.p99[0]!, r0.p99);
    const r2 = reference(reads.slice(first.reads).map((e) => e.durationUs));
    close(s.latency.read.p50[2]!, r2.p50);
    close(s.latency.read.p99[2]!, r2.p99);
    expect(s.latency.read.p50[1]).toBeNull();
    const w0 = reference(commits.map((e) => e.durationUs));
    close(s.latency.write.p50[0]!, w0.p50);
    close(s.latency.write.p95[0]!, w0.p95);
    expect(s.latency.write.p50[2]).toBeNull();
    expect(s.latency.turn.p50).toEqual([null, null, null]);

    // Over the window: every read merged.
    const all = reference(reads.map((e) => e.durationUs));
    expect(s.totals.latency.read.count).toBe(reads.length);
    close(s.totals.latency.read.p50, all.p50);
    close(s.totals.latency.read.p99, all.p99);
    expect(s.totals.latency.write.count).toBe(commits.length);
    expect(s.totals.latency.turn).toEqual({ count: 0, p50: null, p95: null, p99: null });
    await tm.close();
  });

  it('records a turn of 0 µs as 1 µs, caps one past 10 minutes and drops negative or non-finite ones', () => {
    const c = new DashboardCollector();
    c.recordTurn(-5, T0);
    c.recordTurn(Number.NaN, T0);
    c.recordTurn(Number.POSITIVE_INFINITY, T0);
    c.recordTurn(0, T0);
    expect(c.snapshot(T0).totals.latency.turn).toEqual({ count: 1, p50: 0.001, p95: 0.001, p99: 0.001 });
    c.recordTurn(3_600_000_000, T0); // an hour
    const p = c.snapshot(T0).totals.latency.turn;
    expect(p.count).toBe(2);
    close(p.p99, HIGHEST_US / 1000);
  });
});

describe('DashboardCollector: counts, sessions and occupancy from the real middleware', () => {
  it('counts gated candidates, degraded reads and outbox changes in their buckets', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    vi.setSystemTime(T0 + 100);
    const store = new ControlledStore();
    const tm = createTidemark({ store, capacity: 4, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const c = new DashboardCollector({ bucketMs: 5_000, windowMs: 10_000 });
    c.attach(tm);
    let gatedOut = 0;
    tm.on('gate', (e) => void (e.passed || gatedOut++));
    await tm.read({ session: 'w', text: 'Is my bike ready?' });
    await tm.write({ session: 'w', text: 'My name is Dana. Thanks, see you. ok', role: 'user' });
    store.failLoad = true;
    store.failCommit = true;
    vi.setSystemTime(T0 + 5_100);
    await tm.read({ session: 'w', text: 'When can I collect it?' });
    await tm.read({ session: 'other', text: 'Hello?' });
    await tm.write({ session: 'w', text: 'My saddle is brown leather.', role: 'user' });
    store.failLoad = false;
    store.failCommit = false;
    await tm.flush();
    const s = c.snapshot(T0 + 9_999);
    expect(gatedOut).toBeGreaterThan(0);
    expect(s.writes.gated_out).toEqual([gatedOut, 0]);
    expect(s.reads.degraded).toEqual([0, 2]);
    expect(s.reads.miss).toEqual([1, 0]);
    expect(s.outbox.queued).toEqual([0, 1]);
    expect(s.outbox.drained).toEqual([0, 1]);
    expect(s.totals.outbox).toEqual({ queued: 1, drained: 1, overflow: 0 });
    // Every read counts in the hit ratio's denominator, degraded ones included: 0 hits of 3.
    expect(s.totals.hitRatio).toBe(0);
    // The degraded read counts for the session it was for, which the collector knew already.
    const w = s.busiest.find((x) => x.reads === 2);
    expect(w).toBeDefined();
    expect(s.busiest.map((x) => x.reads).sort()).toEqual([2]);
    await tm.close();
  });

  it('bins sessions by fill, gives the mean fill, and ranks the busiest by reads + writes, then by recency', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    const tm = createTidemark({ capacity: 4 });
    const c = new DashboardCollector({ topSessions: 2 });
    c.attach(tm);
    vi.setSystemTime(T0);
    await tm.read({ session: 'empty', text: 'Hello?' }); // 0 of 4 slots: bin 0
    vi.setSystemTime(T0 + 1);
    await tm.write({ session: 'one', text: 'My name is Dana.', role: 'user' }); // 1 of 4: bin 2
    vi.setSystemTime(T0 + 2);
    await tm.write({ session: 'full', text: 'My name is Ilse. My fern is a maidenhair. My pots are terracotta. I live in Eastmoor.', role: 'user' });
    const s = c.snapshot(T0 + 10);
    const fills = (await Promise.all(['empty', 'one', 'full'].map((id) => tm.inspect(id)))).map((x) => x.slots.length / 4);
    expect(fills[0]).toBe(0);
    expect(fills[1]).toBe(0.25);
    expect(fills[2]).toBe(1);
    expect(s.occupancy.bins.map((b) => b.count)).toEqual([1, 0, 1, 0, 0, 0, 0, 0, 0, 1]);
    expect(s.occupancy.bins[9]).toEqual({ lo: 0.9, hi: 1, count: 1 });
    expect(s.occupancy.sessions).toBe(3);
    expect(s.occupancy.meanFill).toBeCloseTo((0 + 0.25 + 1) / 3, 12);
    // 'full' made 4 writes; 'one' and 'empty' one event each, a tie broken by recency: 'one' is newer.
    expect(s.busiest.map((x) => [x.reads, x.writes, x.lastMs])).toEqual([[0, 4, T0 + 2], [0, 1, T0 + 1]]);
    // A copy: changing it does not change the collector.
    s.busiest[0]!.writes = 99;
    expect(c.snapshot(T0 + 10).busiest[0]!.writes).toBe(4);
    // Five reads in all put 'empty' first (5 > 4), its hits counted apart from its reads.
    for (let i = 0; i < 4; i++) await tm.read({ session: 'empty', text: 'Hello again?' });
    expect(c.snapshot(T0 + 10).busiest.map((x) => [x.reads, x.hits, x.writes])).toEqual([[5, 0, 0], [0, 0, 4]]);
    await tm.close();
  });

  it('shows no fill without sessions and leaves out a session reported with no capacity', () => {
    const ee = new EventEmitter<TidemarkEvents>();
    const c = new DashboardCollector();
    c.attach(ee);
    expect(c.snapshot(T0).occupancy.meanFill).toBeNull();
    expect(c.snapshot(T0).totals.hitRatio).toBeNull();
    ee.emit('commit', { sessionHash: 'h', tenant: 't', atMs: T0, ops: 0, demoted: 0, logbook: 0, retries: 0, durationUs: 10, planUs: 1, embedUs: 1, slotsInUse: 0, capacity: 0, version: 1 } as never);
    const s = c.snapshot(T0);
    expect(s.activeSessions).toBe(1);
    expect(s.occupancy.sessions).toBe(0);
    expect(s.occupancy.meanFill).toBeNull();
    // Half full lands in 50–60 %; more slots than capacity (after the capacity was lowered) counts as full.
    const commit = (sessionHash: string, slotsInUse: number, capacity: number): void =>
      void ee.emit('commit', { sessionHash, tenant: 't', atMs: T0, ops: 0, demoted: 0, logbook: 0, retries: 0, durationUs: 10, planUs: 1, embedUs: 1, slotsInUse, capacity, version: 1 } as never);
    commit('half', 2, 4);
    commit('over', 6, 4);
    const t = c.snapshot(T0);
    expect(t.occupancy.bins.map((b) => b.count)).toEqual([0, 0, 0, 0, 0, 1, 0, 0, 0, 1]);
    expect(t.occupancy.meanFill).toBe(0.75);
  });

  it('drops buckets outside a snapshot\'s window on both sides', () => {
    const c = new DashboardCollector({ bucketMs: 1_000, windowMs: 3_000 });
    c.recordTurn(10, T0 + 9_000); // ahead of the snapshot below (a skewed clock)
    c.recordTurn(10, T0 + 1_000);
    expect(c.snapshot(T0 + 1_500).totals.latency.turn.count).toBe(1);
    expect(c.exportBuckets(T0 + 9_500).map((r) => r[0])).toEqual([]);
  });

  it('forgets sessions older than the window even when events came out of order', () => {
    const ee = new EventEmitter<TidemarkEvents>();
    const c = new DashboardCollector({ bucketMs: 1_000, windowMs: 10_000 });
    c.attach(ee);
    const commit = (session: string, atMs: number): void =>
      void ee.emit('commit', { sessionHash: session, tenant: 't', atMs, ops: 1, demoted: 0, logbook: 0, retries: 0, durationUs: 10, planUs: 1, embedUs: 1, slotsInUse: 1, capacity: 4, version: 1 } as never);
    commit('late', T0 + 9_000);
    commit('early', T0); // arrives last, the oldest
    commit('late', T0 + 5_000); // an older time for a known session does not make it older
    expect(c.snapshot(T0 + 10_000).activeSessions).toBe(1 + 1);
    // At T0 + 10,001 'early' (T0) is past the window; 'late' (T0 + 9,000) is not.
    const s = c.snapshot(T0 + 10_001);
    expect(s.activeSessions).toBe(1);
    expect(s.busiest.map((x) => [x.session, x.lastMs])).toEqual([['late', T0 + 9_000]]);
  });
});

describe('DashboardCollector: the fleet rows', () => {
  it('exports the window\'s buckets in order, p95 in µs and -1 without samples, and imports only buckets it lacks', () => {
    const ee = new EventEmitter<TidemarkEvents>();
    const c = new DashboardCollector({ bucketMs: 1_000, windowMs: 5_000 });
    c.attach(ee);
    const read = (atMs: number, result: string, durationUs: number): void =>
      void ee.emit('read', { sessionHash: 'h', tenant: 't', atMs, result, items: 0, slotItems: 0, logbookItems: 0, scanned: 0, slotsInUse: 1, capacity: 4, logbookSize: 0, topWeight: 0, entropy: 0, topCosine: 0, topCoverage: 0, durationUs, searchUs: 0, embedUs: 0 } as never);
    read(T0 + 3_500, 'slot', 250);
    read(T0 + 1_200, 'miss', 40);
    read(T0 + 1_300, 'miss', 60);
    read(T0 - 10_000, 'miss', 60); // before the window
    ee.emit('evict', { sessionHash: 'h', tenant: 't', atMs: T0 + 3_600, slot: 0, id: 'x', reason: 'capacity', logged: true, lifetime: 2, lifetimeMs: 50, halfLife: 20, strength: 0.5 } as never);
    const rows = c.exportBuckets(T0 + 4_999);
    const b = T0 / 1_000;
    expect(rows.map((r) => r[0])).toEqual([b + 1, b + 3]);
    for (const r of rows) expect(r).toHaveLength(FLEET_COLUMNS.length);
    const at = (row: number[], name: string): number => row[FLEET_COLUMNS.indexOf(name)]!;
    expect(at(rows[0]!, 'reads.miss')).toBe(2);
    expect(at(rows[0]!, 'p95us.read')).toBe(60);
    expect(at(rows[0]!, 'p95us.write')).toBe(-1);
    expect(at(rows[1]!, 'reads.slot')).toBe(1);
    expect(at(rows[1]!, 'evictions.capacity')).toBe(1);
    expect(FLEET_COLUMNS.slice(0, 2)).toEqual(['bucket', 'reads.slot']);
    expect(FLEET_COLUMNS.at(-1)).toBe('p95us.turn');

    // A restarted process takes rows back: counts add where it has no bucket yet; a bucket it
    // already filled again and a malformed row are left alone.
    const d = new DashboardCollector({ bucketMs: 1_000, windowMs: 5_000 });
    d.recordTurn(100, T0 + 3_100);
    d.importBuckets([...rows, [b + 2, 1, 2, 3], 'junk' as never]);
    const s = d.snapshot(T0 + 4_999);
    expect(s.reads.miss).toEqual([0, 2, 0, 0, 0]);
    expect(s.reads.slot).toEqual([0, 0, 0, 0, 0]);
    expect(s.evictions.capacity).toEqual([0, 0, 0, 0, 0]);
    expect(s.totals.latency.turn.count).toBe(1);
  });

  it('keeps its buckets bounded when nobody takes snapshots', () => {
    const c = new DashboardCollector({ bucketMs: 1_000, windowMs: 3_000 });
    for (let i = 0; i < 50; i++) c.recordTurn(10, T0 + i * 1_000);
    // Three buckets in the window; at most 2 × 3 kept between snapshots.
    expect(c.exportBuckets(T0 + 49_999).map((r) => r[0])).toEqual([T0 / 1_000 + 47, T0 / 1_000 + 48, T0 / 1_000 + 49]);
    expect((c as unknown as { buckets: Map<number, unknown> }).buckets.size).toBeLessThanOrEqual(6);
  });
});

describe('DashboardCollector: options and curves', () => {
  it('refuses each size option that is not a positive integer, naming it', () => {
    for (const option of ['bucketMs', 'windowMs', 'topSessions', 'maxSessions'] as const) {
      for (const bad of [0, -1, 1.5, Number.NaN]) {
        let err: unknown;
        try {
          new DashboardCollector({ bucketMs: 1_000, windowMs: 10_000, [option]: bad });
        } catch (e) {
          err = e;
        }
        expect(err).toMatchObject({ code: ErrorCodes.CONFIG, details: { option, value: bad } });
      }
    }
    // One is the least of each (a window of one 1 ms bucket).
    expect(() => new DashboardCollector({ bucketMs: 1, windowMs: 1, topSessions: 1, maxSessions: 1 })).not.toThrow();
  });

  it('takes a window of 10,000 buckets and refuses 10,001', () => {
    expect(() => new DashboardCollector({ bucketMs: 100, windowMs: 1_000_000 })).not.toThrow();
    expect(() => new DashboardCollector({ bucketMs: 100, windowMs: 1_000_100 })).toThrow(/at most 10000 buckets/);
  });

  it('downsamples a curve to at most max points, evenly, keeping the first and the last', () => {
    const steps = Array.from({ length: 11 }, (_, i) => i);
    expect(downsample(steps, 11)).toEqual(steps);
    expect(downsample(steps, 11)).not.toBe(steps);
    expect(downsample(steps, 20)).toEqual(steps);
    // Stride (11 - 1) / (6 - 1) = 2.
    expect(downsample(steps, 6)).toEqual([0, 2, 4, 6, 8, 10]);
    // Stride 10 / 3 = 3.33…: rounded positions 0, 3, 7, 10.
    expect(downsample(steps, 4)).toEqual([0, 3, 7, 10]);
    expect(CURVE_POINTS).toBe(120);
  });
});
