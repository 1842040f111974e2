import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { EventEmitter } from 'eventemitter3';
import type { TidemarkEvents, WriteEvent, EvictEvent } from '../../src/middleware/events.js';
import {
  halfLifeDistribution,
  kaplanMeier,
  kaplanMeierGrouped,
  type LifetimeGroup,
  quantile,
  RetentionTracker,
  survivalAt,
  type LifetimeObservation,
} from '../../src/metrics/retention.js';

// Freireich et al. (1963) leukaemia remission times, 6-MP arm (weeks; * = censored), the worked
// example used by Kaplan–Meier textbook chapters (e.g. Kleinbaum & Klein, "Survival Analysis").
// The data and the survival values below are recalled from memory.
const SIX_MP: LifetimeObservation[] = [
  [6, 1], [6, 1], [6, 1], [6, 0], [7, 1], [9, 0], [10, 1], [10, 0], [11, 0], [13, 1], [16, 1],
  [17, 0], [19, 0], [20, 0], [22, 1], [23, 1], [25, 0], [32, 0], [32, 0], [34, 0], [35, 0],
].map(([time, e]) => ({ time: time!, event: e === 1 }));

// From memory: S(t) at each event time, rounded to three places, and the numbers at risk.
const PUBLISHED = [
  { time: 6, atRisk: 21, events: 3, survival: 0.857 },
  { time: 7, atRisk: 17, events: 1, survival: 0.807 },
  { time: 10, atRisk: 15, events: 1, survival: 0.753 },
  { time: 13, atRisk: 12, events: 1, survival: 0.69 },
  { time: 16, atRisk: 11, events: 1, survival: 0.627 },
  { time: 22, atRisk: 7, events: 1, survival: 0.538 },
  { time: 23, atRisk: 6, events: 1, survival: 0.448 },
];

/**
 * Second, independent computation: Efron's (1967) "redistribute-to-the-right" algorithm, which gives the
 * Kaplan–Meier estimate by a different route — every observation starts with mass 1/n; each censored
 * observation, taken in time order, hands its mass in equal parts to all observations to its right.
 * S(t) is 1 minus the mass sitting on events at or before t.
 */
function redistributeToTheRight(obs: readonly LifetimeObservation[], t: number): number {
  // Ties: events before censorings at the same time (the same convention as the product-limit form).
  const sorted = [...obs].sort((a, b) => a.time - b.time || Number(b.event) - Number(a.event));
  const mass = sorted.map(() => 1 / sorted.length);
  for (let i = 0; i < sorted.length; i++) {
    if (sorted[i]!.event) continue;
    const right = sorted.length - i - 1;
    if (right > 0) for (let j = i + 1; j < sorted.length; j++) mass[j]! += mass[i]! / right;
    mass[i] = 0;
  }
  let dead = 0;
  for (let i = 0; i < sorted.length; i++) if (sorted[i]!.event && sorted[i]!.time <= t) dead += mass[i]!;
  return 1 - dead;
}

