// The read path at its edges: which tier a read's result names, how a second attention hop merges
// cosines, the dense list when turn vectors are kept, each item's weight as its share of the scores,
// and the read deadline and the wait for a pending write measured on fake timers (the time the query's
// embedding took counts against the budget).

import { afterEach, describe, expect, it, vi } from 'vitest';
import type { Embedder } from '../../src/embed/embedder.js';
import { hashingEmbedder } from '../../src/embed/hashing.js';
import type { ReadEvent } from '../../src/middleware/events.js';
import { createTidemark, type Tidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import type { MemoryContext } from '../../src/types.js';
import { ControlledStore, gate } from './helpers.js';

afterEach(() => {
  vi.useRealTimers();
});

/** Capacity 2: Dana is evicted to the logbook, the bike and the booking stay in slots. */
const FACTS = ['My name is Dana.', 'My bike is a green Corvane Tourer.', 'Can I book a service for Tuesday?', 'Actually, can we move it to Friday instead?'];

async function workshop(options: Parameters<typeof createTidemark>[0] = {}): Promise<Tidemark> {
  const tm = createTidemark({ store: new InProcessStore(), capacity: 2, ...options });
  for (const text of FACTS) await tm.write({ session: 's', text });
  return tm;
}

describe('what a read found', () => {
  it('names the tier of its top item, or a miss; the read event says the same', async () => {
    const tm = await workshop();
    const results: string[] = [];
    tm.on('read', (e) => results.push(e.result));
    const name = await tm.read({ session: 's', text: 'What is my name?' });
    expect(name.trace.result).toBe('logbook');
    expect(name.items[0]).toMatchObject({ source: 'logbook', kind: 'turn', value: 'My name is Dana.' });
    const bike = await tm.read({ session: 's', text: 'Which bike do I ride?' });
    expect(bike.trace.result).toBe('slot');
    expect(bike.items[0]).toMatchObject({ source: 'slot', value: 'a green Corvane Tourer' });
    const none = await tm.read({ session: 's', text: 'Tell me about quantum chromodynamics' });
    expect(none.trace).toMatchObject({ result: 'miss', topCoverage: 0 });
    expect(none.items).toEqual([]);
    expect(none.prompt).toBe('');
    expect(results).toEqual(['logbook', 'slot', 'miss']);
    await tm.close();
  });

  it('each item weighs its share of the positive scores, and the trace lists the same items', async () => {
    const tm = await workshop();
    const ctx = await tm.read({ session: 's', text: 'Which bike do I ride?' });
    expect(ctx.items.length).toBeGreaterThan(1);
    const total = ctx.items.reduce((a, x) => a + Math.max(0, x.score), 0);
    for (const x of ctx.items) expect(x.weight).toBeCloseTo(Math.max(0, x.score) / total, 12);
    expect(ctx.trace.items.map((x) => [x.id, x.weight, x.score, x.strength])).toEqual(ctx.items.map((x) => [x.id, x.weight, x.score, x.strength]));
    expect(ctx.trace.items[0]).toMatchObject({ source: 'slot', slot: 1 });
    expect(ctx.trace.topCoverage).toBe(ctx.trace.items[0]!.coverage);
    await tm.close();
  });

  it('a second hop keeps each slot\'s best cosine over both hops', async () => {
    const one = await workshop();
    const two = await workshop({ read: { hops: 2 } });
    const q = { session: 's', text: 'Which bike do I ride?' };
    const cosines = (ctx: MemoryContext): Map<number, number> => new Map(ctx.trace.items.filter((x) => x.source === 'slot').map((x) => [x.slot!, x.cosine]));
    const a = cosines(await one.read(q));
    const b = cosines(await two.read(q));
    expect([...b.keys()]).toEqual([...a.keys()]);
    expect(b.get(1)!).toBeGreaterThan(a.get(1)! + 0.01);
    for (const [slot, c] of a) expect([slot, b.get(slot)! >= c]).toEqual([slot, true]);
    await one.close();
    await two.close();
  });
});

describe('the dense list (turn vectors kept)', () => {
  it('turns found by their vector carry a dense rank and a cosine; without vectors neither', async () => {
    const dense = await workshop({ logbook: { vectors: true } });
    const plain = await workshop();
    const q = { session: 's', text: 'Which bike do I ride?' };
    const d = await dense.read(q);
    const p = await plain.read(q);
    expect(d.trace.dense).toBe(true);
    expect(p.trace.dense).toBe(false);
    const denseTurns = d.trace.items.filter((x) => x.kind === 'turn');
    expect(denseTurns.length).toBeGreaterThan(0);
    for (const x of denseTurns) expect(x.denseRank).toBeGreaterThan(0);
    // The turn that states the bike is the closest turn by vector.
    const bikeTurn = d.items.find((x) => x.value === FACTS[1]);
    expect(bikeTurn).toBeDefined();
    expect(bikeTurn!.cosine).toBeGreaterThan(0.3);
    for (const x of p.trace.items) expect(x.denseRank).toBe(0);
    for (const x of p.trace.items.filter((i) => i.kind === 'turn')) expect(x.cosine).toBeNaN();
    // A question that shares no word with anything still finds turns by vector, and none without.
    const off = { session: 's', text: 'Tell me about quantum chromodynamics' };
    expect((await dense.read(off)).trace.items.length).toBeGreaterThan(0);
    expect((await plain.read(off)).trace.items).toEqual([]);
    await dense.close();
    await plain.close();
  });
});

/** The hashing embedder, taking `delayMs` (on the fake clock) for any text in `slow`. */
function slowEmbedder(delayMs: number, slow: ReadonlySet<string>): Embedder {
  const inner = hashingEmbedder();
  return {
    id: inner.id,
    dim: inner.dim,
    embed: async (texts) => {
      if (texts.some((t) => slow.has(t))) await new Promise((r) => setTimeout(r, delayMs));
      return inner.embed(texts);
    },
  };
}

/** Resolves the read's outcome into `box` when it settles, so a test can look at it between clock steps. */
function watch(p: Promise<MemoryContext>): { ctx: MemoryContext | undefined } {
  const box: { ctx: MemoryContext | undefined } = { ctx: undefined };
  void p.then((c) => (box.ctx = c));
  return box;
}

describe('the read deadline on fake timers', () => {
  const QUESTION = 'What is my name?';
  const FAKE = { toFake: ['setTimeout', 'clearTimeout', 'performance', 'Date'] as const };

  it('a stalled load is cut at readTimeoutMs after the read began, the embedding\'s 10 ms included', async () => {
    vi.useFakeTimers({ toFake: [...FAKE.toFake] });
    const store = new ControlledStore();
    const tm = createTidemark({ store, readTimeoutMs: 100, embedder: slowEmbedder(10, new Set([QUESTION])) });
    const stalled = gate();
    store.loadGate = stalled.promise;
    const reads: ReadEvent[] = [];
    tm.on('read', (e) => reads.push(e));
    const box = watch(tm.read({ session: 's', text: QUESTION }));
    await vi.advanceTimersByTimeAsync(99);
    expect(box.ctx).toBeUndefined();
    await vi.advanceTimersByTimeAsync(1);
    expect(box.ctx).toMatchObject({ degraded: true, items: [] });
    expect(reads).toEqual([]);
    stalled.open();
    vi.useRealTimers();
    await tm.close();
  });

  it('a read waits for a pending write until half its budget, then reads the last committed state', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, readTimeoutMs: 100, embedder: slowEmbedder(10, new Set([QUESTION])) });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    vi.useFakeTimers({ toFake: [...FAKE.toFake] });
    const held = gate();
    store.commitGate = () => held.promise;
    const write = tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const box = watch(tm.read({ session: 's', text: QUESTION }));
    await vi.advanceTimersByTimeAsync(49);
    expect(box.ctx).toBeUndefined();
    await vi.advanceTimersByTimeAsync(1);
    expect(box.ctx).toMatchObject({ degraded: false });
    expect(box.ctx!.items[0]).toMatchObject({ source: 'slot', value: 'Dana' });
    held.open();
    await write;
    vi.useRealTimers();
    await tm.close();
  });

  it('a write that lands within the wait is seen at once', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, readTimeoutMs: 100, embedder: slowEmbedder(10, new Set([QUESTION])) });
    vi.useFakeTimers({ toFake: [...FAKE.toFake] });
    const held = gate();
    store.commitGate = () => held.promise;
    const write = tm.write({ session: 's', text: 'My name is Dana.' });
    const box = watch(tm.read({ session: 's', text: QUESTION }));
    await vi.advanceTimersByTimeAsync(20);
    expect(box.ctx).toBeUndefined();
    held.open();
    await write;
    await vi.advanceTimersByTimeAsync(0);
    expect(box.ctx).toMatchObject({ degraded: false });
    expect(box.ctx!.items[0]).toMatchObject({ source: 'slot', value: 'Dana' });
    vi.useRealTimers();
    await tm.close();
  });
});

