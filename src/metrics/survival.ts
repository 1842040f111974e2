// Slot survival as counts a store can keep and Prometheus can graph: for each lifetime interval
// [b_j, b_j+1), how many slots reached age b_j (at risk from it) and how many ended inside it. Slots
// still alive, or erased, are in the first count and never in the second: right-censored, the way the
// Kaplan–Meier estimator wants them. Both counts only grow, so they are plain counters, summable over
// commits and processes. Pure functions, no I/O: the middleware computes one commit's increments, the
// store adds them atomically with the commit, the metrics export them.

import type { EvictReason } from '../types.js';

/** Interval lower bounds, by the session clock's unit. Turns: doubling; seconds: minutes to a week. */
export const SURVIVAL_BOUNDS = {
  turns: [0, 1, 2, 4, 8, 16, 32, 64, 128, 256, 512, 1024],
  seconds: [0, 60, 300, 900, 3600, 14_400, 86_400, 604_800],
} as const satisfies Record<string, readonly number[]>;

export type SurvivalUnit = keyof typeof SURVIVAL_BOUNDS;

/** Eviction reasons that end a lifetime (an erase is the user's wish, not forgetting: censored). */
export const SURVIVAL_END_REASONS: readonly EvictReason[] = ['capacity', 'decayed', 'expired'];

const DEFAULT_ENDS: ReadonlySet<EvictReason> = new Set(SURVIVAL_END_REASONS);

/** Store counter field names: `survival.reached.<bound>` and `survival.ended.<bound>`. */
export const SURVIVAL_FIELD = { reached: 'survival.reached.', ended: 'survival.ended.' } as const;

/** A slot's lineage: an overwrite keeps both times, so it is the same slot living on. */
export interface SlotBirth {
  created: number;
  createdMs: number;
}

/** Index of the interval holding `age` (the last interval is open-ended); -1 below the first bound. */
export function survivalInterval(bounds: readonly number[], age: number): number {
  let j = -1;
  for (let i = 0; i < bounds.length && bounds[i]! <= age; i++) j = i;
  return j;
}

/**
 * One commit's survival increments as store counter fields. `before`: the slots alive when the commit
 * was planned (at `prevClock`); `after`: the slots alive after it; `ended`: the slots it evicted, with
 * their reason. A slot present before had its intervals up to its age at `prevClock` counted by an
 * earlier commit, so only the bounds crossed between then and `clock` count now; a new slot counts from
 * age 0. An eviction for an end reason counts as an event in the interval of its lifetime.
 */
export function survivalIncrements(input: {
  unit: SurvivalUnit;
  prevClock: number;
  clock: number;
  before: Iterable<SlotBirth>;
  after: Iterable<SlotBirth>;
  ended: Iterable<SlotBirth & { reason: EvictReason }>;
  endReasons?: readonly EvictReason[];
}): Record<string, number> {
  const bounds = SURVIVAL_BOUNDS[input.unit];
  const ends = input.endReasons ? new Set(input.endReasons) : DEFAULT_ENDS;
  // Slots alive before, counted by birth (created, then createdMs): numbers as keys, so a commit builds
  // no strings for its 64 slots (this runs on every commit).
  const known = new Map<number, Map<number, number>>();
  for (const s of input.before) {
    let m = known.get(s.created);
    if (!m) known.set(s.created, (m = new Map()));
    m.set(s.createdMs, (m.get(s.createdMs) ?? 0) + 1);
  }
  const out: Record<string, number> = {};
  const add = (field: string, n: number): void => {
    out[field] = (out[field] ?? 0) + n;
  };
  const cross = (s: SlotBirth): number => {
    const age = Math.max(0, input.clock - s.created);
    const m = known.get(s.created);
    const seen = m?.get(s.createdMs) ?? 0;
    // Known before: counted up to its age then. New: counted from nothing (below bound 0).
    const from = seen > 0 ? survivalInterval(bounds, Math.max(0, input.prevClock - s.created)) : -1;
    if (seen > 0) m!.set(s.createdMs, seen - 1);
    const to = survivalInterval(bounds, age);
    for (let j = from + 1; j <= to; j++) add(`${SURVIVAL_FIELD.reached}${bounds[j]}`, 1);
    return to;
  };
  for (const s of input.ended) {
    const j = cross(s);
    if (ends.has(s.reason) && j >= 0) add(`${SURVIVAL_FIELD.ended}${bounds[j]}`, 1);
  }
  for (const s of input.after) cross(s);
  return out;
}

/** One row of a life table built from the counts. */
export interface LifeTableRow {
  /** Interval lower bound (age in the clock's unit). */
  from: number;
  /** Slots that reached `from` (at risk in the interval). */
  atRisk: number;
  /** Slots whose lifetime ended in the interval. */
  events: number;
  /** Slots that reached `from` and neither ended in the interval nor reached the next bound: alive or erased. */
  censored: number;
  /** Conditional probability of ending in the interval, events ÷ at risk. */
  hazard: number;
  /** Estimated share of slots that live past this interval: Π (1 − hazard) over it and those before. */
  survival: number;
}

/**
 * The life table over the store's counts: the Kaplan–Meier product-limit estimate (Kaplan & Meier
 * 1958) on lifetimes grouped to their interval's lower bound, with censored slots at risk through the
 * interval they were last seen in (censoring after events, as `kaplanMeierGrouped` takes it). The
 * actuarial life table (Cutler & Ederer 1958) would count them half; this one is the project's
 * Kaplan–Meier exactly, at the bounds. Intervals nobody reached are left out.
 */
export function lifeTable(unit: SurvivalUnit, counters: Readonly<Record<string, number>>): LifeTableRow[] {
  const bounds = SURVIVAL_BOUNDS[unit];
  const rows: LifeTableRow[] = [];
  let survival = 1;
  for (let j = 0; j < bounds.length; j++) {
    const atRisk = counters[`${SURVIVAL_FIELD.reached}${bounds[j]}`] ?? 0;
    if (atRisk <= 0) continue;
    const events = counters[`${SURVIVAL_FIELD.ended}${bounds[j]}`] ?? 0;
    const next = j + 1 < bounds.length ? counters[`${SURVIVAL_FIELD.reached}${bounds[j + 1]}`] ?? 0 : 0;
    const hazard = events / atRisk;
    survival *= 1 - hazard;
    rows.push({ from: bounds[j]!, atRisk, events, censored: atRisk - events - next, hazard, survival });
  }
  return rows;
}
