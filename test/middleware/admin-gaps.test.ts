// Pin, erase, inspect and migrate at their edges: the events a pin stores, what it refuses and why,
// a session erased under an admin change, what erase announces (and what it loads to do so), the
// outbox writes an erase drops, what inspect shows of a session that does not exist, and migrate
// of a session with no slots or with the value mix off.

import { afterEach, describe, expect, it, vi } from 'vitest';
import { ErrorCodes } from '../../src/errors.js';
import { HashingEmbedder } from '../../src/embed/hashing.js';
import type { EvictEvent } from '../../src/middleware/events.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import type { Store } from '../../src/store/store.js';
import { ControlledStore } from './helpers.js';

afterEach(() => {
  vi.useRealTimers();
});

describe('pin', () => {
  it('stores a pin and an unpin event with the slot, the revision and the session clock', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const before = await tm.inspect('s');
    const bike = before.slots[1]!;
    await tm.pin('s', 1);
    expect((await tm.inspect('s')).slots[1]).toMatchObject({ id: bike.id, pinned: true, value: bike.value });
    await tm.pin('s', 1, false);
    const view = await tm.inspect('s');
    expect(view.slots[1]).toMatchObject({ id: bike.id, pinned: false });
    expect(view.version).toBe(4);
    expect(view.events.slice(-2).map((e) => [e.type, e.slot, e.id, e.clock])).toEqual([['pin', 1, bike.id, 2], ['unpin', 1, bike.id, 2]]);
    // A pin changes no clock, no turn count and no logbook entry.
    expect(view).toMatchObject({ clock: 2, turns: 2, capacity: before.capacity, dim: before.dim });
    expect(view.logbook).toEqual(before.logbook);
    await tm.close();
  });

  it('refuses a slot that is not an index, an empty slot and a session that does not exist, each naming why', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await expect(tm.pin('s', -1)).rejects.toMatchObject({ code: ErrorCodes.INPUT_FIELD, message: 'slot must be a slot index >= 0, got -1', details: { field: 'slot' } });
    await expect(tm.pin('s', 0.5)).rejects.toMatchObject({ code: ErrorCodes.INPUT_FIELD, message: 'slot must be a slot index >= 0, got 0.5' });
    await expect(tm.pin('s', 3)).rejects.toMatchObject({ code: ErrorCodes.INPUT_FIELD, message: 'slot 3 of this session is empty', details: { field: 'slot' } });
    await expect(tm.pin('nobody', 0)).rejects.toMatchObject({ code: ErrorCodes.INPUT_ID, message: 'no such session in this tenant', details: { field: 'session' } });
    // Slot 0 itself is fine.
    await tm.pin('s', 0);
    expect((await tm.inspect('s')).slots[0]!.pinned).toBe(true);
    await tm.close();
  });

  it('refuses a session stored with another embedder\'s dimension until it is migrated', async () => {
    const store = new InProcessStore();
    const old = createTidemark({ store });
    await old.write({ session: 's', text: 'My name is Dana.' });
    const tm = createTidemark({ store, embedder: new HashingEmbedder({ dim: 256 }) });
    await expect(tm.pin('s', 0)).rejects.toMatchObject({ code: ErrorCodes.EMBED_DIM });
    await tm.migrate('s');
    await tm.pin('s', 0);
    expect((await tm.inspect('s')).slots[0]).toMatchObject({ pinned: true, value: 'Dana' });
    await old.close();
    await tm.close();
  });

  it('a session erased between its load and its commit is not changed: STORE_ERASED', async () => {
    const store = new ErasedOnCommitStore();
    const tm = createTidemark({ store });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    store.erasedNext = true;
    await expect(tm.pin('s', 0)).rejects.toMatchObject({ code: ErrorCodes.STORE_ERASED, message: 'the session was erased meanwhile' });
    // Refused once, not retried as a conflict.
    expect(store.refused).toBe(1);
    await tm.close();
  });
});

/** Answers the next commit as a store does for a session erased after the change was planned. */
class ErasedOnCommitStore extends ControlledStore {
  erasedNext = false;
  refused = 0;
  override async commit(...a: Parameters<Store['commit']>): ReturnType<Store['commit']> {
    if (this.erasedNext) {
      this.refused++;
      return { ok: false, erased: true, version: 0 };
    }
    return super.commit(...a);
  }
}

