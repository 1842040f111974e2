// The memory invariants again, end to end through createTidemark with the real extractor, gate,
// embedder and store (fast-check): capacity, strengths in (0, 1], pinned slots kept, and every
// superseded value reachable in the logbook through its successor link, every turn kept there.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { LOGBOOK_SEARCH_DEFAULTS } from '../../src/logbook/index.js';
import { analyseQuery } from '../../src/logbook/query.js';
import { InProcessStore } from '../../src/store/in-process.js';

const TOPICS = ['bike', 'saddle', 'helmet', 'lock', 'pump', 'postcode'];
const VALUES = ['a green Corvane Tourer', 'a red Pennick Sprint', 'blue', 'orange', 'ZZ99 9ZZ', 'a Fenmarrow leather saddle', 'brass'];
const turnArb = fc.oneof(
  fc.record({ kind: fc.constant('fact' as const), topic: fc.constantFrom(...TOPICS), value: fc.constantFrom(...VALUES) }),
  fc.record({ kind: fc.constant('booking' as const), day: fc.constantFrom('Tuesday', 'Friday', 'Monday') }),
  fc.record({ kind: fc.constant('move' as const), day: fc.constantFrom('Tuesday', 'Friday', 'Saturday') }),
  fc.record({ kind: fc.constant('pin' as const), slot: fc.nat({ max: 5 }) }),
  fc.constant({ kind: 'chat' as const }),
);

describe('memory invariants through the middleware (fast-check)', () => {
  it('hold over random conversations', async () => {
    await fc.assert(
      fc.asyncProperty(fc.integer({ min: 1, max: 4 }), fc.array(turnArb, { minLength: 1, maxLength: 14 }), async (capacity, turns) => {
        const store = new InProcessStore();
        const tm = createTidemark({ store, capacity, hashKey: 'p', write: { halfLife: 6 } });
        const pinnedIds = new Set<number>();
        for (const t of turns) {
          if (t.kind === 'pin') {
            const v = await tm.inspect('s');
            const slot = v.slots[t.slot % Math.max(1, v.slots.length)];
            if (slot) {
              await tm.pin('s', slot.index);
              pinnedIds.add(slot.index);
            }
            continue;
          }
          const said =
            t.kind === 'fact' ? `My ${t.topic} is ${t.value}` : t.kind === 'booking' ? `Can I book a service for ${t.day}?` : t.kind === 'move' ? `Actually, can we move it to ${t.day} instead?` : 'hello';
          await tm.write({ session: 's', text: said });
          const v = await tm.inspect('s');
          expect(v.slots.length).toBeLessThanOrEqual(capacity);
          for (const s of v.slots) {
            expect(s.strength).toBeGreaterThan(0);
            expect(s.strength).toBeLessThanOrEqual(1);
          }
          for (const i of pinnedIds) expect(v.slots.find((s) => s.index === i)?.pinned).toBe(true);
        }
        const ref = { tenant: 'default', session: 's' };
        const logbook = await store.listLogbook(ref, { limit: 10_000 });
        const ids = new Set(logbook.map((a) => a.id));
        const live = new Set((await tm.inspect('s')).slots.map((s) => s.id));
        // Nothing said is lost: every turn written is in the logbook.
        expect(logbook.filter((x) => x.kind === 'turn')).toHaveLength(turns.filter((t) => t.kind !== 'pin').length);
        for (const a of logbook.filter((x) => x.kind === 'superseded')) {
          expect(a.successor).toBeDefined();
          expect(live.has(a.successor!) || ids.has(a.successor!)).toBe(true);
          const r = await store.searchLogbook(ref, analyseQuery(a.value, 0), { ...LOGBOOK_SEARCH_DEFAULTS, limit: 10_000 });
          expect(r.hits.map((h) => h.entry.id)).toContain(a.id);
        }
        await tm.close();
      }),
      { numRuns: 40 },
    );
  });
});
