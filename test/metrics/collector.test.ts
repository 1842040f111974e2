import { describe, expect, it, vi } from 'vitest';
// Outside check for latency percentiles: hdr-histogram-js (a port of Gil Tene's HdrHistogram).
import * as hdr from 'hdr-histogram-js';
import { DashboardCollector } from '../../src/metrics/collector.js';
import { createTidemark } from '../../src/middleware/tidemark.js';

const T0 = 1_700_000_000_000; // a bucket boundary for 5 s buckets (divisible by 5000)

describe('DashboardCollector', () => {
  it('bins a real conversation (reads, writes, evictions, an erase) into 5 s buckets over the window', async () => {
    // The real middleware on the in-process store, its clock set per step (Date only: promises run).
    vi.useFakeTimers({ toFake: ['Date'] });
    try {
      const tm = createTidemark({ capacity: 2 });
      const c = new DashboardCollector({ bucketMs: 5_000, windowMs: 30_000 });
      c.attach(tm);
      const at = (ms: number) => vi.setSystemTime(T0 + ms);
      at(-60_000); // outside the window
      await tm.read({ session: 'old', text: 'Hello?' });
      at(100); // bucket 0: a miss, then two facts for session a (two slots allocated)
      await tm.read({ session: 'a', text: 'Can I book a service?' });
      await tm.write({ session: 'a', text: 'My name is Dana. My bike is a green tourer.', role: 'user' });
      at(4_900); // bucket 0: a slot hit for a
      const hit = await tm.read({ session: 'a', text: 'What is my name?' });
      at(5_000); // bucket 1: a third fact for a (one capacity eviction), session b reads and writes, then is erased
      await tm.write({ session: 'a', text: 'I live in Eastmoor.', role: 'user' });
      await tm.read({ session: 'b', text: 'Do you stock ferns?' });
      await tm.write({ session: 'b', text: 'My name is Ilse.', role: 'user' });
      await tm.erase({ session: 'b' });
      const s = c.snapshot(T0 + 9_999);
      expect(hit.items[0]?.source).toBe('slot');
      expect(s.t).toEqual([-4, -3, -2, -1, 0, 1].map((i) => T0 + i * 5_000));
      expect(s.reads.miss).toEqual([0, 0, 0, 0, 1, 1]);
      expect(s.reads.slot).toEqual([0, 0, 0, 0, 1, 0]);
      expect(s.writes.allocated).toEqual([0, 0, 0, 0, 2, 2]);
      expect(s.evictions.capacity).toEqual([0, 0, 0, 0, 0, 1]);
      expect(s.evictions.erased).toEqual([0, 0, 0, 0, 0, 1]);
      expect(s.totals.hitRatio).toBeCloseTo(1 / 3, 12);
      expect(s.activeSessions).toBe(2);
      expect(s.busiest.map((x) => [x.reads, x.hits])).toEqual([[2, 1], [1, 0]]);
      // Retention: one capacity eviction ended a lifetime (1 turn); the erase is censored, and a's two slots are alive.
      expect(s.retention.clock.events).toBe(1);
      expect(s.retention.alive).toBe(2);
      await tm.close();
    } finally {
      vi.useRealTimers();
    }
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

  it('keeps at most maxSessions sessions (1,000 sessions read through the real middleware)', async () => {
    const tm = createTidemark();
    const c = new DashboardCollector({ maxSessions: 100, topSessions: 5 });
    c.attach(tm);
    for (let i = 0; i < 1_000; i++) await tm.read({ session: `s${i}`, text: 'Is my bike ready?' });
    const s = c.snapshot(Date.now());
    expect(s.activeSessions).toBe(100);
    expect(s.busiest).toHaveLength(5);
    expect(s.totals.reads.miss).toBe(1_000);
    await tm.close();
  });

  it('rejects a window that is not a multiple of the bucket', () => {
    expect(() => new DashboardCollector({ bucketMs: 7_000, windowMs: 60_000 })).toThrow(/windowMs \(60000\) must be a multiple of bucketMs \(7000\)/);
  });
});
