// The write path seen from outside: every event a scripted conversation produces, checked against the
// write reports and inspect() (which slot, which id, which clock, which reason), each event kind
// emitted with only its own listener attached, a capacity change between instances, conflicts that
// retry or exhaust commitRetries, and which turns are read for facts and kept in the logbook.

import { describe, expect, it, vi } from 'vitest';
import { ErrorCodes } from '../../src/errors.js';
import type { CommitEvent, DemoteEvent, EvictEvent, GateEvent, LogbookEvent, OverwriteEvent, WriteEvent } from '../../src/middleware/events.js';
import { createTidemark, type Tidemark, type WriteReport } from '../../src/middleware/tidemark.js';
import { mixVectors, newRevisionId, turnEntryId } from '../../src/middleware/write.js';
import { InProcessStore } from '../../src/store/in-process.js';
import { ConflictingStore, ControlledStore } from './helpers.js';

const NAMES = ['logbook', 'evict', 'demote', 'gate', 'write', 'overwrite', 'commit'] as const;
type Name = (typeof NAMES)[number];

/** Every write-path event of `tm`, in order, as [name, payload]. */
function record(tm: Tidemark, names: readonly Name[] = NAMES): Array<[Name, Record<string, unknown>]> {
  const seen: Array<[Name, Record<string, unknown>]> = [];
  for (const n of names) tm.on(n, (e: object) => seen.push([n, e as Record<string, unknown>]));
  return seen;
}

/** The workshop conversation: two facts fill capacity 2, a third evicts the first, an update overwrites it, small talk is gated out. */
const SCRIPT = ['My name is Dana.', 'My bike is a green Corvane Tourer.', 'Can I book a service for Tuesday?', 'Actually, can we move it to Friday instead?', 'ok'];

