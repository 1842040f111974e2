// Slot survival counts kept by the store (reached / ended per lifetime interval, live and erased slots
// censored), driven by the real middleware on the in-process store and the real Redis, checked against
// the project's Kaplan–Meier estimator (kaplanMeierGrouped; Kaplan & Meier 1958) over the same slots:
// every lifetime that ended (from the evict events) and every slot still alive (loaded from the store,
// censored at its session's clock), grouped to its interval's lower bound.

import { afterAll, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { RedisStore } from '../../adapters/redis/index.js';
import type { EvictEvent } from '../../src/middleware/events.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { kaplanMeier, kaplanMeierGrouped, survivalAt, type LifetimeGroup, type RetentionSnapshot } from '../../src/metrics/retention.js';
import { lifeTable, SURVIVAL_BOUNDS, SURVIVAL_END_REASONS, survivalIncrements, survivalInterval, type SlotBirth } from '../../src/metrics/survival.js';
import { InProcessStore } from '../../src/store/in-process.js';
import type { Store } from '../../src/store/store.js';
import type { EvictReason } from '../../src/types.js';
import { newClient, probeRedis, scanKeys, uniquePrefix } from '../adapters/redis/helpers.js';

const BOUNDS = SURVIVAL_BOUNDS.turns;

/** Kaplan–Meier over observations grouped to the lower bound of their interval, read at each bound. */
function kmAtBounds(obs: ReadonlyArray<{ time: number; event: boolean }>): Map<number, { survival: number; atRisk: number }> {
  const groups = new Map<number, LifetimeGroup>();
  for (const o of obs) {
    const t = BOUNDS[survivalInterval(BOUNDS, o.time)]!;
    const g = groups.get(t) ?? { time: t, events: 0, censored: 0 };
    if (o.event) g.events++;
    else g.censored++;
    groups.set(t, g);
  }
  const curve = kaplanMeierGrouped([...groups.values()]);
  const out = new Map<number, { survival: number; atRisk: number }>();
  let atRisk = curve.n;
  for (const b of BOUNDS) {
    out.set(b, { survival: survivalAt(curve, b), atRisk });
    const g = groups.get(b);
    if (g) atRisk -= g.events + g.censored;
  }
  return out;
}

const FACTS = [
  'My name is Dana.', 'My bike is a green tourer.', 'I live in Eastmoor.', 'My saddle height is 74 cm.', 'My phone is 07700 900123.',
  'My favourite colour is teal.', 'My dog is called Pip.', 'My tyres are 32 mm.', 'My brakes are discs.', 'My chain is new.',
  'My helmet is blue.', 'My frame is steel.', 'Actually, my name is Danielle.', 'I work in Northgate.',
];

/** A scripted conversation: 4 sessions, 64 turns, capacity 3 (evictions), one session erased midway. */
async function drive(store: Store): Promise<{ sessions: string[]; evictions: EvictEvent[]; close: () => Promise<unknown>; retention: () => RetentionSnapshot }> {
  const tm = createTidemark({ store, capacity: 3 });
  const evictions: EvictEvent[] = [];
  tm.on('evict', (e) => evictions.push(e));
  const sessions = ['w-1', 'w-2', 'w-3', 'w-4'];
  for (let i = 0; i < 64; i++) {
    const session = sessions[i % 4]!;
    if (session === 'w-2' && i > 40) continue;
    await tm.write({ session, text: FACTS[(i * 3 + (i >> 3)) % FACTS.length]!, role: 'user' });
    if (i === 40) await tm.erase({ session: 'w-2' });
  }
  await tm.flush();
  return { sessions, evictions, close: () => tm.close(), retention: () => tm.retention() };
}

async function observations(store: Store, sessions: readonly string[], evictions: readonly EvictEvent[]): Promise<Array<{ time: number; event: boolean }>> {
  const obs = evictions.map((e) => ({ time: e.lifetime, event: SURVIVAL_END_REASONS.includes(e.reason) }));
  for (const s of sessions) {
    const snap = await store.load({ tenant: 'default', session: s });
    if (!snap) continue;
    for (let i = 0; i < snap.table.capacity; i++) if (snap.table.isUsed(i)) obs.push({ time: snap.clock - snap.table.created[i]!, event: false });
  }
  return obs;
}

async function check(store: Store): Promise<void> {
  const { sessions, evictions, close, retention } = await drive(store);
  expect(evictions.filter((e) => e.reason === 'capacity').length).toBeGreaterThan(5);
  expect(evictions.filter((e) => e.reason === 'erased').length).toBeGreaterThan(0);
  const obs = await observations(store, sessions, evictions);
  const stats = await store.stats!('default');
  const table = lifeTable('turns', stats.counters ?? {});
  const km = kmAtBounds(obs);
  expect(table.length).toBeGreaterThan(2);
  // Every slot ever allocated reached age 0; the events are the end-reason evictions.
  expect(table[0]!.atRisk).toBe(obs.length);
  expect(table.reduce((n, r) => n + r.events, 0)).toBe(obs.filter((o) => o.event).length);
  for (const row of table) {
    expect(row.atRisk).toBe(km.get(row.from)!.atRisk);
    expect(row.survival).toBeCloseTo(km.get(row.from)!.survival, 12);
  }
  // The instance's own retention() (the dashboard's curve, fed by its events) is the exact
  // Kaplan–Meier over the same slots.
  expect(retention().clock).toEqual(kaplanMeier(obs));
  await close();
}

describe('slot survival counts', () => {
  it('counts a textbook case by hand: 4 slots, one ends at age 1, one at age 3, one erased at 2, one alive at 5', () => {
    // Interval bounds 0,1,2,4: reached 0: 4; 1: 4; 2: 3; 4: 1. Ended in [1,2): 1; in [2,4): 1.
    // Kaplan–Meier at the bounds: S(1) = 1 − 1/4 = 0.75, S(2) = 0.75 × (1 − 1/3) = 0.5, S(4) = 0.5.
    const b = (created: number): SlotBirth => ({ created, createdMs: created });
    const counts: Record<string, number> = {};
    const add = (inc: Record<string, number>) => {
      for (const [k, n] of Object.entries(inc)) counts[k] = (counts[k] ?? 0) + n;
    };
    add(survivalIncrements({ unit: 'turns', prevClock: 0, clock: 0, before: [], after: [b(0), b(0), b(0), b(0)], ended: [] }));
    add(survivalIncrements({ unit: 'turns', prevClock: 0, clock: 1, before: [b(0), b(0), b(0), b(0)], after: [b(0), b(0), b(0)], ended: [{ ...b(0), reason: 'capacity' }] }));
    add(survivalIncrements({ unit: 'turns', prevClock: 1, clock: 2, before: [b(0), b(0), b(0)], after: [b(0), b(0), b(0)], ended: [] }));
    // The erase leaves the slot at age 2: censored (no commit moves it again).
    add(survivalIncrements({ unit: 'turns', prevClock: 2, clock: 3, before: [b(0), b(0)], after: [b(0)], ended: [{ ...b(0), reason: 'decayed' }] }));
    add(survivalIncrements({ unit: 'turns', prevClock: 3, clock: 5, before: [b(0)], after: [b(0)], ended: [] }));
    const rows = lifeTable('turns', counts);
    expect(rows.map((r) => [r.from, r.atRisk, r.events, r.censored])).toEqual([[0, 4, 0, 0], [1, 4, 1, 0], [2, 3, 1, 1], [4, 1, 0, 1]]);
    expect(rows.map((r) => r.survival)).toEqual([1, 0.75, 0.5, 0.5]);
  });

  it('equals the project Kaplan–Meier on grouped lifetimes for any history (property, seeded)', () => {
    // Random slot histories: each slot is born at a commit, then ends at the commit at born + life (for
    // an end reason), is erased right after it (censored there), or stays alive (censored at the last commit).
    const slot = fc.record({ born: fc.nat(40), life: fc.nat(60), reason: fc.constantFrom<EvictReason | 'alive'>('capacity', 'decayed', 'expired', 'erased', 'alive') });
    fc.assert(
      fc.property(fc.array(slot, { minLength: 1, maxLength: 40 }), fc.nat(120), (slots, last) => {
        const ends = (s: (typeof slots)[number]) => s.reason !== 'alive' && s.reason !== 'erased';
        const E = (s: (typeof slots)[number]) => (s.reason === 'alive' ? Infinity : s.born + s.life);
        const gone = (s: (typeof slots)[number], t: number) => E(s) <= t;
        const birth = (s: (typeof slots)[number]): SlotBirth => ({ created: s.born, createdMs: slots.indexOf(s) });
        const clocks = [...new Set([last, ...slots.flatMap((s) => [s.born, E(s)])])].filter((c) => c <= last).sort((a, b) => a - b);
        const counts: Record<string, number> = {};
        let prev: number | null = null;
        for (const c of clocks) {
          const before = prev === null ? [] : slots.filter((s) => s.born <= prev! && !gone(s, prev!));
          const ended = slots.filter((s) => ends(s) && s.born <= c && E(s) === c);
          const after = slots.filter((s) => s.born <= c && !(ends(s) ? E(s) <= c : E(s) < c));
          const inc = survivalIncrements({ unit: 'turns', prevClock: prev ?? 0, clock: c, before: before.map(birth), after: after.map(birth), ended: ended.map((x) => ({ ...birth(x), reason: x.reason as EvictReason })) });
          for (const [k, n] of Object.entries(inc)) counts[k] = (counts[k] ?? 0) + n;
          prev = c;
        }
        const obs = slots
          .filter((s) => s.born <= last)
          .map((s) => (E(s) > last ? { time: last - s.born, event: false } : { time: s.life, event: ends(s) }));
        const km = kmAtBounds(obs);
        const rows = lifeTable('turns', counts);
        expect(rows[0]?.atRisk ?? 0).toBe(obs.length);
        for (const row of rows) {
          expect(row.atRisk).toBe(km.get(row.from)!.atRisk);
          expect(row.survival).toBeCloseTo(km.get(row.from)!.survival, 12);
        }
      }),
      { seed: 1616, numRuns: 300 },
    );
  });

  it('in-process store: the counts from a real conversation equal Kaplan–Meier on the slots themselves', async () => {
    await check(new InProcessStore());
  });

  it('in-process store: the counts survive a restart from the snapshot file, as the slots do', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tidemark-survival-'));
    try {
      const snapshotPath = join(dir, 'memory.json');
      const first = new InProcessStore({ snapshotPath });
      const { close } = await drive(first);
      const before = (await first.stats('default')).counters;
      await close();
      const again = new InProcessStore({ snapshotPath });
      expect((await again.stats('default')).counters).toEqual(before);
      expect(Object.keys(before ?? {}).length).toBeGreaterThan(3);
      await again.close();
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});

const down = await probeRedis();
describe.skipIf(down !== null)(`redis slot survival counts${down ? ` (skipped: ${down})` : ''}`, () => {
  const prefix = uniquePrefix('survival');
  const client = newClient();
  afterAll(async () => {
    const keys = await scanKeys(client, `${prefix}*`);
    if (keys.length) await client.del(...keys);
    client.disconnect();
  });

  it('the commit script keeps the same counts, atomically with the commit', async () => {
    await check(new RedisStore({ redis: client, prefix }));
  });
});
