// Invariants of the memory math under random sequences of writes and reads (fast-check): capacity is
// never exceeded, attention weights sum to 1 over used slots, strengths stay in (0, 1], pinned slots
// survive, and an overwritten value stays reachable in the logbook, linked to its successor.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { attend } from '../../src/memory/attention.js';
import { decayed } from '../../src/memory/decay.js';
import { DEFAULT_GATE_WEIGHTS } from '../../src/memory/gate.js';
import { SlotTable } from '../../src/memory/slots.js';
import { planWrite, type KeyedCandidate } from '../../src/memory/write.js';
import { LOGBOOK_SEARCH_DEFAULTS } from '../../src/logbook/index.js';
import { analyseQuery } from '../../src/logbook/query.js';
import { InProcessStore } from '../../src/store/in-process.js';
import { readParams, vec, writeParams } from './helpers.js';

const DIM = 4;
// A few key directions so random writes collide (overwrites, reinforcements) as well as spread.
const DIRECTIONS = [vec(1, 0, 0, 0), vec(0, 1, 0, 0), vec(0, 0, 1, 0), vec(0, 0, 0, 1), vec(1, 1, 0, 0), vec(1, 0.1, 0, 0), vec(1, 1, 1, 1)];
const VALUES = ['Dana', 'a green Corvane', 'Tuesday at 10', 'chain wax', 'Friday at 9', 'a red Tarrant'];

const candidateArb = fc.record({
  dir: fc.integer({ min: 0, max: DIRECTIONS.length - 1 }),
  value: fc.integer({ min: 0, max: VALUES.length - 1 }),
  pin: fc.boolean(),
  date: fc.boolean(),
});
const stepArb = fc.record({
  advance: fc.integer({ min: 0, max: 60 }),
  candidates: fc.array(candidateArb, { maxLength: 3 }),
  readDir: fc.integer({ min: 0, max: DIRECTIONS.length - 1 }),
  reinforceRead: fc.boolean(),
});
const runArb = fc.record({
  capacity: fc.integer({ min: 1, max: 6 }),
  bias: fc.double({ min: -4, max: 4, noNaN: true }),
  halfLife: fc.integer({ min: 1, max: 50 }),
  steps: fc.array(stepArb, { minLength: 1, maxLength: 25 }),
});

describe('memory invariants (fast-check)', () => {
  it('capacity, weights, strengths, pinned slots and logbook reachability hold over random write sequences', async () => {
    await fc.assert(
      fc.asyncProperty(runArb, async ({ capacity, bias, halfLife, steps }) => {
        const store = new InProcessStore();
        const ref = { tenant: 'prop', session: 's' };
        const params = writeParams({ halfLife, gateThreshold: 0.5, gateWeights: { ...DEFAULT_GATE_WEIGHTS, bias } });
        let t = new SlotTable(capacity, DIM);
        let clock = 0;
        let version = 0;
        let n = 0;
        const pinnedSlots = new Set<number>();
        const superseded: Array<{ id: string; successor: string }> = [];
        for (const [s, step] of steps.entries()) {
          clock += step.advance;
          // Read first, as a turn does: weights over used slots sum to 1.
          const read = attend(t, clock, DIRECTIONS[step.readDir]!, [], readParams({ minCosine: -1, hitCosine: -1 }));
          if (t.count() > 0) {
            let sum = 0;
            for (let i = 0; i < capacity; i++) {
              if (t.isUsed(i)) sum += read.weight[i]!;
              else expect(read.weight[i]).toBe(0);
            }
            expect(sum).toBeCloseTo(1, 9);
          } else {
            expect(read.selected).toEqual([]); // an empty memory selects nothing
          }
          const candidates: KeyedCandidate[] = step.candidates.map((c) => ({
            candidate: {
              key: `topic ${c.dir}`, value: VALUES[c.value]!, text: VALUES[c.value]!, pattern: 'my-x-is-y', pin: c.pin,
              ...(c.date ? { updates: { kind: 'date' as const, expr: 'Monday' } } : {}),
            },
            key: DIRECTIONS[c.dir]!,
            turn: `t${s}`,
            role: 'user',
          }));
          const plan = planWrite({
            table: t, now: clock, nowMs: s * 1000, params, tenant: ref.tenant, session: ref.session, candidates,
            reinforce: step.reinforceRead ? read.selected.map((i) => t.ids[i]!) : [], newId: () => `r${++n}`,
          });
          const res = await store.commit(ref, { expectedVersion: version, clock, turns: s + 1, capacity, dim: DIM, ops: plan.ops, logbook: plan.demoted, events: plan.events });
          expect(res.ok).toBe(true);
          version = res.version;
          t = (await store.load(ref))!.table;
          for (const a of plan.demoted) if (a.kind === 'superseded') superseded.push({ id: a.id, successor: a.successor! });
          // Capacity is never exceeded.
          expect(t.count()).toBeLessThanOrEqual(capacity);
          expect(plan.slotsInUse).toBe(t.count());
          for (let i = 0; i < capacity; i++) {
            if (!t.isUsed(i)) continue;
            // Strengths stay in (0, 1], as stored and as decayed to now.
            const sNow = t.isPinned(i) ? t.strength[i]! : decayed(t.strength[i]!, t.stamp[i]!, t.halfLife[i]!, clock);
            expect(t.strength[i]).toBeGreaterThan(0);
            expect(t.strength[i]).toBeLessThanOrEqual(1);
            expect(sNow).toBeGreaterThan(0);
            expect(sNow).toBeLessThanOrEqual(1);
            if (t.isPinned(i)) pinnedSlots.add(i);
          }
          // Pinned slots survive any sequence: once pinned, a slot stays used and pinned.
          for (const i of pinnedSlots) {
            expect(t.isUsed(i)).toBe(true);
            expect(t.isPinned(i)).toBe(true);
          }
        }
        // Every superseded value is in the logbook, linked to its successor, and findable by its words.
        const logbook = await store.listLogbook(ref, { limit: 10_000 });
        const byId = new Map(logbook.map((a) => [a.id, a]));
        const live = new Set<string>();
        for (let i = 0; i < capacity; i++) if (t.isUsed(i)) live.add(t.ids[i]!);
        for (const { id, successor } of superseded) {
          const item = byId.get(id);
          expect(item).toBeDefined();
          expect(item!.successor).toBe(successor);
          // The successor is live, or itself demoted (superseded or evicted later).
          expect(live.has(successor) || byId.has(successor)).toBe(true);
          const r = await store.searchLogbook(ref, analyseQuery(item!.value, 0), { ...LOGBOOK_SEARCH_DEFAULTS, limit: 10_000 });
          expect(r.hits.some((h) => h.entry.id === id)).toBe(true);
        }
      }),
      { numRuns: 100 },
    );
  });
});