describe('write events of a scripted conversation', () => {
  it('agree with each write report and with inspect(): slot, id, clock, gate, strength, reason', async () => {
    const tm = createTidemark({ store: new InProcessStore(), capacity: 2 });
    const seen = record(tm);
    const threshold = tm.params.write.gateThreshold;
    const halfLife = tm.params.write.halfLife;
    const h = { sessionHash: tm.hashSession('default', 's'), tenant: tm.hashTenant('default') };
    const reports: WriteReport[] = [];
    const born = Date.now();
    const turns: Array<Array<[Name, Record<string, unknown>]>> = [];
    for (const text of SCRIPT) {
      const from = seen.length;
      reports.push(await tm.write({ session: 's', text }));
      turns.push(seen.slice(from));
    }
    const names = turns.map((t) => t.map(([n]) => n).join(' '));
    expect(names).toEqual([
      'logbook gate write commit',
      'logbook gate write commit',
      'logbook evict demote gate write commit',
      'logbook gate write overwrite demote commit',
      'logbook gate commit',
    ]);
    for (const t of turns) for (const [, e] of t) expect(e).toMatchObject(h);
    // Durations are measured, never negative (their size is bench/'s business).
    for (const t of turns) {
      const c = t.find(([n]) => n === 'commit')![1] as unknown as CommitEvent;
      expect(c.planUs).toBeGreaterThan(0);
      expect(c.durationUs).toBeGreaterThan(0);
      expect(c.embedUs).toBeGreaterThanOrEqual(0);
    }
    const ev = <T>(turn: number, name: Name): T => turns[turn]!.find(([n]) => n === name)![1] as T;
    const stored = (turn: number): string => reports[turn]!.detail!.stored[0]!.id;

    // 1. Allocated into slot 0 at clock 1, strength = the gate score.
    const gate1 = ev<GateEvent>(0, 'gate');
    expect(gate1).toMatchObject({ threshold, passed: true });
    expect(gate1.score).toBeGreaterThan(threshold);
    expect(Object.keys(gate1.features)).toEqual(expect.arrayContaining(['novelty', 'statement', 'userRole']));
    expect(ev<WriteEvent>(0, 'write')).toMatchObject({ outcome: 'allocated', slot: 0, id: stored(0), clock: 1, gate: gate1.score, strength: gate1.score, halfLife, slotsInUse: 1, capacity: 2 });
    expect(ev<LogbookEvent>(0, 'logbook')).toMatchObject({ turns: 1, demoted: 0, droppedAge: 0, droppedCount: 0 });
    expect(ev<CommitEvent>(0, 'commit')).toMatchObject({ ops: 1, demoted: 0, logbook: 1, retries: 0, slotsInUse: 1, capacity: 2, version: 1 });
    expect(reports[0]).toMatchObject({ allocated: 1, overwritten: 0, reinforced: 0, gatedOut: 0, evicted: 0, logbook: 1, committed: true, version: 1, turns: ['t1'] });
    expect(ev<WriteEvent>(1, 'write')).toMatchObject({ outcome: 'allocated', slot: 1, id: stored(1), clock: 2, slotsInUse: 2, capacity: 2 });

    // 3. Full: the weaker first fact leaves slot 0 for the logbook after living two turns.
    const evict = ev<EvictEvent>(2, 'evict');
    expect(evict).toMatchObject({ slot: 0, id: stored(0), reason: 'capacity', logged: true, lifetime: 2, halfLife });
    expect(evict.lifetimeMs).toBeGreaterThanOrEqual(0);
    expect(evict.lifetimeMs).toBeLessThanOrEqual(Date.now() - born);
    expect(evict.strength).toBeGreaterThan(0);
    expect(evict.strength).toBeLessThan(gate1.score);
    expect(ev<DemoteEvent>(2, 'demote')).toMatchObject({ reason: 'capacity', id: stored(0) });
    expect(ev<WriteEvent>(2, 'write')).toMatchObject({ outcome: 'allocated', slot: 0, id: stored(2), clock: 3, slotsInUse: 2 });
    expect(ev<LogbookEvent>(2, 'logbook')).toMatchObject({ turns: 1, demoted: 1 });
    expect(ev<CommitEvent>(2, 'commit')).toMatchObject({ ops: 1, demoted: 1, logbook: 2, version: 3 });
    expect(reports[2]).toMatchObject({ allocated: 1, evicted: 1, logbook: 2, turns: ['t3'] });

    // 4. The update replaces the booking in place; the old revision is demoted as superseded.
    const write4 = ev<WriteEvent>(3, 'write');
    expect(write4).toMatchObject({ outcome: 'overwritten', slot: 0, id: stored(3), clock: 4 });
    expect(write4.ambiguous).toBeUndefined();
    const over = ev<OverwriteEvent>(3, 'overwrite');
    expect(over).toMatchObject({ slot: 0, id: stored(3), supersededId: stored(2) });
    expect(typeof over.cosine).toBe('number');
    expect(ev<DemoteEvent>(3, 'demote')).toMatchObject({ reason: 'superseded', id: stored(2) });
    expect(reports[3]).toMatchObject({ allocated: 0, overwritten: 1, evicted: 0, logbook: 2 });

    // 5. Small talk: a gate event that did not pass, no write, one turn kept.
    expect(ev<GateEvent>(4, 'gate')).toMatchObject({ threshold, passed: false });
    expect(ev<CommitEvent>(4, 'commit')).toMatchObject({ ops: 0, demoted: 0, logbook: 1 });
    expect(reports[4]).toMatchObject({ allocated: 0, overwritten: 0, gatedOut: 1, evicted: 0, logbook: 1, turns: ['t5'] });

    // What inspect() shows is what the events said.
    const view = await tm.inspect('s');
    expect(view.slots.map((x) => [x.index, x.id])).toEqual([[0, stored(3)], [1, stored(1)]]);
    const booking = view.slots[0]!;
    expect(write4.strength).toBeCloseTo(booking.strength, 1);
    await tm.close();
  });

  it('a reinforcement is a write event with gate 1 and the slot\'s new strength and half-life', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    await tm.write({ session: 's', text: 'I am allergic to chain wax.' });
    const before = (await tm.inspect('s')).slots[0]!;
    const writes: WriteEvent[] = [];
    tm.on('write', (e) => writes.push(e));
    const report = await tm.write({ session: 's', text: 'ok' }, { reinforce: [before.id] });
    expect(report.reinforced).toBe(1);
    const after = (await tm.inspect('s')).slots[0]!;
    expect(after.halfLife).toBeGreaterThan(before.halfLife);
    expect(writes).toEqual([expect.objectContaining({ outcome: 'reinforced', slot: 0, id: before.id, clock: 2, gate: 1, halfLife: after.halfLife, slotsInUse: 1, capacity: tm.params.capacity })]);
    expect(writes[0]!.strength).toBeCloseTo(after.strength, 6);
    await tm.close();
  });

  it('each event kind arrives with only its own listener attached, as often as with all of them', async () => {
    const run = async (names: readonly (Name | 'archive')[]): Promise<number> => {
      const tm = createTidemark({ store: new InProcessStore(), capacity: 2 });
      let n = 0;
      for (const name of names) tm.on(name, () => n++);
      for (const text of SCRIPT) await tm.write({ session: 's', text });
      await tm.close();
      return n;
    };
    const expected: Record<Name, number> = { logbook: 5, evict: 1, demote: 2, gate: 5, write: 4, overwrite: 1, commit: 5 };
    for (const name of NAMES) expect([name, await run([name])]).toEqual([name, expected[name]]);
    // The old name of `demote` still gets them, alone.
    expect(await run(['archive'])).toBe(expected.demote);
  });
});