describe('kaplanMeier', () => {
  it('reproduces the 6-MP arm of Freireich et al. (1963)', () => {
    const curve = kaplanMeier(SIX_MP);
    expect(curve.n).toBe(21);
    expect(curve.events).toBe(9);
    expect(curve.censored).toBe(12);
    expect(curve.steps.map((s) => s.time)).toEqual(PUBLISHED.map((p) => p.time));
    for (const [i, p] of PUBLISHED.entries()) {
      const s = curve.steps[i]!;
      expect(s.atRisk).toBe(p.atRisk);
      expect(s.events).toBe(p.events);
      expect(s.survival).toBeCloseTo(p.survival, 3);
    }
    // Median remission: S first drops to ≤ 0.5 at week 23 (from memory, same textbooks).
    expect(curve.median).toBe(23);
    // Greenwood standard error at week 6: 0.857·sqrt(3/(21·18)) ≈ 0.076 (from memory: 0.0764).
    expect(Math.sqrt(curve.steps[0]!.variance)).toBeCloseTo(0.0764, 4);
    // Exact value at week 23, in closed form: (18/21)(16/17)(14/15)(11/12)(10/11)(6/7)(5/6).
    expect(curve.steps[6]!.survival).toBeCloseTo((18 / 21) * (16 / 17) * (14 / 15) * (11 / 12) * (10 / 11) * (6 / 7) * (5 / 6), 12);
  });

  it('agrees with the redistribute-to-the-right computation on the 6-MP data at every week', () => {
    const curve = kaplanMeier(SIX_MP);
    for (let t = 0; t <= 36; t++) expect(survivalAt(curve, t)).toBeCloseTo(redistributeToTheRight(SIX_MP, t), 12);
  });

  it('agrees with redistribute-to-the-right on random censored samples (property)', () => {
    const obs = fc.array(fc.record({ time: fc.integer({ min: 0, max: 30 }), event: fc.boolean() }), { minLength: 1, maxLength: 40 });
    fc.assert(
      fc.property(obs, (sample) => {
        const curve = kaplanMeier(sample);
        for (let t = 0; t <= 30; t++) {
          const a = survivalAt(curve, t);
          const b = redistributeToTheRight(sample, t);
          if (Math.abs(a - b) > 1e-9) return false;
        }
        // Survival never increases and stays in [0, 1].
        let prev = 1;
        for (const s of curve.steps) {
          if (s.survival > prev + 1e-12 || s.survival < 0) return false;
          prev = s.survival;
        }
        return true;
      }),
      { numRuns: 200 },
    );
  });

  it('without censoring is the empirical survival function', () => {
    const curve = kaplanMeier([1, 2, 2, 3].map((time) => ({ time, event: true })));
    expect(curve.steps.map((s) => [s.time, s.survival])).toEqual([[1, 0.75], [2, 0.25], [3, 0]]);
    expect(Number.isNaN(curve.steps[2]!.variance)).toBe(true);
    expect(curve.median).toBe(2);
  });

  it('with everything censored stays at 1 and has no median', () => {
    const curve = kaplanMeier([{ time: 4, event: false }, { time: 9, event: false }]);
    expect(curve.steps).toEqual([]);
    expect(curve.median).toBeNull();
    expect(survivalAt(curve, 100)).toBe(1);
  });
});

describe('halfLifeDistribution', () => {
  it('gives type-7 quantiles and doubling bins', () => {
    expect(quantile([1, 2, 3, 4], 0.5)).toBe(2.5);
    const d = halfLifeDistribution([0.5, 1, 3, 3, 8, 20]);
    expect(d.n).toBe(6);
    expect(d.p50).toBe(3);
    expect(d.bins).toEqual([
      { lo: 0, hi: 2, count: 2 },
      { lo: 2, hi: 4, count: 2 },
      { lo: 4, hi: 8, count: 0 },
      { lo: 8, hi: 16, count: 1 },
      { lo: 16, hi: 32, count: 1 },
    ]);
  });
});

