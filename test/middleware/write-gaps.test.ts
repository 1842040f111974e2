// What the write path does at its less travelled corners: how long it backs off between conflicting
// commits (fake timers, a fixed Math.random), the quarantine report of a reload, turn vectors kept
// for a dense list, an ambiguous update on the write event, and which index a resize survivor keeps.

import { afterEach, describe, expect, it, vi } from 'vitest';
import { ErrorCodes } from '../../src/errors.js';
import { hashingEmbedder } from '../../src/embed/hashing.js';
import type { Embedder } from '../../src/embed/embedder.js';
import { SlotTable } from '../../src/memory/slots.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { mixVectors, resizeTable } from '../../src/middleware/write.js';
import { InProcessStore, scopeOf } from '../../src/store/in-process.js';
import type { Store } from '../../src/store/store.js';
import type { SlotRecord } from '../../src/types.js';
import { ControlledStore } from './helpers.js';

afterEach(() => {
  vi.useRealTimers();
  vi.restoreAllMocks();
});

/** Answers the first `conflicts` commits as if another writer had won, noting the (fake) time of each attempt. */
class BusyStore extends ControlledStore {
  conflicts = 0;
  readonly attemptsAt: number[] = [];
  override async commit(...a: Parameters<Store['commit']>): ReturnType<Store['commit']> {
    this.attemptsAt.push(Date.now());
    if (this.conflicts > 0) {
      this.conflicts--;
      return { ok: false, conflict: true, version: 0 };
    }
    return super.commit(...a);
  }
}

/** Gaps between successive attempts, in ms. */
const gaps = (at: readonly number[]): number[] => at.slice(1).map((x, i) => x - at[i]!);

describe('the backoff between conflicting commits', () => {
  // With Math.random fixed at 0.75 the waits are 0.75 × min(50, 2^attempt) ms: 0.75, 1.5, 3, 6, 12, 24,
  // 37.5 (the cap), which the fake clock counts in whole ms: 0, 1, 3, 6, 12, 24, 37.
  const EXPECTED = [0, 1, 3, 6, 12, 24, 37];

  it('a write waits a random share of a window that doubles per conflict, capped at 50 ms', async () => {
    vi.useFakeTimers({ toFake: ['setTimeout', 'clearTimeout', 'Date'] });
    vi.spyOn(Math, 'random').mockReturnValue(0.75);
    const store = new BusyStore();
    const tm = createTidemark({ store, commitRetries: 7 });
    store.conflicts = 7;
    const pending = tm.write({ session: 's', text: 'My name is Dana.' });
    await vi.runAllTimersAsync();
    expect(await pending).toMatchObject({ committed: true, allocated: 1 });
    expect(gaps(store.attemptsAt)).toEqual(EXPECTED);
    await tm.close();
  });

  it('pin() backs off the same way', async () => {
    const store = new BusyStore();
    const tm = createTidemark({ store, commitRetries: 7 });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    vi.useFakeTimers({ toFake: ['setTimeout', 'clearTimeout', 'Date'] });
    vi.spyOn(Math, 'random').mockReturnValue(0.75);
    store.attemptsAt.length = 0;
    store.conflicts = 7;
    const pending = tm.pin('s', 0);
    await vi.runAllTimersAsync();
    await pending;
    expect(gaps(store.attemptsAt)).toEqual(EXPECTED);
    vi.useRealTimers();
    expect((await tm.inspect('s')).slots[0]!.pinned).toBe(true);
    await tm.close();
  });

  it('pin() gives up after commitRetries + 1 attempts with STORE_CONFLICT', async () => {
    const store = new BusyStore();
    const tm = createTidemark({ store, commitRetries: 1 });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    store.attemptsAt.length = 0;
    store.conflicts = 2;
    await expect(tm.pin('s', 0)).rejects.toMatchObject({ code: ErrorCodes.STORE_CONFLICT, message: 'session kept changing under 2 attempts' });
    expect(store.attemptsAt).toHaveLength(2);
    expect((await tm.inspect('s')).slots[0]!.pinned).toBe(false);
    await tm.close();
  });
});

/** A store whose every load says `n` slot payloads were moved aside. */
class QuarantiningStore extends ControlledStore {
  override async load(...a: Parameters<Store['load']>): ReturnType<Store['load']> {
    const snap = await super.load(...a);
    return snap ? { ...snap, quarantined: 2 } : snap;
  }
}