describe('a capacity change between instances sharing a store', () => {
  it('keeps the pinned slot and the strongest, moves a survivor into range, evicts the rest into the logbook', async () => {
    const shared = new InProcessStore();
    const wide = createTidemark({ store: shared, capacity: 3 });
    for (const text of ['My name is Dana.', 'My bike is a green Corvane Tourer.', 'I am allergic to chain wax.']) await wide.write({ session: 's', text });
    const before = (await wide.inspect('s')).slots;
    expect(before.map((x) => x.index)).toEqual([0, 1, 2]);
    await wide.pin('s', 2);
    // Of slots 0 and 1, the weaker goes; the pinned slot 2 moves into its place.
    const [weak, strong] = before[0]!.strength < before[1]!.strength ? [before[0]!, before[1]!] : [before[1]!, before[0]!];
    const narrow = createTidemark({ store: shared, capacity: 2 });
    const seen = record(narrow, ['evict', 'demote', 'commit']);
    const report = await narrow.write({ session: 's', text: 'ok' });
    expect(report).toMatchObject({ evicted: 1, gatedOut: 1, logbook: 2 });
    expect(seen.map(([n, e]) => [n, e.slot ?? null, e.id ?? null, e.reason ?? null])).toEqual([
      ['evict', weak.index, weak.id, 'capacity'],
      ['demote', null, weak.id, 'capacity'],
      ['commit', null, null, null],
    ]);
    expect(seen[0]![1]).toMatchObject({ logged: true });
    expect(seen[2]![1]).toMatchObject({ capacity: 2, slotsInUse: 2, demoted: 1 });
    const after = await narrow.inspect('s');
    expect(after.slots.map((x) => [x.index, x.id, x.pinned])).toEqual(
      [[strong.index, strong.id, false], [weak.index, before[2]!.id, true]].sort((a, b) => (a[0] as number) - (b[0] as number)),
    );
    expect(after.logbook.filter((e) => e.kind !== 'turn').map((e) => [e.id, e.value])).toEqual([[weak.id, weak.value]]);
    await wide.close();
    await narrow.close();
  });
});

describe('a capacity change and a new fact in one commit', () => {
  it('the new fact takes the slot the plan freed, on top of the resized table', async () => {
    const shared = new InProcessStore();
    const wide = createTidemark({ store: shared, capacity: 3 });
    for (const text of ['My name is Dana.', 'My bike is a green Corvane Tourer.', 'Can I book a service for Tuesday?']) await wide.write({ session: 's', text });
    const narrow = createTidemark({ store: shared, capacity: 2 });
    const report = await narrow.write({ session: 's', text: 'I am allergic to chain wax.' });
    expect(report).toMatchObject({ allocated: 1, evicted: 2 });
    const after = await narrow.inspect('s');
    expect(after.slots).toHaveLength(2);
    expect(after.slots.map((x) => x.value)).toContain('chain wax');
    expect(after.slots.map((x) => x.index).sort()).toEqual([0, 1]);
    await wide.close();
    await narrow.close();
  });
});

