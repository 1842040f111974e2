// The seal of a logbook slice at rest (RedisSlotStore sealIdleMs, codec.ts sealTail, SEAL_TAIL) against
// the real redis-server: a short session's only block is compressed once the session pauses, a later
// burst is merged into it, every turn reads back the same and a search finds the same items; a tail
// that moved since it was fetched is left as it is.

import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import type { Redis } from 'ioredis';
import { redisSlotStore } from '../../../adapters/redis/index.js';
import { runScript } from '../../../adapters/redis/client.js';
import { sealBlock, splitBlock } from '../../../adapters/redis/codec.js';
import { SEAL_TAIL } from '../../../adapters/redis/scripts.js';
import { createTidemark } from '../../../src/index.js';
import type { LogbookScope } from '../../../src/types.js';
import { commitOf, searchText, turnEntry } from '../../store/conformance.js';
import { deletePrefix, newClient, probeRedis, uniquePrefix } from './helpers.js';

const down = await probeRedis();

const user = ['Hi, can I book a service for Friday?', 'At 2 pm if you can.', 'My name is Noor Haddad.', 'It is the blue one with the basket.', 'The front brake squeaks.', 'Yes, please.', 'Do you take cards?', 'Great, thanks!', 'Can I move it to Saturday?', 'Bye for now.'];
const reply = ['Sure, which time suits you?', 'Friday at 2 pm is free.', 'Thanks, Noor.', 'Noted: blue, with a basket.', 'We will look at the brake pads.', 'Booked for Friday at 2 pm.', 'Yes, cards and cash.', 'You are welcome!', 'Saturday at 2 pm is free too; moved.', 'See you on Saturday.'];

/** The first byte of each element of a log: 0 open block, 1 sealed. */
const marks = async (r: Redis, log: string): Promise<number[]> => (await r.lrangeBuffer(log, 0, -1)).map((el) => el[0]!);