describe('slots moved aside by the store', () => {
  const corrupt = (codes: string[]): number => codes.filter((c) => c === ErrorCodes.STORE_CORRUPT).length;

  it('a write that loads the session itself reports them; one that plans on the read\'s snapshot leaves that to the read', async () => {
    const store = new QuarantiningStore();
    const tm = createTidemark({ store });
    const codes: string[] = [];
    const messages: string[] = [];
    tm.on('error', (e) => {
      codes.push(e.error.code);
      messages.push(e.error.message);
    });
    await tm.write({ session: 's', text: 'My name is Dana.' }); // no session yet: nothing to report
    expect(codes).toEqual([]);
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' }); // loads: reports
    expect(corrupt(codes)).toBe(1);
    expect(messages[0]).toBe('store controlled: 2 slot payloads of this session failed their check and were moved aside; the session continues without them');
    await tm.read({ session: 's', text: 'What bike do I ride?' }); // the read reports
    expect(corrupt(codes)).toBe(2);
    await tm.write({ session: 's', text: 'I am allergic to chain wax.' }); // planned on the read's snapshot: not again
    expect(corrupt(codes)).toBe(2);
    await tm.close();
  });
});

/** The hashing embedder, recording every text it is asked to embed. */
function recording(): { embedder: Embedder; texts: string[] } {
  const inner = hashingEmbedder();
  const texts: string[] = [];
  const embedder: Embedder = {
    id: inner.id,
    dim: inner.dim,
    embed: (t) => {
      texts.push(...t);
      return inner.embed(t);
    },
  };
  return { embedder, texts };
}

describe('turn vectors for the dense list (logbook.vectors)', () => {
  const at = Date.UTC(2026, 11, 3, 12);
  const turns = [
    { session: 's', role: 'assistant' as const, text: 'Which day suits you for the service?', at },
    { session: 's', text: 'Friday morning suits me.', at },
  ];

  it('each kept turn carries its own text\'s embedding; a turn of a role not kept is never embedded', async () => {
    const { embedder, texts } = recording();
    const store = new InProcessStore();
    const tm = createTidemark({ store, embedder, logbook: { vectors: true, roles: ['user'] } });
    await tm.write(turns);
    expect(texts).not.toContain(turns[0]!.text);
    const kept = (await store.listLogbook(scopeOf({ tenant: 'default', session: 's' }))).filter((e) => e.kind === 'turn');
    expect(kept.map((e) => e.value)).toEqual([turns[1]!.text]);
    const [want] = await hashingEmbedder().embed([turns[1]!.text]);
    expect(kept[0]!.key).toBeInstanceOf(Float32Array);
    expect(Array.from(kept[0]!.key!)).toEqual(Array.from(want!));
    await tm.close();
  });

  it('two kept turns get a vector each, in order', async () => {
    const store = new InProcessStore();
    const tm = createTidemark({ store, logbook: { vectors: true } });
    await tm.write(turns);
    const kept = (await store.listLogbook(scopeOf({ tenant: 'default', session: 's' }))).filter((e) => e.kind === 'turn');
    const want = await hashingEmbedder().embed(turns.map((t) => t.text));
    const byText = new Map(kept.map((e) => [e.value, Array.from(e.key!)]));
    expect(byText.get(turns[0]!.text)).toEqual(Array.from(want[0]!));
    expect(byText.get(turns[1]!.text)).toEqual(Array.from(want[1]!));
    await tm.close();
  });

  it('without them (the hashing embedder\'s default) no turn carries a vector and a turn read for no fact is not embedded', async () => {
    const { embedder, texts } = recording();
    const store = new InProcessStore();
    const tm = createTidemark({ store, embedder });
    await tm.write(turns);
    const kept = (await store.listLogbook(scopeOf({ tenant: 'default', session: 's' }))).filter((e) => e.kind === 'turn');
    expect(kept).toHaveLength(2);
    for (const e of kept) expect(e).not.toHaveProperty('key');
    // The bot's question is read for no fact, so nothing embeds it.
    expect(texts).not.toContain(turns[0]!.text);
    await tm.close();
  });
});

describe('an ambiguous update', () => {
  it('is written beside the facts it may replace, and its write event says so', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    const writes: Array<Record<string, unknown>> = [];
    tm.on('write', (e) => writes.push(e as unknown as Record<string, unknown>));
    await tm.write({ session: 's', text: 'My exam is on the 14th of October.' });
    await tm.write({ session: 's', text: "My friend's wedding is on the 18th of October." });
    // With a turn between, "it" no longer points at the wedding alone.
    await tm.write({ session: 's', text: 'ok' });
    const [exam, wedding] = (await tm.inspect('s')).slots;
    writes.length = 0;
    const report = await tm.write({ session: 's', text: "They moved it, it's in November instead." });
    expect(report).toMatchObject({ allocated: 1, overwritten: 0 });
    expect(writes).toEqual([expect.objectContaining({ outcome: 'allocated', slot: 2, ambiguous: true })]);
    const added = (await tm.inspect('s')).slots[2]!;
    expect(added.id).toBe(writes[0]!.id);
    expect(added.maybeReplaces).toEqual([wedding!.id, exam!.id]);
    await tm.close();
  });
});

