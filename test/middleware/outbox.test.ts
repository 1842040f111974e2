// The outbox after an outage: every queued write lands, each session's writes in their order, with
// many sessions drained at once.

import { afterEach, describe, expect, it, vi } from 'vitest';
import { ErrorCodes, StoreError } from '../../src/errors.js';
import type { DegradedEvent, OutboxEvent } from '../../src/middleware/events.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import type { Store } from '../../src/store/store.js';
import { ControlledStore, gate } from './helpers.js';

describe('outbox drain', () => {
  it('commits every queued write once the store is back, in order per session', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 5, maxRetryMs: 20, concurrency: 4 } });
    store.failLoad = true;
    store.failCommit = true;
    const sessions = ['a', 'b', 'c', 'd', 'e', 'f'];
    const days = ['Monday', 'Tuesday', 'Wednesday'];
    for (const day of days) {
      await Promise.all(sessions.map((s) => tm.write({ session: s, text: `My lesson is on ${day}.` })));
    }
    expect(tm.outboxDepth).toBe(sessions.length * days.length);
    store.failLoad = false;
    store.failCommit = false;
    const { outboxDepth } = await tm.flush({ timeoutMs: 10_000 });
    expect(outboxDepth).toBe(0);
    for (const s of sessions) {
      const view = await tm.inspect(s);
      expect(view.turns).toBe(3);
      // Applied in order: the last value wins, the earlier ones are superseded in the logbook.
      const lesson = view.slots.find((x) => x.key === 'my booking (lesson)');
      expect(lesson?.value).toMatch(/Wednesday/);
      expect(view.logbook.filter((a) => a.kind === 'superseded').map((a) => a.value).join(' ')).toMatch(/Monday/);
      // And all three turns are kept, in order.
      expect(view.logbook.filter((a) => a.kind === 'turn').map((a) => a.seq)).toEqual([3, 2, 1]);
    }
    await tm.close();
  });
});

const FAST = { retryMs: 100, maxRetryMs: 300 } as const;

/** Fails commits of the sessions in `conflicts` as another writer winning, and records every commit tried. */
class ContestedStore extends ControlledStore {
  readonly conflicts = new Set<string>();
  /** A permanent refusal for every commit while set (not a connectivity problem). */
  refuse: StoreError | undefined;
  readonly tried: string[] = [];
  override async commit(...a: Parameters<Store['commit']>): ReturnType<Store['commit']> {
    const [ref, req] = a;
    this.tried.push(`${ref.session}:${req.logbook.find((e) => e.kind === 'turn')?.value ?? ''}`);
    if (this.refuse) throw this.refuse;
    if (this.conflicts.has(ref.session)) throw new StoreError(ErrorCodes.STORE_CONFLICT, 'another writer won (test)');
    return super.commit(...a);
  }
  /** The erasure fence of the real store inside, so a write parked here is refused after an erase elsewhere. */
  fence(...a: Parameters<NonNullable<Store['fence']>>): ReturnType<NonNullable<Store['fence']>> {
    return this.inner.fence(...a);
  }
}

