// The archive tier seen from the middleware: evicted values stay searchable, an archive hit that a
// turn uses moves back into a slot, and erased text never comes back through any read.

import { describe, expect, it } from 'vitest';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { MemoryStore } from '../../src/store/memory.js';

const facts = [
  'My bike is a green Brompton with a dynamo hub.',
  'My favourite fern is the maidenhair fern on the balcony.',
  'My Spanish teacher is called Lucia Moreno.',
];

describe('archive hits and promotion', () => {
  it('finds an evicted value in the archive, then promotes it back into a slot when used', async () => {
    const store = new MemoryStore();
    const tm = createTidemark({ store, capacity: 2 });
    for (const text of facts) await tm.write({ session: 's1', text });
    let view = await tm.inspect('s1');
    expect(view.slots).toHaveLength(2);
    expect(view.archive).toHaveLength(1);
    const evicted = view.archive[0]!;
    expect(evicted.reason).toBe('capacity');

    const ctx = await tm.read({ session: 's1', text: evicted.keyText });
    expect(ctx.trace.archiveSearched).toBe(true);
    const hit = ctx.items.find((i) => i.id === evicted.id);
    expect(hit?.source).toBe('archive');
    expect(hit?.provenance).toEqual(evicted.provenance);

    const promote = tm.promotedBy(ctx);
    if (ctx.trace.result === 'archive_hit') expect(promote).toContain(evicted.id);
    await tm.write({ session: 's1', text: 'Thanks!' }, { promote: [evicted.id] });
    view = await tm.inspect('s1');
    expect(view.slots.map((s) => s.id)).toContain(evicted.id);
    expect(view.slots.find((s) => s.id === evicted.id)!.value).toBe(evicted.value);
    // It left the archive; the slot it displaced went there instead.
    expect(view.archive.map((a) => a.id)).not.toContain(evicted.id);
    expect(view.archive).toHaveLength(1);
    await tm.close();
  });

  it('erased text cannot come back through any read, from slots or the archive', async () => {
    const store = new MemoryStore();
    const tm = createTidemark({ store, capacity: 1, read: { archive: 'always' } });
    for (const text of facts) await tm.write({ session: 'gone', user: 'u9', text });
    await tm.write({ session: 'kept', text: 'My bike is a red Dawes.' });
    expect((await tm.inspect('gone', undefined, { user: 'u9' })).archive.length).toBeGreaterThan(0);
    await tm.erase({ session: 'gone' });
    for (const q of [...facts, 'bike', 'fern', 'teacher Lucia', 'Brompton']) {
      for (const ref of [{ session: 'gone' }, { session: 'gone', user: 'u9' }, { session: 'other', user: 'u9' }]) {
        const ctx = await tm.read({ ...ref, text: q });
        for (const item of ctx.items) {
          expect(item.value).not.toMatch(/Brompton|maidenhair|Lucia/);
        }
      }
    }
    expect(await store.listArchive({ tenant: 'default', user: 'u9' })).toEqual([]);
    expect(await store.listArchive({ tenant: 'default', session: 'gone' })).toEqual([]);
    // Another session is untouched.
    const kept = await tm.read({ session: 'kept', text: 'what bike do I have' });
    expect(kept.items[0]?.value).toMatch(/Dawes/);
    await tm.close();
  });
});