describe('resizeTable', () => {
  const DIM = 4;
  const rec = (id: string, over: Partial<SlotRecord> = {}): SlotRecord => ({
    id, key: Float32Array.from({ length: DIM }, (_, j) => (j === id.length % DIM ? 1 : 0)), keyText: `key ${id}`, value: `value ${id}`,
    provenance: [`t-${id}`], strength: 1, halfLife: 10, stamp: 0, created: 0, createdMs: 0, updatedMs: 0, reads: 0, pinned: false, ...over,
  });
  const tableOf = (records: Array<SlotRecord | null>): SlotTable => {
    const t = new SlotTable(records.length, DIM);
    records.forEach((r, i) => r && t.set(i, r));
    return t;
  };
  const ids = (t: SlotTable): Array<string | null> => Array.from({ length: t.capacity }, (_, i) => t.get(i)?.id ?? null);

  it('survivors keep their index when it fits; one past the end takes the first free slot; the weakest goes', () => {
    // Slot 0 is the weakest once decayed to now = 10 (0.4 halved once); slot 2 outranks slot 1, so a
    // survivor that moved by rank would swap them; the pinned slot 3 is weakest of all yet stays.
    const t = tableOf([rec('weak', { strength: 0.4 }), rec('mid', { strength: 0.5, stamp: 10 }), rec('strong', { strength: 0.9, stamp: 10 }), rec('pin', { strength: 0.05, pinned: true })]);
    const r = resizeTable(t, 3, 10);
    expect(r.table.capacity).toBe(3);
    expect(ids(r.table)).toEqual(['pin', 'mid', 'strong']);
    expect(r.evictions).toHaveLength(1);
    expect(r.evictions[0]).toMatchObject({ slot: 0, reason: 'capacity', logged: true });
    expect(r.evictions[0]!.record.id).toBe('weak');
    expect(r.evictions[0]!.strength).toBeCloseTo(0.2, 9);
    expect(r.ops.map((o) => [o.index, o.slot?.id ?? null])).toEqual([[0, 'pin'], [1, 'mid'], [2, 'strong']]);
    const demoted = r.demote({ tenant: 'default', session: 's' }, 11, 5_000);
    expect(demoted.map((e) => [e.id, e.value, e.kind])).toEqual([['weak', 'value weak', 'capacity']]);
  });

  it('pinned slots go first, ranked by their undecayed strength; the rest by strength decayed to now', () => {
    // Decayed to now = 10, pinA (0.9, half-life 1) would be ~0.0009 and pinB 0.5: a pinned slot does not decay.
    const t = tableOf([rec('free', { strength: 1, stamp: 10 }), rec('pinB', { strength: 0.5, stamp: 10, pinned: true }), rec('pinA', { strength: 0.9, halfLife: 1, pinned: true })]);
    const r = resizeTable(t, 1, 10);
    expect(ids(r.table)).toEqual(['pinA']);
    expect(r.evictions.map((e) => [e.slot, e.record.id])).toEqual([[1, 'pinB'], [0, 'free']]);
    expect(r.evictions[0]!.strength).toBe(0.5);
    expect(r.evictions[1]!.strength).toBe(1);
  });

  it('growing keeps every slot where it was and adds empty ones', () => {
    const t = tableOf([null, rec('a'), rec('b', { strength: 0.3 })]);
    const r = resizeTable(t, 5, 0);
    expect(ids(r.table)).toEqual([null, 'a', 'b', null, null]);
    expect(r.evictions).toEqual([]);
    expect(r.ops.map((o) => [o.index, o.slot?.id ?? null])).toEqual([[0, null], [1, 'a'], [2, 'b'], [3, null], [4, null]]);
  });
});

/** A store whose logbook deletes fail like a lost connection. */
class DeleteFailStore extends ControlledStore {
  deletes = 0;
  override deleteLogbook(..._a: Parameters<Store['deleteLogbook']>): ReturnType<Store['deleteLogbook']> {
    this.deletes++;
    return Promise.reject(new Error('connection reset (test)'));
  }
}

