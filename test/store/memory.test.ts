import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { MemoryStore } from '../../src/store/memory.js';
import { archived, commitOf, slot, storeConformance, unit } from './conformance.js';

storeConformance('memory', async () => new MemoryStore());

describe('MemoryStore snapshot', () => {
  const dir = mkdtempSync(join(tmpdir(), 'tidemark-snap-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('restores sessions, slots, archive and events after a restart', async () => {
    const path = join(dir, 'a.json');
    const ref = { tenant: 't', session: 's1' };
    const first = new MemoryStore({ snapshotPath: path, snapshotIntervalMs: 0 });
    await first.commit(ref, commitOf({ clock: 5, turns: 6, ops: [{ index: 2, slot: slot(1) }], archive: [archived(1, ref)], events: [{ type: 'allocate', slot: 2, id: 'r1', clock: 5, atMs: 9 }] }));
    await first.close();
    const second = new MemoryStore({ snapshotPath: path, snapshotIntervalMs: 0 });
    const snap = await second.load(ref);
    expect(snap!.version).toBe(1);
    expect(snap!.clock).toBe(5);
    expect(snap!.table.get(2)).toEqual(slot(1));
    const hits = await second.searchArchive(ref, unit(1001), 1);
    expect(hits[0]!.item.id).toBe('a1');
    expect(await second.readEvents(ref)).toHaveLength(1);
    await second.close();
  });

  it('erasure rewrites the snapshot at once, leaving no trace of the text', async () => {
    const path = join(dir, 'b.json');
    const ref = { tenant: 't', session: 'secret-session' };
    const store = new MemoryStore({ snapshotPath: path, snapshotIntervalMs: 0 });
    await store.commit(ref, commitOf({ ops: [{ index: 0, slot: slot(1, { value: 'allergic to peanut oil' }) }], archive: [archived(1, ref, { value: 'old booking Tuesday' })] }));
    store.save();
    expect(readFileSync(path, 'utf8')).toContain('peanut oil');
    await store.erase(ref);
    const text = readFileSync(path, 'utf8');
    expect(text).not.toContain('peanut oil');
    expect(text).not.toContain('old booking Tuesday');
    expect(text).not.toContain('secret-session');
    await store.close();
  });

  it('rejects a snapshot of another format with a coded error', async () => {
    const path = join(dir, 'c.json');
    const { writeFileSync } = await import('node:fs');
    writeFileSync(path, JSON.stringify({ format: 'something-else', version: 1 }));
    expect(() => new MemoryStore({ snapshotPath: path })).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_STORE_CORRUPT' }));
  });
});
