// How long memories survive: slot lifetimes (in session turns/seconds and in wall-clock seconds),
// right-censored for slots still alive, summarised by the Kaplan–Meier product-limit estimator,
// plus the distribution of per-slot half-lives. Pure functions and a small event-fed tracker.

import { ConfigError } from '../errors.js';
import type { EvictReason } from '../types.js';
import type { EvictEvent, WriteEvent } from '../middleware/events.js';
import { subscribe, type TidemarkEventSource } from './source.js';

/** One lifetime: how long a slot lived, and whether it ended (`event`) or is still running (censored). */
export interface LifetimeObservation {
  /** Lifetime in the unit being estimated (session clock units or seconds). Must be ≥ 0. */
  time: number;
  /** True when the slot left working memory; false when it was still alive (right-censored). */
  event: boolean;
}

/** One step of a Kaplan–Meier curve, at a distinct time where at least one slot left memory. */
export interface SurvivalStep {
  time: number;
  /** Slots whose lifetime is ≥ `time` (still observed just before it). */
  atRisk: number;
  /** Slots that left memory exactly at `time`. */
  events: number;
  /** Slots censored exactly at `time` (counted at risk here, gone after; the usual convention). */
  censored: number;
  /** Estimated probability that a slot lives beyond `time`. */
  survival: number;
  /** Greenwood's variance of `survival` (Greenwood 1926); NaN once survival reaches 0. */
  variance: number;
}

/** A whole Kaplan–Meier estimate. */
export interface SurvivalCurve {
  /** Observations used. */
  n: number;
  events: number;
  censored: number;
  /** Steps in increasing time; the curve is 1 before the first step and constant between steps. */
  steps: SurvivalStep[];
  /** Smallest time at which survival ≤ 0.5, or null when the curve never gets there (the empirical memory half-life). */
  median: number | null;
}

/**
 * Kaplan–Meier product-limit estimator (Kaplan & Meier 1958, "Nonparametric estimation from incomplete
 * observations"): S(t) = Π_{t_j ≤ t} (1 − d_j / n_j) over distinct event times t_j, with n_j the number at
 * risk and d_j the events at t_j. Observations censored at t_j are counted at risk at t_j (censoring is
 * taken to happen just after the events of the same time). Greenwood's formula gives the variance:
 * Var S(t) = S(t)² Σ_{t_j ≤ t} d_j / (n_j (n_j − d_j)).
 */
export function kaplanMeier(observations: readonly LifetimeObservation[]): SurvivalCurve {
  return kaplanMeierGrouped(observations.map((o) => ({ time: o.time, events: o.event ? 1 : 0, censored: o.event ? 0 : 1 })));
}

/** Observations sharing one lifetime: how many ended there and how many were censored there. */
export interface LifetimeGroup {
  time: number;
  events: number;
  censored: number;
}

/**
 * The Kaplan–Meier estimate over grouped observations (counts per distinct time, in any order), the
 * one estimator behind `kaplanMeier`: its cost is set by the number of distinct times, not of
 * observations, so the incremental curves stay cheap.
 */
export function kaplanMeierGrouped(groups: readonly LifetimeGroup[]): SurvivalCurve {
  const sorted = groups.filter((g) => Number.isFinite(g.time) && g.time >= 0 && g.events + g.censored > 0).sort((a, b) => a.time - b.time);
  let n = 0;
  for (const g of sorted) n += g.events + g.censored;
  const steps: SurvivalStep[] = [];
  let atRisk = n;
  let survival = 1;
  let greenwoodSum = 0;
  let totalEvents = 0;
  let median: number | null = null;
  for (let i = 0; i < sorted.length; ) {
    const time = sorted[i]!.time;
    let events = 0;
    let censored = 0;
    for (; i < sorted.length && sorted[i]!.time === time; i++) {
      events += sorted[i]!.events;
      censored += sorted[i]!.censored;
    }
    if (events > 0) {
      survival *= 1 - events / atRisk;
      greenwoodSum = atRisk > events ? greenwoodSum + events / (atRisk * (atRisk - events)) : Number.NaN;
      steps.push({ time, atRisk, events, censored, survival, variance: survival > 0 ? survival * survival * greenwoodSum : Number.NaN });
      totalEvents += events;
      if (median === null && survival <= 0.5) median = time;
    }
    atRisk -= events + censored;
  }
  return { n, events: totalEvents, censored: n - totalEvents, steps, median };
}

