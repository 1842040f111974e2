// The read path's details that only show in its numbers: a second hop that lowers a slot's cosine,
// the recency boost by a slot's age, a fact about someone else, a read that returns items and still
// misses, the read event's per-tier counts, the fields an item leaves out, the read deadline's timer
// (cleared when the read ends), and the wait for a pending write measured from the read's own start.

import { afterEach, describe, expect, it, vi } from 'vitest';
import type { ReadEvent } from '../../src/middleware/events.js';
import { createTidemark, type Tidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import { ControlledStore, gate } from './helpers.js';

afterEach(() => {
  vi.restoreAllMocks();
});

const FACTS = ['My name is Dana.', 'My bike is a green Corvane Tourer.', 'Can I book a service for Tuesday?', 'My phone number is 0770 900 123.', 'My saddle is a brown leather Brooks.', 'I live in Wexdale.'];

async function shop(options: Parameters<typeof createTidemark>[0] = {}): Promise<Tidemark> {
  const tm = createTidemark({ store: new InProcessStore(), capacity: 8, ...options });
  for (const text of FACTS) await tm.write({ session: 's', text });
  return tm;
}

const slotCosine = (ctx: Awaited<ReturnType<Tidemark['read']>>, slot: number): number => ctx.trace.items.find((x) => x.slot === slot)!.cosine;

describe('attention over two hops', () => {
  it('a slot the second hop moves away from keeps its first-hop cosine', async () => {
    // The second query adds the service booking's value, which the bike's key is further from.
    const q = { session: 's', text: 'When is the service for my bike?' };
    const one = await shop();
    const two = await shop({ read: { hops: 2 } });
    const a = await one.read(q);
    const b = await two.read(q);
    expect(b.trace.hops).toBe(2);
    expect(slotCosine(b, 2)).toBeGreaterThan(slotCosine(a, 2) + 0.01);
    expect(slotCosine(b, 1)).toBe(slotCosine(a, 1));
    await one.close();
    await two.close();
  });
});

describe('what a slot scores by', () => {
  it('its age: (1 + recencyBoost × 2^(-age / recencyHalfLife)), age in clock units since it was written', async () => {
    const t0 = Date.UTC(2026, 11, 3, 12);
    // Seconds as the clock, no strength in the score: only the recency factor changes between the reads.
    const tm = createTidemark({ store: new InProcessStore(), decayUnit: 'seconds', read: { slotPrior: 0, recencyBoost: 1, recencyHalfLife: 2 } });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.', at: t0 });
    const at = (s: number) => tm.read({ session: 's', text: 'Which bike do I ride?', at: t0 + s * 1000 } as Parameters<Tidemark['read']>[0]);
    const score = async (s: number): Promise<number> => (await at(s)).items.find((x) => x.source === 'slot')!.score;
    const now = await score(0);
    const later = await score(4);
    expect(now / later).toBeCloseTo((1 + 1) / (1 + 2 ** (-4 / 2)), 9);
    await tm.close();
  });

  it('a fact about someone else scores × othersWeight unless the question names them', async () => {
    const run = async (othersWeight: number): Promise<string[]> => {
      const tm = createTidemark({ store: new InProcessStore(), read: { othersWeight } });
      await tm.write({ session: 's', text: 'My brother wants a Corvane.' });
      const ctx = await tm.read({ session: 's', text: 'Who wants a Corvane?' });
      await tm.close();
      return ctx.items.filter((x) => x.source === 'slot').map((x) => x.value);
    };
    expect(await run(1)).toEqual(['My brother wants a Corvane.']);
    // Weighted to nothing, the slot has no score left and drops out.
    expect(await run(0)).toEqual([]);
  });
});

describe('what a read reports', () => {
  it('items found but no top item clear of the next: the result is a miss', async () => {
    const tm = await shop();
    const ctx = await tm.read({ session: 's', text: 'Was it the green one or the brown one?' });
    expect(ctx.items.length).toBeGreaterThan(0);
    expect(ctx.trace.result).toBe('miss');
    await tm.close();
  });

  it('the read event counts the items of each tier', async () => {
    const tm = createTidemark({ store: new InProcessStore(), capacity: 2 });
    for (const text of ['My name is Dana.', 'My bike is a green Corvane Tourer.', 'Can I book a service for Tuesday?', 'My bike has a squeaky chain.']) await tm.write({ session: 's', text });
    const reads: ReadEvent[] = [];
    tm.on('read', (e) => reads.push(e));
    const ctx = await tm.read({ session: 's', text: 'What is my name, and which bike do I ride?' });
    const slots = ctx.items.filter((x) => x.source === 'slot').length;
    expect(slots).toBeGreaterThan(0);
    expect(ctx.items.length - slots).toBeGreaterThan(0);
    expect(reads[0]).toMatchObject({ items: ctx.items.length, slotItems: slots, logbookItems: ctx.items.length - slots });
    await tm.close();
  });

  it('an item leaves out the dates it does not have', async () => {
    const tm = await shop();
    const ctx = await tm.read({ session: 's', text: 'Which bike do I ride?' });
    const bike = ctx.items.find((x) => x.source === 'slot' && x.value === 'a green Corvane Tourer')!;
    expect(Object.keys(bike)).not.toContain('dates');
    const booking = (await tm.read({ session: 's', text: 'When is my service booked?' })).items.find((x) => x.value.includes('Tuesday'))!;
    expect(booking.dates?.length).toBeGreaterThan(0);
    await tm.close();
  });
});

describe('the read deadline and the wait for a write', () => {
  const timers = (): number => process.getActiveResourcesInfo().filter((r) => r === 'Timeout').length;

  it('leaves no timer behind once the read is done', async () => {
    const tm = await shop({ readTimeoutMs: 600_000 });
    await tm.read({ session: 's', text: 'warm up' });
    const before = timers();
    await tm.read({ session: 's', text: 'Which bike do I ride?' });
    await tm.read({ session: 'fresh', text: 'Which bike do I ride?' });
    expect(timers()).toBe(before);
    await tm.close();
  });

  it('waits for the write in flight for half the budget counted from the read\'s start, whatever the clock reads', async () => {
    // A clock far from zero: a wait computed from anything but (now - start) would end at once.
    vi.spyOn(performance, 'now').mockReturnValue(1e9);
    const store = new ControlledStore();
    const tm = createTidemark({ store, readTimeoutMs: 10_000 });
    const held = gate();
    store.commitGate = () => held.promise;
    const write = tm.write({ session: 's', text: 'My name is Dana.' });
    await vi.waitFor(() => expect(store.commits).toBe(1));
    const read = tm.read({ session: 's', text: 'What is my name?' });
    // Let the read reach its wait (a read that did not wait would load the old state meanwhile).
    await new Promise((r) => setTimeout(r, 20));
    held.open();
    await write;
    const ctx = await read;
    expect(ctx.items[0]?.value).toBe('Dana');
    await tm.close();
  });
});
