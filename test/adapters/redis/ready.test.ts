// Many calls waiting for a client's first connection share one wait: one pair of listeners on the
// client, not one per caller (which tripped Node's MaxListenersExceededWarning in `bench soak`).

import { describe, expect, it } from 'vitest';
import { Redis } from 'ioredis';
import { ensureReady, REDIS_CLIENT_OPTIONS } from '../../../adapters/redis/client.js';
import { probeRedis } from './helpers.js';

const down = await probeRedis();
const url = process.env.REDIS_URL ?? 'redis://127.0.0.1:6379';

describe.skipIf(down !== null)(`first connection${down ? ` (skipped: ${down})` : ''}`, () => {
  it('adds one ready and one end listener for 50 concurrent callers and removes them once connected', async () => {
    const client = new Redis(url, { ...REDIS_CLIENT_OPTIONS, lazyConnect: true });
    const warnings: string[] = [];
    const onWarning = (w: Error): void => {
      warnings.push(w.name);
    };
    process.on('warning', onWarning);
    try {
      const ready0 = client.listenerCount('ready');
      const end0 = client.listenerCount('end');
      const waits = Array.from({ length: 50 }, () => ensureReady(client, 5000));
      expect(client.listenerCount('ready') - ready0).toBe(1);
      expect(client.listenerCount('end') - end0).toBe(1);
      await Promise.all(waits);
      expect(client.status).toBe('ready');
      expect(client.listenerCount('ready')).toBe(ready0);
      expect(client.listenerCount('end')).toBe(end0);
      // Node emits 'warning' on the next tick; let it.
      await new Promise((r) => setImmediate(r));
      expect(warnings).not.toContain('MaxListenersExceededWarning');
    } finally {
      process.off('warning', onWarning);
      client.disconnect();
    }
  });
});
