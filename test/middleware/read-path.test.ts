// The read path seen from outside: the read event agrees with the context the handler gets, a store
// that fails or stalls gives empty memory with the reason in events, a read waits for the session's
// pending write but never past half its budget, and items carry what their tier knows.

import { describe, expect, it } from 'vitest';
import { ErrorCodes } from '../../src/errors.js';
import type { DegradedEvent, ReadEvent } from '../../src/middleware/events.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import { ControlledStore, gate, sleep } from './helpers.js';

const FACTS = ['My name is Dana.', 'My bike is a green Corvane Tourer.', 'Can I book a service for Tuesday?', 'Actually, can we move it to Friday instead?'];

describe('the read event', () => {
  it('says what the context holds: result, item counts by tier, slots, logbook size and the trace figures', async () => {
    const tm = createTidemark({ store: new InProcessStore(), capacity: 2 });
    for (const text of FACTS) await tm.write({ session: 's', text });
    const reads: ReadEvent[] = [];
    tm.on('read', (e) => reads.push(e));
    const ctx = await tm.read({ session: 's', text: 'What is my name?' });
    expect(ctx.degraded).toBe(false);
    expect(ctx.items.length).toBeGreaterThan(0);
    const slotItems = ctx.items.filter((i) => i.source === 'slot').length;
    const view = await tm.inspect('s');
    expect(reads).toHaveLength(1);
    expect(reads[0]).toMatchObject({
      sessionHash: tm.hashSession('default', 's'), tenant: tm.hashTenant('default'),
      result: ctx.trace.result, items: ctx.items.length, slotItems, logbookItems: ctx.items.length - slotItems,
      scanned: 2, slotsInUse: 2, capacity: 2, logbookSize: ctx.trace.logbookSize,
      topWeight: ctx.trace.topWeight, entropy: ctx.trace.entropy, topCosine: ctx.trace.topCosine, topCoverage: ctx.trace.topCoverage,
    });
    // Four turns and two values that left working memory (Dana evicted, Tuesday superseded).
    expect(ctx.trace.logbookSize).toBe(view.logbook.length);
    expect(ctx.trace.logbookSize).toBe(6);
    expect(ctx.trace).toMatchObject({ scanned: 2, hops: 1 });
    expect(ctx.trace.topCosine).toBeGreaterThan(-1);
    expect(ctx.trace.items.map((i) => i.id)).toEqual(ctx.items.map((i) => i.id));
    const weights = ctx.items.reduce((a, i) => a + i.weight, 0);
    expect(weights).toBeCloseTo(1, 6);
    await tm.close();
  });

  it('with the logbook left out, only slots come back; with working memory left out, no slot is scanned', async () => {
    const slotsOnly = createTidemark({ store: new InProcessStore(), capacity: 2, read: { tiers: 'slots' } });
    const logbookOnly = createTidemark({ store: new InProcessStore(), capacity: 2, read: { tiers: 'logbook' } });
    for (const tm of [slotsOnly, logbookOnly]) for (const text of FACTS) await tm.write({ session: 's', text });
    const a = await slotsOnly.read({ session: 's', text: 'What is my name?' });
    expect(a.items.map((i) => i.source)).not.toContain('logbook');
    expect(a.trace.logbookSize).toBe(0);
    const b = await logbookOnly.read({ session: 's', text: 'What is my name?' });
    expect(b.items.map((i) => i.source)).not.toContain('slot');
    expect(b.trace).toMatchObject({ scanned: 0, hops: 0, topCosine: -1, topWeight: 0, entropy: 0 });
    expect(b.items.map((i) => i.value).join(' ')).toMatch(/Dana/);
    await slotsOnly.close();
    await logbookOnly.close();
  });
});

describe('attention hops', () => {
  it('a second hop runs when the first selected slots, and none runs over an empty session', async () => {
    const tm = createTidemark({ store: new InProcessStore(), read: { hops: 2 } });
    expect((await tm.read({ session: 's', text: 'What is my name?' })).trace).toMatchObject({ hops: 0, scanned: 0, topCosine: -1 });
    for (const text of FACTS) await tm.write({ session: 's', text });
    const ctx = await tm.read({ session: 's', text: 'What is my name?' });
    expect(ctx.trace.hops).toBe(2);
    expect(ctx.items[0]?.value).toBe('Dana');
    await tm.close();
  });
});

