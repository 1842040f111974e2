// Retention deletes: a slot past write.maxAgeMs leaves working memory without being demoted into the
// logbook (an `evict` with reason `expired`, logged: false), and with logbook.maxAgeMs the turn that
// said it goes too — so the expired value does not come back through either tier.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { redisSlotStore } from '../../adapters/redis/index.js';
import { prometheusMetrics } from '../../src/metrics/prometheus.js';
import { InProcessStore, createTidemark, type Store, type SweepEvent } from '../../src/index.js';
import { REDIS_URL, deletePrefix, newClient, probeRedis, uniquePrefix } from '../adapters/redis/helpers.js';

describe('retention', () => {
  it('an expired slot is deleted, not kept in the logbook; with the logbook limit its turn goes too', async () => {
    const day = 86_400_000;
    const t0 = Date.now() - 30 * day;
    const tm = createTidemark({ write: { maxAgeMs: 7 * day }, logbook: { maxAgeMs: 7 * day } });
    const evicted: Array<{ reason: string; logged: boolean }> = [];
    tm.on('evict', (e) => evicted.push({ reason: e.reason, logged: e.logged }));
    await tm.write({ session: 's', text: 'My phone number is 07700 900555.', at: t0 });
    await tm.write({ session: 's', text: 'My bike is a green tandem.', at: t0 + 10 * day });
    expect(evicted).toEqual([{ reason: 'expired', logged: false }]);
    const view = await tm.inspect('s');
    expect(view.slots.map((x) => x.value)).not.toContain('07700 900555');
    expect(view.logbook.map((e) => e.kind)).not.toContain('expired');
    expect(view.logbook.map((e) => e.value).join(' ')).not.toContain('900555');
    const ctx = await tm.read({ session: 's', text: 'What is my phone number?' });
    expect(ctx.items.map((i) => i.value).join(' ')).not.toContain('900555');
    await tm.close();
  });
});

// The sweep: expiry without waiting for the session's next turn, on every tier and every store.
const day = 86_400_000;
const PHONE = 'My phone number is 07700 900123.';

async function expiredPhoneScenario(makeStore: () => Store | Promise<Store>, tenant: string): Promise<void> {
  const options = { tenant, write: { maxAgeMs: 7 * day }, logbook: { maxAgeMs: 7 * day }, retention: { sweepMs: 0 } };
  const tm = createTidemark({ ...options, store: await makeStore() });
  // A second process on the same store (its own caches), for Redis; the same instance otherwise.
  const other = createTidemark({ ...options, store: await makeStore() });
  try {
    const swept: SweepEvent[] = [];
    tm.on('sweep', (e) => swept.push(e));
    const t0 = Date.now() - 10 * day;
    await tm.write({ session: 'b', user: 'u1', text: 'My bike is a green tandem.', at: t0 - day });
    await tm.write({ session: 'a', user: 'u1', text: PHONE, at: t0 });
    // Before the sweep the number is stored (the session never writes again) and searchable from
    // another session of the user — in both processes, so their in-memory indexes hold it.
    const heard = async (t: typeof tm) => (await t.read({ session: 'b', user: 'u1', text: 'What is my phone number?' })).items.map((i) => i.value).join(' ');
    expect(await heard(other)).toContain('900123');
    expect(await heard(tm)).toContain('900123');

    // Both turns (and both slots) are past 7 days.
    const report = await tm.sweep();
    expect(report.slots).toBe(2);
    expect(report.logbookEntries).toBe(2);
    expect(swept).toHaveLength(1);
    expect(swept[0]).toMatchObject({ reason: 'expired', slots: 2, logbookEntries: 2 });
    expect(JSON.stringify(swept[0])).not.toContain(tenant);

    expect(await heard(tm)).not.toContain('900123');
    expect(await heard(other)).not.toContain('900123');
    const view = await tm.inspect('a');
    expect(view.slots.map((x) => x.value).join(' ')).not.toContain('900123');
    expect(view.logbook.map((e) => e.value).join(' ')).not.toContain('900123');
    // Only what expired goes: a fact written now stays through the next sweeps, from either process.
    await tm.write({ session: 'b', user: 'u1', text: 'My saddle is a brown leather one.' });
    expect(await tm.sweep()).toMatchObject({ slots: 0, logbookEntries: 0 });
    expect(await other.sweep()).toMatchObject({ slots: 0, logbookEntries: 0 });
    expect((await tm.inspect('b')).slots.map((x) => x.value).join(' ')).toContain('brown leather');
  } finally {
    await tm.erase({ user: 'u1' });
    await tm.close();
    await other.close();
  }
}