describe('what else a write takes from its input', () => {
  it('a caller\'s own turn id names the turn in the report, the slot\'s provenance and the logbook; without one it is t<n>', async () => {
    const at = Date.UTC(2026, 11, 3, 12);
    const tm = createTidemark({ store: new InProcessStore() });
    expect((await tm.write({ session: 's', text: 'My name is Dana.', turn: 'msg-17', at })).turns).toEqual(['msg-17']);
    expect((await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.', at: at + 1000 })).turns).toEqual(['t2']);
    const view = await tm.inspect('s');
    expect(view.slots.map((x) => x.provenance)).toEqual([['msg-17'], ['t2']]);
    const turns = view.logbook.filter((e) => e.kind === 'turn');
    expect(turns.map((e) => [e.provenance, e.clock, e.seq, e.atMs, e.createdMs])).toEqual([[['t2'], 2, 2, at + 1000, at + 1000], [['msg-17'], 1, 1, at, at]]);
    await tm.close();
  });

  it('a system turn is never read for facts, even with writeReplies: true', async () => {
    const tm = createTidemark({ store: new InProcessStore(), writeReplies: true });
    let scored = 0;
    tm.on('gate', () => scored++);
    const r = await tm.write({ session: 's', role: 'system', text: 'My name is Dana.' });
    expect(scored).toBe(0);
    expect(r).toMatchObject({ allocated: 0, gatedOut: 0, logbook: 0 });
    await tm.close();
  });

  it('with valueMix 0 a slot\'s key is its topic\'s embedding and no value is embedded', async () => {
    const { embedder, texts } = recording();
    const store = new InProcessStore();
    const tm = createTidemark({ store, embedder, valueMix: 0 });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const t = (await store.load({ tenant: 'default', session: 's' }))!.table;
    expect(t.value[0]).toBe('a green Corvane Tourer');
    expect(texts).not.toContain('a green Corvane Tourer');
    const [want] = await hashingEmbedder().embed([t.keyText[0]!]);
    expect(Array.from(t.keyRow(0))).toEqual(Array.from(want!));
    await tm.close();
  });

  it('a write to a session stored with another embedder\'s dimension is refused with EMBED_DIM, naming migrate', async () => {
    const store = new InProcessStore();
    const old = createTidemark({ store });
    await old.write({ session: 's', text: 'My name is Dana.' });
    const tm = createTidemark({ store, embedder: hashingEmbedder({ dim: 128 }) });
    await expect(tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' })).rejects.toMatchObject({ code: ErrorCodes.EMBED_DIM, message: expect.stringContaining('migrate') });
    expect((await old.inspect('s')).slots.map((x) => x.value)).toEqual(['Dana']);
    await old.close();
    await tm.close();
  });

  it('an overwrite\'s write event carries the stored slot\'s strength and half-life', async () => {
    const tm = createTidemark({ store: new InProcessStore(), write: { halfLife: 50 } });
    const writes: Array<Record<string, unknown>> = [];
    tm.on('write', (e) => writes.push(e as unknown as Record<string, unknown>));
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await tm.write({ session: 's', text: 'hello' });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    // A reinforcement lengthens the slot's half-life past the configured one; the overwrite keeps it.
    const bikeId = (await tm.inspect('s')).slots[1]!.id;
    await tm.write({ session: 's', text: 'ok' }, { reinforce: [bikeId] });
    await tm.write({ session: 's', text: 'Actually my bike is a red Corvane Tourer.' });
    const over = writes.at(-1)!;
    expect(over).toMatchObject({ outcome: 'overwritten', slot: 1 });
    const slot = (await tm.inspect('s')).slots[1]!;
    expect(over.strength).toBeCloseTo(slot.strength, 12);
    expect(over.halfLife).toBe(slot.halfLife);
    expect(slot.halfLife).toBeGreaterThan(50);
    await tm.close();
  });

  it.each([0.5, 0])('a turn with two facts addresses each by its own topic: an update of both overwrites both (valueMix %s)', async (valueMix) => {
    const tm = createTidemark({ store: new InProcessStore(), valueMix });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    const writes: Array<Record<string, unknown>> = [];
    tm.on('write', (e) => writes.push(e as unknown as Record<string, unknown>));
    const r = await tm.write({ session: 's', text: 'Actually my name is Dana Smith and my bike is a red Corvane Tourer.' });
    expect(r).toMatchObject({ overwritten: 2, allocated: 0 });
    const slots = (await tm.inspect('s')).slots;
    expect(slots.map((x) => x.value)).toEqual(['Dana Smith', 'a red Corvane Tourer']);
    // Each write event carries its own slot's strength.
    expect(slots[0]!.strength).not.toBeCloseTo(slots[1]!.strength, 9);
    expect(writes.map((e) => e.slot)).toEqual([0, 1]);
    for (const e of writes) expect(e.strength).toBeCloseTo(slots[e.slot as number]!.strength, 12);
    await tm.close();
  });
});

describe('the vector stored for each fact of a write', () => {
  it('is normalize(key + valueMix × value), or the key\'s own vector when the value is the key, for every candidate in order', async () => {
    const text = 'My name is Dana, my bike is a green Corvane Tourer, and I am allergic to chain wax.';
    const facts: Array<[string, string]> = [['my name', 'Dana'], ['my bike', 'a green Corvane Tourer'], ['allergic to chain wax', 'allergic to chain wax']];
    const extractor = { extract: () => facts.map(([key, value]) => ({ key, value, text, pattern: 'sentence', remember: true })) };
    const store = new InProcessStore();
    const tm = createTidemark({ store, extractor });
    expect(await tm.write({ session: 's', text })).toMatchObject({ allocated: 3 });
    const t = (await store.load({ tenant: 'default', session: 's' }))!.table;
    const e = hashingEmbedder();
    for (let i = 0; i < 3; i++) {
      const [key, value] = facts[i]!;
      const [k, v] = await e.embed([key, value]);
      const want = key === value ? Array.from(k!) : Array.from(mixVectors(k!, v!, 0.5));
      expect([t.keyText[i], Array.from(t.keyRow(i)).map((x, j) => Math.abs(x - want[j]!) < 1e-6).every(Boolean)]).toEqual([key, true]);
    }
    await tm.close();
  });
});

describe('promotion after a write in between', () => {
  it('a value a read recalled can be promoted by a later write of the session, not only the next one', async () => {
    const facts = ['My bike is a green Corvane Tourer with a dynamo hub.', 'My favourite fern is the maidenhair fern on the balcony.', 'My Spanish teacher is called Lucia Moreno.'];
    const tm = createTidemark({ store: new InProcessStore(), capacity: 2, logbook: { roles: [] } });
    for (const text of facts) await tm.write({ session: 's', text });
    const evicted = (await tm.inspect('s')).logbook[0]!;
    const ctx = await tm.read({ session: 's', text: `What is ${evicted.keyText}?` });
    const promote = tm.promotedBy(ctx, `It is ${evicted.value}.`);
    expect(promote).toEqual([evicted.id]);
    await tm.write({ session: 's', text: 'ok' });
    await tm.write({ session: 's', text: 'Thanks!' }, { promote });
    expect((await tm.inspect('s')).slots.map((x) => x.id)).toContain(evicted.id);
    await tm.close();
  });
});

describe('promotion when the logbook delete fails', () => {
  it('the write stands, the failure is reported as a store error, and the value is not promoted twice', async () => {
    const store = new DeleteFailStore();
    const facts = ['My bike is a green Corvane Tourer with a dynamo hub.', 'My favourite fern is the maidenhair fern on the balcony.', 'My Spanish teacher is called Lucia Moreno.'];
    const tm = createTidemark({ store, capacity: 2, logbook: { roles: [] } });
    for (const text of facts) await tm.write({ session: 's', text });
    const evicted = (await tm.inspect('s')).logbook[0]!;
    const errors: Array<[string, string, string]> = [];
    tm.on('error', (e) => errors.push([e.stage, e.error.code, e.error.message]));
    const ctx = await tm.read({ session: 's', text: `What is ${evicted.keyText}?` });
    const promote = tm.promotedBy(ctx, `It is ${evicted.value}.`);
    expect(promote).toEqual([evicted.id]);
    const report = await tm.write({ session: 's', text: 'Thanks!' }, { promote });
    expect(report.committed).toBe(true);
    await vi.waitFor(() => expect(errors).toHaveLength(1));
    expect(errors[0]).toEqual(['store', ErrorCodes.STORE_UNAVAILABLE, 'connection reset (test)']);
    expect(store.deletes).toBe(1);
    const slots = (await tm.inspect('s')).slots;
    expect(slots.map((x) => x.id)).toContain(evicted.id);
    // The same ids again: the value is remembered no more, so nothing is promoted or deleted twice.
    await tm.write({ session: 's', text: 'Thanks again!' }, { promote });
    expect(store.deletes).toBe(1);
    expect((await tm.inspect('s')).slots.filter((x) => x.id === evicted.id)).toHaveLength(1);
    await tm.close();
  });
});
