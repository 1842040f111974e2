// The store on an ioredis client with auto-pipelining (commands of one tick share one socket write):
// the same conversation gives the same memory as on a plain client, erasure included. Before the store
// sent its scripts as typed EVALSHA commands, ioredis threw inside its auto-pipeline on
// callBuffer('evalsha', [...]).

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Redis } from 'ioredis';
import { REDIS_CLIENT_OPTIONS, redisSlotStore } from '../../../adapters/redis/index.js';
import { createTidemark } from '../../../src/index.js';
import { deletePrefix, newClient, probeRedis, REDIS_URL, uniquePrefix } from './helpers.js';

const down = await probeRedis();

// A plant nursery's help desk, invented.
const turns: Array<[string, string]> = [
  ['Hi, I bought a fiddle-leaf fig last week and its leaves are going brown.', 'Sorry to hear that. Where does it stand?'],
  ['It is by the south window, and I water it every Monday.', 'South light is fine; weekly water may be a lot in winter.'],
  ['My name is Ilse, by the way, and I live in Elmwood.', 'Thanks, Ilse.'],
  ['Actually I water it every Thursday, not Monday.', 'Noted: Thursdays.'],
  ['Can you deliver a bag of bark mix to Elmwood on Saturday?', 'Yes, Saturday morning works.'],
  ['When do I water the fig?', 'On Thursdays, as you said.'],
];

async function converse(redis: Redis, prefix: string): Promise<{ reads: string[][]; slots: string[]; erased: number }> {
  const tm = createTidemark({ store: redisSlotStore({ redis, prefix }), tenant: 't', hashKey: 'auto-pipeline' });
  const t0 = Date.UTC(2026, 10, 2, 9);
  const reads: string[][] = [];
  for (const [i, [user, reply]] of turns.entries()) {
    const at = t0 + i * 60_000;
    // Two sessions at once, so commands of both land in one tick.
    const [a] = await Promise.all([
      tm.read({ session: 'fig', text: user, at }),
      tm.read({ session: 'other', text: user, at }),
    ]);
    reads.push(a.items.map((x) => `${x.source}:${x.value}`));
    await Promise.all([
      tm.write([{ session: 'fig', text: user, at }, { session: 'fig', text: reply, role: 'assistant', at }]),
      tm.write([{ session: 'other', text: user, at }]),
    ]);
  }
  const slots = (await tm.inspect('fig')).slots.map((s) => `${s.key}=${s.value}`).sort();
  await tm.erase({ session: 'fig' });
  const erased = (await tm.inspect('fig')).slots.length;
  await tm.close();
  return { reads, slots, erased };
}

describe.skipIf(down !== null)(`redis store on an auto-pipelining client${down ? ` (skipped: ${down})` : ''}`, () => {
  let plain: Redis;
  let piped: Redis;
  const prefixes = [uniquePrefix('auto-pipe-plain'), uniquePrefix('auto-pipe-on')];
  beforeAll(() => {
    plain = newClient();
    piped = new Redis(REDIS_URL, { ...REDIS_CLIENT_OPTIONS, enableAutoPipelining: true });
    piped.on('error', () => undefined);
  });
  afterAll(async () => {
    for (const p of prefixes) await deletePrefix(plain, p);
    plain.disconnect();
    piped.disconnect();
  });

  it('gives the same reads, slots and erasure as a plain client', async () => {
    const a = await converse(plain, prefixes[0]!);
    const b = await converse(piped, prefixes[1]!);
    expect(b).toEqual(a);
    // The conversation did something worth comparing: the corrected day is held, the erase emptied the session.
    expect(a.slots.some((s) => /thursday/i.test(s))).toBe(true);
    expect(a.reads[5]!.some((x) => /thursday/i.test(x))).toBe(true);
    expect(a.erased).toBe(0);
  });
});
