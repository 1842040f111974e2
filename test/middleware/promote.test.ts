// Values that leave working memory seen from the middleware: an evicted value stays searchable in
// the logbook, one a turn uses moves back into a slot, and erased text never comes back through any read.

import { describe, expect, it } from 'vitest';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';

const facts = [
  'My bike is a green Corvane Tourer with a dynamo hub.',
  'My favourite fern is the maidenhair fern on the balcony.',
  'My Spanish teacher is called Lucia Moreno.',
];

describe('logbook values and promotion', () => {
  it('finds an evicted value in the logbook, then promotes it back into a slot when the reply uses it', async () => {
    const store = new InProcessStore();
    // No turns kept, so the evicted value is the only thing its words can find (with turns kept, the
    // turn it came from stands for it).
    const tm = createTidemark({ store, capacity: 2, logbook: { roles: [] } });
    for (const text of facts) await tm.write({ session: 's1', text });
    let view = await tm.inspect('s1');
    expect(view.slots).toHaveLength(2);
    const demoted = view.logbook;
    expect(demoted).toHaveLength(1);
    const evicted = demoted[0]!;
    expect(evicted.kind).toBe('capacity');

    const ctx = await tm.read({ session: 's1', text: `What is ${evicted.keyText}?` });
    const hit = ctx.items.find((i) => i.id === evicted.id);
    expect(hit).toMatchObject({ source: 'logbook', kind: 'capacity', provenance: evicted.provenance });
    // Used: the reply repeats the value; not used: it does not.
    expect(tm.promotedBy(ctx, `It is ${evicted.value}, as you said.`)).toEqual([evicted.id]);
    expect(tm.promotedBy(ctx, 'Let me check that for you.')).toEqual([]);
    await tm.write({ session: 's1', text: 'Thanks!' }, { promote: tm.promotedBy(ctx, `It is ${evicted.value}.`) });
    view = await tm.inspect('s1');
    expect(view.slots.map((s) => s.id)).toContain(evicted.id);
    expect(view.slots.find((s) => s.id === evicted.id)!.value).toBe(evicted.value);
    // It left the logbook's demoted values; the slot it displaced went there instead.
    const demotedNow = view.logbook.filter((a) => a.kind !== 'turn');
    expect(demotedNow.map((a) => a.id)).not.toContain(evicted.id);
    expect(demotedNow).toHaveLength(1);
    await tm.close();
  });

  it('erased text cannot come back through any read, from slots or the logbook', async () => {
    const store = new InProcessStore();
    const tm = createTidemark({ store, capacity: 1 });
    for (const text of facts) await tm.write({ session: 'gone', user: 'u9', text });
    await tm.write({ session: 'kept', text: 'My bike is a red Pennick Sprint.' });
    expect((await tm.inspect('gone', undefined, { user: 'u9' })).logbook.length).toBeGreaterThan(facts.length);
    await tm.erase({ session: 'gone' });
    for (const q of [...facts, 'bike', 'fern', 'teacher Lucia', 'Corvane']) {
      for (const ref of [{ session: 'gone' }, { session: 'gone', user: 'u9' }, { session: 'other', user: 'u9' }]) {
        const ctx = await tm.read({ ...ref, text: q });
        for (const item of ctx.items) {
          expect(item.value).not.toMatch(/Corvane|maidenhair|Lucia/);
        }
      }
    }
    expect(await store.listLogbook({ tenant: 'default', user: 'u9' })).toEqual([]);
    expect(await store.listLogbook({ tenant: 'default', session: 'gone' })).toEqual([]);
    // Another session is untouched.
    const kept = await tm.read({ session: 'kept', text: 'what bike do I have' });
    expect(kept.items[0]?.value).toMatch(/Pennick/);
    await tm.close();
  });
});
