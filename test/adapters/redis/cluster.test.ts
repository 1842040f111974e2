// The Redis store on a real local Redis Cluster of 3 masters, started by scripts/redis-cluster.sh
// (and stopped again when this file started it): the shared conformance suite, Redis's own
// CLUSTER KEYSLOT for every key of a session, sessions spread over all masters, erasure proven by SCAN.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Cluster } from 'ioredis';
import { redisSlotStore } from '../../../adapters/redis/index.js';
import { createTidemark } from '../../../src/index.js';
import { demotedItem, commitOf, searchText, slot, storeConformance } from '../../store/conformance.js';
import { deletePrefix, newCluster, probeRedis, scanKeys, startCluster, stopCluster, uniquePrefix } from './helpers.js';

// The cluster needs redis-server and redis-cli; the same probe as the single-node suite decides
// (fail under CI, skip with the reason elsewhere).
const down = await probeRedis();

describe.skipIf(down !== null)(`redis cluster store${down ? ` (skipped: ${down})` : ''}`, () => {
  let ports: number[] = [];
  let started = false;
  let admin: Cluster;
  const prefix = uniquePrefix('cluster');
  const clients: Cluster[] = [];
  /** Keys holding data under the prefix: not erase tombstones (a time each) nor the store's marker. */
  const dataKeys = async (): Promise<string[]> => (await scanKeys(admin, `${prefix}*`)).filter((k) => !k.endsWith(':gone') && !k.endsWith(':marker'));

  beforeAll(async () => {
    ({ ports, started } = startCluster());
    admin = newCluster(ports);
    await new Promise<void>((resolve, reject) => {
      admin.once('ready', resolve);
      admin.once('error', reject);
    });
  });
  afterAll(async () => {
    if (admin) {
      await deletePrefix(admin, prefix);
      admin.disconnect();
    }
    for (const c of clients) c.disconnect();
    if (started) stopCluster();
  });

  storeConformance('cluster', async () => {
    const c = newCluster(ports);
    clients.push(c);
    return redisSlotStore({ redis: c, prefix: `${prefix}conf:` });
  }, { keyTolerance: 1e-2 });

  it('every key of a session hashes to one slot (CLUSTER KEYSLOT), and sessions spread over the masters', async () => {
    const store = redisSlotStore({ redis: admin, prefix });
    const slotsSeen = new Set<number>();
    for (let n = 0; n < 24; n++) {
      const ref = { tenant: 'acme', session: `ks-${n}`, user: 'u-ks' };
      // Distinct entry ids per session, so gathering them proves every master was asked.
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [demotedItem(1, ref, { id: `a-${n}`, value: `kayak note ${n}` })], events: [{ type: 'allocate', slot: 0, id: 'r1', clock: 1, atMs: 1 }] }));
      const k = store.sessionKeys('acme', ref.session);
      const slots = new Set<number>();
      for (const key of k.script) slots.add(Number(await admin.cluster('KEYSLOT', key)));
      expect(slots.size, ref.session).toBe(1);
      slotsSeen.add([...slots][0]!);
    }
    // Which master owns each slot, from the cluster itself.
    const owners = new Set<string>();
    const ranges = await admin.cluster('SLOTS');
    for (const s of slotsSeen) {
      const r = ranges.find(([lo, hi]) => s >= lo && s <= hi)!;
      owners.add(`${r[2][0]}:${r[2][1]}`);
    }
    expect(owners.size).toBe(3);
    expect((await store.listSessions('acme', 10_000)).sort()).toEqual(Array.from({ length: 24 }, (_, n) => `ks-${n}`).sort());
    // The user's logbook gathers entries from sessions on all three masters.
    expect((await searchText(store, { tenant: 'acme', user: 'u-ks' }, 'kayak note')).hits).toHaveLength(24);
    expect((await store.listLogbook({ tenant: 'acme', user: 'u-ks' }, { limit: 100 })).map((e) => e.id).sort()).toEqual(Array.from({ length: 24 }, (_, n) => `a-${n}`).sort());
    const report = await store.erase({ tenant: 'acme', user: 'u-ks' });
    expect(report).toEqual({ sessions: 24, slots: 24, logbookEntries: 24, events: 24 });
    expect(await dataKeys()).toEqual([]);
  });

  it('erasing a session leaves no key of it on any master', async () => {
    const store = redisSlotStore({ redis: admin, prefix });
    const ref = { tenant: 'acme', session: 'bye', user: 'u-bye' };
    await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [demotedItem(1, ref)], events: [{ type: 'allocate', slot: 0, id: 'r1', clock: 1, atMs: 1 }] }));
    // meta, slots, events, ualog (the logbook's blocks), slot birth times, applied commit ids + the user's set
    expect((await dataKeys()).length).toBe(7);
    await store.erase({ tenant: 'acme', session: 'bye' });
    // The session's keys are gone; the user's set no longer names it (it is empty, so Redis dropped it).
    expect(await dataKeys()).toEqual([]);
  });

  it('a user erase while another process opens sessions for that user on all three masters leaves none accepted before it', async () => {
    const a = createTidemark({ store: redisSlotStore({ redis: admin, prefix }), tenant: 'acme' });
    const bClient = newCluster(ports);
    clients.push(bClient);
    const b = createTidemark({ store: redisSlotStore({ redis: bClient, prefix }), tenant: 'acme' });
    try {
      await b.write({ session: 'race-warm', user: 'u-race', text: 'My lesson is on Friday.' });
      await a.read({ session: 'race-warm', user: 'u-race', text: 'When is my lesson?' });
      const writes = Array.from({ length: 30 }, (_, i) =>
        b.write({ session: `race-${i}`, user: 'u-race', text: `My locker number is ${100 + i}.` }).then(
          (r) => (r.committed ? 'stored' : 'queued'),
          (e: { code?: string }) => e.code ?? 'error',
        ),
      );
      await a.erase({ user: 'u-race' });
      const outcomes = await Promise.all(writes);
      expect(outcomes.filter((o) => o !== 'stored' && o !== 'TIDEMARK_E_STORE_ERASED')).toEqual([]);
      expect(await dataKeys()).toEqual([]);
      expect(await a.erase({ user: 'u-race' })).toEqual({ sessions: 0, slots: 0, logbookEntries: 0, events: 0 });
    } finally {
      await a.close();
      await b.close();
    }
  });
});
