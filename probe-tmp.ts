import { Redis } from 'ioredis';
import { redisSlotStore } from './adapters/redis/index.js';
import { createTidemark } from './src/middleware/tidemark.js';
import { scripts } from './bench/load.js';
import { splitBlock, decodeRecord } from './adapters/redis/codec.js';
import { turnEntryId } from './src/middleware/write.js';
const c = new Redis();
const prefix = `i17probe:${process.pid}:`;
const store = redisSlotStore({ redis: c, prefix });
const tm = createTidemark({ store, tenant: 'bench', capacity: 64, hashKey: 'x' });
const N = Number(process.argv[2] ?? 1000);
const sc = scripts(1, N, 31)[0]!;
for (let t = 0; t < N; t++) { const u = sc.user[t % sc.user.length]!, r = sc.reply[t % sc.reply.length]!; await tm.write([{ session: 'm', text: u }, { session: 'm', text: r, role: 'assistant' }]); }
await tm.flush();
const k = store.sessionKeys('bench', 'm');
const els = await c.lrangeBuffer(k.alog, 0, -1);
const by: Record<string, { n: number; bytes: number; text: number; key: number }> = {};
for (const el of els) for (const r of splitBlock(el, 'x').records) {
  const e = decodeRecord(r.body, r.at, 'x', { tenant: 'bench', session: 'm' }, turnEntryId);
  const b = (by[e.kind] ??= { n: 0, bytes: 0, text: 0, key: 0 });
  b.n++; b.bytes += r.raw.length; b.text += Buffer.byteLength(e.value) + Buffer.byteLength(e.keyText); b.key += e.key ? e.key.length : 0;
}
console.log(N, els.length, by, 'usage', await c.memory('USAGE', k.alog, 'SAMPLES', '0'));
await tm.close();
const keys = await c.keys(`${prefix}*`); if (keys.length) await c.del(...keys);
c.disconnect();