/**
 * The group a lifetime falls in for the incremental curves: whole numbers (turns) as they are; other
 * values (seconds) at the lower edge of log-spaced bins 5 % wide, so the curve's cost is bounded by the
 * number of bins however many slots it has seen.
 */
export function lifetimeGroup(time: number): number {
  if (!(time > 0)) return 0;
  if (Number.isInteger(time)) return time;
  if (time < 0.001) return 0;
  return Number((1.05 ** Math.floor(Math.log(time) / Math.log(1.05))).toPrecision(4));
}

/** S(t) read off a curve (right-continuous step function). */
export function survivalAt(curve: SurvivalCurve, time: number): number {
  let s = 1;
  for (const step of curve.steps) {
    if (step.time > time) break;
    s = step.survival;
  }
  return s;
}

/** Quantiles and a log₂-binned histogram of half-lives. */
export interface HalfLifeDistribution {
  n: number;
  p10: number | null;
  p50: number | null;
  p90: number | null;
  /** Bins [lo, hi) doubling in width: 1, 2, 4, 8, … (values below 1 go to the first bin). */
  bins: Array<{ lo: number; hi: number; count: number }>;
}

/** Quantile by linear interpolation between order statistics (type 7 in Hyndman & Fan 1996). */
export function quantile(sortedValues: readonly number[], q: number): number | null {
  if (sortedValues.length === 0) return null;
  const h = (sortedValues.length - 1) * q;
  const lo = Math.floor(h);
  const hi = Math.ceil(h);
  return sortedValues[lo]! + (h - lo) * (sortedValues[hi]! - sortedValues[lo]!);
}

export function halfLifeDistribution(values: readonly number[]): HalfLifeDistribution {
  const sorted = values.filter((v) => Number.isFinite(v) && v > 0).sort((a, b) => a - b);
  const bins: HalfLifeDistribution['bins'] = [];
  for (const v of sorted) {
    const k = Math.max(0, Math.floor(Math.log2(v)));
    while (bins.length <= k) {
      const lo = 2 ** bins.length;
      bins.push({ lo: bins.length === 0 ? 0 : lo, hi: lo * 2, count: 0 });
    }
    bins[k]!.count += 1;
  }
  return { n: sorted.length, p10: quantile(sorted, 0.1), p50: quantile(sorted, 0.5), p90: quantile(sorted, 0.9), bins };
}

export interface RetentionTrackerOptions {
  /**
   * Eviction reasons that count as a slot's lifetime ending. Others (by default `erased`: the user asked
   * for deletion, the memory did not fade) are recorded as censored at the time they left.
   * @default ['capacity', 'decayed', 'expired']
   */
  endReasons?: readonly EvictReason[];
  /** Finished lifetimes kept (most recent first out); older ones are dropped. @default 10000 */
  maxFinished?: number;
  /** Live slots tracked; past this the oldest-started is forgotten. @default 100000 */
  maxAlive?: number;
}

export const RETENTION_TRACKER_DEFAULTS: Required<RetentionTrackerOptions> = {
  endReasons: ['capacity', 'decayed', 'expired'],
  maxFinished: 10_000,
  maxAlive: 100_000,
};

/** JSON shape served to the dashboard and returned by `retentionSnapshot()`. */
export interface RetentionSnapshot {
  atMs: number;
  /** Lifetimes in session clock units (turns, or seconds with `decayUnit: 'seconds'`). */
  clock: SurvivalCurve;
  /** Lifetimes in wall-clock seconds. */
  seconds: SurvivalCurve;
  alive: number;
  finished: number;
  /** Finished lifetimes by eviction reason. */
  byReason: Record<EvictReason, number>;
  /** Half-lives of slots alive now, and of slots as they left memory. */
  halfLife: { alive: HalfLifeDistribution; evicted: HalfLifeDistribution };
}

interface AliveSlot {
  startClock: number;
  startMs: number;
  halfLife: number;
  sessionHash: string;
  slot: number;
}

interface Finished {
  clock: number;
  seconds: number;
  event: boolean;
  halfLife: number;
}

/**
 * Follows slot lifetimes from events: a `write` with outcome `allocated` starts one (keyed by session
 * hash + slot index; an overwrite keeps the slot's lifetime, as `SlotRecord.created` does), an `evict`
 * ends it with the lifetime the event carries. Slots still alive are censored at the session's latest
 * seen clock and at `now`.
 */