describe('version conflicts on the write path', () => {
  it('plans again and commits; the commit event counts the retries, and the first plan reused the read\'s load', async () => {
    const store = new ConflictingStore();
    const tm = createTidemark({ store });
    const commits: CommitEvent[] = [];
    tm.on('commit', (e) => commits.push(e));
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await tm.read({ session: 's', text: 'What is my name?' });
    const loads = store.loads;
    const tried = store.commits;
    store.conflicts = 2;
    const report = await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    expect(report).toMatchObject({ committed: true, allocated: 1, version: 2 });
    expect(commits.map((e) => e.retries)).toEqual([0, 2]);
    // Attempt 0 planned on the read's snapshot; attempts 1 and 2 loaded again.
    expect(store.loads - loads).toBe(2);
    expect(store.commits - tried).toBe(3);
    await tm.close();
  });

  it('gives up after commitRetries + 1 attempts with STORE_CONFLICT, and the write waits in the outbox', async () => {
    const store = new ConflictingStore();
    const tm = createTidemark({ store, commitRetries: 2, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const errors: Array<[string, string, string]> = [];
    tm.on('error', (e) => errors.push([e.stage, e.error.code, e.error.message]));
    store.conflicts = 3;
    const report = await tm.write({ session: 's', text: 'My name is Dana.' });
    expect(report.committed).toBe(false);
    expect(store.commits).toBe(3);
    expect(errors).toEqual([['write', ErrorCodes.STORE_CONFLICT, 'session kept changing under 3 commit attempts; another writer is very busy on it — retry later or raise commitRetries']]);
    expect(await tm.flush()).toEqual({ outboxDepth: 0 });
    expect((await tm.inspect('s')).slots.map((x) => x.value)).toEqual(['Dana']);
    await tm.close();
  });
});

describe('which turns are read for facts and which are kept', () => {
  const reply = { session: 's', role: 'assistant' as const, text: 'Your bike is a green Corvane Tourer.' };

  it('a bot reply is read for facts only when it names a speaker (default) or writeReplies is true', async () => {
    /** Candidates the gate scored: one per fact the turn was read for. */
    const scored = async (options: Parameters<typeof createTidemark>[0], turn: object): Promise<number> => {
      const tm = createTidemark({ store: new InProcessStore(), ...options });
      let n = 0;
      tm.on('gate', () => n++);
      await tm.write(turn as never);
      await tm.close();
      return n;
    };
    expect(await scored({}, reply)).toBe(0);
    expect(await scored({}, { ...reply, speaker: 'Dana', text: 'My bike is a green Corvane Tourer.' })).toBe(1);
    expect(await scored({ writeReplies: true }, reply)).toBe(1);
    expect(await scored({ writeReplies: false }, { ...reply, speaker: 'Dana', text: 'My bike is a green Corvane Tourer.' })).toBe(0);
  });

  it('only the roles in logbook.roles are kept, each with the dates it mentions', async () => {
    const tm = createTidemark({ store: new InProcessStore(), logbook: { roles: ['user'] } });
    const at = Date.UTC(2026, 11, 3, 12);
    const r = await tm.write([{ session: 's', text: 'Can I book a service for Friday?', at }, { session: 's', role: 'assistant', text: 'Friday works.', at }]);
    expect(r.logbook).toBe(1);
    const turns = (await tm.inspect('s')).logbook.filter((e) => e.kind === 'turn');
    expect(turns.map((e) => e.value)).toEqual(['Can I book a service for Friday?']);
    expect(turns[0]!.dates?.map((d) => d.text)).toEqual(['Friday']);
    await tm.close();
  });

  it('with the clock in seconds, a turn dated earlier never moves the clock back', async () => {
    const tm = createTidemark({ store: new InProcessStore(), decayUnit: 'seconds' });
    const writes: WriteEvent[] = [];
    tm.on('write', (e) => writes.push(e));
    await tm.write({ session: 's', text: 'My name is Dana.', at: 2_000_000 });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.', at: 1_000_000 });
    expect(writes.map((e) => e.clock)).toEqual([2000, 2000]);
    await tm.close();
  });
});

describe('what leaves working memory, and the survival counters', () => {
  it('a slot past write.maxAgeMs is evicted as `expired`: not demoted, not in the logbook', async () => {
    const tm = createTidemark({ store: new InProcessStore(), write: { maxAgeMs: 60_000 } });
    const seen = record(tm, ['evict', 'demote', 'logbook']);
    const t0 = Date.UTC(2026, 11, 3, 12);
    await tm.write({ session: 's', text: 'My name is Dana.', at: t0 });
    const dana = (await tm.inspect('s')).slots[0]!;
    seen.length = 0;
    const report = await tm.write({ session: 's', text: 'ok', at: t0 + 60_001 });
    expect(report).toMatchObject({ evicted: 1, logbook: 1 });
    expect(seen.map(([n, e]) => [n, e.id ?? null, e.reason ?? null, e.logged ?? null])).toEqual([['logbook', null, null, null], ['evict', dana.id, 'expired', false]]);
    expect(seen[0]![1]).toMatchObject({ turns: 1, demoted: 0 });
    const view = await tm.inspect('s');
    expect(view.slots).toEqual([]);
    expect(view.logbook.filter((e) => e.kind !== 'turn')).toEqual([]);
    await tm.close();
  });

  it('each commit adds the survival counts of its slots: every lifetime bound reached, and the evicted one\'s end', async () => {
    // Bounds in turns are 0, 1, 2, 4, ...: a slot counts once per bound its age reaches. Dana (born
    // at clock 1) is evicted at clock 3, age 2; the bike (2) and the booking (3, overwritten in place,
    // the same slot living on) stay.
    const store = new InProcessStore();
    const tm = createTidemark({ store, capacity: 2 });
    const counts: Array<Record<string, number>> = [];
    for (const text of SCRIPT) {
      await tm.write({ session: 's', text });
      counts.push((await store.stats('default')).counters ?? {});
    }
    expect(counts).toEqual([
      { 'survival.reached.0': 1 },
      { 'survival.reached.0': 2, 'survival.reached.1': 1 },
      { 'survival.reached.0': 3, 'survival.reached.1': 2, 'survival.reached.2': 1, 'survival.ended.2': 1 },
      { 'survival.reached.0': 3, 'survival.reached.1': 3, 'survival.reached.2': 2, 'survival.ended.2': 1 },
      { 'survival.reached.0': 3, 'survival.reached.1': 3, 'survival.reached.2': 3, 'survival.ended.2': 1 },
    ]);
    await tm.close();
  });
});

describe('write path helpers', () => {
  it('mixVectors gives the unit vector of a + mix * b, and zeros for a zero sum', () => {
    const out = mixVectors(new Float32Array([1, 0]), new Float32Array([0, 1]), 0.75);
    expect(Array.from(out)).toEqual([expect.closeTo(0.8, 6), expect.closeTo(0.6, 6)]);
    expect(Array.from(mixVectors(new Float32Array([1, -1]), new Float32Array([-1, 1]), 1))).toEqual([0, 0]);
  });

  it('revision ids are 16 hex chars, fresh each time; turn entry ids depend on session and turn, unambiguously', () => {
    const a = newRevisionId();
    expect(a).toMatch(/^[0-9a-f]{16}$/);
    expect(newRevisionId()).not.toBe(a);
    expect(turnEntryId('s', 't1')).toBe(turnEntryId('s', 't1'));
    expect(turnEntryId('s', 't1')).toMatch(/^T\S+$/);
    expect(turnEntryId('s', 't1')).not.toBe(turnEntryId('s', 't2'));
    expect(turnEntryId('ab', 'c')).not.toBe(turnEntryId('a', 'bc'));
  });
});

describe('a short answer takes its topic from what was said just before', () => {
  const question = { session: 's', role: 'assistant' as const, text: "What's the best number to reach you on?" };
  const answer = { session: 's', text: "It's 07700 900814." };
  const keys = async (tm: Tidemark): Promise<string[]> => (await tm.inspect('s')).slots.map((x) => x.key);

  it('within one write call', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    await tm.write([question, answer]);
    expect(await keys(tm)).toEqual(['my phone number (mobile)']);
    await tm.close();
  });

  it('across write calls: the last turn of the previous write, not an earlier one', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    await tm.write([{ session: 's', text: 'Hi, I would like to book a service.' }, question]);
    await tm.write(answer);
    expect(await keys(tm)).toContain('my phone number (mobile)');
    await tm.close();
  });

  it('and without the question there is no such topic', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    await tm.write(answer);
    expect(await keys(tm)).not.toContain('my phone number (mobile)');
    await tm.close();
  });
});