describe('what erase announces', () => {
  it('lifetimes on the session clock and the wall clock, the stored strength, not logged', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    const t0 = Date.UTC(2026, 11, 3, 12);
    vi.setSystemTime(t0 + 90_000);
    const store = new InProcessStore();
    const tm = createTidemark({ store });
    await tm.write({ session: 's', text: 'My name is Dana.', at: t0 });
    await tm.write({ session: 's', text: 'ok', at: t0 + 1000 });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.', at: t0 + 30_000 });
    const raw = (await store.load({ tenant: 'default', session: 's' }))!.table;
    const strengths = [raw.strength[0]!, raw.strength[1]!];
    const evicted: EvictEvent[] = [];
    tm.on('evict', (e) => evicted.push(e));
    await tm.erase({ session: 's' });
    expect(evicted.map((e) => [e.slot, e.reason, e.logged, e.lifetime, e.lifetimeMs, e.strength])).toEqual([
      [0, 'erased', false, 2, 90_000, strengths[0]],
      [1, 'erased', false, 0, 60_000, strengths[1]],
    ]);
    await tm.close();
  });

  it('loads nothing when no one listens; a session never stored, or a load that fails, announces nothing and the erase goes on', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    // The instance's own retention tracker listens to `evict`; with it gone, no one does.
    tm.removeAllListeners('evict');
    const loads = store.loads;
    expect(await tm.erase({ session: 's' })).toMatchObject({ sessions: 1, slots: 1 });
    expect(store.loads).toBe(loads);
    const evicted: EvictEvent[] = [];
    tm.on('evict', (e) => evicted.push(e));
    expect(await tm.erase({ session: 'never' })).toMatchObject({ slots: 0 });
    await tm.write({ session: 't', text: 'My name is Dana.' });
    store.failLoad = true;
    expect(await tm.erase({ session: 't' })).toMatchObject({ sessions: 1, slots: 1 });
    store.failLoad = false;
    expect(evicted).toEqual([]);
    await tm.close();
  });

  it('an erase of a user announces no slot, and drops that user\'s waiting writes only', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const evicted: EvictEvent[] = [];
    tm.on('evict', (e) => evicted.push(e));
    store.failCommit = true;
    await tm.write({ session: 'a', user: 'u1', text: 'My name is Dana.' });
    await tm.write({ session: 'b', user: 'u2', text: 'My name is Robin.' });
    await tm.write({ session: 'c', text: 'My name is Sam.' });
    expect(tm.outboxDepth).toBe(3);
    store.failCommit = false;
    await tm.erase({ user: 'u1' });
    expect(tm.outboxDepth).toBe(2);
    await tm.erase({ session: 'c' });
    expect(tm.outboxDepth).toBe(1);
    expect(evicted).toEqual([]);
    expect(await tm.flush()).toEqual({ outboxDepth: 0 });
    expect((await tm.inspect('a', 'default', { user: 'u1' })).slots).toEqual([]);
    expect((await tm.inspect('b', 'default', { user: 'u2' })).slots.map((x) => x.value)).toEqual(['Robin']);
    expect((await tm.inspect('c')).slots).toEqual([]);
    await tm.close();
  });
});

describe('inspect', () => {
  it('of a session never stored: empty, at version 0, with the configured capacity and the embedder\'s dimension', async () => {
    const tm = createTidemark({ store: new InProcessStore(), capacity: 7, embedder: new HashingEmbedder({ dim: 128 }) });
    expect(await tm.inspect('nobody')).toEqual({
      tenant: 'default', session: 'nobody', sessionHash: tm.hashSession('default', 'nobody'),
      version: 0, clock: 0, turns: 0, capacity: 7, dim: 128, slots: [], logbook: [], events: [],
    });
    await tm.close();
  });

  it('shows each slot\'s times, reads and owner; limits logbook entries and events as asked', async () => {
    const t0 = Date.UTC(2026, 11, 3, 12);
    const tm = createTidemark({ store: new InProcessStore() });
    await tm.write({ session: 's', speaker: 'Dana', text: 'My name is Dana.', at: t0 });
    await tm.write({ session: 's', speaker: 'Dana', text: 'My bike is a green Corvane Tourer.', at: t0 + 5000 });
    await tm.write({ session: 's', text: 'Actually my bike is a red Corvane Tourer.', at: t0 + 9000 });
    const view = await tm.inspect('s');
    expect(view.slots.map((x) => [x.index, x.value, x.owner, x.createdMs, x.updatedMs, x.reads])).toEqual([
      [0, 'Dana', 'Dana', t0, t0, 0],
      [1, 'a red Corvane Tourer', 'Dana', t0 + 5000, t0 + 9000, 0],
    ]);
    expect(view.logbook).toHaveLength(4);
    expect(view.events.length).toBeGreaterThan(2);
    const small = await tm.inspect('s', 'default', { logbookLimit: 2, eventLimit: 2 });
    expect(small.logbook.map((e) => e.id)).toEqual(view.logbook.slice(0, 2).map((e) => e.id));
    expect(small.events).toEqual(view.events.slice(-2));
    for (const e of view.logbook) expect(e).not.toHaveProperty('key');
    await tm.close();
  });
});

