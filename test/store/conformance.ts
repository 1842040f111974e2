// The shared conformance suite every Store runs (in-process, Redis, Redis Cluster): call
// `storeConformance(name, factory)` from a *.test.ts file. Every case runs for every store.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { LOGBOOK_SEARCH_DEFAULTS } from '../../src/logbook/index.js';
import { analyseQuery } from '../../src/logbook/query.js';
import { SlotTable } from '../../src/memory/slots.js';
import type { CommitRequest, Store } from '../../src/store/store.js';
import type { LogbookEntry, LogbookScope, SessionRef, SlotRecord } from '../../src/types.js';

export interface ConformanceOptions {
  /** Allowed absolute error per key component after a round trip (int8 payloads quantise). */
  keyTolerance?: number;
  /** Tenant prefix so parallel suites on one server never collide. */
  tenant?: string;
}

const DIM = 16;

export function unit(seed: number, dim = DIM): Float32Array {
  // A deterministic pseudo-random unit vector (mulberry32 PRNG, common practice for seeded tests).
  let a = seed >>> 0;
  const next = (): number => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296 - 0.5;
  };
  const v = new Float32Array(dim);
  let s = 0;
  for (let j = 0; j < dim; j++) {
    v[j] = next();
    s += v[j]! * v[j]!;
  }
  for (let j = 0; j < dim; j++) v[j] = v[j]! / Math.sqrt(s);
  return v;
}

export function slot(n: number, over: Partial<SlotRecord> = {}): SlotRecord {
  return {
    id: `r${n}`,
    key: unit(n),
    keyText: `topic ${n}`,
    value: `value ${n} — ünïcode ✓`,
    provenance: [`t${n}`],
    strength: 0.75,
    halfLife: 200,
    stamp: n,
    created: n,
    createdMs: 1_700_000_000_000 + n,
    updatedMs: 1_700_000_000_000 + n,
    reads: 0,
    pinned: false,
    ...over,
  };
}

/** A demoted slot value (superseded by revision r{n}). */
export function demotedItem(n: number, ref: SessionRef, over: Partial<LogbookEntry> = {}): LogbookEntry {
  return {
    id: `a${n}`,
    kind: 'superseded',
    tenant: ref.tenant,
    session: ref.session,
    ...(ref.user ? { user: ref.user } : {}),
    key: unit(1000 + n),
    keyText: `old topic ${n}`,
    value: `old value ${n}`,
    provenance: [`t${n}`],
    strength: 0.4,
    halfLife: 200,
    clock: n,
    seq: 0,
    createdMs: 1_700_000_000_000,
    atMs: 1_700_000_000_000 + n,
    successor: `r${n}`,
    ...over,
  };
}

/** A kept turn: seq n, said by `speaker`, at 1_700_000_000_000 + n * 1000. */
export function turnEntry(n: number, ref: SessionRef, text: string, over: Partial<LogbookEntry> = {}): LogbookEntry {
  return {
    id: `T-${ref.session}-${n}`,
    kind: 'turn',
    tenant: ref.tenant,
    session: ref.session,
    ...(ref.user ? { user: ref.user } : {}),
    value: text,
    keyText: '',
    provenance: [`t${n}`],
    role: n % 2 === 1 ? 'user' : 'assistant',
    atMs: 1_700_000_000_000 + n * 1000,
    createdMs: 1_700_000_000_000 + n * 1000,
    clock: n,
    seq: n,
    ...over,
  };
}

export function commitOf(over: Partial<CommitRequest>): CommitRequest {
  return { expectedVersion: 0, clock: 1, turns: 1, capacity: 8, dim: DIM, ops: [], logbook: [], events: [], ...over };
}

/** A logbook search for a text, with the default settings. */
export function searchText(store: Store, scope: LogbookScope, text: string) {
  return store.searchLogbook(scope, analyseQuery(text, Date.now()), LOGBOOK_SEARCH_DEFAULTS);
}