describe('outbox: what a parked write reports', () => {
  it('a conflict on the first commit parks the write like an outage: degraded event with its code, an empty uncommitted report', async () => {
    const store = new ContestedStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const degraded: DegradedEvent[] = [];
    tm.on('degraded', (e) => degraded.push(e));
    store.conflicts.add('s');
    const report = await tm.write([{ session: 's', text: 'My name is Dana.', turn: 'q1' }, { session: 's', role: 'assistant', text: 'Hello Dana!' }]);
    expect(report).toEqual({
      allocated: 0, overwritten: 0, reinforced: 0, gatedOut: 0, evicted: 0, logbook: 0, dropped: { age: 0, count: 0 },
      committed: false, version: -1, turns: ['q1', ''],
    });
    expect(tm.outboxDepth).toBe(1);
    expect(degraded).toEqual([expect.objectContaining({ stage: 'write', code: ErrorCodes.STORE_CONFLICT, sessionHash: tm.hashSession('default', 's') })]);
    store.conflicts.clear();
    expect(await tm.flush()).toEqual({ outboxDepth: 0 });
    expect((await tm.inspect('s')).slots.map((x) => x.value)).toEqual(['Dana']);
    await tm.close();
  });

  it('a refusal no retry can fix rejects the write itself: nothing is queued, no degraded event', async () => {
    const store = new ContestedStore();
    const tm = createTidemark({ store });
    const degraded: DegradedEvent[] = [];
    const errors: string[] = [];
    tm.on('degraded', (e) => degraded.push(e));
    tm.on('error', (e) => errors.push(`${e.stage}:${e.error.code}`));
    store.refuse = new StoreError(ErrorCodes.STORE_CORRUPT, 'refused for good (test)');
    await expect(tm.write({ session: 's', text: 'My name is Dana.' })).rejects.toMatchObject({ code: ErrorCodes.STORE_CORRUPT });
    expect(tm.outboxDepth).toBe(0);
    expect(degraded).toEqual([]);
    expect(errors).toEqual([`write:${ErrorCodes.STORE_CORRUPT}`]);
    await tm.close();
  });

  it('queued and overflow events carry the depth and the session hash; the limit is outbox.max exactly', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { max: 2, retryMs: 60_000, maxRetryMs: 60_000 } });
    const events: OutboxEvent[] = [];
    const errors: Array<[string, string, string | undefined]> = [];
    tm.on('outbox', (e) => events.push(e));
    tm.on('error', (e) => errors.push([e.stage, e.error.code, e.sessionHash]));
    store.failCommit = true;
    await tm.write({ session: 'a', text: 'My name is Dana.' });
    await tm.write({ session: 'b', text: 'My name is Rowan.' });
    await expect(tm.write({ session: 'c', text: 'My name is Ola.' })).rejects.toMatchObject({
      code: ErrorCodes.STORE_OUTBOX_FULL,
      message: 'outbox is full (2 pending writes) while store controlled is unreachable; this write was refused — raise outbox.max or restore the store',
    });
    const h = (s: string): string => tm.hashSession('default', s);
    expect(events).toEqual([
      { depth: 1, change: 'queued', sessionHash: h('a') },
      { depth: 2, change: 'queued', sessionHash: h('b') },
      { depth: 2, change: 'overflow', sessionHash: h('c') },
    ]);
    expect(errors.at(-1)).toEqual(['outbox', ErrorCodes.STORE_OUTBOX_FULL, h('c')]);
    store.failCommit = false;
    expect(await tm.flush()).toEqual({ outboxDepth: 0 });
    expect(events.slice(3).map((e) => `${e.change}:${e.depth}`)).toEqual(['drained:1', 'drained:0']);
    await tm.close();
  });

  it('the retry timer does not keep the process alive', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const timers = (): number => process.getActiveResourcesInfo().filter((r) => r === 'Timeout').length;
    const before = timers();
    store.failCommit = true;
    await tm.write({ session: 's', text: 'My name is Dana.' });
    expect(tm.outboxDepth).toBe(1);
    expect(timers()).toBe(before);
    store.failCommit = false;
    await tm.close();
  });
});