describe('retention sweep', () => {
  it('in-process: an expired phone number goes from slots and the user logbook with no further turn', async () => {
    const store = new InProcessStore();
    // One process: both handles share the store (close() of the second must not stop the first's).
    await expiredPhoneScenario(() => store, 'sweep-mem');
  });

  it('runs on its own timer (retention.sweepMs), unref\'d, and stops with close()', async () => {
    const tm = createTidemark({ write: { maxAgeMs: 7 * day }, retention: { sweepMs: 20 } });
    await tm.write({ session: 's', text: PHONE, at: Date.now() - 10 * day });
    const e = await new Promise<SweepEvent>((resolve) => tm.on('sweep', resolve));
    expect(e.slots).toBe(1);
    expect((await tm.inspect('s')).slots).toEqual([]);
    await tm.close();
  });

  it('a value recalled before a sweep deleted it is not promoted back into a slot from another instance\'s memory', async () => {
    const store = new InProcessStore();
    const opts = { store, capacity: 2, logbook: { roles: [] as [], maxAgeMs: 7 * day }, retention: { sweepMs: 3_600_000 } };
    const a = createTidemark(opts);
    const b = createTidemark(opts);
    const t0 = Date.now() - 10 * day;
    const facts = ['My bike is a green Corvane Tourer with a dynamo hub.', 'My favourite fern is the maidenhair fern on the balcony.', 'My Spanish teacher is called Lucia Moreno.'];
    for (const [i, text] of facts.entries()) await a.write({ session: 's1', text, at: t0 + i * 1000 });
    const evicted = (await a.inspect('s1')).logbook.find((e) => e.kind === 'capacity')!;
    expect(evicted).toBeDefined();
    // B recalls the evicted value (nothing has swept it yet) ...
    const ctx = await b.read({ session: 's1', text: `What is ${evicted.keyText}?` });
    expect(ctx.items.map((i) => i.id)).toContain(evicted.id);
    const used = b.promotedBy(ctx, `It is ${evicted.value}.`);
    expect(used).toEqual([evicted.id]);
    // ... A's sweep deletes it (only the logbook limit is set: the slots stay) ...
    expect((await a.sweep()).logbookEntries).toBe(1);
    // ... and B's write does not bring it back from its memory.
    await b.write({ session: 's1', text: 'Thanks!' }, { promote: used });
    const view = await a.inspect('s1');
    expect(view.slots.map((x) => x.id)).not.toContain(evicted.id);
    expect(JSON.stringify(view)).not.toContain(evicted.value);
    await a.close();
    await b.close();
  });

  it('swept slots count in tidemark_evictions_total{reason="expired"}', async () => {
    const tm = createTidemark({ write: { maxAgeMs: 7 * day }, retention: { sweepMs: 0 } });
    const metrics = await prometheusMetrics(tm);
    await tm.write({ session: 's', text: PHONE, at: Date.now() - 10 * day });
    expect(await metrics.metrics()).toContain('tidemark_evictions_total{reason="expired"} 0');
    await tm.sweep();
    expect(await metrics.metrics()).toContain('tidemark_evictions_total{reason="expired"} 1');
    metrics.stop();
    await tm.close();
  });

  it('rejects a bad retention.sweepMs with a ConfigError', () => {
    expect(() => createTidemark({ retention: { sweepMs: -1 } })).toThrow(/retention\.sweepMs/);
  });
});

const down = await probeRedis();
describe.skipIf(down !== null)(`retention sweep on Redis${down ? ` (skipped: ${down})` : ''}`, () => {
  const prefix = uniquePrefix('sweep');
  let admin: ReturnType<typeof newClient>;
  beforeAll(() => {
    admin = newClient();
  });
  afterAll(async () => {
    await deletePrefix(admin, prefix);
    admin.disconnect();
  });

  it('two processes on one Redis: after one sweeps, neither returns the expired number', async () => {
    await expiredPhoneScenario(() => redisSlotStore({ redis: REDIS_URL, prefix }), 'sweep-redis');
  });
});