describe('what a write stores besides the slot value', () => {
  it('a turn entry carries its user and speaker, an empty key text and no dates field when it names none; a slot its owner', async () => {
    const tm = createTidemark({ store: new InProcessStore(), capacity: 1 });
    await tm.write({ session: 's', user: 'u1', speaker: 'Dana', text: 'My name is Dana.' });
    await tm.write({ session: 's', user: 'u1', speaker: 'Dana', text: 'My bike is a green Corvane Tourer.' });
    const view = await tm.inspect('s', 'default', { user: 'u1' });
    expect(view.slots.map((x) => [x.value, x.owner])).toEqual([['a green Corvane Tourer', 'Dana']]);
    const turn = view.logbook.find((e) => e.kind === 'turn' && e.value === 'My name is Dana.')!;
    expect(turn).toMatchObject({ user: 'u1', speaker: 'Dana', keyText: '', seq: 1 });
    expect(turn).not.toHaveProperty('dates');
    // The value evicted to make room keeps the user too.
    expect(view.logbook.find((e) => e.kind !== 'turn')).toMatchObject({ value: 'Dana', user: 'u1' });
    await tm.close();
  });

  it('a repeated fact reinforces its slot and the report counts it; detail carries values only when asked', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    const first = await tm.write({ session: 's', text: 'My name is Dana.' }, { text: true });
    expect(first.detail?.stored.map((x) => x.value)).toEqual(['Dana']);
    const again = await tm.write({ session: 's', text: 'My name is Dana.' });
    expect(again).toMatchObject({ allocated: 0, overwritten: 0, reinforced: 1 });
    expect(again.detail?.stored).toEqual([]);
    await tm.close();
  });

  it('a write plans on the snapshot its read just loaded: no second load', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await tm.read({ session: 's', text: 'What is my name?' });
    const loads = store.loads;
    await tm.write({ session: 's', text: 'My bike is red.' });
    expect(store.loads).toBe(loads);
    await tm.close();
  });

  it('a store failure names the call that failed; an erase just before a write refuses it with a coded error', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const messages: string[] = [];
    tm.on('error', (e) => messages.push(e.error.message));
    store.failLoad = true;
    await tm.write({ session: 's', text: 'My name is Dana.' });
    store.failLoad = false;
    store.failCommit = true;
    await tm.write({ session: 't', text: 'My name is Dana.' });
    expect(messages).toEqual(['store controlled failed (load): connection refused (test)', 'store controlled failed (commit): connection reset (test)']);
    store.failCommit = false;
    await tm.close();
    const fenced = createTidemark({ store: new InProcessStore() });
    // The clock stands still: the write is accepted in the erase's own millisecond, and the erase wins.
    vi.useFakeTimers({ toFake: ['Date'] });
    try {
      vi.setSystemTime(Date.UTC(2026, 11, 3, 12));
      await fenced.erase({ session: 's' });
      await expect(fenced.write({ session: 's', text: 'My name is Dana.' })).rejects.toMatchObject({
        code: ErrorCodes.STORE_ERASED, message: `session #${fenced.hashSession('default', 's')} or its user was erased after this write was accepted; it was not stored`,
      });
    } finally {
      vi.useRealTimers();
    }
    await fenced.close();
  });

  it('with the clock in seconds, the survival counts use the bounds in seconds', async () => {
    const store = new InProcessStore();
    const tm = createTidemark({ store, decayUnit: 'seconds' });
    const t0 = Date.UTC(2026, 11, 3, 12);
    await tm.write({ session: 's', text: 'My name is Dana.', at: t0 });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.', at: t0 + 120_000 });
    // Dana is 120 s old at the second commit: past the 60 s bound, short of 300 s.
    expect((await store.stats('default')).counters).toEqual({ 'survival.reached.0': 2, 'survival.reached.60': 1 });
    await tm.close();
  });

  it('a resize skips empty slots', async () => {
    const shared = new InProcessStore();
    const wide = createTidemark({ store: shared, capacity: 4 });
    for (const text of ['My name is Dana.', 'My bike is a green Corvane Tourer.']) await wide.write({ session: 's', text });
    const narrow = createTidemark({ store: shared, capacity: 2 });
    expect(await narrow.write({ session: 's', text: 'ok' })).toMatchObject({ evicted: 0, committed: true });
    expect((await narrow.inspect('s')).slots.map((x) => x.value).sort()).toEqual(['Dana', 'a green Corvane Tourer']);
    await wide.close();
    await narrow.close();
  });
});
