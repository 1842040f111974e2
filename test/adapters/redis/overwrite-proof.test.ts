// Several OS processes overwriting the *same* facts of the same sessions at once (every process
// restates the same four topics with its own values), checked against a serial run of the same turns
// in the order the store committed them (the logbook's turn sequence): the same slots, values,
// provenance, superseded values, versions and events. No write is lost (every turn is in the logbook
// once, every replaced value is in it as superseded) and none is applied twice.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Redis } from 'ioredis';
import { RedisSlotStore, redisSlotStore } from '../../../adapters/redis/index.js';
import { createTidemark } from '../../../src/index.js';
import { OVERWRITE_TOPICS, overwriteText } from './facts.js';
import { REDIS_URL, deletePrefix, newClient, probeRedis, runWriters, uniquePrefix } from './helpers.js';

const down = await probeRedis();

/** A session's memory without what depends on timing (slot index, ids, wall-clock ms). */
async function canon(store: RedisSlotStore, tenant: string, session: string) {
  const ref = { tenant, session };
  const snap = await store.load(ref);
  const slots: string[] = [];
  for (let i = 0; i < (snap?.table.capacity ?? 0); i++) {
    const r = snap!.table.get(i);
    if (r) slots.push(`${r.keyText} | ${r.value} | ${r.provenance.join(',')}`);
  }
  const logbook = await store.listLogbook(ref, { limit: 100_000 });
  const superseded = logbook.filter((e) => e.kind === 'superseded').map((e) => `${e.value} | ${e.provenance.join(',')}`).sort();
  const events = await store.readEvents(ref, 100_000);
  return { version: snap?.version ?? 0, turns: snap?.turns ?? 0, clock: snap?.clock ?? 0, slots: slots.sort(), superseded, eventTypes: events.map((e) => `${e.type}:${e.reason ?? ''}`) };
}

/** The session's turn ids in the order the store committed them. */
async function committedOrder(store: RedisSlotStore, tenant: string, session: string): Promise<string[]> {
  const logbook = await store.listLogbook({ tenant, session }, { limit: 100_000 });
  return logbook
    .filter((e) => e.kind === 'turn')
    .sort((a, b) => a.seq - b.seq)
    .map((e) => e.provenance[0]!);
}

describe.skipIf(down !== null)(`overwrites from several processes${down ? ` (skipped: ${down})` : ''}`, () => {
  let admin: Redis;
  const prefixes: string[] = [];
  beforeAll(() => {
    admin = newClient();
  });
  afterAll(async () => {
    for (const p of prefixes) await deletePrefix(admin, p);
    admin.disconnect();
  });

  it('3 processes restating the same 4 facts of 2 sessions end as a serial run in commit order', async () => {
    const PROCS = 3;
    const SESSIONS = 2;
    const FACTS = 8; // two values per topic per process: 6 competing values per fact
    const prefix = uniquePrefix('mp-over');
    const serialPrefix = uniquePrefix('mp-over-serial');
    prefixes.push(prefix, serialPrefix);
    const results = await runWriters(admin, prefix, PROCS, [String(SESSIONS), String(FACTS), 'overwrite']);
    expect(results.map((r) => r.writes)).toEqual(Array(PROCS).fill(SESSIONS * FACTS));
    expect(results.map((r) => r.abandoned)).toEqual(Array(PROCS).fill(0));
    expect(results.reduce((s, r) => s + r.retries, 0)).toBeGreaterThan(0); // they really collided

    const a = redisSlotStore({ redis: REDIS_URL, prefix, cacheSessions: 0 });
    const b = redisSlotStore({ redis: REDIS_URL, prefix: serialPrefix, cacheSessions: 0 });
    const texts = new Map<string, string>();
    for (let p = 0; p < PROCS; p++) for (let f = 0; f < FACTS; f++) texts.set(`p${p}-f${f}`, overwriteText(p, f));
    try {
      for (let s = 0; s < SESSIONS; s++) {
        const session = `shop-${s}`;
        const order = await committedOrder(a, 'bikes', session);
        // Every acknowledged turn is in the logbook exactly once.
        expect([...order].sort()).toEqual([...texts.keys()].sort());
        // Each process's own turns were committed in the order it wrote them.
        for (let p = 0; p < PROCS; p++) {
          const mine = order.filter((t) => t.startsWith(`p${p}-`));
          expect(mine).toEqual(Array.from({ length: FACTS }, (_, f) => `p${p}-f${f}`));
        }
        // The same turns, one at a time, in that order.
        const serial = createTidemark({ store: redisSlotStore({ redis: REDIS_URL, prefix: serialPrefix }), tenant: 'bikes' });
        for (const turn of order) await serial.write({ session, text: texts.get(turn)!, turn });
        await serial.close();

        const got = await canon(a, 'bikes', session);
        const want = await canon(b, 'bikes', session);
        // Overwrites really happened: one live value per topic, the rest superseded.
        expect(want.slots).toHaveLength(OVERWRITE_TOPICS);
        expect(want.superseded).toHaveLength(PROCS * FACTS - OVERWRITE_TOPICS);
        expect(got).toEqual(want);
        // The live value of each topic is the one committed last.
        for (let k = 0; k < OVERWRITE_TOPICS; k++) {
          const last = order.filter((t) => Number(t.split('-f')[1]) % OVERWRITE_TOPICS === k).pop()!;
          expect(got.slots.some((x) => x.endsWith(`| ${last}`) && x.includes(texts.get(last)!.match(/\d+/)![0]))).toBe(true);
        }
      }
    } finally {
      await a.close();
      await b.close();
    }
  }, 120_000);
});
