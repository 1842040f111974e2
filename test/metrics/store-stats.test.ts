// The truth figures an operator's fleet view reads — sessions stored, slots alive, logbook entries —
// kept by the stores atomically with commits and erasures, checked against the stored state itself
// (every session loaded and counted), on the in-process store and the real Redis.

import { afterAll, describe, expect, it } from 'vitest';
import { RedisStore } from '../../adapters/redis/index.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import type { Store } from '../../src/store/store.js';
import { newClient, probeRedis, scanKeys, uniquePrefix } from '../adapters/redis/helpers.js';

const FACTS = ['My name is Dana.', 'My bike is a green tourer.', 'I live in Eastmoor.', 'My saddle height is 74 cm.', 'Can I book a service for Friday?', 'Actually, move it to Monday.'];

/** Counts what the store holds by loading every session and listing every logbook scope. */
async function counted(store: Store, sessions: readonly string[]): Promise<{ sessions: number; slots: number; logbookEntries: number }> {
  let n = 0;
  let slots = 0;
  let entries = 0;
  for (const s of sessions) {
    const snap = await store.load({ tenant: 'default', session: s });
    if (snap) {
      n++;
      slots += snap.table.count();
    }
    entries += (await store.listLogbook({ tenant: 'default', session: s }, { limit: 100_000 })).length;
  }
  return { sessions: n, slots, logbookEntries: entries };
}

async function drive(store: Store): Promise<string[]> {
  const tm = createTidemark({ store, capacity: 4 });
  const sessions = ['bk-1', 'bk-2', 'bk-3', 'bk-4'];
  for (let i = 0; i < 24; i++) {
    const session = sessions[i % sessions.length]!;
    await tm.write({ session, text: FACTS[i % FACTS.length]!, role: 'user' });
  }
  await tm.erase({ session: 'bk-2' });
  // Erasing a session that holds nothing must leave the figures alone (and not fail).
  await tm.erase({ session: 'bk-never-seen' });
  await tm.flush();
  return sessions;
}

describe('store truth figures', () => {
  it('in-process: stats() equals what the store holds after writes, evictions and an erase', async () => {
    const store = new InProcessStore();
    const sessions = await drive(store);
    const truth = await counted(store, sessions);
    expect(truth.sessions).toBe(3);
    expect(truth.slots).toBeGreaterThan(0);
    const { source, counters: _survival, ...figures } = await store.stats('default');
    expect(figures).toEqual(truth);
    expect(source).toBe('counters');
  });
});

const down = await probeRedis();
describe.skipIf(down !== null)(`redis store truth figures${down ? ` (skipped: ${down})` : ''}`, () => {
  const prefix = uniquePrefix('stats');
  const client = newClient();
  afterAll(async () => {
    const keys = await scanKeys(client, `${prefix}*`);
    if (keys.length) await client.del(...keys);
    client.disconnect();
  });

  it('the commit and erase scripts keep the counters equal to the stored state', async () => {
    const store = new RedisStore({ redis: client, prefix });
    const sessions = await drive(store);
    // Another tenant's turns count for that tenant only.
    const orchard = createTidemark({ store, tenant: 'orchard' });
    await orchard.write({ session: 'bk-1', text: 'My name is Ilse.', role: 'user' });
    expect((await store.stats('orchard')).sessions).toBe(1);
    const truth = await counted(store, sessions);
    expect(truth.sessions).toBe(3);
    expect(truth.logbookEntries).toBeGreaterThan(0);
    const { source, counters: _survival, ...figures } = await store.stats('default');
    expect(source).toBe('counters');
    expect(figures).toEqual(truth);
    // A logbook delete moves the counter too.
    const [one] = await store.listLogbook({ tenant: 'default', session: 'bk-1' }, { limit: 1 });
    expect(await store.deleteLogbook({ tenant: 'default', session: 'bk-1' }, [one!.id])).toBe(1);
    expect((await store.stats('default')).logbookEntries).toBe(truth.logbookEntries - 1);
  });

  it('samples bytes per session with MEMORY USAGE, bounded by the sample size', async () => {
    const store = new RedisStore({ redis: client, prefix });
    const tm = createTidemark({ store, tenant: 'sizes', capacity: 4 });
    const sessions = ['z-1', 'z-2', 'z-3'];
    for (let i = 0; i < 12; i++) await tm.write({ session: sessions[i % 3]!, text: FACTS[i % FACTS.length]!, role: 'user' });
    // Every session sampled (3 < 10): the figures equal MEMORY USAGE summed over each session's keys.
    const direct: number[] = [];
    for (const s of sessions) {
      const keys = await scanKeys(client, `${prefix}{sizes:${s}}:*`);
      let n = 0;
      for (const k of keys) if (!/:(gone|quarantine)$/.test(k)) n += Number(await client.call('MEMORY', 'USAGE', k));
      direct.push(n);
    }
    expect(direct.every((n) => n > 0)).toBe(true);
    expect((await store.sampleSessionBytes('sizes', 10)).sort((a, b) => a - b)).toEqual(direct.sort((a, b) => a - b));
    expect(await store.sampleSessionBytes('sizes', 2)).toHaveLength(2);
    expect(await store.sampleSessionBytes('no-such-tenant', 5)).toEqual([]);
  });

  it('fleet records are shared by every process on the store and expire', async () => {
    const a = new RedisStore({ redis: client, prefix });
    const b = new RedisStore({ redis: client, prefix });
    await a.putFleet('default', 'a', '{"x":1}', 60_000);
    await a.putFleet('other-tenant', 'c', '{"x":3}', 60_000);
    // A record whose time to live has already run out (no waiting on the clock).
    await b.putFleet('default', 'b', '{"x":2}', -1);
    const seen = await b.listFleet('default');
    expect(seen.map((r) => [r.instance, r.payload])).toEqual([['a', '{"x":1}']]);
  });
});
