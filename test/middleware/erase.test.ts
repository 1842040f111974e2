// Erase from outside: it waits for the session's (or, for a user, every) write in flight so none lands
// after it, drops the snapshot a read kept for the next write, validates its target, and reports a
// store failure as such.

import { describe, expect, it, vi } from 'vitest';
import { ErrorCodes } from '../../src/errors.js';
import type { EvictEvent } from '../../src/middleware/events.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import type { Store } from '../../src/store/store.js';
import { ControlledStore, gate, sleep } from './helpers.js';

describe('erase and writes in flight', () => {
  it('an erase of a session waits for its write in flight: nothing of it is left afterwards', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store });
    const held = gate();
    store.commitGate = (session) => (session === 's' ? held.promise : undefined);
    const write = tm.write({ session: 's', text: 'My name is Dana.' });
    // The write is committing (held at the store) when the erase comes.
    await vi.waitFor(() => expect(store.commits).toBe(1));
    const erase = tm.erase({ session: 's' });
    // Time for an erase that did not wait to reach the store before the write does.
    await sleep(20);
    held.open();
    await Promise.all([write, erase]);
    const view = await tm.inspect('s');
    expect(view.slots).toEqual([]);
    expect(view.logbook).toEqual([]);
    await tm.close();
  });

  it('an erase of a user waits for every write in flight', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store });
    const held = gate();
    store.commitGate = () => held.promise;
    const writes = [tm.write({ session: 'a', user: 'u1', text: 'My name is Dana.' }), tm.write({ session: 'b', user: 'u1', text: 'My bike is red.' })];
    await vi.waitFor(() => expect(store.commits).toBe(2));
    const erase = tm.erase({ user: 'u1' });
    await sleep(20);
    held.open();
    await Promise.all([...writes, erase]);
    for (const s of ['a', 'b']) expect((await tm.inspect(s, 'default', { user: 'u1' })).slots).toEqual([]);
    await tm.close();
  });
});

describe('erase and what the instance remembers', () => {
  it('the snapshot a read kept for the next write is dropped: that write plans on the erased state, first time', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await tm.read({ session: 's', text: 'What is my name?' });
    await tm.erase({ session: 's' });
    const commits = store.commits;
    const report = await tm.write({ session: 's', text: 'My bike is red.' });
    expect(report).toMatchObject({ committed: true, version: 1 });
    // One commit: no stale plan refused for its version and planned again.
    expect(store.commits - commits).toBe(1);
    expect((await tm.inspect('s')).slots.map((x) => x.value)).toEqual(['red']);
    await tm.close();
  });
});

/** A store whose erase fails like a lost connection. */
class EraseFailStore extends ControlledStore {
  override erase(..._a: Parameters<Store['erase']>): ReturnType<Store['erase']> {
    return Promise.reject(new Error('connection reset (test)'));
  }
}

describe('erase input and failures', () => {
  it('refuses an empty id with a coded error naming the field, and reports a store failure as STORE_UNAVAILABLE naming the call', async () => {
    const tm = createTidemark({ store: new EraseFailStore() });
    await expect(tm.erase({ session: '' })).rejects.toMatchObject({ code: ErrorCodes.INPUT_ID, message: expect.stringMatching(/^session /) });
    await expect(tm.erase({ user: '' })).rejects.toMatchObject({ code: ErrorCodes.INPUT_ID, message: expect.stringMatching(/^user /) });
    await expect(tm.erase({ session: 's' }, '')).rejects.toMatchObject({ code: ErrorCodes.INPUT_ID, message: expect.stringMatching(/^tenant /) });
    await expect(tm.erase({ session: 's' })).rejects.toMatchObject({ code: ErrorCodes.STORE_UNAVAILABLE, message: 'store controlled failed (erase): connection reset (test)' });
    await tm.close();
  });
});

describe('erase announces the slots it removes', () => {
  it('one `erased` evict event per slot, with its slot, lifetime on the session clock and half-life', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    for (const text of ['My name is Dana.', 'My bike is a green Corvane Tourer.', 'I am allergic to chain wax.']) await tm.write({ session: 's', text });
    const view = await tm.inspect('s');
    const evicted: EvictEvent[] = [];
    tm.on('evict', (e) => evicted.push(e));
    await tm.erase({ session: 's' });
    expect(evicted.map((e) => [e.slot, e.id, e.lifetime, e.halfLife])).toEqual(view.slots.map((x) => [x.index, x.id, x.age, x.halfLife]));
    for (const e of evicted) {
      expect(e.lifetimeMs).toBeGreaterThanOrEqual(0);
      expect(e.strength).toBeGreaterThan(0);
    }
    // The newest slot was stamped at this clock: its stored strength is the one inspect shows.
    expect(evicted.at(-1)!.strength).toBeCloseTo(view.slots.at(-1)!.strength, 9);
    await tm.close();
  });
});

describe('erase straight after write, on a store without fences', () => {
  it('the write joins its session before write() returns control, so the erase waits for it', async () => {
    // A store of one's own may leave out the optional `fence`: then nothing but the order of calls
    // keeps an erase after a write.
    const inner = new InProcessStore();
    const store = new Proxy(inner, { get: (t, k) => (k === 'fence' ? undefined : Reflect.get(t, k, t)) }) as Store;
    expect(store.fence).toBeUndefined();
    const tm = createTidemark({ store });
    const write = tm.write({ session: 's', text: 'My name is Dana.' });
    const erase = tm.erase({ session: 's' });
    await Promise.all([write, erase]);
    const view = await tm.inspect('s');
    expect(view.slots).toEqual([]);
    expect(view.logbook).toEqual([]);
    await tm.close();
  });
});

describe('a commit that fails after close() stopped waiting', () => {
  it('rejects its write with TIDEMARK_E_CLOSED instead of parking it in a stopped outbox, where it was lost without a word', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store });
    const held = gate();
    store.commitGate = () => held.promise;
    const write = tm.write({ session: 's', text: 'My name is Dana.' }).then((r) => `resolved, committed: ${r.committed}`, (e: { code?: string }) => e.code);
    await vi.waitFor(() => expect(store.commits).toBe(1));
    // close() gives up waiting after its deadline and stops the outbox; only then does the commit fail.
    tm.once('closed', () => {
      store.failCommit = true;
      held.open();
    });
    expect(await tm.close({ timeoutMs: 10 })).toEqual({ abandoned: 0 });
    expect(await write).toBe(ErrorCodes.CLOSED);
  });
});
