// A bot process of the chaos test: through a fault proxy, writes M turns to the session every process
// shares and M turns spread over its own sessions of user "rider", plus turns for user "leaver" (erased
// mid-run by the parent). Waits for "go" on stdin; prints one "n" line per write answered, then one
// JSON line: every write with its turn id, whether it was committed or queued, when it was accepted,
// and the outbox depth after the final flush.
// Run: node --import tsx bot-child.ts URL PREFIX PROC M

import { createInterface } from 'node:readline';
import { redisSlotStore } from '../../adapters/redis/index.js';
import { createTidemark } from '../../src/index.js';

const [url, prefix, procArg, mArg] = process.argv.slice(2) as [string, string, string, string];
const proc = Number(procArg);
const M = Number(mArg);

const tm = createTidemark({
  store: redisSlotStore({ redis: url, prefix, connectTimeoutMs: 1000 }),
  tenant: 'chaos',
  outbox: { retryMs: 20, maxRetryMs: 200 },
});
tm.on('error', () => undefined);

interface Done {
  turn: string;
  session: string;
  user?: string;
  outcome: string;
  acceptedMs: number;
}
const done: Done[] = [];

async function one(session: string, user: string | undefined, turn: string, text: string): Promise<void> {
  const acceptedMs = Date.now();
  let outcome: string;
  try {
    const r = await tm.write({ session, ...(user ? { user } : {}), turn, text });
    outcome = r.committed ? 'committed' : 'queued';
  } catch (err) {
    outcome = (err as { code?: string }).code ?? 'error';
  }
  done.push({ turn, session, ...(user ? { user } : {}), outcome, acceptedMs });
  process.stdout.write('n\n');
}

const lines = createInterface({ input: process.stdin });
process.stdout.write('ready\n');
await new Promise<void>((resolve) => lines.once('line', () => resolve()));

await Promise.all([
  (async () => {
    for (let i = 0; i < M; i++) await one('shared', undefined, `p${proc}-s${i}`, `Note p${proc} s${i}: my locker code is ${proc}${i}.`);
  })(),
  (async () => {
    for (let i = 0; i < M; i++) await one(`rider-p${proc}-${i % 3}`, 'rider', `p${proc}-r${i}`, `Note p${proc} r${i}: my saddle is size ${i}.`);
  })(),
  (async () => {
    for (let i = 0; i < M; i++) await one(`leaver-p${proc}-${i % 4}`, 'leaver', `p${proc}-l${i}`, `Note p${proc} l${i}: my phone ends in ${1000 + i}.`);
  })(),
]);
const { outboxDepth } = await tm.flush({ timeoutMs: 20_000 });
await tm.close({ timeoutMs: 1000 });
lines.close();
process.stdout.write(`${JSON.stringify({ done, outboxDepth })}\n`);
