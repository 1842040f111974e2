// Child of lifecycle.test.ts, run with no-ioredis.cjs preloaded: constructing a URL-backed redis
// store must throw a coded config error at once. Prints the error's code.
import { redisSlotStore } from '../../../adapters/redis/index.js';

try {
  redisSlotStore({ redis: 'redis://127.0.0.1:6379' });
  process.stdout.write('constructed\n');
} catch (err) {
  process.stdout.write(`${(err as { code?: string }).code ?? 'no code'}: ${(err as Error).message}\n`);
}