describe('outbox: retries on their own timer', () => {
  afterEach(() => {
    vi.useRealTimers();
  });

  it('retries after outbox.retryMs, doubling per failed pass up to maxRetryMs, and starts again from retryMs after a success', async () => {
    vi.useFakeTimers({ toFake: ['setTimeout', 'clearTimeout'] });
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: FAST });
    const changes: string[] = [];
    tm.on('outbox', (e) => changes.push(e.change));
    store.failCommit = true;
    await tm.write({ session: 's', text: 'My name is Dana.' });
    expect(store.commits).toBe(1);
    expect(vi.getTimerCount()).toBe(1);
    // Passes at +100, then +200, then +300 (400 capped), then +300 again.
    for (const delay of [100, 200, 300, 300]) {
      const before = store.commits;
      await vi.advanceTimersByTimeAsync(delay - 1);
      expect(store.commits).toBe(before);
      if (delay === 300 && before === 4) store.failCommit = false;
      await vi.advanceTimersByTimeAsync(1);
      expect(store.commits).toBe(before + 1);
    }
    expect(tm.outboxDepth).toBe(0);
    expect(changes).toEqual(['queued', 'drained']);
    // Nothing queued: no timer left running.
    expect(vi.getTimerCount()).toBe(0);
    // The next outage starts from retryMs again.
    store.failCommit = true;
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const before = store.commits;
    await vi.advanceTimersByTimeAsync(99);
    expect(store.commits).toBe(before);
    await vi.advanceTimersByTimeAsync(1);
    expect(store.commits).toBe(before + 1);
    store.failCommit = false;
    vi.useRealTimers();
    expect(await tm.flush()).toEqual({ outboxDepth: 0 });
    await tm.close();
  });

  it('one timer for any number of parked writes', async () => {
    vi.useFakeTimers({ toFake: ['setTimeout', 'clearTimeout'] });
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: FAST });
    store.failCommit = true;
    for (const s of ['a', 'b', 'c']) await tm.write({ session: s, text: 'My name is Dana.' });
    expect(tm.outboxDepth).toBe(3);
    expect(vi.getTimerCount()).toBe(1);
    // A pass that fails schedules one next pass, not one per entry.
    await vi.advanceTimersByTimeAsync(100);
    expect(vi.getTimerCount()).toBe(1);
    store.failCommit = false;
    vi.useRealTimers();
    expect(await tm.flush()).toEqual({ outboxDepth: 0 });
    await tm.close();
  });

  it('a conflict in a pass keeps that session\'s writes in order for the next pass and drains the other sessions', async () => {
    vi.useFakeTimers({ toFake: ['setTimeout', 'clearTimeout'] });
    const store = new ContestedStore();
    const tm = createTidemark({ store, outbox: FAST });
    const changes: string[] = [];
    tm.on('outbox', (e) => changes.push(`${e.change}:${e.depth}:${e.sessionHash === tm.hashSession('default', 'a') ? 'a' : 'b'}`));
    store.failCommit = true;
    await tm.write({ session: 'a', text: 'My lesson is on Monday.' });
    await tm.write({ session: 'a', text: 'My lesson is on Tuesday.' });
    await tm.write({ session: 'b', text: 'My name is Rowan.' });
    store.failCommit = false;
    store.conflicts.add('a');
    store.tried.length = 0;
    await vi.advanceTimersByTimeAsync(100);
    // a's oldest write conflicted: its second one was not tried ahead of it; b landed.
    expect(store.tried.sort()).toEqual(['a:My lesson is on Monday.', 'b:My name is Rowan.']);
    expect(changes.slice(3).sort()).toEqual(['drained:2:b', 'retry:3:a'].sort());
    expect(tm.outboxDepth).toBe(2);
    store.conflicts.clear();
    store.tried.length = 0;
    // A pass with a conflict backs off like a failed one: the next pass comes after 200 ms, not 100.
    await vi.advanceTimersByTimeAsync(199);
    expect(store.tried).toEqual([]);
    await vi.advanceTimersByTimeAsync(1);
    expect(store.tried).toEqual(['a:My lesson is on Monday.', 'a:My lesson is on Tuesday.']);
    expect(tm.outboxDepth).toBe(0);
    vi.useRealTimers();
    const lesson = (await tm.inspect('a')).slots.find((x) => x.key === 'my booking (lesson)');
    expect(lesson?.value).toMatch(/Tuesday/);
    await tm.close();
  });
});

