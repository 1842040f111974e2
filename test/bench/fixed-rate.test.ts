// The fixed-rate driver: a fleet's histograms merge exactly (the merged percentiles are those of all
// values recorded in one histogram, not an average of percentiles), and a fleet's processes split the
// schedule between them without gaps or overlaps, on one shared store.

import { EventEmitter } from 'node:events';
import { describe, expect, it, vi } from 'vitest';
import type { Tidemark } from '../../src/middleware/tidemark.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import { encodeHistogram, mergeResults, newHistogram, percentiles, runFixedRate, type FixedRateResult } from '../../bench/lib/fixed-rate.js';
import { rng } from '../../bench/lib/stats.js';

const part = (values: number[], windows: number[][]): FixedRateResult => {
  const h = newHistogram();
  for (const v of values) h.recordValue(v);
  return {
    offered_per_s: 10, scheduled: values.length, completed: values.length, errors: 0, error_codes: {}, conflict_retries: 1, seconds: 1, achieved_per_s: values.length, max_start_lag_ms: 0,
    histogram: encodeHistogram(h),
    done_per_window: windows.map((w) => w.length),
    windows: windows.map((w) => {
      const x = newHistogram();
      for (const v of w) x.recordValue(v);
      return encodeHistogram(x);
    }),
  };
};

describe('fixed-rate results', () => {
  it('merges histograms exactly: percentiles of the union, not the mean of percentiles', () => {
    const seed = 1717;
    console.log(`fixed-rate merge seed ${seed}`);
    const r = rng(seed);
    // One fast process and one with a slow tail: averaging their p99s would hide the tail.
    const fast = Array.from({ length: 5000 }, () => 500 + Math.floor(r() * 1000));
    const slow = Array.from({ length: 5000 }, (_, i) => (i % 20 === 0 ? 200_000 + Math.floor(r() * 50_000) : 800 + Math.floor(r() * 1000)));
    const all = newHistogram();
    for (const v of [...fast, ...slow]) all.recordValue(v);
    const m = mergeResults([part(fast, [fast]), part(slow, [slow])], 5);
    const whole = percentiles(all);
    expect({ ...m.latency, max_ms: 0 }).toEqual({ ...whole, max_ms: 0 });
    // An encoded histogram reports its max at the top of the max's bucket: equal to 3 significant digits.
    expect(Math.abs(m.latency.max_ms - whole.max_ms) / whole.max_ms).toBeLessThan(1e-3);
    expect(m.windows[0]).toMatchObject({ t_s: 0, count: 10_000, p99_ms: percentiles(all).p99_ms, achieved_per_s: 2_000 });
    expect(m.completed).toBe(10_000);
    expect(m.conflict_retries).toBe(2);
    const meanOfP99 = (percentiles(newFrom(fast)).p99_ms + percentiles(newFrom(slow)).p99_ms) / 2;
    expect(m.latency.p99_ms).not.toBeCloseTo(meanOfP99, 0);
  });

  it('splits one schedule between two drivers on one shared store, every turn once', async () => {
    const store = new InProcessStore();
    const a = createTidemark({ store, tenant: 'bench', capacity: 16 });
    const b = createTidemark({ store, tenant: 'bench', capacity: 16 });
    const o = { rate: 100, seconds: 1, activeSessions: 10, userSessions: 0, windowSeconds: 1, maxInFlight: 64, of: 2, tenant: 'bench' };
    const at = Date.now() + 100;
    const [ra, rb] = await Promise.all([
      runFixedRate(a, { ...o, index: 0, ready: async () => at }),
      runFixedRate(b, { ...o, index: 1, ready: async () => at }),
    ]);
    // Turn n goes to process floor(n / 10) % 2: rounds of 10 alternate, 5 rounds each.
    expect(ra.scheduled).toBe(50);
    expect(rb.scheduled).toBe(50);
    expect(ra.completed + ra.errors).toBe(50);
    expect(rb.completed + rb.errors).toBe(50);
    const m = mergeResults([ra, rb], 1);
    expect(m.scheduled).toBe(100);
    expect(m.latency.count).toBe(m.completed);
    // Each of the 10 sessions holds the turns both drivers committed to it.
    let turns = 0;
    for (let i = 0; i < 10; i++) turns += (await store.load({ tenant: 'bench', session: `s${i}` }))?.turns ?? 0;
    expect(turns).toBe(2 * m.completed);
    await a.close();
    await b.close();
  });
});

function newFrom(values: number[]) {
  const h = newHistogram();
  for (const v of values) h.recordValue(v);
  return h;
}

describe('fixed-rate timing (fake clock)', () => {
  // A stand-in for the middleware that commits each turn after a set service time on the fake clock:
  // the driver's own arithmetic is under test here, not tidemark's speed.
  function fakeMiddleware(serviceMs: (n: number) => number) {
    const em = new EventEmitter();
    let n = 0;
    return {
      on: (e: string, f: (...a: unknown[]) => void) => em.on(e, f),
      off: (e: string, f: (...a: unknown[]) => void) => em.off(e, f),
      hashSession: (_t: string, s: string) => `h-${s}`,
      flush: async () => undefined,
      wrap: () => async (input: { session: string }) => {
        const ms = serviceMs(n++);
        setTimeout(() => em.emit('commit', { sessionHash: `h-${input.session}`, retries: 0 }), ms);
        return (async function* () {
          yield 'ok';
        })();
      },
    } as unknown as Tidemark;
  }

  it('times each turn from its due time, so one stall shows in every turn queued behind it', async () => {
    vi.useFakeTimers({ toFake: ['setTimeout', 'clearTimeout', 'setImmediate', 'performance', 'Date'] });
    try {
      // 100 turns/s for 1 s = one turn due every 10 ms; each takes 10 ms, the first 500 ms; one in flight.
      const run = runFixedRate(fakeMiddleware((n) => (n === 0 ? 500 : 10)), {
        rate: 100, seconds: 1, activeSessions: 100, userSessions: 0, windowSeconds: 1, maxInFlight: 1, index: 0, of: 1, tenant: 't',
      });
      await vi.advanceTimersByTimeAsync(5_000);
      const r = await run;
      const m = mergeResults([r], 1);
      expect(r.completed).toBe(100);
      // Turn k (k >= 1) is due at 10k ms, starts when turn k-1 ends and ends at 500 + 10k: every turn
      // waits 500 ms. Timing from the start of service instead would report 10 ms for 99 of 100 turns.
      expect(m.latency.p50_ms).toBeGreaterThanOrEqual(499);
      expect(m.latency.p50_ms).toBeLessThanOrEqual(501);
      expect(m.latency.count).toBe(100);
    } finally {
      vi.useRealTimers();
    }
  });
});