describe('what each item and the trace carry', () => {
  it('a session whose slots are all empty is not attended to; the read event names the configured capacity for a session never stored', async () => {
    const tm = createTidemark({ store: new InProcessStore(), capacity: 5, read: { hops: 2 } });
    const reads: ReadEvent[] = [];
    tm.on('read', (e) => reads.push(e));
    await tm.write({ session: 'e', text: 'ok' });
    const empty = await tm.read({ session: 'e', text: 'What is my name?' });
    expect(empty.trace).toMatchObject({ scanned: 0, hops: 0, topCosine: -1, topWeight: 0, entropy: 0, logbookSize: 1 });
    await tm.read({ session: 'nobody', text: 'What is my name?' });
    expect(reads.map((e) => [e.capacity, e.slotsInUse, e.logbookSize])).toEqual([[5, 0, 1], [5, 0, 0]]);
    await tm.close();
  });

  it('a slot decayed far below 1e-9 shows its true strength; a pinned one its stored strength', async () => {
    const t0 = Date.UTC(2026, 11, 3, 12);
    const store = new InProcessStore();
    const tm = createTidemark({ store, decayUnit: 'seconds', write: { halfLife: 1 } });
    await tm.write({ session: 's', text: 'My name is Dana.', at: t0 });
    await tm.write({ session: 's', text: 'I am allergic to chain wax.', at: t0 });
    await tm.pin('s', 1);
    const raw = (await store.load({ tenant: 'default', session: 's' }))!.table;
    const stored = [raw.strength[0]!, raw.strength[1]!];
    // 100 half-lives later (seconds): Dana is at 2^-100 of her strength.
    const ctx = await tm.read({ session: 's', text: 'What is my name and my allergy?', at: t0 + 100_000 } as Parameters<Tidemark['read']>[0]);
    const dana = ctx.items.find((x) => x.value === 'Dana')!;
    const wax = ctx.items.find((x) => x.value === 'chain wax')!;
    expect(dana.strength / (stored[0]! * 2 ** -100)).toBeCloseTo(1, 6);
    expect(dana.strength).toBeLessThan(1e-9);
    expect(wax.strength).toBe(stored[1]);
    await tm.close();
  });

  it('items name their speaker (a slot\'s owner, a turn\'s speaker, a demoted value\'s owner) and a demoted value its strength and reason', async () => {
    const tm = createTidemark({ store: new InProcessStore(), capacity: 1 });
    await tm.write({ session: 's', speaker: 'Dana', text: 'My name is Dana.' });
    const slotCtx = await tm.read({ session: 's', text: 'What is my name?' });
    expect(slotCtx.items.map((x) => [x.source, x.kind, x.speaker])).toEqual([['slot', 'slot', 'Dana'], ['logbook', 'turn', 'Dana']]);
    // No turns kept: the demoted value is what the logbook finds.
    const bare = createTidemark({ store: new InProcessStore(), capacity: 1, logbook: { roles: [] } });
    await bare.write({ session: 's', speaker: 'Dana', text: 'My name is Dana.' });
    const dana = (await bare.inspect('s')).slots[0]!;
    await bare.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const ctx = await bare.read({ session: 's', text: 'What is my name?' });
    const demoted = ctx.items.find((x) => x.kind === 'capacity')!;
    expect(demoted).toMatchObject({ source: 'logbook', id: dana.id, value: 'Dana', speaker: 'Dana', reason: 'capacity', provenance: ['t1'] });
    expect(demoted.strength).toBeGreaterThan(0);
    expect(demoted.strength).toBeLessThanOrEqual(dana.strength);
    expect(demoted).not.toHaveProperty('atMs');
    expect(demoted).not.toHaveProperty('role');
    await tm.close();
    await bare.close();
  });

  it('an item\'s provenance is its own copy: changing it changes nothing stored', async () => {
    const store = new InProcessStore();
    const tm = createTidemark({ store, capacity: 1 });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const ctx = await tm.read({ session: 's', text: 'What is my name and my bike?' });
    expect(new Set(ctx.items.map((x) => x.source))).toEqual(new Set(['slot', 'logbook']));
    for (const x of ctx.items) x.provenance.push('tampered');
    const again = await tm.read({ session: 's', text: 'What is my name and my bike?' });
    for (const x of again.items) expect(x.provenance).not.toContain('tampered');
    const view = await tm.inspect('s');
    expect(view.slots[0]!.provenance).toEqual(['t2']);
    await tm.close();
  });

  it('an ambiguous update comes back with the ids it may replace', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    for (const text of ['My exam is on the 14th of October.', "My friend's wedding is on the 18th of October.", 'ok', "They moved it, it's in November instead."]) await tm.write({ session: 's', text });
    const [exam, wedding, moved] = (await tm.inspect('s')).slots;
    const ctx = await tm.read({ session: 's', text: 'When was it moved to November?' });
    const item = ctx.items.find((x) => x.id === moved!.id)!;
    expect(item.maybeReplaces).toEqual([wedding!.id, exam!.id]);
    item.maybeReplaces!.push('tampered');
    expect((await tm.inspect('s')).slots[2]!.maybeReplaces).toEqual([wedding!.id, exam!.id]);
    for (const x of ctx.items.filter((i) => i.id !== moved!.id)) expect(x).not.toHaveProperty('maybeReplaces');
    await tm.close();
  });
});