describe('inspect of pinned and copied values', () => {
  it('a pinned slot shows its stored strength while the clock moves on; an unpinned one decays', async () => {
    const store = new InProcessStore();
    const tm = createTidemark({ store, write: { halfLife: 2 } });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await tm.write({ session: 's', text: 'I am allergic to chain wax.' });
    await tm.pin('s', 1);
    await tm.write({ session: 's', text: 'hello' });
    await tm.write({ session: 's', text: 'What time do you open?' });
    const raw = (await store.load({ tenant: 'default', session: 's' }))!.table;
    const view = await tm.inspect('s');
    expect(view.clock).toBe(4);
    expect(view.slots[1]).toMatchObject({ pinned: true, strength: raw.strength[1], age: 2 });
    expect(view.slots[0]!.strength).toBeCloseTo(raw.strength[0]! / 2 ** 1.5, 12);
    await tm.close();
  });

  it('the provenance and the ambiguous ids it shows are copies', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    for (const text of ['My exam is on the 14th of October.', "My friend's wedding is on the 18th of October.", 'ok', "They moved it, it's in November instead."]) await tm.write({ session: 's', text });
    const first = await tm.inspect('s');
    const ids = first.slots[2]!.maybeReplaces!.slice();
    expect(ids).toHaveLength(2);
    first.slots[2]!.maybeReplaces!.push('tampered');
    first.slots[2]!.provenance.push('tampered');
    const again = await tm.inspect('s');
    expect(again.slots[2]!.maybeReplaces).toEqual(ids);
    expect(again.slots[2]!.provenance).toEqual(['t4']);
    await tm.close();
  });
});

describe('migrate', () => {
  it('a session with no slots moves to the new dimension with nothing to embed', async () => {
    const store = new InProcessStore();
    const old = createTidemark({ store });
    await old.write({ session: 's', text: 'ok' });
    const tm = createTidemark({ store, embedder: new HashingEmbedder({ dim: 256 }) });
    expect(await tm.migrate('s')).toEqual({ slots: 0 });
    expect(await tm.inspect('s')).toMatchObject({ dim: 256, slots: [], turns: 1 });
    await old.close();
    await tm.close();
  });

  it('with the value mix off, a slot\'s key is the embedding of its topic alone, and empty slots stay empty', async () => {
    const store = new InProcessStore();
    const old = createTidemark({ store, capacity: 4, valueMix: 0 });
    await old.write({ session: 's', text: 'My name is Dana.' });
    await old.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const embedder = new HashingEmbedder({ dim: 256 });
    const tm = createTidemark({ store, capacity: 4, valueMix: 0, embedder });
    const events = (await old.inspect('s')).events;
    expect(await tm.migrate('s')).toEqual({ slots: 2 });
    // It changes keys only: no event, no logbook entry.
    expect((await tm.inspect('s')).events).toEqual(events);
    expect((await tm.inspect('s')).logbook).toHaveLength(2);
    const t = (await store.load({ tenant: 'default', session: 's' }))!.table;
    expect([0, 1, 2, 3].map((i) => t.isUsed(i))).toEqual([true, true, false, false]);
    const want = await embedder.embed([t.keyText[0]!, t.keyText[1]!]);
    expect(Array.from(t.keyRow(0))).toEqual(Array.from(want[0]!));
    expect(Array.from(t.keyRow(1))).toEqual(Array.from(want[1]!));
    await old.close();
    await tm.close();
  });
});