describe('outbox: erase and expiry', () => {
  it('a parked write whose session another instance erased is removed as `erased`, with no error and nothing stored', async () => {
    const shared = new InProcessStore();
    const store = new ContestedStore(shared);
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const other = createTidemark({ store: shared });
    const changes: string[] = [];
    const errors: string[] = [];
    tm.on('outbox', (e) => changes.push(e.change));
    tm.on('error', (e) => errors.push(`${e.stage}:${e.error.code}`));
    store.failCommit = true;
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await other.erase({ session: 's' });
    store.failCommit = false;
    expect(await tm.flush()).toEqual({ outboxDepth: 0 });
    expect(changes).toEqual(['queued', 'erased']);
    expect(errors).toEqual([`write:${ErrorCodes.STORE_UNAVAILABLE}`]);
    expect((await other.inspect('s')).version).toBe(0);
    await tm.close();
    await other.close();
  });

  it('erase drops only the parked writes of its tenant and session or user, wherever they sit in the queue', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    store.failCommit = true;
    const parked = [
      { tenant: 't1', session: 's1', user: 'u1' },
      { tenant: 't2', session: 's1', user: 'u1' },
      { tenant: 't1', session: 's2', user: 'u2' },
      { tenant: 't1', session: 's3', user: 'u1' },
      { tenant: 't1', session: 's4', user: 'u3' },
    ];
    for (const p of parked) await tm.write({ ...p, text: 'My name is Dana.' });
    expect(tm.outboxDepth).toBe(5);
    store.failCommit = false;
    await tm.erase({ user: 'u1' }, 't1');
    expect(tm.outboxDepth).toBe(3);
    await tm.erase({ session: 's4' }, 't1');
    expect(tm.outboxDepth).toBe(2);
    await tm.flush();
    const stored = async (tenant: string, session: string): Promise<number> => (await tm.inspect(session, tenant)).slots.length;
    expect([await stored('t1', 's1'), await stored('t2', 's1'), await stored('t1', 's2'), await stored('t1', 's3'), await stored('t1', 's4')]).toEqual([0, 1, 1, 0, 0]);
    await tm.close();
  });

  it('a write exactly outbox.maxAgeMs old is still stored; one a millisecond older expires', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { maxAgeMs: 60_000, retryMs: 60_000, maxRetryMs: 60_000 } });
    const changes: string[] = [];
    const errors: Array<[string, string, string, string | undefined]> = [];
    tm.on('outbox', (e) => changes.push(e.change));
    tm.on('error', (e) => errors.push([e.stage, e.error.code, e.error.message, e.sessionHash]));
    vi.useFakeTimers({ toFake: ['Date'] });
    try {
      const t0 = Date.now();
      vi.setSystemTime(t0);
      store.failCommit = true;
      await tm.write({ session: 'a', text: 'My name is Dana.' });
      vi.setSystemTime(t0 + 1);
      await tm.write({ session: 'b', text: 'My name is Rowan.' });
      store.failCommit = false;
      vi.setSystemTime(t0 + 60_001);
      expect(await tm.flush({ timeoutMs: 1000 })).toEqual({ outboxDepth: 0 });
    } finally {
      vi.useRealTimers();
    }
    expect(changes).toEqual(['queued', 'queued', 'expired', 'drained']);
    expect(errors.at(-1)).toEqual(['outbox', ErrorCodes.STORE_OUTBOX_EXPIRED, 'a write waited 60001 ms in the outbox, past outbox.maxAgeMs (60000); it was given up', tm.hashSession('default', 'a')]);
    expect((await tm.inspect('a')).version).toBe(0);
    expect((await tm.inspect('b')).slots.map((x) => x.value)).toEqual(['Rowan']);
    await tm.close();
  });
});