describe('items carry what their tier knows', () => {
  it('a slot item has its key, provenance and the dates its value meant; a logbook turn its role and time; a demoted value its reason and successor', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    const at = Date.UTC(2026, 11, 3, 12);
    await tm.write({ session: 's', text: 'Can I book a service for Tuesday?', at });
    await tm.write({ session: 's', text: 'Actually, can we move it to Friday instead?', at: at + 1000 });
    const ctx = await tm.read({ session: 's', text: 'When is my service booked?', history: true });
    const slot = ctx.items.find((i) => i.source === 'slot')!;
    expect(slot).toMatchObject({ kind: 'slot', slot: 0, key: 'my booking (service)', value: 'book a service for Friday', provenance: ['t2', 't1'] });
    expect(slot.dates?.map((d) => d.text)).toEqual(['Friday']);
    const turn = ctx.items.find((i) => i.kind === 'turn');
    expect(turn).toBeDefined();
    expect(turn).toMatchObject({ source: 'logbook', role: 'user' });
    expect([at, at + 1000]).toContain(turn!.atMs);
    expect(turn).not.toHaveProperty('reason');
    const old = ctx.items.find((i) => i.kind === 'superseded');
    expect(old).toMatchObject({ source: 'logbook', reason: 'superseded', successor: slot.id, value: 'book a service for Tuesday' });
    expect(old).not.toHaveProperty('atMs');
    await tm.close();
  });
});

describe('a store that fails or stalls', () => {
  it('a failed load gives empty memory, an error event with what failed, and a degraded event', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    const errors: Array<[string, string, string]> = [];
    const degraded: DegradedEvent[] = [];
    tm.on('error', (e) => errors.push([e.stage, e.error.code, e.error.message]));
    tm.on('degraded', (e) => degraded.push(e));
    store.failLoad = true;
    const ctx = await tm.read({ session: 's', text: 'What is my name?' });
    expect(ctx).toMatchObject({
      items: [], prompt: '', degraded: true,
      trace: { result: 'miss', scanned: 0, logbookSize: 0, topCosine: -1, topWeight: 0, entropy: 0, hops: 0, topCoverage: 0, speakersNamed: 0, temporal: false, dense: false, items: [], searchUs: 0 },
    });
    expect(ctx.trace.durationUs).toBeGreaterThanOrEqual(0);
    expect(errors).toEqual([['read', ErrorCodes.STORE_UNAVAILABLE, 'store controlled failed a read: connection refused (test)']]);
    expect(degraded).toEqual([expect.objectContaining({ stage: 'read', code: ErrorCodes.STORE_UNAVAILABLE, sessionHash: tm.hashSession('default', 's') })]);
    store.failLoad = false;
    await tm.close();
  });

  it('a load that never answers is cut at readTimeoutMs', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, readTimeoutMs: 40 });
    const errors: string[] = [];
    tm.on('error', (e) => errors.push(e.error.message));
    const stalled = gate();
    store.loadGate = stalled.promise;
    const ctx = await tm.read({ session: 's', text: 'What is my name?' });
    expect(ctx.degraded).toBe(true);
    expect(errors).toEqual(['store controlled did not answer a read within 40 ms (readTimeoutMs)']);
    stalled.open();
    await tm.close();
  });

  it('a read waits for the session\'s write in flight, so it sees what that write stored', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, readTimeoutMs: 10_000 });
    const held = gate();
    store.commitGate = () => held.promise;
    const write = tm.write({ session: 's', text: 'My name is Dana.' });
    const read = tm.read({ session: 's', text: 'What is my name?' });
    await sleep(20);
    held.open();
    await write;
    const ctx = await read;
    expect(ctx.degraded).toBe(false);
    expect(ctx.items[0]?.value).toBe('Dana');
    await tm.close();
  });

  it('but not past half its budget: then it reads the last committed state instead of failing', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, readTimeoutMs: 2000 });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    const held = gate();
    store.commitGate = () => held.promise;
    const write = tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const ctx = await tm.read({ session: 's', text: 'What is my name?' });
    expect(ctx.degraded).toBe(false);
    expect(ctx.items[0]?.value).toBe('Dana');
    held.open();
    await write;
    await tm.close();
  });
});
