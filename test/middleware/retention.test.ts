// Retention deletes: a slot past write.maxAgeMs leaves working memory without being demoted into the
// logbook (an `evict` with reason `expired`, logged: false), and with logbook.maxAgeMs the turn that
// said it goes too — so the expired value does not come back through either tier.

import { describe, expect, it } from 'vitest';
import { createTidemark } from '../../src/index.js';

describe('retention', () => {
  it('an expired slot is deleted, not kept in the logbook; with the logbook limit its turn goes too', async () => {
    const day = 86_400_000;
    const t0 = Date.now() - 30 * day;
    const tm = createTidemark({ write: { maxAgeMs: 7 * day }, logbook: { maxAgeMs: 7 * day } });
    const evicted: Array<{ reason: string; logged: boolean }> = [];
    tm.on('evict', (e) => evicted.push({ reason: e.reason, logged: e.logged }));
    await tm.write({ session: 's', text: 'My phone number is 07700 900555.', at: t0 });
    await tm.write({ session: 's', text: 'My bike is a green tandem.', at: t0 + 10 * day });
    expect(evicted).toEqual([{ reason: 'expired', logged: false }]);
    const view = await tm.inspect('s');
    expect(view.slots.map((x) => x.value)).not.toContain('07700 900555');
    expect(view.logbook.map((e) => e.kind)).not.toContain('expired');
    expect(view.logbook.map((e) => e.value).join(' ')).not.toContain('900555');
    const ctx = await tm.read({ session: 's', text: 'What is my phone number?' });
    expect(ctx.items.map((i) => i.value).join(' ')).not.toContain('900555');
    await tm.close();
  });
});