describe('RetentionTracker', () => {
  const base = { tenant: 't', capacity: 8, gate: 0.9, strength: 1, slotsInUse: 1 };
  const write = (sessionHash: string, slot: number, clock: number, atMs: number, outcome: WriteEvent['outcome'] = 'allocated'): WriteEvent =>
    ({ ...base, sessionHash, slot, id: `${sessionHash}-${slot}-${clock}`, clock, atMs, outcome, halfLife: 10 });
  const evict = (sessionHash: string, slot: number, lifetime: number, lifetimeMs: number, reason: EvictEvent['reason']): EvictEvent =>
    ({ tenant: 't', sessionHash, slot, id: 'x', reason, logged: reason !== 'erased', lifetime, lifetimeMs, halfLife: 12, strength: 0.1, atMs: 0 });

  it('ends lifetimes on evict, censors live slots at the session clock and now, and censors erasures', () => {
    const bus = new EventEmitter<TidemarkEvents>();
    const tracker = new RetentionTracker();
    const stop = tracker.attach(bus);
    bus.emit('write', write('a', 0, 1, 1_000));
    bus.emit('write', write('a', 1, 2, 2_000));
    bus.emit('write', write('a', 1, 4, 4_000, 'overwritten')); // same lifetime continues
    bus.emit('write', write('b', 0, 1, 1_000));
    bus.emit('evict', evict('a', 0, 5, 5_000, 'capacity'));
    bus.emit('evict', evict('b', 0, 3, 3_000, 'erased'));
    bus.emit('write', write('a', 0, 6, 6_000)); // slot 0 reused by a new allocation
    const snap = tracker.snapshot(10_000);
    expect(snap.alive).toBe(2);
    expect(snap.finished).toBe(2);
    expect(snap.byReason).toEqual({ capacity: 1, decayed: 0, expired: 0, erased: 1 });
    const obs = tracker.observations(10_000);
    // Finished: 5 turns (event), 3 turns (erased -> censored). Alive in session a (clock 6): slot 1 since 2, slot 0 since 6.
    expect(obs.clock).toEqual([
      { time: 5, event: true },
      { time: 3, event: false },
      { time: 4, event: false },
      { time: 0, event: false },
    ]);
    expect(obs.seconds).toEqual([
      { time: 5, event: true },
      { time: 3, event: false },
      { time: 8, event: false },
      { time: 4, event: false },
    ]);
    expect(snap.clock.steps).toEqual([{ time: 5, atRisk: 1, events: 1, censored: 0, survival: 0, variance: Number.NaN }]);
    stop();
    bus.emit('evict', evict('a', 1, 9, 9_000, 'decayed'));
    expect(tracker.snapshot().finished).toBe(2);
  });

  it('keeps memory bounded', () => {
    const tracker = new RetentionTracker({ maxFinished: 3, maxAlive: 2 });
    for (let i = 0; i < 10; i++) tracker.onWrite(write(`s${i}`, 0, 1, 0));
    for (let i = 0; i < 10; i++) tracker.onEvict(evict(`s${i}`, 0, i, i, 'decayed'));
    const snap = tracker.snapshot(0);
    expect(snap.alive).toBe(0);
    expect(snap.finished).toBe(3);
    expect(tracker.observations(0).clock.map((o) => o.time).sort()).toEqual([7, 8, 9]);
  });

  it("follows a live slot's half-life through reinforcements and overwrites, and only that slot's", () => {
    const tracker = new RetentionTracker({ maxAlive: 3 });
    const hl = (e: WriteEvent, halfLife: number): WriteEvent => ({ ...e, halfLife });
    const alive = (): number[] => {
      const d = tracker.snapshot(0).halfLife.alive;
      return [d.n, d.p10!, d.p50!, d.p90!];
    };
    tracker.onWrite(write('a', 0, 1, 0)); // half-life 10
    tracker.onWrite(write('a', 1, 1, 0));
    tracker.onWrite(write('b', 0, 1, 0));
    tracker.onWrite(hl(write('a', 1, 2, 0, 'reinforced'), 16));
    tracker.onWrite(hl(write('b', 0, 2, 0, 'overwritten'), 40));
    expect(alive()).toEqual([3, 10 + 0.2 * 6, 16, 16 + 0.8 * 24]);
    // A slot of another session, or one never allocated, changes nothing.
    tracker.onWrite(hl(write('c', 1, 2, 0, 'reinforced'), 99));
    tracker.onWrite(hl(write('a', 5, 2, 0, 'reinforced'), 99));
    expect(alive()).toEqual([3, 10 + 0.2 * 6, 16, 16 + 0.8 * 24]);
    // Past maxAlive the oldest-started (a#0) is forgotten: its reinforcement finds nothing.
    tracker.onWrite(write('c', 0, 3, 0));
    tracker.onWrite(hl(write('a', 0, 4, 0, 'reinforced'), 99));
    expect(alive()).toEqual([3, 10 + 0.2 * 6, 16, 16 + 0.8 * 24]);
    // An evicted slot is gone too; the same index allocated again starts afresh at its own half-life.
    tracker.onEvict(evict('a', 1, 3, 3, 'capacity'));
    tracker.onWrite(hl(write('a', 1, 5, 0, 'reinforced'), 99));
    expect(alive()).toEqual([2, 10 + 0.1 * 30, 25, 40 - 0.1 * 30]);
    tracker.onWrite(hl(write('a', 1, 6, 0), 2));
    expect(alive()).toEqual([3, 2 + 0.2 * 8, 10, 10 + 0.8 * 30]);
    tracker.onWrite(hl(write('a', 1, 7, 0, 'reinforced'), 30));
    expect(alive()).toEqual([3, 10 + 0.2 * 20, 30, 30 + 0.8 * 10]);
    expect(tracker.aliveCount).toBe(3);
  });

  it('rejects bad options naming the option', () => {
    expect(() => new RetentionTracker({ maxFinished: 0 })).toThrow(/maxFinished must be a positive integer, got 0/);
  });
});