describe.skipIf(down !== null)(`redis store: logbook slices sealed at rest${down ? ` (skipped: ${down})` : ''}`, () => {
  let admin: Redis;
  const prefix = uniquePrefix('seal-idle');
  beforeAll(() => {
    admin = newClient();
  });
  afterAll(async () => {
    await deletePrefix(admin, prefix);
    admin.disconnect();
  });

  it('a short session is compressed once it pauses; every turn reads back the same and searches find the same items', async () => {
    const store = redisSlotStore({ redis: admin, prefix });
    const tm = createTidemark({ store, tenant: 't', hashKey: 'seal-idle' });
    const say = async (from: number, to: number): Promise<void> => {
      for (let i = from; i < to; i++) await tm.write([{ session: 'short', text: user[i]! }, { session: 'short', text: reply[i]!, role: 'assistant' }]);
      await tm.flush();
    };
    const scope: LogbookScope = { tenant: 't', session: 'short' };
    // A fresh store each time: nothing cached, every entry decoded from Redis.
    const read = async () => {
      const reader = redisSlotStore({ redis: admin, prefix });
      const all = await reader.listLogbook(scope, { limit: 100 });
      const hits = await Promise.all(['brake pads', 'which day is the booking', 'Noor'].map(async (q) => (await searchText(reader, scope, q)).hits.map((h) => [h.entry.id, h.score])));
      return { all, hits };
    };
    const k = store.sessionKeys('t', 'short');
    // A reader that keeps its copy between calls: it fetches only what follows the end it has seen,
    // and must follow the seals (the elements change, the entries and their positions do not).
    const cached = redisSlotStore({ redis: admin, prefix });
    const list = async () => cached.listLogbook(scope, { limit: 100 });
    // Another that does not look between the burst and the merge: its next fetch spans both.
    const late = redisSlotStore({ redis: admin, prefix });
    await say(0, 7);
    const open = await read();
    expect(open.all.filter((e) => e.kind === 'turn')).toHaveLength(14);
    expect(open.hits.map((h) => h.length > 0)).toEqual([true, true, true]);
    expect(await marks(admin, k.alog)).toEqual([0]);
    const openBytes = (await admin.lindexBuffer(k.alog, 0))!.length;

    await store.sealIdle();
    expect(await marks(admin, k.alog)).toEqual([1]);
    expect((await admin.lindexBuffer(k.alog, 0))!.length).toBeLessThan(openBytes * 0.8);
    expect(await read()).toEqual(open);
    expect(await list()).toEqual(open.all);
    expect(await late.listLogbook(scope, { limit: 100 })).toEqual(open.all);
    expect(await admin.hget(k.meta, 'an')).toBe(String(open.all.length));

    // A later burst starts an open block after the sealed one; at rest again, the two are one sealed block.
    await say(7, 10);
    expect(await marks(admin, k.alog)).toEqual([1, 0]);
    const beforeMerge = await list();
    await store.sealIdle();
    expect(await marks(admin, k.alog)).toEqual([1]);
    const rest = await read();
    // Every turn, in order, beside the values that left working memory meanwhile (demoted entries).
    const turns = rest.all.filter((e) => e.kind === 'turn');
    expect(turns.map((e) => e.value)).toEqual(user.flatMap((u, i) => [u, reply[i]!]).reverse());
    expect(rest.all).toEqual(expect.arrayContaining(open.all));
    expect(await admin.hget(k.meta, 'an')).toBe(String(rest.all.length));
    expect(beforeMerge).toEqual(rest.all);
    expect(await list()).toEqual(rest.all);
    expect(await late.listLogbook(scope, { limit: 100 })).toEqual(rest.all);
    await tm.close();
    await cached.close();
    await late.close();
  });

  it('the idle timer seals both slices of a session after their last commit; a user\'s slice too', async () => {
    const store = redisSlotStore({ redis: admin, prefix, sealIdleMs: 20 });
    const ref = { tenant: 't', session: 'timed', user: 'u1' };
    const texts = ['Can I change my booking to Friday, please?', 'Of course, I can help with that.', 'Thank you so much.', 'You are welcome, see you on Friday!'];
    await store.commit(ref, commitOf({ logbook: texts.map((t, i) => turnEntry(i + 1, ref, t)) }));
    const k = store.sessionKeys('t', 'timed');
    await vi.waitFor(async () => expect(await marks(admin, k.ualog)).toEqual([1]), { timeout: 5000, interval: 20 });
    expect(store.sealed).toBe(1);
    const reader = redisSlotStore({ redis: admin, prefix });
    expect((await reader.listLogbook({ tenant: 't', user: 'u1' }, { limit: 10 })).map((e) => e.value)).toEqual([...texts].reverse());
    await store.close();
    await reader.close();
  });

  it('SEAL_TAIL leaves a log alone when its tail, or the block before it, moved since the writer fetched them', async () => {
    const store = redisSlotStore({ redis: admin, prefix });
    const ref = { tenant: 't', session: 'moved' };
    const k = store.sessionKeys('t', 'moved');
    await store.commit(ref, commitOf({ logbook: [turnEntry(1, ref, 'Is there anything else I can help you with?')] }));
    const seen = (await admin.lindexBuffer(k.alog, -1))!;
    await store.commit(ref, commitOf({ expectedVersion: 1, logbook: [turnEntry(2, ref, 'No, that is all, thanks.')] }));
    const now = (await admin.lindexBuffer(k.alog, -1))!;
    // Sealed from the bytes seen before the second commit: refused, the second entry stays.
    expect(Number(await runScript(admin, SEAL_TAIL, [k.alog], [seen, '', sealBlock(seen, 'test')]))).toBe(0);
    expect(Number(await runScript(admin, SEAL_TAIL, [k.alog], [now, seen, sealBlock(now, 'test')]))).toBe(0);
    expect(await admin.lrangeBuffer(k.alog, 0, -1)).toEqual([now]);
    expect(splitBlock(now, 'test').records).toHaveLength(2);
    // As fetched: replaced.
    expect(Number(await runScript(admin, SEAL_TAIL, [k.alog], [now, '', sealBlock(now, 'test')]))).toBe(1);
    expect(await marks(admin, k.alog)).toEqual([1]);
    await store.close();
  });
});
