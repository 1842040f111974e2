// The Redis store against the real redis-server (REDIS_URL, default 127.0.0.1:6379): the shared
// conformance suite in both key formats, payload checks, round trips per call (counted with MONITOR),
// tenant isolation, TTLs, erasure proven by SCAN, replayed commits, and a SIGKILLed server.

import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Redis } from 'ioredis';
import { REDIS_SLOT_STORE_DEFAULTS, RedisSlotStore, redisSlotStore } from '../../../adapters/redis/index.js';
import { createTidemark } from '../../../src/index.js';
import { slotTermsCached } from '../../../src/memory/rank.js';
import { buildBlocks, encodeLogbook, encodeRecord, splitBlock } from '../../../adapters/redis/codec.js';
import { turnEntryId } from '../../../src/middleware/write.js';
import { demotedItem, commitOf, searchText, slot, storeConformance, turnEntry, unit } from '../../store/conformance.js';
import { REDIS_URL, ThrowawayRedis, deletePrefix, freePort, newClient, probeRedis, scanKeys, uniquePrefix, watchCommands, type SeenCommand } from './helpers.js';

const down = await probeRedis();

/** The logbook entries a slice holds, counted from its log: a block's live records, an older element's payload in the hash. */
async function entriesHeld(r: Redis, hash: string, log: string): Promise<number> {
  let n = 0;
  for (const el of await r.lrangeBuffer(log, 0, -1)) {
    if (el[0] === 0 || el[0] === 1) n += splitBlock(el, 'test').records.length;
    else n += await r.hexists(hash, el.toString().replace(/^-?\d+:/, ''));
  }
  return n;
}

/**
 * Flips the last byte of one record's body in the open block at the tail of a log (so the block still
 * splits, and that record fails its check); resolves to the record's bytes as now stored.
 */
async function tamperRecord(r: Redis, log: string, record: number): Promise<Buffer> {
  const el = Buffer.from((await r.lindexBuffer(log, -1))!);
  expect(el[0]).toBe(0);
  const rec = splitBlock(el, 'test').records[record]!;
  const at = el.indexOf(rec.raw) + rec.raw.length - 1;
  el[at]! ^= 0x01;
  await r.lset(log, -1, el);
  return splitBlock(el, 'test').records[record]!.raw;
}
const prefixes: string[] = [];
const prefixFor = (tag: string): string => {
  const p = uniquePrefix(tag);
  prefixes.push(p);
  return p;
};