describe('outbox: one pass at a time, and nothing left behind', () => {
  afterEach(() => {
    vi.useRealTimers();
  });

  it('a session with a parked write holds back only its own later writes, not other sessions', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    store.failCommit = true;
    expect((await tm.write({ session: 'a', text: 'My name is Dana.' })).committed).toBe(false);
    store.failCommit = false;
    expect((await tm.write({ session: 'b', text: 'My name is Rowan.' })).committed).toBe(true);
    expect((await tm.write({ session: 'a', text: 'My bike is red.' })).committed).toBe(false);
    expect(tm.outboxDepth).toBe(2);
    await tm.close();
  });

  it('a flush while a pass is committing joins that pass: each parked write is tried once', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    store.failCommit = true;
    await tm.write({ session: 'a', text: 'My name is Dana.' });
    store.failCommit = false;
    const held = gate();
    store.commitGate = () => held.promise;
    const before = store.commits;
    const first = tm.flush();
    const second = tm.flush();
    await vi.waitFor(() => expect(store.commits).toBe(before + 1));
    held.open();
    expect(await Promise.all([first, second])).toEqual([{ outboxDepth: 0 }, { outboxDepth: 0 }]);
    expect(store.commits).toBe(before + 1);
    await tm.close();
  });

  it('a write erased while the outbox commits it leaves the other parked writes in place', async () => {
    const store = new ContestedStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000, concurrency: 1 } });
    const changes: string[] = [];
    tm.on('outbox', (e) => changes.push(`${e.change}:${e.depth}`));
    store.failCommit = true;
    await tm.write({ session: 'a', text: 'My name is Dana.' });
    await tm.write({ session: 'b', text: 'My name is Rowan.' });
    store.failCommit = false;
    const held = gate();
    store.commitGate = (session) => (session === 'a' ? held.promise : undefined);
    const pass = tm.flush();
    await vi.waitFor(() => expect(store.tried).toContain('a:My name is Dana.'));
    // The erase takes a's entry out of the queue while its commit is in flight; the store refuses it.
    await tm.erase({ session: 'a' });
    expect(tm.outboxDepth).toBe(1);
    held.open();
    expect(await pass).toEqual({ outboxDepth: 0 });
    expect(changes).toEqual(['queued:1', 'queued:2', 'erased:1', 'drained:0']);
    expect((await tm.inspect('a')).version).toBe(0);
    expect((await tm.inspect('b')).slots.map((x) => x.value)).toEqual(['Rowan']);
    await tm.close();
  });

  it('flush and close leave no retry timer behind, and a write parked after close starts none', async () => {
    vi.useFakeTimers({ toFake: ['setTimeout', 'clearTimeout'] });
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: FAST });
    store.failCommit = true;
    await tm.write({ session: 'a', text: 'My name is Dana.' });
    expect(vi.getTimerCount()).toBe(1);
    store.failCommit = false;
    // flush() drains now and cancels the scheduled pass.
    expect(await tm.flush()).toEqual({ outboxDepth: 0 });
    expect(vi.getTimerCount()).toBe(0);
    store.failCommit = true;
    await tm.write({ session: 'a', text: 'My bike is red.' });
    expect(vi.getTimerCount()).toBe(1);
    // A write in flight when close() gives up waiting, whose commit then fails.
    const held = gate();
    store.commitGate = (session) => (session === 'b' ? held.promise : undefined);
    const late = tm.write({ session: 'b', text: 'My name is Rowan.' });
    await vi.waitFor(() => expect(store.commits).toBe(3));
    expect(await tm.close({ timeoutMs: 0 })).toEqual({ abandoned: 1 });
    expect(vi.getTimerCount()).toBe(0);
    held.open();
    // Not stored and not parked in the stopped outbox: the write says so.
    await expect(late).rejects.toMatchObject({ code: ErrorCodes.CLOSED });
    expect(vi.getTimerCount()).toBe(0);
  });
});

describe('outbox: promotion and an erase by another instance', () => {
  it('a value recalled before another instance erased the session is not promoted back by the next write', async () => {
    const shared = new InProcessStore();
    // Capacity 1 and no turns kept: the first fact leaves for the logbook and only it can answer.
    const tm = createTidemark({ store: shared, capacity: 1, logbook: { roles: [] } });
    const other = createTidemark({ store: shared });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    const ctx = await tm.read({ session: 's', text: 'What is my bike?' });
    const ids = tm.promotedBy(ctx, 'It is a green Corvane Tourer.');
    expect(ids).toHaveLength(1);
    await other.erase({ session: 's' });
    // The next turn comes a second later (an erase refuses writes accepted in its own millisecond).
    vi.useFakeTimers({ toFake: ['Date'] });
    try {
      vi.setSystemTime(Date.now() + 1000);
      expect((await tm.write({ session: 's', text: 'Thanks!' }, { promote: ids })).committed).toBe(true);
    } finally {
      vi.useRealTimers();
    }
    const v = await other.inspect('s');
    expect(v.slots.map((x) => x.value).join(' ')).not.toMatch(/Corvane/);
    expect(v.logbook.map((e) => e.value).join(' ')).not.toMatch(/Corvane/);
    await tm.close();
    await other.close();
  });
});
