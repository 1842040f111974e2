// Failing fast on misconfiguration and saying so when the store changes under us, against real Redis
// servers: ioredis missing, `redis: undefined`, Redis down at startup (one connect timeout, not one per
// turn), and a Redis restarted without persistence (detected, an event and a counter).

import { execFileSync } from 'node:child_process';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { REDIS_SLOT_STORE_DEFAULTS, redisSlotStore } from '../../../adapters/redis/index.js';
import { createTidemark } from '../../../src/index.js';
import { REDIS_URL, ThrowawayRedis, deletePrefix, freePort, probeRedis, repoRoot, uniquePrefix } from './helpers.js';

const down = await probeRedis();

describe('redis store configuration', () => {
  it('a URL store without ioredis installed throws a coded config error at construction', () => {
    const dir = join(repoRoot, 'test', 'adapters', 'redis');
    const out = execFileSync(process.execPath, ['--require', join(dir, 'no-ioredis.cjs'), '--import', 'tsx', join(dir, 'no-ioredis-child.ts')], { cwd: repoRoot, encoding: 'utf8' });
    expect(out).toMatch(/^TIDEMARK_E_CONFIG: redis store: the ioredis package is not installed/);
  });

  it('Redis down at startup costs one connect timeout, then calls fail at once until it is back', async () => {
    const port = await freePort();
    const store = redisSlotStore({ redis: `redis://127.0.0.1:${port}`, connectTimeoutMs: 300 });
    try {
      const first = await store.load({ tenant: 't', session: 's' }).catch((e: Error) => e);
      expect(String((first as Error).message)).toMatch(/not ready after 300 ms/);
      // The second call takes the fast path: it does not wait for the connection again.
      const second = await store.load({ tenant: 't', session: 's' }).catch((e: Error) => e);
      expect((second as { code?: string }).code).toBe('TIDEMARK_E_STORE_UNAVAILABLE');
      expect(String((second as Error).message)).toMatch(/never connected .* retrying in the background/);
      // Once Redis is there, the store recovers by itself.
      const server = new ThrowawayRedis(port, false);
      await server.start();
      try {
        const tm = createTidemark({ store });
        const ready = new Promise<void>((resolve) => {
          const poll = (): void => void store.load({ tenant: 't', session: 's' }).then(() => resolve(), () => setImmediate(poll));
          poll();
        });
        await ready;
        expect(await tm.write({ session: 's', text: 'My name is Ola.' })).toMatchObject({ committed: true });
        await tm.close();
      } finally {
        await server.stop();
      }
    } finally {
      await store.close();
    }
  });
});

describe.skipIf(down !== null)(`redis store lifecycle${down ? ` (skipped: ${down})` : ''}`, () => {
  // The default names 127.0.0.1:6379; with REDIS_URL pointing elsewhere there is nothing to reach.
  it.skipIf(!REDIS_URL.startsWith('redis://127.0.0.1:6379'))('redis: undefined means the documented default URL', async () => {
    const prefix = uniquePrefix('default-url');
    const store = redisSlotStore({ redis: undefined, prefix });
    try {
      expect(store.name).toBe('redis');
      expect(await store.listSessions('t')).toEqual([]);
      const o = (await store.redis()).options as { host?: string; port?: number };
      expect(`redis://${o.host}:${o.port}`).toBe(REDIS_SLOT_STORE_DEFAULTS.redis);
    } finally {
      await deletePrefix(await store.redis(), prefix);
      await store.close();
    }
  });

  it('a Redis restarted without persistence is detected: a storeReset event and a counter', async () => {
    const port = await freePort();
    const server = new ThrowawayRedis(port, false);
    await server.start();
    const tm = createTidemark({ store: redisSlotStore({ redis: server.url }) });
    try {
      expect(await tm.write({ session: 's', text: 'My name is Ola.' })).toMatchObject({ committed: true });
      expect(tm.storeResets).toBe(0);
      const reset = new Promise<{ resets: number }>((resolve) => tm.once('storeReset', resolve));
      await server.kill();
      await server.start();
      expect((await reset).resets).toBe(1);
      expect(tm.storeResets).toBe(1);
    } finally {
      await tm.close({ timeoutMs: 200 });
      await server.stop();
    }
  });
});