export class RetentionTracker {
  private readonly o: Required<RetentionTrackerOptions>;
  private readonly ends: ReadonlySet<EvictReason>;
  private readonly alive = new Map<string, AliveSlot>();
  /** The same live slots by session hash and slot index: a reinforcement or overwrite (every turn) finds its slot without building a key. */
  private readonly bySession = new Map<string, { slots: Array<AliveSlot | undefined>; n: number }>();
  /** Latest clock seen per session, to censor live slots in clock units. */
  private readonly clocks = new Map<string, number>();
  private readonly finished: Finished[] = [];
  private finishedHead = 0;
  private readonly byReason: Record<EvictReason, number> = { capacity: 0, decayed: 0, expired: 0, erased: 0 };
  /** Finished lifetimes grouped by `lifetimeGroup`, kept in step with `finished` (time -> [events, censored]). */
  private readonly grouped = { clock: new Map<number, [number, number]>(), seconds: new Map<number, [number, number]>() };
  private halfLifeCache: { atMs: number; size: number; value: HalfLifeDistribution } | null = null;

  constructor(options: RetentionTrackerOptions = {}) {
    const o = { ...RETENTION_TRACKER_DEFAULTS, ...options };
    for (const name of ['maxFinished', 'maxAlive'] as const) {
      if (!Number.isInteger(o[name]) || o[name] < 1) {
        throw new ConfigError(`retention: ${name} must be a positive integer, got ${String(o[name])}`, {
          details: { option: name, value: o[name], expected: 'integer ≥ 1' },
        });
      }
    }
    if (!Array.isArray(o.endReasons)) {
      throw new ConfigError(`retention: endReasons must be an array of eviction reasons, got ${typeof o.endReasons}`, {
        details: { option: 'endReasons' },
      });
    }
    this.o = o;
    this.ends = new Set(o.endReasons);
  }

  /** Feed a `write` event. */
  onWrite(e: WriteEvent): void {
    this.seeClock(e.sessionHash, e.clock);
    if (e.outcome !== 'allocated') {
      const a = this.bySession.get(e.sessionHash)?.slots[e.slot];
      if (a) a.halfLife = e.halfLife;
      return;
    }
    const key = `${e.sessionHash}#${e.slot}`;
    this.forget(key);
    const a: AliveSlot = { startClock: e.clock, startMs: e.atMs, halfLife: e.halfLife, sessionHash: e.sessionHash, slot: e.slot };
    this.alive.set(key, a);
    let s = this.bySession.get(e.sessionHash);
    if (!s) this.bySession.set(e.sessionHash, (s = { slots: [], n: 0 }));
    s.slots[e.slot] = a;
    s.n++;
    if (this.alive.size > this.o.maxAlive) {
      const oldest = this.alive.keys().next().value;
      if (oldest !== undefined) this.forget(oldest);
    }
  }

  /** Drops a live slot from both indexes; returns it. */
  private forget(key: string): AliveSlot | undefined {
    const a = this.alive.get(key);
    if (!a) return undefined;
    this.alive.delete(key);
    const s = this.bySession.get(a.sessionHash);
    if (s && s.slots[a.slot] === a) {
      s.slots[a.slot] = undefined;
      if (--s.n === 0) this.bySession.delete(a.sessionHash);
    }
    return a;
  }

  /** Feed an `evict` event. Lifetimes come from the event, so slots allocated before the tracker started count too. */
  onEvict(e: EvictEvent): void {
    const a = this.forget(`${e.sessionHash}#${e.slot}`);
    if (a) this.seeClock(e.sessionHash, a.startClock + e.lifetime);
    this.byReason[e.reason] += 1;
    const obs: Finished = {
      clock: e.lifetime,
      seconds: e.lifetimeMs / 1000,
      event: this.ends.has(e.reason),
      halfLife: e.halfLife,
    };
    if (this.finished.length < this.o.maxFinished) this.finished.push(obs);
    else {
      this.regroup(this.finished[this.finishedHead]!, -1);
      this.finished[this.finishedHead] = obs;
      this.finishedHead = (this.finishedHead + 1) % this.o.maxFinished;
    }
    this.regroup(obs, 1);
  }

  private regroup(f: Finished, delta: number): void {
    for (const [map, time] of [[this.grouped.clock, f.clock], [this.grouped.seconds, f.seconds]] as const) {
      const k = lifetimeGroup(time);
      const g = map.get(k) ?? [0, 0];
      g[f.event ? 0 : 1] += delta;
      if (g[0] === 0 && g[1] === 0) map.delete(k);
      else map.set(k, g);
    }
  }