describe('grouped Kaplan–Meier for the feed', () => {
  it('equals kaplanMeier on the expanded observations (6-MP example and random data, fast-check seed 4242)', () => {
    const group = (obs: readonly LifetimeObservation[]): LifetimeGroup[] => {
      const m = new Map<number, LifetimeGroup>();
      for (const o of obs) {
        const g = m.get(o.time) ?? { time: o.time, events: 0, censored: 0 };
        if (o.event) g.events++;
        else g.censored++;
        m.set(o.time, g);
      }
      return [...m.values()].reverse();
    };
    expect(kaplanMeierGrouped(group(SIX_MP))).toEqual(kaplanMeier(SIX_MP));
    const seed = 4242;
    console.log(`fast-check seed ${seed}`);
    fc.assert(
      fc.property(fc.array(fc.record({ time: fc.integer({ min: 0, max: 40 }), event: fc.boolean() }), { maxLength: 200 }), (obs) => {
        expect(kaplanMeierGrouped(group(obs))).toEqual(kaplanMeier(obs));
      }),
      { seed, numRuns: 200 },
    );
  });

  it("the tracker's grouped curves equal its exact ones in turns, and stay within one 5 % bin in seconds", () => {
    const t = new RetentionTracker({ maxFinished: 50 });
    const bus = new EventEmitter<TidemarkEvents>();
    t.attach(bus);
    const base = { tenant: 'default', atMs: 1_000_000 };
    for (let i = 0; i < 120; i++) {
      const sessionHash = `s${i % 9}`;
      bus.emit('write', { ...base, sessionHash, outcome: 'allocated', slot: i % 4, id: `r${i}`, clock: i, gate: 1, strength: 1, halfLife: 20, slotsInUse: 1, capacity: 4 } as WriteEvent);
      if (i % 3 === 0) bus.emit('evict', { ...base, sessionHash, slot: i % 4, id: `r${i}`, reason: i % 15 === 0 ? 'erased' : 'capacity', logged: true, lifetime: i % 11, lifetimeMs: 1000 + 137 * i, halfLife: 20, strength: 0.1 } as EvictEvent);
    }
    const exact = t.snapshot(2_000_000);
    const grouped = t.curves(2_000_000);
    expect(grouped.clock).toEqual(exact.clock);
    expect(grouped.seconds.n).toBe(exact.seconds.n);
    expect(grouped.seconds.events).toBe(exact.seconds.events);
    expect(Math.abs(grouped.seconds.median! - exact.seconds.median!) / exact.seconds.median!).toBeLessThanOrEqual(0.05);
  });
});