describe('the erasure fence a read is made under', () => {
  it('an erase while the reply is written wins even when the eraser\'s clock is behind: the read saw the session before it', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    const t = Date.UTC(2026, 11, 3, 12);
    vi.setSystemTime(t);
    const tm = createTidemark({ store: new InProcessStore() });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const errors: string[] = [];
    tm.on('error', (e) => errors.push(e.error.code));
    const handler = tm.wrap(async () => {
      // Another process, its clock a second behind, erases the session while this reply is made.
      vi.setSystemTime(t - 1000);
      await tm.erase({ session: 's' });
      vi.setSystemTime(t + 10);
      return 'Noted.';
    });
    expect(await handler({ session: 's', text: 'My name is Dana.' })).toBe('Noted.');
    await tm.flush();
    expect(errors).toEqual(['TIDEMARK_E_STORE_ERASED']);
    expect((await tm.inspect('s')).slots).toEqual([]);
    await tm.close();
  });
});

describe('more of the trace', () => {
  it('names the speakers a question names, whether it is about a time, and how long the search took', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    const at = Date.UTC(2026, 11, 3, 12);
    await tm.write({ session: 's', speaker: 'Dana', text: 'My bike is a green Corvane Tourer.', at });
    await tm.write({ session: 's', speaker: 'Robin', text: 'Can I book a service for Tuesday?', at });
    const reads: ReadEvent[] = [];
    tm.on('read', (e) => reads.push(e));
    const who = await tm.read({ session: 's', text: 'Which bike does Dana ride?' });
    expect(who.trace).toMatchObject({ speakersNamed: 1, temporal: false });
    expect(who.trace.searchUs).toBeGreaterThan(0);
    expect(reads[0]!.searchUs).toBe(who.trace.searchUs);
    expect(reads[0]!.durationUs).toBe(who.trace.durationUs);
    expect(reads[0]!.embedUs).toBeGreaterThanOrEqual(0);
    const when = await tm.read({ session: 's', text: 'Which day did I book a service for?', history: true });
    expect(when.trace).toMatchObject({ speakersNamed: 0, temporal: true });
    const turn = when.items.find((x) => x.kind === 'turn' && x.value === 'Can I book a service for Tuesday?')!;
    expect(turn).toMatchObject({ strength: 0, speaker: 'Robin', role: 'user', atMs: at });
    expect(turn.dates?.map((d) => d.text)).toEqual(['Tuesday']);
    await tm.close();
  });
});
