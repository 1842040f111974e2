// The outbox after an outage: every queued write lands, each session's writes in their order, with
// many sessions drained at once.

import { describe, expect, it } from 'vitest';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { ControlledStore } from './helpers.js';

describe('outbox drain', () => {
  it('commits every queued write once the store is back, in order per session', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 5, maxRetryMs: 20, concurrency: 4 } });
    store.failLoad = true;
    store.failCommit = true;
    const sessions = ['a', 'b', 'c', 'd', 'e', 'f'];
    const days = ['Monday', 'Tuesday', 'Wednesday'];
    for (const day of days) {
      await Promise.all(sessions.map((s) => tm.write({ session: s, text: `My lesson is on ${day}.` })));
    }
    expect(tm.outboxDepth).toBe(sessions.length * days.length);
    store.failLoad = false;
    store.failCommit = false;
    const { outboxDepth } = await tm.flush({ timeoutMs: 10_000 });
    expect(outboxDepth).toBe(0);
    for (const s of sessions) {
      const view = await tm.inspect(s);
      expect(view.turns).toBe(3);
      // Applied in order: the last value wins, the earlier ones are superseded in the logbook.
      const lesson = view.slots.find((x) => x.key === 'my booking (lesson)');
      expect(lesson?.value).toMatch(/Wednesday/);
      expect(view.logbook.filter((a) => a.kind === 'superseded').map((a) => a.value).join(' ')).toMatch(/Monday/);
      // And all three turns are kept, in order.
      expect(view.logbook.filter((a) => a.kind === 'turn').map((a) => a.seq)).toEqual([3, 2, 1]);
    }
    await tm.close();
  });
});
