// A bot process for the multi-process proof: writes its share of facts to the shared sessions through
// createTidemark({ store: redisSlotStore(...) }).write(), after a start signal in Redis so that all
// processes write at the same time. Prints one JSON line: writes done, conflicts retried, writes queued in the outbox and
// writes abandoned at close (must be 0).
// Run: node --import tsx writer-child.ts URL PREFIX PROC SESSIONS FACTS [overwrite]
// With `overwrite` the processes restate the same topics (overwriteText) instead of each its own.

import { Redis } from 'ioredis';
import { redisSlotStore } from '../../../adapters/redis/index.js';
import { createTidemark } from '../../../src/index.js';
import { factText, overwriteText } from './facts.js';

const [url, prefix, procArg, sessionsArg, factsArg, mode] = process.argv.slice(2) as [string, string, string, string, string, string | undefined];
const text = mode === 'overwrite' ? overwriteText : factText;
const proc = Number(procArg);
const sessions = Number(sessionsArg);
const facts = Number(factsArg);

const signal = new Redis(url);
const tm = createTidemark({ store: redisSlotStore({ redis: url, prefix }), tenant: 'bikes' });
let retries = 0;
tm.on('commit', (e) => (retries += e.retries));
process.stdout.write('ready\n');
while ((await signal.get(`${prefix}go`)) === null) await new Promise((r) => setTimeout(r, 5));
let writes = 0;
let queued = 0;
// Every session at once, each session's facts in order: the processes collide on every session.
await Promise.all(
  Array.from({ length: sessions }, async (_, s) => {
    for (let f = 0; f < facts; f++) {
      const r = await tm.write({ session: `shop-${s}`, text: text(proc, f), turn: `p${proc}-f${f}` });
      // A write that kept losing the version race waits in the outbox (in order for its session) and
      // is committed by close(); the test checks that every turn landed once.
      if (!r.committed) queued++;
      writes++;
    }
  }),
);
const { abandoned } = await tm.close({ timeoutMs: 60_000 });
signal.disconnect();
process.stdout.write(`${JSON.stringify({ writes, retries, queued, abandoned })}\n`);
