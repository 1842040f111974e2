// The events and side effects the real middleware produces for a scripted conversation, checked
// against what was sent: an evicted slot's lifetime is the clock it lived, an erase announces each
// slot as `erased` (never as a capacity eviction), erase forgets the logbook values remembered for
// promotion, usedBy names the slot a reply repeats (so it is reinforced), and an outbox write that a
// later pass cannot store for good is reported with an `error` event, not dropped silently.

import { describe, expect, it } from 'vitest';
import { ErrorCodes, StoreError } from '../../src/errors.js';
import type { ErrorEvent, EvictEvent, OutboxEvent } from '../../src/middleware/events.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import type { Store } from '../../src/store/store.js';
import { ControlledStore } from './helpers.js';

const FACTS = ['My name is Dana.', 'My bike is a green Corvane Tourer.', 'I am allergic to chain wax.'];

describe('evict events from the real write path', () => {
  it('a capacity eviction carries the lifetime the slot lived on the session clock', async () => {
    const tm = createTidemark({ store: new InProcessStore(), capacity: 2, logbook: { roles: [] } });
    const evicted: EvictEvent[] = [];
    tm.on('evict', (e) => evicted.push(e));
    await tm.write({ session: 's', text: FACTS[0]! });
    await tm.write({ session: 's', text: FACTS[1]! });
    const before = await tm.inspect('s');
    expect(before.slots).toHaveLength(2);
    await tm.write({ session: 's', text: FACTS[2]! });
    const after = await tm.inspect('s');
    expect(evicted).toHaveLength(1);
    const e = evicted[0]!;
    expect(e).toMatchObject({ reason: 'capacity', logged: true });
    const gone = before.slots.find((s) => s.id === e.id)!;
    expect(gone).toBeDefined();
    // created = clock at inspect - age; lifetime = clock at eviction - created.
    const created = before.clock - gone.age;
    expect(after.clock).toBeGreaterThan(before.clock);
    expect(e.lifetime).toBe(after.clock - created);
    expect(e.lifetime).toBeGreaterThan(0);
    await tm.close();
  });
});

describe('erase seen through events and memos', () => {
  it('announces every slot of the erased session as an `erased` eviction, not kept in the logbook', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    for (const text of FACTS) await tm.write({ session: 'gone', text });
    await tm.write({ session: 'kept', text: 'My name is Rowan.' });
    const slots = (await tm.inspect('gone')).slots;
    expect(slots.length).toBe(FACTS.length);
    const evicted: EvictEvent[] = [];
    tm.on('evict', (e) => evicted.push(e));
    await tm.erase({ session: 'gone' });
    expect(evicted.map((e) => e.id).sort()).toEqual(slots.map((s) => s.id).sort());
    for (const e of evicted) expect(e).toMatchObject({ reason: 'erased', logged: false, sessionHash: tm.hashSession('default', 'gone') });
    await tm.close();
  });

  it('forgets the logbook values a read remembered for promotion: an erased value is never promoted back', async () => {
    // A store without erasure fences (ControlledStore implements none): the memo alone must be cleared.
    const store = new ControlledStore();
    expect((store as Store).fence).toBeUndefined();
    // Capacity 1 and no turns kept: the first fact leaves for the logbook and only it can answer.
    const tm = createTidemark({ store, capacity: 1, logbook: { roles: [] } });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    const ctx = await tm.read({ session: 's', text: 'What is my bike?' });
    const ids = tm.promotedBy(ctx, 'It is a green Corvane Tourer.');
    expect(ids).toHaveLength(1);
    await tm.erase({ session: 's' });
    await tm.write({ session: 's', text: 'Thanks!' }, { promote: ids });
    const v = await tm.inspect('s');
    expect(v.slots.map((s) => s.value).join(' ')).not.toMatch(/Corvane/);
    expect(v.logbook.map((e) => e.value).join(' ')).not.toMatch(/Corvane/);
    await tm.close();
  });
});

describe('usedBy: what a reply used is reinforced', () => {
  it('names the slot whose value the reply repeats, and a write with it reinforces that slot', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    for (const text of FACTS) await tm.write({ session: 's', text });
    const ctx = await tm.read({ session: 's', text: 'Which lubricant am I allergic to?' });
    const allergy = (await tm.inspect('s')).slots.find((s) => s.value === 'chain wax')!;
    expect(allergy.reads).toBe(0);
    expect(tm.usedBy(ctx, 'You are allergic to chain wax, so I will use a dry lube.')).toEqual([allergy.id]);
    expect(tm.usedBy(ctx, 'Let me look that up.')).toEqual([]);
    await tm.write({ session: 's', text: 'Thanks!' }, { reinforce: tm.usedBy(ctx, 'You are allergic to chain wax.') });
    const after = (await tm.inspect('s')).slots.find((s) => s.id === allergy.id)!;
    expect(after.reads).toBe(1);
    expect(after.halfLife).toBeGreaterThan(allergy.halfLife);
    await tm.close();
  });
});

/** Fails commits with a connectivity error until `refuse` is set, then with a permanent refusal. */
class RefusingStore extends ControlledStore {
  refuse = false;
  override async commit(...a: Parameters<Store['commit']>): ReturnType<Store['commit']> {
    if (this.refuse) throw new StoreError(ErrorCodes.STORE_CORRUPT, 'refused for good (test)');
    return super.commit(...a);
  }
}

describe('outbox: a queued write the store refuses for good', () => {
  it('is removed as `failed` with an `error` event of stage outbox, code and session hash', async () => {
    const store = new RefusingStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const errors: ErrorEvent[] = [];
    const outbox: OutboxEvent[] = [];
    tm.on('error', (e) => errors.push(e));
    tm.on('outbox', (e) => outbox.push(e));
    store.failCommit = true;
    const report = await tm.write({ session: 's', text: 'My name is Dana.' });
    expect(report.committed).toBe(false);
    expect(tm.outboxDepth).toBe(1);
    expect(errors.map((e) => [e.stage, e.error.code])).toEqual([['write', ErrorCodes.STORE_UNAVAILABLE]]);
    store.failCommit = false;
    store.refuse = true;
    await tm.flush();
    expect(tm.outboxDepth).toBe(0);
    expect(outbox.map((e) => e.change)).toEqual(['queued', 'failed']);
    expect(errors.map((e) => [e.stage, e.error.code])).toEqual([['write', ErrorCodes.STORE_UNAVAILABLE], ['outbox', ErrorCodes.STORE_CORRUPT]]);
    expect(errors[1]!.sessionHash).toBe(tm.hashSession('default', 's'));
    await tm.close();
  });
});
