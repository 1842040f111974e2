import { describe, expect, it } from 'vitest';
import { EventEmitter } from 'eventemitter3';
// Outside check for latency percentiles: hdr-histogram-js (a port of Gil Tene's HdrHistogram).
import * as hdr from 'hdr-histogram-js';
import type { TidemarkEvents } from '../../src/middleware/events.js';
import { DashboardCollector } from '../../src/metrics/collector.js';
import { emitTurn } from './synthetic.js';

const T0 = 1_700_000_000_000; // a bucket boundary for 5 s buckets (divisible by 5000)

describe('DashboardCollector', () => {
  it('bins reads, writes and evictions into 5 s buckets over the window', () => {
    const bus = new EventEmitter<TidemarkEvents>();
    const c = new DashboardCollector({ bucketMs: 5_000, windowMs: 30_000 });
    c.attach(bus);
    emitTurn(bus, { sessionHash: 'a', atMs: T0 + 100, result: 'slot' });
    emitTurn(bus, { sessionHash: 'a', atMs: T0 + 4_900, result: 'miss', passed: false });
    emitTurn(bus, { sessionHash: 'b', atMs: T0 + 5_000, result: 'logbook', outcome: 'overwritten', evict: 'capacity' });
    emitTurn(bus, { sessionHash: 'old', atMs: T0 - 60_000, result: 'slot' }); // outside the window
    const s = c.snapshot(T0 + 9_999);
    expect(s.t).toEqual([-4, -3, -2, -1, 0, 1].map((i) => T0 + i * 5_000));
    expect(s.reads.slot).toEqual([0, 0, 0, 0, 1, 0]);
    expect(s.reads.miss).toEqual([0, 0, 0, 0, 1, 0]);
    expect(s.reads.logbook).toEqual([0, 0, 0, 0, 0, 1]);
    expect(s.writes.gated_out).toEqual([0, 0, 0, 0, 1, 0]);
    expect(s.writes.allocated).toEqual([0, 0, 0, 0, 1, 0]);
    expect(s.writes.overwritten).toEqual([0, 0, 0, 0, 0, 1]);
    expect(s.evictions.capacity).toEqual([0, 0, 0, 0, 0, 1]);
    expect(s.totals.hitRatio).toBeCloseTo(2 / 3, 12);
    expect(s.activeSessions).toBe(2);
    expect(s.busiest.map((x) => [x.session, x.reads, x.hits])).toEqual([['a', 2, 1], ['b', 1, 1]]);
    // Occupancy: both sessions at 3/8 = 37.5 % -> the 30–40 % bin.
    expect(s.occupancy.bins[3]!.count).toBe(2);
    expect(s.occupancy.meanFill).toBeCloseTo(0.375, 12);
    // Retention: one eviction with lifetime 6; allocations still alive are censored.
    expect(s.retention.clock.events).toBe(1);
    expect(s.retention.alive).toBe(2); // a#0 and old#0; b only overwrote
  });

  it('gives latency percentiles that agree with hdr-histogram-js within its 3-digit precision', () => {
    const c = new DashboardCollector();
    const ref = hdr.build({ numberOfSignificantValueDigits: 3 });
    let seed = 7;
    const rand = (): number => ((seed = (seed * 48271) % 2147483647) / 2147483647);
    const now = Date.now();
    for (let i = 0; i < 5_000; i++) {
      const us = Math.round(200 + 5_000 * rand() ** 4); // skewed: long tail
      c.recordTurn(us, now);
      ref.recordValue(us);
    }
    const p = c.snapshot(now).totals.latency.turn;
    expect(p.count).toBe(5_000);
    for (const [q, got] of [[50, p.p50], [95, p.p95], [99, p.p99]] as const) {
      const want = ref.getValueAtPercentile(q) / 1000;
      expect(Math.abs(got! - want) / want).toBeLessThan(0.002);
    }
  });

  it('keeps at most maxSessions sessions', () => {
    const bus = new EventEmitter<TidemarkEvents>();
    const c = new DashboardCollector({ maxSessions: 100, topSessions: 5 });
    c.attach(bus);
    const now = Date.now();
    for (let i = 0; i < 1_000; i++) emitTurn(bus, { sessionHash: `s${i}`, atMs: now });
    const s = c.snapshot(now);
    expect(s.activeSessions).toBe(100);
    expect(s.busiest).toHaveLength(5);
  });

  it('rejects a window that is not a multiple of the bucket', () => {
    expect(() => new DashboardCollector({ bucketMs: 7_000, windowMs: 60_000 })).toThrow(/windowMs \(60000\) must be a multiple of bucketMs \(7000\)/);
  });
});
