import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it, vi } from 'vitest';
import { fencedOut, InProcessStore } from '../../src/store/in-process.js';
import { MemoryStore } from '../../src/deprecated.js';
import { demotedItem, commitOf, searchText, slot, storeConformance, turnEntry } from './conformance.js';

storeConformance('in-process', async () => new InProcessStore());

describe('InProcessStore snapshot', () => {
  const dir = mkdtempSync(join(tmpdir(), 'tidemark-snap-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('restores sessions, slots, logbook and events after a restart', async () => {
    const path = join(dir, 'a.json');
    const ref = { tenant: 't', session: 's1' };
    const first = new InProcessStore({ snapshotPath: path, snapshotIntervalMs: 0 });
    const turn = turnEntry(1, ref, 'My sister Ana is a nurse in Fellbrook.', { speaker: 'Maren', dates: [{ text: 'today', day: '2023-11-14', grain: 'day' }] });
    await first.commit(ref, commitOf({ clock: 5, turns: 6, ops: [{ index: 2, slot: slot(1) }], logbook: [demotedItem(1, ref), turn], events: [{ type: 'allocate', slot: 2, id: 'r1', clock: 5, atMs: 9 }] }));
    await first.close();
    const second = new InProcessStore({ snapshotPath: path, snapshotIntervalMs: 0 });
    const snap = await second.load(ref);
    expect(snap!.version).toBe(1);
    expect(snap!.clock).toBe(5);
    expect(snap!.table.get(2)).toEqual(slot(1));
    expect((await second.listLogbook(ref)).map((e) => e.id).sort()).toEqual(['T-s1-1', 'a1']);
    expect((await second.listLogbook(ref)).find((e) => e.id === 'a1')!.key).toEqual(demotedItem(1, ref).key);
    const r = await searchText(second, ref, 'What does Ana do for work?');
    expect(r.hits[0]!.entry).toEqual(turn);
    expect(await second.readEvents(ref)).toHaveLength(1);
    await second.close();
  });

  it('the deprecated MemoryStore name is the same class', () => {
    expect(new MemoryStore()).toBeInstanceOf(InProcessStore);
  });

  it('erasure rewrites the snapshot at once, leaving no trace of the text', async () => {
    const path = join(dir, 'b.json');
    const ref = { tenant: 't', session: 'secret-session' };
    const store = new InProcessStore({ snapshotPath: path, snapshotIntervalMs: 0 });
    await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1, { value: 'allergic to peanut oil' }) }], logbook: [demotedItem(1, ref, { value: 'old booking Tuesday' }), turnEntry(1, ref, 'I told you about my tax return')] }));
    store.save();
    expect(readFileSync(path, 'utf8')).toContain('peanut oil');
    await store.erase(ref);
    const text = readFileSync(path, 'utf8');
    expect(text).not.toContain('peanut oil');
    expect(text).not.toContain('old booking Tuesday');
    expect(text).not.toContain('tax return');
    expect(text).not.toContain('secret-session');
    await store.close();
  });

  it('rejects a snapshot of another format with a coded error', async () => {
    const path = join(dir, 'c.json');
    const { writeFileSync } = await import('node:fs');
    writeFileSync(path, JSON.stringify({ format: 'something-else', version: 1 }));
    expect(() => new InProcessStore({ snapshotPath: path })).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_STORE_CORRUPT' }));
  });

  it('rejects a snapshot of the right format but a malformed body with a coded error, not a TypeError', async () => {
    const { writeFileSync } = await import('node:fs');
    const bodies = [
      { sessions: 'nope', logbook: [] },
      { sessions: [{ tenant: 't', session: 's', capacity: 4, dim: 4, slots: [{ index: 0, key: 12 }] }], logbook: [] },
      { sessions: [{ tenant: 't', session: 's', capacity: 4, dim: 4, slots: null }], logbook: [] },
      { sessions: [], logbook: [null] },
    ];
    bodies.forEach((body, n) => {
      const path = join(dir, `malformed-${n}.json`);
      writeFileSync(path, JSON.stringify({ format: 'tidemark-memory-snapshot', version: 2, ...body }));
      expect(() => new InProcessStore({ snapshotPath: path }), `body ${n}`).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_STORE_CORRUPT' }));
    });
  });
});

describe('InProcessStore bounds', () => {
  it('holds at most maxSessions: the least recently used goes, with its logbook entries, and is counted', async () => {
    const store = new InProcessStore({ maxSessions: 3, idleTtlMs: 0 });
    const refs = ['a', 'b', 'c'].map((session) => ({ tenant: 't', session, user: 'u' }));
    for (const ref of refs) await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [turnEntry(1, ref, `bell note ${ref.session}`, { id: `e-${ref.session}` })] }));
    await store.load(refs[0]!); // a is now the most recently used; b the least
    const d = { tenant: 't', session: 'd', user: 'u' };
    await store.commit(d, commitOf({ ops: [{ index: 0, slot: slot(1) }] }));
    expect(store.evicted).toEqual({ cap: 1, idle: 0 });
    expect(await store.load({ tenant: 't', session: 'b' })).toBeNull();
    expect(await store.load(refs[0]!)).not.toBeNull();
    expect((await store.listLogbook({ tenant: 't', user: 'u' })).map((e) => e.id).sort()).toEqual(['e-a', 'e-c']);
    expect((await store.listSessions('t')).sort()).toEqual(['a', 'c', 'd']);
    await store.close();
  });

  it('drops a session idle past idleTtlMs by a timer, without waiting for its next turn, and counts it', async () => {
    vi.useFakeTimers();
    try {
      const store = new InProcessStore({ idleTtlMs: 10_000 });
      const ref = { tenant: 't', session: 'idle', user: 'u' };
      await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1) }], logbook: [turnEntry(1, ref, 'my phone number is 07700 900111', { id: 'p1' })] }));
      const live = { tenant: 't', session: 'live' };
      await store.commit(live, commitOf({}));
      vi.advanceTimersByTime(6_000);
      await store.load(live);
      vi.advanceTimersByTime(6_000);
      // The sweep ran: the idle session and its user-logbook entries are gone; the live one stays.
      expect(store.evicted).toEqual({ cap: 0, idle: 1 });
      expect(await store.listSessions('t')).toEqual(['live']);
      expect(await store.listLogbook({ tenant: 't', user: 'u' })).toEqual([]);
      await store.close();
    } finally {
      vi.useRealTimers();
    }
  });
});

describe('fencedOut', () => {
  const marks = (session: number, user = 0) => ({ session, user });

  it('refuses a turn accepted in the same millisecond as an erase: the order cannot be told, so the erase wins', () => {
    expect(fencedOut({ acceptedMs: 1_000 }, marks(1_000))).toBe(true);
    expect(fencedOut({ acceptedMs: 1_000 }, marks(0, 1_000))).toBe(true);
  });
  it('keeps a turn accepted one millisecond after the erase, and refuses one accepted before it', () => {
    expect(fencedOut({ acceptedMs: 1_001 }, marks(1_000, 1_000))).toBe(false);
    expect(fencedOut({ acceptedMs: 999 }, marks(1_000))).toBe(true);
  });
  it('refuses a turn whose reader saw an older erase than the store now holds', () => {
    expect(fencedOut({ acceptedMs: 5_000, seen: marks(1_000, 0) }, marks(2_000, 0))).toBe(true);
    expect(fencedOut({ acceptedMs: 5_000, seen: marks(2_000, 3_000) }, marks(2_000, 3_000))).toBe(false);
  });
});