  /**
   * The survival curves from the grouped lifetimes plus the live slots censored now: what `snapshot()`
   * gives, at a cost set by the distinct lifetimes and the live slots, not by the slots seen. Seconds are
   * grouped into 5 %-wide bins (each lifetime at its bin's lower edge), turns are exact. For the feed.
   */
  curves(nowMs = Date.now()): { clock: SurvivalCurve; seconds: SurvivalCurve } {
    const clock = new Map<number, LifetimeGroup>();
    const seconds = new Map<number, LifetimeGroup>();
    const add = (m: Map<number, LifetimeGroup>, time: number, events: number, censored: number): void => {
      const g = m.get(time);
      if (g) {
        g.events += events;
        g.censored += censored;
      } else m.set(time, { time, events, censored });
    };
    for (const [t, [e, c]] of this.grouped.clock) add(clock, t, e, c);
    for (const [t, [e, c]] of this.grouped.seconds) add(seconds, t, e, c);
    for (const [key, a] of this.alive) {
      const sessionClock = this.clocks.get(key.slice(0, key.lastIndexOf('#'))) ?? a.startClock;
      add(clock, lifetimeGroup(Math.max(0, sessionClock - a.startClock)), 0, 1);
      add(seconds, lifetimeGroup(Math.max(0, (nowMs - a.startMs) / 1000)), 0, 1);
    }
    return { clock: kaplanMeierGrouped([...clock.values()]), seconds: kaplanMeierGrouped([...seconds.values()]) };
  }

  /** Half-lives as in `snapshot()`; the evicted side is recomputed at most every 10 s (it sorts the finished ring). */
  halfLives(nowMs = Date.now()): RetentionSnapshot['halfLife'] {
    const c = this.halfLifeCache;
    if (!c || nowMs - c.atMs >= 10_000 || (c.size === 0) !== (this.finished.length === 0)) {
      this.halfLifeCache = { atMs: nowMs, size: this.finished.length, value: halfLifeDistribution(this.finished.map((f) => f.halfLife)) };
    }
    return { alive: halfLifeDistribution([...this.alive.values()].map((a) => a.halfLife)), evicted: this.halfLifeCache!.value };
  }

  get aliveCount(): number {
    return this.alive.size;
  }

  /** Subscribe to an event source; returns the function that unsubscribes. */
  attach(source: TidemarkEventSource): () => void {
    return subscribe(source, { write: (e) => this.onWrite(e), evict: (e) => this.onEvict(e) });
  }

  /** Observations in clock units and seconds, live slots censored at `nowMs`. */
  observations(nowMs = Date.now()): { clock: LifetimeObservation[]; seconds: LifetimeObservation[] } {
    const clock: LifetimeObservation[] = [];
    const seconds: LifetimeObservation[] = [];
    for (const f of this.finished) {
      clock.push({ time: f.clock, event: f.event });
      seconds.push({ time: f.seconds, event: f.event });
    }
    for (const [key, a] of this.alive) {
      const sessionClock = this.clocks.get(key.slice(0, key.lastIndexOf('#'))) ?? a.startClock;
      clock.push({ time: Math.max(0, sessionClock - a.startClock), event: false });
      seconds.push({ time: Math.max(0, (nowMs - a.startMs) / 1000), event: false });
    }
    return { clock, seconds };
  }

  snapshot(nowMs = Date.now()): RetentionSnapshot {
    const obs = this.observations(nowMs);
    return {
      atMs: nowMs,
      clock: kaplanMeier(obs.clock),
      seconds: kaplanMeier(obs.seconds),
      alive: this.alive.size,
      finished: this.finished.length,
      byReason: { ...this.byReason },
      halfLife: {
        alive: halfLifeDistribution([...this.alive.values()].map((a) => a.halfLife)),
        evicted: halfLifeDistribution(this.finished.map((f) => f.halfLife)),
      },
    };
  }

  private seeClock(sessionHash: string, clock: number): void {
    const prev = this.clocks.get(sessionHash);
    if (prev === undefined || clock > prev) {
      this.clocks.delete(sessionHash);
      this.clocks.set(sessionHash, clock);
      if (this.clocks.size > this.o.maxAlive) {
        const oldest = this.clocks.keys().next().value;
        if (oldest !== undefined) this.clocks.delete(oldest);
      }
    }
  }
}

/**
 * Retention as JSON for `inspect()` and the dashboard: pass the tracker the instance feeds, or a list of
 * observations to estimate directly.
 */
export function retentionSnapshot(source: RetentionTracker, nowMs = Date.now()): RetentionSnapshot {
  return source.snapshot(nowMs);
}