// Outside CI, with no Redis reachable, the suites are skipped; the reason is in the suite name.
describe.skipIf(down !== null)(`redis store${down ? ` (skipped: ${down})` : ''}`, () => {
  let admin: Redis;
  beforeAll(() => {
    admin = newClient();
  });
  afterAll(async () => {
    for (const p of prefixes) await deletePrefix(admin, p);
    admin.disconnect();
  });

  storeConformance('redis-int8', async () => redisSlotStore({ redis: REDIS_URL, prefix: prefixFor('int8') }), { keyTolerance: 1e-2 });
  storeConformance('redis-float32', async () => redisSlotStore({ redis: REDIS_URL, prefix: prefixFor('f32'), keyFormat: 'float32' }), { keyTolerance: 1e-6 });
  storeConformance('redis-nocache', async () => redisSlotStore({ redis: REDIS_URL, prefix: prefixFor('nocache'), cacheSessions: 0 }), { keyTolerance: 1e-2 });

  describe('store-kept counters do not drift', () => {
    const T0 = 1_700_000_000_000;
    const figures = async (store: RedisSlotStore, tenant: string) => {
      const { source, counters: _survival, ...f } = await store.stats(tenant);
      expect(source).toBe('counters');
      return f;
    };

    it('property: after any sequence of commits, caps, deletes, sweeps and erases the counters equal what Redis holds (fast-check, seeded)', async () => {
      const prefix = prefixFor('stats-prop');
      const store = redisSlotStore({ redis: REDIS_URL, prefix });
      const seed = Number(process.env.FC_SEED ?? 14014);
      const sessions = ['p1', 'p2', 'p3'];
      const op = fc.oneof(
        fc.record({ kind: fc.constant('commit' as const), s: fc.nat({ max: 2 }), user: fc.boolean(), slots: fc.array(fc.tuple(fc.nat({ max: 5 }), fc.boolean()), { maxLength: 4 }), entries: fc.nat({ max: 3 }), cap: fc.constantFrom(0, 3, 5) }),
        fc.record({ kind: fc.constant('sweep' as const), slotCut: fc.nat({ max: 40 }), logCut: fc.nat({ max: 40 }) }),
        fc.record({ kind: fc.constant('erase' as const), s: fc.nat({ max: 2 }) }),
        fc.constant({ kind: 'eraseUser' as const }),
        fc.record({ kind: fc.constant('delete' as const), n: fc.nat({ max: 40 }) }),
      );
      let run = 0;
      try {
        await fc.assert(
          fc.asyncProperty(fc.array(op, { minLength: 1, maxLength: 12 }), async (ops) => {
            const tenant = `prop${++run}`;
            const version = new Map<string, number>();
            let n = 0;
            for (const o of ops) {
              if (o.kind === 'commit') {
                const ref = { tenant, session: sessions[o.s]!, ...(o.user ? { user: 'pu' } : {}) };
                const expectedVersion = (await store.load(ref))?.version ?? 0;
                const slotOps = o.slots.map(([index, set]) => ({ index, slot: set ? slot(++n, { createdMs: T0 + n }) : null }));
                const logbook = Array.from({ length: o.entries }, () => turnEntry(++n, ref, `turn ${n}`, { atMs: T0 + n }));
                const r = await store.commit(ref, commitOf({ expectedVersion, ops: slotOps, logbook, retention: { policy: { maxAgeMs: 0, maxEntries: o.cap }, nowMs: T0 + n } }));
                expect(r.ok).toBe(true);
                version.set(ref.session, r.ok ? r.version : 0);
              } else if (o.kind === 'sweep') {
                await store.sweep({ tenant, slotCutoffMs: o.slotCut ? T0 + o.slotCut : 0, logbookCutoffMs: o.logCut ? T0 + o.logCut : 0 });
              } else if (o.kind === 'erase') {
                await store.erase({ tenant, session: sessions[o.s]! });
              } else if (o.kind === 'eraseUser') {
                await store.erase({ tenant, user: 'pu' });
              } else {
                await store.deleteLogbook({ tenant, user: 'pu' }, [`T-p1-${o.n}`, `T-p2-${o.n}`, `T-p3-${o.n}`]);
                await store.deleteLogbook({ tenant, session: 'p1' }, [`T-p1-${o.n}`]);
              }
            }
            // The truth, counted from the keys themselves.
            const truth = { sessions: 0, slots: 0, logbookEntries: 0 };
            for (const s of sessions) {
              const k = store.sessionKeys(tenant, s);
              if ((await admin.exists(k.meta)) === 0) continue;
              truth.sessions++;
              truth.slots += await admin.hlen(k.slots);
              truth.logbookEntries += (await entriesHeld(admin, k.arch, k.alog)) + (await entriesHeld(admin, k.uarch, k.ualog));
            }
            expect(await figures(store, tenant)).toEqual(truth);
            await store.erase({ tenant, user: 'pu' });
            for (const s of sessions) await store.erase({ tenant, session: s });
            expect(await figures(store, tenant)).toEqual({ sessions: 0, slots: 0, logbookEntries: 0 });
          }),
          { seed, numRuns: 25 },
        );
      } finally {
        await store.close();
      }
    });

    it('a session that expires by idleTtlSeconds leaves the counters at the next sweep', async () => {
      const prefix = prefixFor('ttl-stats');
      const store = redisSlotStore({ redis: REDIS_URL, prefix, idleTtlSeconds: 1 });
      try {
        const ref = { tenant: 'acme', session: 'brief', user: 'u-brief' };
        await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }, { index: 1, slot: slot(2) }], logbook: [demotedItem(1, ref)] }));
        expect(await figures(store, 'acme')).toEqual({ sessions: 1, slots: 2, logbookEntries: 1 });
        const k = store.sessionKeys('acme', 'brief');
        for (let i = 0; i < 60 && (await admin.exists(k.meta)) === 1; i++) await new Promise((r) => setTimeout(r, 100));
        expect(await admin.exists(k.meta)).toBe(0);
        // Redis dropped the keys without a script seeing it; the sweep counts the session again.
        await store.sweep({ tenant: 'acme', slotCutoffMs: 0, logbookCutoffMs: 0 });
        expect(await figures(store, 'acme')).toEqual({ sessions: 0, slots: 0, logbookEntries: 0 });
        // A session that comes back is counted once, not on top of the lost figures.
        await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(3) }] }));
        expect(await figures(store, 'acme')).toEqual({ sessions: 1, slots: 1, logbookEntries: 0 });
      } finally {
        await store.close();
      }
    });

    it('a session re-created after TTL expiry, before any sweep, is not counted twice', async () => {
      const prefix = prefixFor('ttl-recreate');
      const store = redisSlotStore({ redis: REDIS_URL, prefix, idleTtlSeconds: 1 });
      try {
        const ref = { tenant: 'acme', session: 'again' };
        await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }, { index: 1, slot: slot(2) }], logbook: [demotedItem(1, ref)] }));
        const k = store.sessionKeys('acme', 'again');
        for (let i = 0; i < 60 && (await admin.exists(k.meta)) === 1; i++) await new Promise((r) => setTimeout(r, 100));
        await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(3) }] }));
        expect(await figures(store, 'acme')).toEqual({ sessions: 1, slots: 1, logbookEntries: 0 });
        await store.sweep({ tenant: 'acme', slotCutoffMs: 0, logbookCutoffMs: 0 });
        expect(await figures(store, 'acme')).toEqual({ sessions: 1, slots: 1, logbookEntries: 0 });
      } finally {
        await store.close();
      }
    });

    it('a quarantined slot leaves the slot counter; an erase then brings every counter to zero', async () => {
      const prefix = prefixFor('q-stats');
      const store = redisSlotStore({ redis: REDIS_URL, prefix, cacheSessions: 0 });
      try {
        const ref = { tenant: 'acme', session: 'q' };
        await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }, { index: 1, slot: slot(2) }], logbook: [demotedItem(1, ref)] }));
        const k = store.sessionKeys('acme', 'q');
        const raw = (await admin.hgetBuffer(k.slots, '0'))!;
        raw[raw.length - 1] ^= 0x01;
        await admin.hset(k.slots, '0', raw);
        expect((await store.load(ref))?.quarantined).toBe(1);
        expect(await figures(store, 'acme')).toEqual({ sessions: 1, slots: 1, logbookEntries: 1 });
        await store.erase(ref);
        expect(await figures(store, 'acme')).toEqual({ sessions: 0, slots: 0, logbookEntries: 0 });
        // No per-session figure is left behind under the tenant's keys once nothing is stored.
        expect((await scanKeys(admin, `${prefix}*`)).filter((x) => !x.endsWith(':gone') && !x.endsWith(':stats') && !x.endsWith('marker'))).toEqual([]);
      } finally {
        await store.close();
      }
    });
  });

  describe('erase reaches what other processes hold in memory', () => {
    it('a second instance that read the text returns none of it after an erase made elsewhere, and drops its derived caches', async () => {
      const prefix = prefixFor('erase-mem');
      const writer = createTidemark({ tenant: 'shop', store: redisSlotStore({ redis: REDIS_URL, prefix }) });
      const reader = createTidemark({ tenant: 'shop', store: redisSlotStore({ redis: REDIS_URL, prefix }) });
      // The erase comes from a bare store (another process, or the CLI): nothing in this process is told.
      const eraser = redisSlotStore({ redis: REDIS_URL, prefix });
      try {
        await writer.write({ session: 's1', user: 'u-mem', text: 'My phone number is 07700 900321.' });
        await writer.write({ session: 's2', user: 'u-mem', text: 'My bike is a red cargo trike.' });
        const ask = (session: string, text: string) => reader.read({ session, user: 'u-mem', text });
        const before = await ask('s1', 'What is my phone number?');
        const slotItem = before.items.find((i) => i.source === 'slot' && i.value.includes('900321'));
        expect(slotItem).toBeDefined();
        expect(slotTermsCached(slotItem!.id)).toBe(true);
        expect((await ask('s2', 'What is my phone number?')).items.map((i) => i.value).join(' ')).toContain('900321');
        // The reader's store caches hold the text too (session table, user-scope index).
        expect((await reader.store.listLogbook({ tenant: 'shop', user: 'u-mem' })).map((e) => e.value).join(' ')).toContain('900321');

        await eraser.erase({ tenant: 'shop', user: 'u-mem' });

        const after = await ask('s1', 'What is my phone number?');
        expect(after.items.map((i) => i.value).join(' ')).not.toContain('900321');
        expect(slotTermsCached(slotItem!.id)).toBe(false);
        expect((await ask('s2', 'What is my phone number?')).items.map((i) => i.value).join(' ')).not.toContain('900321');
        expect((await reader.store.listLogbook({ tenant: 'shop', user: 'u-mem' })).map((e) => e.value).join(' ')).not.toContain('900321');
        expect(await reader.store.load({ tenant: 'shop', session: 's1', user: 'u-mem' })).toBeNull();
      } finally {
        await writer.close();
        await reader.close();
        await eraser.close();
      }
    });

    it('the erasing instance drops the ranking cache of the erased values at once', async () => {
      const prefix = prefixFor('erase-rank');
      const tm = createTidemark({ tenant: 'shop', store: redisSlotStore({ redis: REDIS_URL, prefix }) });
      try {
        await tm.write({ session: 's1', text: 'My phone number is 07700 900654.' });
        const item = (await tm.read({ session: 's1', text: 'What is my phone number?' })).items.find((i) => i.source === 'slot');
        expect(item && slotTermsCached(item.id)).toBe(true);
        await tm.erase({ session: 's1' });
        expect(slotTermsCached(item!.id)).toBe(false);
      } finally {
        await tm.close();
      }
    });
  });

  describe('payloads', () => {
    let store: RedisSlotStore;
    let prefix: string;
    beforeAll(() => {
      prefix = prefixFor('payload');
      store = redisSlotStore({ redis: newClient(), prefix });
    });
    afterAll(async () => {
      (await store.redis()).disconnect();
      await store.close();
    });

    it('int8 keys keep every component within 0.005 and come back unit length', async () => {
      const ref = { tenant: 't', session: 'int8' };
      const key = unit(42, 384);
      await store.commit(ref, commitOf({ dim: 384, ops: [{ index: 0, slot: slot(1, { key }) }] }));
      const fresh = redisSlotStore({ redis: await store.redis(), prefix, cacheSessions: 0 });
      const got = (await fresh.load(ref))!.table.get(0)!.key;
      let maxErr = 0;
      let norm = 0;
      for (let j = 0; j < 384; j++) {
        maxErr = Math.max(maxErr, Math.abs(got[j]! - key[j]!));
        norm += got[j]! * got[j]!;
      }
      expect(maxErr).toBeLessThan(0.005);
      expect(Math.sqrt(norm)).toBeCloseTo(1, 6);
    });

    it('a tampered slot payload is never decoded: it is moved aside (kept, reported) and the session keeps working', async () => {
      const ref = { tenant: 't', session: 'tamper' };
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }, { index: 1, slot: slot(2) }] }));
      const k = store.sessionKeys('t', 'tamper');
      const raw = (await admin.hgetBuffer(k.slots, '0'))!;
      raw[raw.length - 1] ^= 0x01; // one bit of the key
      await admin.hset(k.slots, '0', raw);
      const fresh = redisSlotStore({ redis: await store.redis(), prefix, cacheSessions: 0 });
      const snap = await fresh.load(ref);
      expect(snap?.quarantined).toBe(1);
      expect(snap?.version).toBe(2); // moved on, so every cached copy and plan refreshes
      expect(snap?.table.get(0)).toBeNull();
      expect(snap?.table.get(1)?.id).toBe(slot(2).id);
      expect(fresh.quarantined).toBe(1);
      const kept = await admin.hgetallBuffer(k.quarantine);
      expect(Object.keys(kept)).toHaveLength(1);
      expect(Object.values(kept)[0]!.equals(raw)).toBe(true);
      // Writes go on.
      expect(await fresh.commit(ref, commitOf({ expectedVersion: 2, ops: [{ index: 0, slot: slot(3) }] }))).toMatchObject({ ok: true, version: 3 });
      // An unknown format version byte is moved aside too.
      const raw3 = (await admin.hgetBuffer(k.slots, '0'))!;
      raw3[0] = 9;
      await admin.hset(k.slots, '0', raw3);
      expect((await fresh.load(ref))?.quarantined).toBe(1);
      // A garbage version in the meta hash concerns the whole session: refused, coded.
      await admin.hset(k.meta, 'v', 'banana');
      await expect(fresh.load(ref)).rejects.toMatchObject({ code: 'TIDEMARK_E_STORE_CORRUPT' });
      // Erase removes what was kept aside as well.
      await fresh.erase(ref);
      expect(await admin.exists(k.quarantine)).toBe(0);
    });

    it('a tampered logbook payload is moved aside (kept, reported once) and the scope stays searchable', async () => {
      const ref = { tenant: 't', session: 'tamper-log', user: 'u-tl' };
      await store.commit(ref, commitOf({ logbook: [turnEntry(1, ref, 'my saddle is a brown leather one'), turnEntry(3, ref, 'my saddle bag is waxed canvas')] }));
      const k = store.sessionKeys('t', 'tamper-log');
      const raw = await tamperRecord(admin, k.ualog, 0);
      const fresh = redisSlotStore({ redis: await store.redis(), prefix });
      const heard: Array<{ session: string; entries: number }> = [];
      fresh.watchQuarantine((e) => heard.push({ session: e.session, entries: e.entries }));
      const scope = { tenant: 't', user: 'u-tl' };
      const hits = (await searchText(fresh, scope, 'saddle')).hits.map((h) => h.entry.id);
      expect(hits).toEqual(['T-tamper-log-3']);
      expect(heard).toEqual([{ session: 'tamper-log', entries: 1 }]);
      expect(fresh.quarantinedEntries).toBe(1);
      const kept = await admin.hgetallBuffer(k.quarantine);
      expect(Object.keys(kept)).toHaveLength(1);
      expect(Object.keys(kept)[0]).toMatch(/^log:at\d+\.0@\d+$/);
      expect(Object.values(kept)[0]!.equals(raw)).toBe(true);
      expect(await admin.hget(k.meta, 'aun')).toBe('1');
      // Another process reading afresh finds nothing left to move and reports nothing.
      const third = redisSlotStore({ redis: await store.redis(), prefix });
      third.watchQuarantine(() => heard.push({ session: 'again', entries: 0 }));
      expect((await searchText(third, scope, 'saddle')).hits.map((h) => h.entry.id)).toEqual(['T-tamper-log-3']);
      expect(heard).toHaveLength(1);
      // The session keeps committing; erase removes what was kept aside.
      expect(await fresh.commit(ref, commitOf({ expectedVersion: 1, logbook: [turnEntry(5, ref, 'my saddle height is 74 cm')] }))).toMatchObject({ ok: true });
      expect((await searchText(fresh, scope, 'saddle')).hits).toHaveLength(2);
      await fresh.erase({ tenant: 't', user: 'u-tl' });
      expect(await admin.exists(k.quarantine)).toBe(0);
    });

    it('under the middleware a corrupt logbook entry is reported (STORE_CORRUPT, tier logbook) and reads are not degraded', async () => {
      const p3 = `${prefix}mwlog:`;
      const writer = createTidemark({ store: redisSlotStore({ redis: await store.redis(), prefix: p3 }) });
      const reader = createTidemark({ store: redisSlotStore({ redis: await store.redis(), prefix: p3 }) });
      try {
        await writer.write({ session: 'lg', user: 'u-lg', text: 'My saddle is a brown leather one.' });
        await writer.write({ session: 'lg', user: 'u-lg', text: 'My pump is a yellow track pump.' });
        const k = redisSlotStore({ prefix: p3, redis: await store.redis() }).sessionKeys('default', 'lg');
        await tamperRecord(admin, k.ualog, 0);
        const errors: Array<{ code: string; details: unknown }> = [];
        const degraded: string[] = [];
        reader.on('error', (e) => errors.push({ code: e.error.code, details: e.error.details }));
        reader.on('degraded', (e) => degraded.push(e.code));
        const ctx = await reader.read({ session: 'lg2', user: 'u-lg', text: 'What pump and saddle do I have?' });
        expect(ctx.degraded ?? false).toBe(false);
        expect(degraded).toEqual([]);
        expect(errors).toEqual([{ code: 'TIDEMARK_E_STORE_CORRUPT', details: { quarantined: 1, tier: 'logbook' } }]);
        await reader.write({ session: 'lg2', user: 'u-lg', text: 'My lock is a heavy chain.' });
      } finally {
        await writer.close();
        await reader.close();
      }
    });

    it('under the middleware a corrupt slot is reported and the session keeps reading and writing', async () => {
      const p2 = `${prefix}mw:`;
      const tm = createTidemark({ store: redisSlotStore({ redis: await store.redis(), prefix: p2 }) });
      try {
        await tm.write({ session: 'kept', text: 'My name is Ola.' });
        await tm.write({ session: 'kept', text: 'My bike is a green tandem.' });
        const k = redisSlotStore({ redis: await store.redis(), prefix: p2 }).sessionKeys('default', 'kept');
        const fields = await admin.hkeys(k.slots);
        const raw = (await admin.hgetBuffer(k.slots, fields[0]!))!;
        raw[raw.length - 1] ^= 0x01;
        await admin.hset(k.slots, fields[0]!, raw);
        const other = createTidemark({ store: redisSlotStore({ redis: await store.redis(), prefix: p2 }) });
        const codes: string[] = [];
        other.on('error', (e) => codes.push(e.error.code));
        const ctx = await other.read({ session: 'kept', text: 'What is my bike?' });
        expect(ctx.degraded).toBe(false);
        expect(codes).toEqual(['TIDEMARK_E_STORE_CORRUPT']);
        expect((await other.write({ session: 'kept', text: 'My phone number is 07700 900222.' })).committed).toBe(true);
        await other.close();
      } finally {
        await tm.close();
      }
    });

    it('the retention sweep takes expired entries from old elements and into a sealed block; counts, heads and readers follow', async () => {
      const T = 1_600_000_000_000;
      const ref = { tenant: 'tsw', session: 'swept' };
      const scope = { tenant: 'tsw', session: 'swept' };
      const k = store.sessionKeys('tsw', 'swept');
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
      await admin.hdel(k.meta, 'an');
      for (const n of [1, 2, 3]) {
        const e = turnEntry(n, ref, `older note ${n} about the trailer`, { atMs: T + n });
        await admin.hset(k.arch, e.id, encodeLogbook(e, undefined, 'int8', { tenant: 'tsw', session: 'swept', id: e.id }));
        await admin.rpush(k.alog, `${e.atMs}:${e.id}`);
      }
      // 130 entries in one commit: a block cut at the block size (closed, then sealed) and an open one.
      await store.commit(ref, commitOf({ expectedVersion: 1, logbook: Array.from({ length: 130 }, (_, i) => turnEntry(i + 4, ref, `note ${i + 4} about the trailer`, { atMs: T + i + 4 })) }));
      await store.settled();
      expect((await admin.lrangeBuffer(k.alog, 0, -1)).map((e) => (e[0]! > 1 ? 'old' : e[0]))).toEqual(['old', 'old', 'old', 1, 0]);
      const reader = redisSlotStore({ redis: admin, prefix });
      expect(await reader.listLogbook(scope, { limit: 1000 })).toHaveLength(133);
      expect((await store.stats('tsw')).logbookEntries).toBe(133);
      // Entries before T + 54: the 3 old ones and the first 50 of the sealed block.
      expect(await store.sweep({ tenant: 'tsw', slotCutoffMs: 0, logbookCutoffMs: T + 54 })).toMatchObject({ logbookEntries: 53 });
      expect(await admin.hlen(k.arch)).toBe(0);
      const head = (await admin.lindexBuffer(k.alog, 0))!;
      // Sealed, its dead count moved on by 50 (its records past them still there).
      expect([head[0], head[2]]).toEqual([1, 50]);
      expect(head[1]).toBeGreaterThan(50);
      expect(await admin.hmget(k.meta, 'an', 'ah')).toEqual(['80', '53']);
      expect((await store.stats('tsw')).logbookEntries).toBe(80);
      expect((await reader.listLogbook(scope, { limit: 1000 })).map((e) => e.seq)).toEqual(Array.from({ length: 80 }, (_, i) => 133 - i));
      // A second pass finds nothing more; the oldest-entry index now names the sealed block's first live time.
      expect(await store.sweep({ tenant: 'tsw', slotCutoffMs: 0, logbookCutoffMs: T + 54 })).toMatchObject({ logbookEntries: 0 });
      expect(await admin.zscore(`${store.sessionKeys('tsw', '').meta.slice(0, -':meta'.length)}:oldlog`, k.meta.slice(0, -':meta'.length))).toBe(String(T + 54));
      await store.erase({ tenant: 'tsw', session: 'swept' });
      expect((await store.stats('tsw')).logbookEntries).toBe(0);
    });

    it('a session written before slot births were kept gets its births key with the idle TTL at its next commit', async () => {
      const ttlStore = redisSlotStore({ redis: admin, prefix: prefixFor('born'), idleTtlSeconds: 3600 });
      const ref = { tenant: 'tborn', session: 'older' };
      const k = ttlStore.sessionKeys('tborn', 'older');
      await ttlStore.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
      // The older layout: slots but no births key, and no record of the last TTL refresh.
      await admin.del(k.born);
      await admin.hdel(k.meta, 'xr');
      expect(await admin.exists(k.born)).toBe(0);
      await ttlStore.commit(ref, commitOf({ expectedVersion: 1, ops: [{ index: 1, slot: slot(2) }] }));
      expect(await admin.zcard(k.born)).toBe(1);
      const ttl = await admin.pttl(k.born);
      expect(ttl).toBeGreaterThan(3_500_000);
      expect(ttl).toBeLessThanOrEqual(3_600_000);
      await ttlStore.erase({ tenant: 'tborn', session: 'older' });
    });

    it('entries deleted by age, by the sweep or at a commit, leave the user cap index as well', async () => {
      const T = Date.now() - 60_000;
      const ref = { tenant: 'tcap', session: 'capped', user: 'rider-7' };
      const index = store.userSessionsKey('tcap', 'rider-7').replace(/:sessions$/, ':entries');
      const at = (n: number) => turnEntry(n, ref, `note ${n} about the saddle`, { atMs: T + n });
      const cap = (nowMs: number, maxAgeMs = 0) => ({ policy: { maxAgeMs, maxEntries: 1000 }, nowMs });
      await store.commit(ref, commitOf({ logbook: [1, 2, 3, 4, 5, 6].map(at), retention: cap(T + 10) }));
      expect(await admin.zcard(index)).toBe(6);
      // The sweep deletes entries 1-3 (before T + 4) and their index members with them.
      expect(await store.sweep({ tenant: 'tcap', slotCutoffMs: 0, logbookCutoffMs: T + 4 })).toMatchObject({ logbookEntries: 3 });
      expect(await admin.zrange(index, 0, -1)).toEqual(['capped T-capped-4', 'capped T-capped-5', 'capped T-capped-6']);
      // A commit whose age limit (100 ms at T + 106: before T + 6) deletes 4 and 5 does the same.
      const r = await store.commit(ref, commitOf({ expectedVersion: 1, logbook: [at(7)], retention: cap(T + 106, 100) }));
      expect(r).toMatchObject({ ok: true, dropped: { age: 2 } });
      expect(await admin.zrange(index, 0, -1)).toEqual(['capped T-capped-6', 'capped T-capped-7']);
      await store.erase({ tenant: 'tcap', user: 'rider-7' });
    });

    it('the per-user cap takes named records from the head of blocks, and one elsewhere in a block as a delete does', async () => {
      const T = 1_600_000_000_000;
      const c1 = { tenant: 'tcap', session: 'c1', user: 'ucap' };
      const c2 = { tenant: 'tcap', session: 'c2', user: 'ucap' };
      const scope = { tenant: 'tcap', user: 'ucap' };
      const k1 = store.sessionKeys('tcap', 'c1');
      const retention = { policy: { maxAgeMs: 0, maxEntries: 4 }, nowMs: T + 200 };
      await store.commit(c1, commitOf({ logbook: [1, 2].map((n) => turnEntry(n, c1, `bell note ${n}`, { atMs: T + 100 + n })), retention }));
      // An entry filed with an older time than those c1 already holds: the scope's oldest is not at c1's head.
      await store.commit(c1, commitOf({ expectedVersion: 1, logbook: [turnEntry(3, c1, 'bell note 3', { atMs: T + 3 })], retention }));
      const r = await store.commit(c2, commitOf({ logbook: [4, 5].map((n) => turnEntry(n, c2, `bell note ${n}`, { atMs: T + 150 + n })), retention }));
      expect(r).toMatchObject({ ok: true, dropped: { count: 1 } });
      const seqs = async (): Promise<number[]> => (await redisSlotStore({ redis: admin, prefix }).listLogbook(scope, { limit: 100 })).map((e) => e.seq).sort();
      expect(await seqs()).toEqual([1, 2, 4, 5]);
      expect(await admin.hget(k1.meta, 'aun')).toBe('2');
      // Then the head: the next entry pushes out the oldest by time, c1's first record.
      const r2 = await store.commit(c2, commitOf({ expectedVersion: 1, logbook: [turnEntry(6, c2, 'bell note 6', { atMs: T + 160 })], retention }));
      expect(r2).toMatchObject({ ok: true, dropped: { count: 1 } });
      expect(await seqs()).toEqual([2, 4, 5, 6]);
      expect(await admin.hmget(k1.meta, 'aun', 'auh')).toEqual(['1', '1']);
      expect((await store.stats('tcap')).logbookEntries).toBe(4);
      expect(await admin.zcard(`${prefix}{tcap:u:ucap}:entries`)).toBe(4);
      await store.erase({ tenant: 'tcap', user: 'ucap' });
      expect((await store.stats('tcap')).logbookEntries).toBe(0);
    });

    it('a bad payload of a log written before blocks, with blocks after it, is kept aside with its element: count and counter follow', async () => {
      const ref = { tenant: 'tmix', session: 'mixed' };
      const scope = { tenant: 'tmix', session: 'mixed' };
      const k = store.sessionKeys('tmix', 'mixed');
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
      await admin.hdel(k.meta, 'an');
      for (const n of [1, 2, 3]) {
        const e = turnEntry(n, ref, `older note ${n} about kayaks`);
        await admin.hset(k.arch, e.id, encodeLogbook(e, undefined, 'int8', { tenant: 'tmix', session: 'mixed', id: e.id }));
        await admin.rpush(k.alog, `${e.atMs}:${e.id}`);
      }
      await store.commit(ref, commitOf({ expectedVersion: 1, logbook: [4, 5].map((n) => turnEntry(n, ref, `newer note ${n} about kayaks`)) }));
      expect((await store.stats('tmix')).logbookEntries).toBe(5);
      const id2 = turnEntry(2, ref, '').id;
      const raw = (await admin.hgetBuffer(k.arch, id2))!;
      await admin.hset(k.arch, id2, raw.subarray(0, raw.length - 3));
      const reader = redisSlotStore({ redis: admin, prefix });
      expect((await searchText(reader, scope, 'kayaks')).hits.map((h) => h.entry.seq).sort()).toEqual([1, 3, 4, 5]);
      expect(Object.keys(await admin.hgetall(k.quarantine))).toEqual([expect.stringMatching(new RegExp(`^log:${id2}@\\d+$`))]);
      expect(await admin.llen(k.alog)).toBe(3);
      expect(await admin.hget(k.meta, 'an')).toBe('4');
      expect((await store.stats('tmix')).logbookEntries).toBe(4);
      expect((await reader.listLogbook(scope)).map((e) => e.seq)).toEqual([5, 4, 3, 1]);
      expect(await store.erase({ tenant: 'tmix', session: 'mixed' })).toMatchObject({ logbookEntries: 4 });
      expect((await store.stats('tmix')).logbookEntries).toBe(0);
    });

    it('a log written before blocks (hash payloads, atMs:id elements) still reads, and takes blocks after it: listing, delta reads, delete and retention span both', async () => {
      const ref = { tenant: 't', session: 'legacy-log' };
      const scope = { tenant: 't', session: 'legacy-log' };
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
      const k = store.sessionKeys('t', 'legacy-log');
      // As 0.2 wrote it: one hash field per entry, one log element `atMs:id`, no entry count in meta.
      await admin.hdel(k.meta, 'an');
      for (const n of [1, 2, 3]) {
        const e = turnEntry(n, ref, `older note ${n} about canoes`);
        await admin.hset(k.arch, e.id, encodeLogbook(e, undefined, 'int8', { tenant: 't', session: 'legacy-log', id: e.id }));
        await admin.rpush(k.alog, `${e.atMs}:${e.id}`);
      }
      await admin.hset(k.meta, 'as', 'moved');
      const reader = redisSlotStore({ redis: admin, prefix });
      expect((await reader.listLogbook(scope)).map((e) => e.seq)).toEqual([3, 2, 1]);
      await store.commit(ref, commitOf({ expectedVersion: 1, logbook: [4, 5].map((n) => turnEntry(n, ref, `newer note ${n} about canoes`)) }));
      expect(await admin.hget(k.meta, 'an')).toBe('5');
      const els = await admin.lrangeBuffer(k.alog, 0, -1);
      expect(els.map((e) => e[0] === 0)).toEqual([false, false, false, true]);
      // The reader that saw the three old entries gets the two new ones as a delta.
      expect((await reader.listLogbook(scope)).map((e) => e.seq)).toEqual([5, 4, 3, 2, 1]);
      expect((await searchText(reader, scope, 'canoes')).hits).toHaveLength(5);
      expect(await reader.deleteLogbook(scope, [turnEntry(2, ref, '').id, turnEntry(5, ref, '').id, 'nope'])).toBe(2);
      expect((await reader.listLogbook(scope)).map((e) => e.seq)).toEqual([4, 3, 1]);
      expect(await admin.hget(k.meta, 'an')).toBe('3');
      // Retention by count takes the oldest first, across the old elements and into the block.
      const r = await store.commit(ref, commitOf({ expectedVersion: 2, logbook: [turnEntry(6, ref, 'latest note about canoes')], retention: { policy: { maxAgeMs: 0, maxEntries: 2 }, nowMs: Date.now() } }));
      expect(r).toEqual({ ok: true, version: 3, dropped: { age: 0, count: 2 } });
      expect((await reader.listLogbook(scope)).map((e) => e.seq)).toEqual([6, 4]);
      expect(await admin.hlen(k.arch)).toBe(0);
      expect(await store.erase({ tenant: 't', session: 'legacy-log' })).toMatchObject({ logbookEntries: 2 });
    });

    it('appended turns share blocks, cut where the codec\'s reference builder cuts them, and a reader that looked between commits gets the rest', async () => {
      const ref = { tenant: 't', session: 'blocks' };
      const scope = { tenant: 't', session: 'blocks' };
      const reader = redisSlotStore({ redis: admin, prefix });
      for (let v = 0; v < 75; v++) {
        await store.commit(ref, commitOf({ expectedVersion: v, logbook: [2 * v + 1, 2 * v + 2].map((n) => turnEntry(n, ref, `note ${n} on the tandem`)) }));
        if (v === 40) expect(await reader.listLogbook(scope, { limit: 1000 })).toHaveLength(82);
      }
      const k = store.sessionKeys('t', 'blocks');
      const want = buildBlocks(Array.from({ length: 150 }, (_, i) => encodeRecord(turnEntry(i + 1, ref, `note ${i + 1} on the tandem`), undefined, 'int8', ref, turnEntryId)));
      expect(want.length).toBeLessThan(10);
      await store.settled();
      const got = await admin.lrangeBuffer(k.alog, 0, -1);
      // Every block the commits closed is sealed (compressed, shorter); the open one at the tail is as built.
      expect(got.map((b) => b[0])).toEqual(want.map((_, i) => (i < want.length - 1 ? 1 : 0)));
      got.slice(0, -1).forEach((b, i) => expect(b.length).toBeLessThan(want[i]!.length));
      expect(got.map((b) => splitBlock(b, 'test').records.map((r) => r.raw.toString('hex')))).toEqual(want.map((b) => splitBlock(b, 'test').records.map((r) => r.raw.toString('hex'))));
      expect(got.at(-1)).toEqual(want.at(-1));
      expect((await reader.listLogbook(scope, { limit: 1000 })).map((e) => e.seq)).toEqual(Array.from({ length: 150 }, (_, i) => 150 - i));
      // Retention and delete reach into sealed blocks: the oldest 70 go (a block and a part of the next),
      // then one entry in the middle of a sealed block.
      const kept = await store.commit(ref, commitOf({ expectedVersion: 75, retention: { policy: { maxAgeMs: 0, maxEntries: 80 }, nowMs: Date.now() } }));
      expect(kept).toMatchObject({ ok: true, dropped: { age: 0, count: 70 } });
      expect(await reader.deleteLogbook(scope, [turnEntry(100, ref, '').id])).toBe(1);
      expect((await reader.listLogbook(scope, { limit: 1000 })).map((e) => e.seq)).toEqual(Array.from({ length: 80 }, (_, i) => 150 - i).filter((n) => n !== 100));
      expect(await admin.hget(k.meta, 'an')).toBe('79');
    });

    it('a record of a logbook block that fails its check is never decoded: search goes on without it, the record kept aside', async () => {
      const ref = { tenant: 't', session: 'tamper-arch' };
      await store.commit(ref, commitOf({ logbook: [demotedItem(1, ref), demotedItem(2, ref)] }));
      const k = store.sessionKeys('t', 'tamper-arch');
      const raw = Buffer.from((await admin.lindexBuffer(k.alog, -1))!);
      raw[raw.length - 1] ^= 0x55; // one byte of the record's value
      await admin.lset(k.alog, -1, raw);
      await admin.hset(k.meta, 'as', 'moved'); // as a real writer would, so the cached copy is refreshed
      const bad = splitBlock(Buffer.from(raw), 'test').records[1]!; // the block still splits: only a2's body fails its check
      const before = (await store.stats('t')).logbookEntries;
      const hits = (await searchText(store, { tenant: 't', session: 'tamper-arch' }, 'old value')).hits.map((h) => h.entry.id);
      expect(hits).toEqual(['a1']);
      const kept = await admin.hgetallBuffer(k.quarantine);
      expect(Object.keys(kept)).toEqual([expect.stringMatching(new RegExp(`^log:at${bad.at}\\.0@\\d+$`))]);
      expect(Object.values(kept)[0]!.equals(bad.raw)).toBe(true);
      // The block keeps its good record; the entry count and the store's counter drop by the one kept aside.
      expect(splitBlock((await admin.lindexBuffer(k.alog, -1))!, 'test').records).toHaveLength(1);
      expect(await admin.hget(k.meta, 'an')).toBe('1');
      expect((await store.stats('t')).logbookEntries).toBe(before - 1);
      expect((await searchText(redisSlotStore({ redis: admin, prefix }), { tenant: 't', session: 'tamper-arch' }, 'old value')).hits.map((h) => h.entry.id)).toEqual(['a1']);
      expect(Object.keys(await admin.hgetall(k.quarantine))).toHaveLength(1);
    });

    it('a logbook block that cannot be read at all is kept aside whole; the entries after it stay searchable and counted', async () => {
      const ref = { tenant: 't', session: 'tamper-block' };
      const scope = { tenant: 't', session: 'tamper-block' };
      const home = { tenant: 't', session: 'tamper-block' };
      const k = store.sessionKeys('t', 'tamper-block');
      await store.commit(ref, commitOf({ logbook: [turnEntry(1, ref, 'my bell is brass')] }));
      // A second block after the first (as the commit script starts one past BLOCK_RECORDS or BLOCK_BYTES).
      const [second] = buildBlocks([encodeRecord(turnEntry(2, ref, 'my bell is loud'), undefined, 'int8', home, turnEntryId)]);
      await admin.rpush(k.alog, second!);
      await admin.hset(k.meta, 'an', 2, 'as', 'moved');
      const first = Buffer.from((await admin.lindexBuffer(k.alog, 0))!);
      first[1] = 9; // the header names 9 records: the block no longer splits
      await admin.lset(k.alog, 0, first);
      const reader = redisSlotStore({ redis: admin, prefix });
      const heard: number[] = [];
      reader.watchQuarantine((e) => heard.push(e.entries));
      expect((await searchText(reader, scope, 'bell')).hits.map((h) => h.entry.seq)).toEqual([2]);
      // The header's 9 is not trusted: the entry count is counted again from what is left, so one went.
      expect(heard).toEqual([1]);
      const kept = await admin.hgetallBuffer(k.quarantine);
      expect(Object.keys(kept)).toEqual([expect.stringMatching(/^log:block\d+@\d+$/)]);
      expect(Object.values(kept)[0]!.equals(first)).toBe(true);
      expect(await admin.llen(k.alog)).toBe(1);
      expect((await reader.listLogbook(scope)).map((e) => e.seq)).toEqual([2]);
      expect(await store.erase({ tenant: 't', session: 'tamper-block' })).toMatchObject({ logbookEntries: 1 });
    });
  });

  describe('round trips, caching, isolation', () => {
    let prefix: string;
    let client: Redis;
    let monitor: { close(): void } | undefined;
    let seen: SeenCommand[] = [];
    let marks = new Set<string>();
    beforeAll(async () => {
      prefix = prefixFor('rt');
      client = newClient();
      monitor = await watchCommands(REDIS_URL, (c) => {
        if (c.args[0]?.toLowerCase() === 'echo' && c.args[1]?.startsWith(prefix)) marks.add(c.args[1]);
        // Commands run inside our Lua scripts show as "lua" sources; only client calls count as round trips.
        else if (!c.source.includes('lua') && c.args.some((a) => a.includes(prefix))) seen.push(c);
      });
    });
    afterAll(async () => {
      monitor?.close();
      client.disconnect();
    });
    // MONITOR lines arrive asynchronously but in the server's order: once the monitor has seen an
    // ECHO sent after the calls, it has seen every call before it.
    let marker = 0;
    const settle = async (): Promise<SeenCommand[]> => {
      const mark = `${prefix}mark-${++marker}`;
      await client.echo(mark);
      while (!marks.has(mark)) await new Promise((r) => setImmediate(r));
      marks = new Set();
      const out = seen;
      seen = [];
      return out;
    };

    it('a commit is one EVALSHA and a read one EVALSHA', async () => {
      const store = redisSlotStore({ redis: client, prefix });
      const ref = { tenant: 'acme', session: 'rt1' };
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
      await settle();
      await store.commit(ref, commitOf({ expectedVersion: 1, ops: [{ index: 1, slot: slot(2) }], logbook: [demotedItem(1, ref)], events: [{ type: 'allocate', slot: 1, id: 'r2', clock: 1, atMs: 1 }] }));
      let cmds = await settle();
      expect(cmds.map((c) => c.args[0]!.toLowerCase())).toEqual(['evalsha']);
      const cold = redisSlotStore({ redis: client, prefix });
      expect((await cold.load(ref))!.table.count()).toBe(2);
      cmds = await settle();
      // A store's first call on a connection also checks the prefix's marker key (an empty comeback).
      expect(cmds.filter((c) => c.args[1] === `${prefix}marker`).map((c) => c.args[0]!.toLowerCase())).toEqual(['set', 'get']);
      expect(cmds.filter((c) => c.args[1] !== `${prefix}marker`).map((c) => c.args[0]!.toLowerCase())).toEqual(['evalsha']);
      // A session search is one round trip too, and a repeat transfers only that nothing is new.
      expect((await searchText(store, { tenant: 'acme', session: 'rt1' }, 'old value 1')).hits).toHaveLength(1);
      expect((await settle()).map((c) => c.args[0]!.toLowerCase())).toEqual(['evalsha']);
      expect((await searchText(store, { tenant: 'acme', session: 'rt1' }, 'old value 1')).hits).toHaveLength(1);
      expect((await settle()).map((c) => c.args[0]!.toLowerCase())).toEqual(['evalsha']);
    });

    it('an unchanged session is served from the cache; another writer or an erase is seen at once', async () => {
      const a = redisSlotStore({ redis: client, prefix });
      const b = redisSlotStore({ redis: client, prefix });
      const ref = { tenant: 'acme', session: 'cache1' };
      await a.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
      const s1 = await a.load(ref);
      const s2 = await a.load(ref);
      expect(s2!.table).toBe(s1!.table); // same decoded table: only the version crossed the wire
      await b.commit(ref, commitOf({ expectedVersion: 1, ops: [{ index: 0, slot: slot(5) }] }));
      expect((await a.load(ref))!.table.get(0)!.id).toBe('r5');
      // Erase and rewrite up to the same version from elsewhere: the epoch differs, so no stale copy.
      await b.erase(ref);
      await b.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(9) }] }));
      await b.commit(ref, commitOf({ expectedVersion: 1, ops: [{ index: 1, slot: slot(10) }] }));
      const after = await a.load(ref);
      expect(after!.version).toBe(2);
      expect(after!.table.get(0)!.id).toBe('r9');
    });

    it('logbook searches pick up entries appended by another process, its deletes and its retention', async () => {
      const a = redisSlotStore({ redis: client, prefix });
      const b = redisSlotStore({ redis: client, prefix });
      const ref = { tenant: 'acme', session: 'arch-delta' };
      const scope = { tenant: 'acme', session: 'arch-delta' };
      await b.commit(ref, commitOf({ logbook: [demotedItem(1, ref), demotedItem(2, ref)] }));
      expect((await a.listLogbook(scope)).map((i) => i.id)).toEqual(['a2', 'a1']);
      await b.commit(ref, commitOf({ expectedVersion: 1, logbook: [demotedItem(3, ref)] }));
      const r = await searchText(a, scope, 'old value 3');
      expect(r.hits.sort((x, y) => y.score - x.score)[0]!.entry.id).toBe('a3');
      await b.deleteLogbook(scope, ['a1']);
      expect((await a.listLogbook(scope)).map((i) => i.id)).toEqual(['a3', 'a2']);
      await b.commit(ref, commitOf({ expectedVersion: 2, logbook: [demotedItem(4, ref)] }));
      expect((await a.listLogbook(scope)).map((i) => i.id)).toEqual(['a4', 'a3', 'a2']);
      // Retention in b's commit trims the head of the log; a's cached index drops the trimmed entries.
      const t = (n: number) => turnEntry(n, ref, `logbook turn ${n}`);
      await b.commit(ref, commitOf({ expectedVersion: 3, logbook: [t(1), t(2)], retention: { policy: { maxAgeMs: 0, maxEntries: 3 }, nowMs: Date.now() } }));
      expect((await a.listLogbook(scope)).map((i) => i.id).sort()).toEqual(['T-arch-delta-1', 'T-arch-delta-2', 'a4']);
      expect((await searchText(a, scope, 'old value')).hits.map((h) => h.entry.id)).toEqual(['a4']);
    });

    it('a re-sent commit is recognised and applied once', async () => {
      const store = redisSlotStore({ redis: client, prefix });
      const ref = { tenant: 'acme', session: 'resend' };
      const req = commitOf({ ops: [{ index: 0, slot: slot(1) }], events: [{ type: 'allocate', slot: 0, id: 'r1', clock: 1, atMs: 1 }] });
      expect(await store.commit(ref, req)).toEqual({ ok: true, version: 1 });
      // The same request again, as after a reply lost in a disconnect: no second apply.
      expect(await store.commit(ref, req)).toEqual({ ok: true, version: 1 });
      expect(await store.readEvents(ref)).toHaveLength(1);
      // A different request planned against the old version is a conflict.
      expect(await store.commit(ref, commitOf({ ops: [] }))).toEqual({ ok: false, conflict: true, version: 1 });
      // A write re-planned on top of its own landed commit (reply lost, outbox retry) carries the same
      // commitId: reported as applied at version 2, not applied again.
      const ev = { type: 'allocate' as const, slot: 1, id: 'r2', clock: 2, atMs: 2 };
      const first = { ...commitOf({ expectedVersion: 1, ops: [{ index: 1, slot: slot(2) }], events: [ev] }), commitId: 'write-7f3a' };
      expect(await store.commit(ref, first)).toEqual({ ok: true, version: 2 });
      const replanned = { ...commitOf({ expectedVersion: 2, ops: [{ index: 2, slot: slot(3) }], events: [ev] }), commitId: 'write-7f3a' };
      expect(await store.commit(ref, replanned)).toEqual({ ok: true, version: 2 });
      const snap = await redisSlotStore({ redis: client, prefix, cacheSessions: 0 }).load(ref);
      expect(snap!.version).toBe(2);
      expect(snap!.table.isUsed(2)).toBe(false);
      expect(await store.readEvents(ref)).toHaveLength(2);
    });

    it('no call for one tenant names a key of another tenant', async () => {
      const store = redisSlotStore({ redis: client, prefix });
      const other = { tenant: 'beta', session: 'shared-id', user: 'u1' };
      await store.commit(other, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [demotedItem(1, other)] }));
      await settle();
      const ref = { tenant: 'alpha', session: 'shared-id', user: 'u1' };
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(2) }], logbook: [demotedItem(2, ref)], events: [{ type: 'allocate', slot: 0, id: 'r2', clock: 1, atMs: 1 }] }));
      await store.load(ref);
      await searchText(store, { tenant: 'alpha', user: 'u1' }, 'old value');
      await searchText(store, { tenant: 'alpha', session: 'shared-id' }, 'old value');
      await store.listLogbook({ tenant: 'alpha', user: 'u1' });
      await store.deleteLogbook({ tenant: 'alpha', user: 'u1' }, ['a1', 'a2']);
      await store.readEvents(ref);
      expect(await store.listSessions('alpha')).toEqual(['shared-id']);
      await store.erase({ tenant: 'alpha', user: 'u1' });
      await store.erase({ tenant: 'alpha', session: 'shared-id' });
      const cmds = await settle();
      expect(cmds.length).toBeGreaterThanOrEqual(10);
      for (const c of cmds) {
        for (const arg of c.args.filter((a) => a.includes(prefix))) {
          expect(arg.startsWith(`${prefix}{alpha:`), `${c.args[0]} ${arg}`).toBe(true);
        }
      }
      // And beta's state is untouched.
      expect((await store.load(other))!.table.count()).toBe(1);
      expect(await store.listLogbook({ tenant: 'beta', user: 'u1' })).toHaveLength(1);
    });

    it('tenant and session ids cannot collide through ":" or braces', async () => {
      const store = redisSlotStore({ redis: client, prefix });
      await store.commit({ tenant: 'a:b', session: 'c' }, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
      expect(await store.load({ tenant: 'a', session: 'b:c' })).toBeNull();
      await store.commit({ tenant: 'x', session: 'we{ir}d%' }, commitOf({ ops: [{ index: 0, slot: slot(2) }] }));
      expect(await store.listSessions('x')).toEqual(['we{ir}d%']);
      expect(await store.listSessions('a')).toEqual([]);
      expect(await store.listSessions('a:b')).toEqual(['c']);
    });

    it('a new session gets the idle TTL on all its keys; 0 means none', async () => {
      const store = redisSlotStore({ redis: client, prefix, idleTtlSeconds: 120 });
      const ref = { tenant: 'acme', session: 'ttl', user: 'u-ttl' };
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [demotedItem(1, ref)], events: [{ type: 'allocate', slot: 0, id: 'r1', clock: 1, atMs: 1 }] }));
      const k = store.sessionKeys('acme', 'ttl');
      for (const key of [k.meta, k.slots, k.events, k.ualog]) {
        const ttl = await client.ttl(key);
        expect(ttl, key).toBeGreaterThan(110);
        expect(ttl, key).toBeLessThanOrEqual(120);
      }
      const forever = redisSlotStore({ redis: client, prefix, idleTtlSeconds: 0 });
      await forever.commit(ref, commitOf({ expectedVersion: 1 }));
      expect(await client.ttl(k.meta)).toBe(-1);
      await forever.erase({ tenant: 'acme', user: 'u-ttl' });
    });

    it('between TTL refreshes a key a commit creates gets the TTL of the rest; the refresh time stays put', async () => {
      const store = redisSlotStore({ redis: client, prefix, idleTtlSeconds: 3600 });
      const ref = { tenant: 'acme', session: 'ttl-new', user: 'u-ttl-new' };
      const k = store.sessionKeys('acme', 'ttl-new');
      // A session with nothing but meta: no slots, no logbook, no events yet.
      await store.commit(ref, commitOf({}));
      const refreshed = await client.hget(k.meta, 'xr');
      expect(refreshed).toMatch(/^\d+:3600$/);
      // The next commit (well within a tenth of the TTL) creates the slots, births, logbook and events keys.
      await store.commit(ref, commitOf({ expectedVersion: 1, ops: [{ index: 0, slot: slot(1) }], logbook: [demotedItem(1, ref)], events: [{ type: 'allocate', slot: 0, id: 'r1', clock: 1, atMs: 1 }] }));
      expect(await client.hget(k.meta, 'xr')).toBe(refreshed);
      for (const key of [k.meta, k.slots, k.born, k.events, k.ualog]) {
        expect(await client.exists(key), key).toBe(1);
        const ttl = await client.ttl(key);
        expect(ttl, key).toBeGreaterThan(3500);
        expect(ttl, key).toBeLessThanOrEqual(3600);
      }
      // A slot freed (the hash goes when empty) and set again: the hash made again gets it too.
      await store.commit(ref, commitOf({ expectedVersion: 2, ops: [{ index: 0, slot: null }] }));
      expect(await client.exists(k.slots)).toBe(0);
      await store.commit(ref, commitOf({ expectedVersion: 3, ops: [{ index: 1, slot: slot(2) }] }));
      expect(await client.ttl(k.slots)).toBeGreaterThan(3500);
      expect(await client.ttl(k.born)).toBeGreaterThan(3500);
      // A changed TTL is applied at once.
      const shorter = redisSlotStore({ redis: client, prefix, idleTtlSeconds: 120 });
      await shorter.commit(ref, commitOf({ expectedVersion: 4 }));
      expect(await client.ttl(k.slots)).toBeLessThanOrEqual(120);
      await store.erase({ tenant: 'acme', user: 'u-ttl-new' });
    });

    it('erasure leaves no data key of the session or of the user, only tombstones holding a time (SCAN proves it)', async () => {
      const store = redisSlotStore({ redis: client, prefix });
      const a = { tenant: 'acme', session: 'gone-1', user: 'u-gone' };
      const b = { tenant: 'acme', session: 'gone-2', user: 'u-gone' };
      const c = { tenant: 'acme', session: 'gone-3' };
      for (const ref of [a, b, c]) {
        await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [demotedItem(1, ref)], events: [{ type: 'allocate', slot: 0, id: 'r1', clock: 1, atMs: 1 }] }));
      }
      // meta, slots, events, (u)alog (the logbook's blocks), slot birth times, plus the applied commit ids
      expect(await scanKeys(client, `${prefix}{acme:gone-*`)).toHaveLength(6 * 3);
      expect(await scanKeys(client, store.userSessionsKey('acme', 'u-gone'))).toHaveLength(1);
      expect(await store.erase({ tenant: 'acme', user: 'u-gone' })).toEqual({ sessions: 2, slots: 2, logbookEntries: 2, events: 2 });
      expect(await store.erase({ tenant: 'acme', session: 'gone-3' })).toEqual({ sessions: 1, slots: 1, logbookEntries: 1, events: 1 });
      // What is left: one tombstone per session and one for the user, each a bare time in ms with a TTL.
      const left = [...(await scanKeys(client, `${prefix}{acme:gone-*`)), ...(await scanKeys(client, `${prefix}{acme:u:u-gone}*`))].sort();
      expect(left).toEqual([`${prefix}{acme:gone-1}:gone`, `${prefix}{acme:gone-2}:gone`, `${prefix}{acme:gone-3}:gone`, `${prefix}{acme:u:u-gone}:gone`]);
      for (const key of left) {
        expect(await client.get(key)).toMatch(/^\d{13}$/);
        expect(await client.ttl(key)).toBeGreaterThan(0);
        expect(await client.ttl(key)).toBeLessThanOrEqual(REDIS_SLOT_STORE_DEFAULTS.fenceTtlSeconds);
      }
      // A store that had them cached returns nothing either.
      expect(await store.load(a)).toBeNull();
      expect((await searchText(store, { tenant: 'acme', user: 'u-gone' }, 'old value')).hits).toEqual([]);
    });
  });

  describe('options', () => {
    it('rejects bad options naming the option, the value and what was expected', () => {
      expect(() => redisSlotStore({ prefix: 'a{b' })).toThrow(/prefix must be a string without \{ or \}, got "a\{b"/);
      expect(() => redisSlotStore({ idleTtlSeconds: -1 })).toThrow(/idleTtlSeconds must be an integer >= 0 \(0 = no TTL\), got -1/);
      expect(() => redisSlotStore({ keyFormat: 'int4' as never })).toThrow(/keyFormat must be 'int8' or 'float32', got "int4"/);
      expect(() => redisSlotStore({ maxEvents: 1.5 })).toThrow(/maxEvents must be an integer >= 0, got 1.5/);
      expect(() => redisSlotStore({ redis: 'http://x' })).toThrow(/redis must be an ioredis Redis\/Cluster instance or a redis:\/\/ URL/);
      expect(() => redisSlotStore({ redis: 'http://x' })).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_CONFIG' }));
    });
  });

  describe('outages', () => {
    it('fails fast with STORE_UNAVAILABLE when nothing listens', async () => {
      const port = await freePort();
      const store = redisSlotStore({ redis: `redis://127.0.0.1:${port}`, connectTimeoutMs: 500 });
      const t0 = performance.now();
      const err = await store.load({ tenant: 't', session: 's' }).catch((e: unknown) => e);
      expect(err).toMatchObject({ code: 'TIDEMARK_E_STORE_UNAVAILABLE' });
      expect((err as Error).cause).toBeDefined();
      expect(performance.now() - t0).toBeLessThan(1500);
      await store.close();
    });

    it('a SIGKILLed server: calls fail fast while it is down, then the store reconnects and nothing acknowledged is lost', async () => {
      const server = new ThrowawayRedis();
      await server.start();
      const store = redisSlotStore({ redis: server.url, prefix: 'tidemark:' });
      try {
        const acked: number[] = [];
        for (let n = 1; n <= 20; n++) {
          const r = await store.commit({ tenant: 't', session: `s${n}` }, commitOf({ ops: [{ index: 0, slot: slot(n) }] }));
          if (r.ok) acked.push(n);
        }
        await server.kill();
        const t0 = performance.now();
        await expect(store.commit({ tenant: 't', session: 's99' }, commitOf({}))).rejects.toMatchObject({ code: 'TIDEMARK_E_STORE_UNAVAILABLE' });
        await expect(store.load({ tenant: 't', session: 's1' })).rejects.toMatchObject({ code: 'TIDEMARK_E_STORE_UNAVAILABLE' });
        expect(performance.now() - t0).toBeLessThan(1000);
        await server.start();
        let back = false;
        for (let i = 0; i < 60 && !back; i++) {
          back = await store.load({ tenant: 't', session: 's1' }).then(() => true, () => false);
          if (!back) await new Promise((r) => setTimeout(r, 100));
        }
        expect(back).toBe(true);
        const fresh = redisSlotStore({ redis: server.url, prefix: 'tidemark:', cacheSessions: 0 });
        for (const n of acked) expect((await fresh.load({ tenant: 't', session: `s${n}` }))!.table.get(0)!.id).toBe(`r${n}`);
        expect(acked).toHaveLength(20);
        await fresh.close();
      } finally {
        await store.close();
        await server.stop();
      }
    });
  });
});