export function storeConformance(name: string, factory: () => Promise<Store>, options: ConformanceOptions = {}): void {
  const tol = options.keyTolerance ?? 1e-6;
  const tenantBase = options.tenant ?? `conf-${name}-${process.pid}-${Date.now().toString(36)}`;
  let counter = 0;
  const fresh = (user?: string): SessionRef => ({ tenant: tenantBase, session: `s${++counter}`, ...(user ? { user } : {}) });
  const test = (caseName: string, fn: () => Promise<void>): void => {
    it(caseName, fn);
  };
  const expectSlot = (table: SlotTable, i: number, want: SlotRecord): void => {
    const got = table.get(i);
    expect(got, `slot ${i}`).not.toBeNull();
    const { key, ...rest } = got!;
    const { key: wantKey, ...wantRest } = want;
    expect(rest).toEqual(wantRest);
    for (let j = 0; j < wantKey.length; j++) expect(Math.abs(key[j]! - wantKey[j]!)).toBeLessThanOrEqual(tol);
  };

  describe(`Store conformance: ${name}`, () => {
    let store: Store;
    beforeAll(async () => {
      store = await factory();
    });
    afterAll(async () => {
      // Leave nothing behind on shared servers.
      for (const s of await store.listSessions(tenantBase, 10_000)) await store.erase({ tenant: tenantBase, session: s });
      for (const u of ['u1', 'u2', 'u3', 'u4']) await store.erase({ tenant: tenantBase, user: u });
      await store.close();
    });

    test('load of an unknown session is null', async () => {
      expect(await store.load(fresh())).toBeNull();
    });

    test('a first commit creates the session at version 1 with its slots', async () => {
      const ref = fresh();
      const res = await store.commit(ref, commitOf({ clock: 3, turns: 4, ops: [{ index: 0, slot: slot(1) }, { index: 5, slot: slot(2, { pinned: true, previous: 'r0', owner: 'Kofi', reply: true, maybeReplaces: ['r7', 'r8'] }) }] }));
      expect(res).toEqual({ ok: true, version: 1 });
      const snap = await store.load(ref);
      expect(snap).not.toBeNull();
      expect(snap!.version).toBe(1);
      expect(snap!.clock).toBe(3);
      expect(snap!.turns).toBe(4);
      expect(snap!.table.capacity).toBe(8);
      expect(snap!.table.dim).toBe(DIM);
      expect(snap!.table.count()).toBe(2);
      expectSlot(snap!.table, 0, slot(1));
      expectSlot(snap!.table, 5, slot(2, { pinned: true, previous: 'r0', owner: 'Kofi', reply: true, maybeReplaces: ['r7', 'r8'] }));
      expect(snap!.table.isUsed(1)).toBe(false);
    });

    test('a stale expected version is refused and changes nothing', async () => {
      const ref = fresh();
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
      const res = await store.commit(ref, commitOf({ expectedVersion: 0, clock: 9, ops: [{ index: 0, slot: slot(7) }] }));
      expect(res).toEqual({ ok: false, conflict: true, version: 1 });
      const snap = await store.load(ref);
      expect(snap!.version).toBe(1);
      expect(snap!.clock).toBe(1);
      expectSlot(snap!.table, 0, slot(1));
    });

    test('ops overwrite and free slots; versions count commits', async () => {
      const ref = fresh();
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }, { index: 1, slot: slot(2) }] }));
      const res = await store.commit(ref, commitOf({ expectedVersion: 1, clock: 2, turns: 2, ops: [{ index: 0, slot: slot(3) }, { index: 1, slot: null }] }));
      expect(res).toEqual({ ok: true, version: 2 });
      const snap = await store.load(ref);
      expect(snap!.table.count()).toBe(1);
      expectSlot(snap!.table, 0, slot(3));
      expect(snap!.table.isUsed(1)).toBe(false);
    });

    test('a commit resent with the same commitId is not applied twice', async () => {
      const ref = fresh();
      const first = await store.commit(ref, commitOf({ commitId: 'c-1', ops: [{ index: 0, slot: slot(1) }], events: [{ type: 'allocate', slot: 0, id: 'r1', clock: 1, atMs: 1 }] }));
      expect(first).toEqual({ ok: true, version: 1 });
      // The reply was lost; the writer re-plans on what it last saw (version 0) and resends.
      const again = await store.commit(ref, commitOf({ commitId: 'c-1', ops: [{ index: 1, slot: slot(1) }], events: [{ type: 'allocate', slot: 1, id: 'r1', clock: 1, atMs: 1 }] }));
      expect(again.ok).toBe(true);
      const snap = await store.load(ref);
      expect(snap!.version).toBe(1);
      expect(snap!.table.count()).toBe(1);
      expect(await store.readEvents(ref)).toHaveLength(1);
    });

    test('concurrent commits against one version: exactly one wins', async () => {
      const ref = fresh();
      await store.commit(ref, commitOf({}));
      const results = await Promise.all(
        Array.from({ length: 6 }, (_, i) => store.commit(ref, commitOf({ expectedVersion: 1, clock: 10 + i, ops: [{ index: 0, slot: slot(20 + i) }] }))),
      );
      expect(results.filter((r) => r.ok)).toHaveLength(1);
      expect((await store.load(ref))!.version).toBe(2);
    });

    test('a capacity change keeps the slots below the new capacity', async () => {
      const ref = fresh();
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }, { index: 6, slot: slot(2) }] }));
      await store.commit(ref, commitOf({ expectedVersion: 1, capacity: 4, ops: [{ index: 6 - 6 + 1, slot: slot(2) }] }));
      const snap = await store.load(ref);
      expect(snap!.table.capacity).toBe(4);
      expect(snap!.table.count()).toBe(2);
      expectSlot(snap!.table, 1, slot(2));
    });

    test('every kept turn is searchable by its words, best first, in the session scope only', async () => {
      const ref = fresh();
      const turns = [
        turnEntry(1, ref, 'We adopted a puppy last week, she is a beagle mix.', { speaker: 'Maren' }),
        turnEntry(2, ref, 'Aww! What is her name?', { speaker: 'Kofi' }),
        turnEntry(3, ref, 'Biscuit! She chews everything.', { speaker: 'Maren' }),
        turnEntry(4, ref, 'I finally finished the pottery course.', { speaker: 'Kofi' }),
      ];
      await store.commit(ref, commitOf({ logbook: turns }));
      const r = await searchText(store, { tenant: ref.tenant, session: ref.session }, 'What kind of puppy did Maren adopt?');
      expect(r.size).toBe(4);
      const ranked = r.hits.sort((a, b) => b.score - a.score);
      expect(ranked[0]!.entry).toMatchObject({ id: turns[0]!.id, value: turns[0]!.value, speaker: 'Maren', role: 'user', seq: 1, provenance: ['t1'] });
      expect(ranked[0]!.speakerMatch).toBe(true);
      expect(r.speakers).toEqual(['maren']);
      // The reply after it shares no word with the query but is found as its neighbour.
      expect(ranked.map((h) => h.entry.id)).toContain(turns[1]!.id);
      expect(ranked.map((h) => h.entry.id)).not.toContain(turns[3]!.id);
      // Another session of the tenant sees nothing of it.
      expect((await searchText(store, { tenant: ref.tenant, session: 'other' }, 'puppy')).hits).toEqual([]);
    });

    test('demoted values round-trip with their vectors, links and owners', async () => {
      const ref = fresh();
      const items = [1, 2, 3].map((n) => demotedItem(n, ref, n === 2 ? { owner: 'Ana', kind: 'capacity', successor: undefined } : {}));
      delete (items[1] as { successor?: string }).successor;
      await store.commit(ref, commitOf({ logbook: items }));
      const listed = await store.listLogbook({ tenant: ref.tenant, session: ref.session });
      expect(listed.map((i) => i.id)).toEqual(['a3', 'a2', 'a1']);
      const two = listed.find((i) => i.id === 'a2')!;
      expect(two).toMatchObject({ kind: 'capacity', owner: 'Ana', keyText: 'old topic 2', value: 'old value 2', provenance: ['t2'], strength: 0.4, halfLife: 200 });
      expect(two.successor).toBeUndefined();
      expect(listed.find((i) => i.id === 'a1')!.successor).toBe('r1');
      const key = two.key!;
      const want = unit(1002);
      for (let j = 0; j < want.length; j++) expect(Math.abs(key[j]! - want[j]!)).toBeLessThanOrEqual(tol);
      expect((await store.listLogbook({ tenant: ref.tenant, session: ref.session }, { kinds: ['superseded'] })).map((i) => i.id)).toEqual(['a3', 'a1']);
    });

    test('dates and roles of turns round-trip; a resent entry id replaces, not duplicates', async () => {
      const ref = fresh();
      const t = turnEntry(1, ref, 'I ran my first 10k yesterday!', { dates: [{ text: 'yesterday', day: '2023-11-13', grain: 'day' }], speaker: 'Priya' });
      await store.commit(ref, commitOf({ logbook: [t] }));
      await store.commit(ref, commitOf({ expectedVersion: 1, logbook: [t] }));
      const listed = await store.listLogbook({ tenant: ref.tenant, session: ref.session });
      expect(listed).toHaveLength(1);
      expect(listed[0]).toMatchObject({ dates: [{ text: 'yesterday', day: '2023-11-13', grain: 'day' }], role: 'user', speaker: 'Priya', atMs: t.atMs });
      const r = await store.searchLogbook({ tenant: ref.tenant, session: ref.session }, { ...analyseQuery('what happened on 13 November 2023', Date.now()) }, LOGBOOK_SEARCH_DEFAULTS);
      expect(r.hits.map((h) => h.entry.id)).toEqual([t.id]);
    });

    test('deleteLogbook removes from listing and search', async () => {
      const ref = fresh();
      const scope = { tenant: ref.tenant, session: ref.session };
      await store.commit(ref, commitOf({ logbook: [1, 2, 3].map((n) => demotedItem(n, ref)) }));
      expect(await store.deleteLogbook(scope, ['a2', 'nope'])).toBe(1);
      expect((await store.listLogbook(scope)).map((i) => i.id)).toEqual(['a3', 'a1']);
      const r = await searchText(store, scope, 'old value 2');
      expect(r.hits.map((h) => h.entry.id)).not.toContain('a2');
      // The same id can come back later (a value evicted again) and is searchable again.
      await store.commit(ref, commitOf({ expectedVersion: 1, logbook: [demotedItem(2, ref, { value: 'old value 2 revisited' })] }));
      expect((await searchText(store, scope, 'revisited')).hits.map((h) => h.entry.id)).toEqual(['a2']);
    });

    test('the retention policy deletes the oldest past the count, and the expired, and says how many', async () => {
      const ref = fresh();
      const scope = { tenant: ref.tenant, session: ref.session };
      const t = (n: number) => turnEntry(n, ref, `note number ${n} about kayaks`);
      const first = await store.commit(ref, commitOf({ logbook: [1, 2, 3].map(t), retention: { policy: { maxAgeMs: 0, maxEntries: 5 }, nowMs: t(3).atMs } }));
      expect(first).toEqual({ ok: true, version: 1 });
      const second = await store.commit(ref, commitOf({ expectedVersion: 1, logbook: [4, 5, 6, 7].map(t), retention: { policy: { maxAgeMs: 0, maxEntries: 5 }, nowMs: t(7).atMs } }));
      expect(second).toEqual({ ok: true, version: 2, dropped: { age: 0, count: 2 } });
      expect((await store.listLogbook(scope)).map((e) => e.seq)).toEqual([7, 6, 5, 4, 3]);
      // Entries older than 2.5 s before turn 9 (turns 3..6) go by age.
      const third = await store.commit(ref, commitOf({ expectedVersion: 2, logbook: [8, 9].map(t), retention: { policy: { maxAgeMs: 2500, maxEntries: 5 }, nowMs: t(9).atMs } }));
      expect(third).toEqual({ ok: true, version: 3, dropped: { age: 4, count: 0 } });
      expect((await store.listLogbook(scope)).map((e) => e.seq)).toEqual([9, 8, 7]);
      expect((await searchText(store, scope, 'kayaks')).hits.map((h) => h.entry.seq).sort()).toEqual([7, 8, 9]);
    });

    test('sessions of one user share a user-scope logbook', async () => {
      const a = fresh('u1');
      const b = fresh('u1');
      await store.commit(a, commitOf({ logbook: [demotedItem(1, a), turnEntry(1, a, 'the first violin lesson')] }));
      await store.commit(b, commitOf({ logbook: [demotedItem(2, b), turnEntry(1, b, 'the second violin lesson')] }));
      const listed = await store.listLogbook({ tenant: a.tenant, user: 'u1' });
      expect(listed.map((h) => h.id).sort()).toEqual(['T-' + a.session + '-1', 'T-' + b.session + '-1', 'a1', 'a2'].sort());
      expect(listed.find((h) => h.id === 'a1')!.session).toBe(a.session);
      const r = await searchText(store, { tenant: a.tenant, user: 'u1' }, 'violin lesson');
      expect(r.hits).toHaveLength(2);
    });

    test('events append in order and read back with a limit', async () => {
      const ref = fresh();
      const ev = (n: number) => ({ type: 'allocate' as const, slot: n, id: `r${n}`, clock: n, atMs: 1000 + n });
      await store.commit(ref, commitOf({ events: [ev(1), ev(2)] }));
      await store.commit(ref, commitOf({ expectedVersion: 1, events: [ev(3)] }));
      expect((await store.readEvents(ref)).map((e) => e.slot)).toEqual([1, 2, 3]);
      expect((await store.readEvents(ref, 2)).map((e) => e.slot)).toEqual([2, 3]);
    });

    test('erasing a session removes slots, logbook entries and events', async () => {
      const ref = fresh();
      const keep = fresh();
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [demotedItem(1, ref), turnEntry(1, ref, 'my secret diary')], events: [{ type: 'allocate', slot: 0, id: 'r1', clock: 1, atMs: 1 }] }));
      await store.commit(keep, commitOf({ ops: [{ index: 0, slot: slot(2) }] }));
      const report = await store.erase({ tenant: ref.tenant, session: ref.session });
      expect(report).toMatchObject({ sessions: 1, slots: 1, logbookEntries: 2, events: 1 });
      expect(await store.load(ref)).toBeNull();
      expect((await searchText(store, { tenant: ref.tenant, session: ref.session }, 'secret diary')).hits).toEqual([]);
      expect(await store.listLogbook({ tenant: ref.tenant, session: ref.session })).toEqual([]);
      expect(await store.readEvents(ref)).toEqual([]);
      expect(await store.listSessions(ref.tenant, 10_000)).not.toContain(ref.session);
      expect((await store.load(keep))!.table.count()).toBe(1);
    });

    test('erasing a session also removes what it put in its user logbook', async () => {
      const a = fresh('u2');
      const b = fresh('u2');
      await store.commit(a, commitOf({ logbook: [demotedItem(1, a)] }));
      await store.commit(b, commitOf({ logbook: [demotedItem(2, b)] }));
      await store.erase({ tenant: a.tenant, session: a.session });
      expect((await store.listLogbook({ tenant: a.tenant, user: 'u2' })).map((h) => h.id)).toEqual(['a2']);
    });

    test('erasing a user removes all of their sessions and logbook', async () => {
      const a = fresh('u3');
      const b = fresh('u3');
      const other = fresh('u4');
      for (const r of [a, b, other]) await store.commit(r, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [demotedItem(1, r, { id: `a-${r.session}` })] }));
      const report = await store.erase({ tenant: a.tenant, user: 'u3' });
      expect(report.sessions).toBe(2);
      expect(report.logbookEntries).toBe(2);
      expect(await store.load(a)).toBeNull();
      expect(await store.load(b)).toBeNull();
      expect(await store.listLogbook({ tenant: a.tenant, user: 'u3' })).toEqual([]);
      expect(await store.load(other)).not.toBeNull();
      expect(await store.listLogbook({ tenant: a.tenant, user: 'u4' })).toHaveLength(1);
    });

    test('tenants are isolated: same session id, separate state', async () => {
      const s = `iso${++counter}`;
      const t1 = { tenant: `${tenantBase}-x`, session: s };
      const t2 = { tenant: `${tenantBase}-y`, session: s };
      await store.commit(t1, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [demotedItem(1, t1)] }));
      expect(await store.load(t2)).toBeNull();
      expect(await store.listLogbook({ tenant: t2.tenant, session: s })).toEqual([]);
      expect(await store.listSessions(t2.tenant)).toEqual([]);
      await store.erase({ tenant: t2.tenant, session: s });
      expect(await store.load(t1)).not.toBeNull();
      await store.erase({ tenant: t1.tenant, session: s });
    });

    test('listSessions lists sessions with state', async () => {
      const ref = fresh();
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
      expect(await store.listSessions(ref.tenant, 10_000)).toContain(ref.session);
    });
  });
}
