// `npm run bench -- soak --steady ...` is the drift soak (no faults; see lib/steady.ts). Without it:
// `npm run bench -- soak [--seconds S] [--rate OPS] [--sessions N] [--concurrency C] [--json]`: bounded mixed load
// (turns, plain reads, erasures) on a throwaway redis-server that this benchmark starts on a free
// port and SIGKILLs and restarts on the same port half-way through, and erases 5% of the sessions at
// three quarters. It reports errors, degraded reads, the outbox peak, and lost, duplicated and
// resurrected writes, which must be 0: every write the core acknowledged (committed, or queued in the
// outbox) is checked afterwards in the store, and no write accepted before an erase may survive it.

import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { createServer, connect } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { progressBar } from '../cli/progress.js';
import { ErrorCodes } from '../src/errors.js';
import { createTidemark, TIDEMARK_DEFAULTS, type WrapInput } from '../src/middleware/tidemark.js';
import { asciiTable, lineChart, writeResult } from './lib/results.js';
import { prng } from './lib/scenario.js';
import { loadAverage, scripts, words } from './load.js';
import { machine, parseArgs, round } from './lib/stats.js';

// ------------------------------------------------------------------ a throwaway redis-server

/** A redis-server child of this process, on its own port, without persistence. */
export interface ThrowawayRedis {
  port: number;
  url: string;
  pid: number | undefined;
  /** SIGKILL (no shutdown, no save): what a crash or an OOM kill looks like to clients. */
  kill(): Promise<void>;
  /** Starts a fresh, empty server on the same port. */
  restart(): Promise<void>;
  /** Stops the server this helper started (by its pid; never any other redis). */
  stop(): Promise<void>;
}

/** A free TCP port on loopback (the kernel picks it; a race with another process is unlikely). */
export function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = createServer();
    srv.once('error', reject);
    srv.listen(0, '127.0.0.1', () => {
      const addr = srv.address();
      const port = typeof addr === 'object' && addr ? addr.port : 0;
      srv.close(() => resolve(port));
    });
  });
}

/** Resolves once `PING` on the port answers `+PONG`, or rejects after `timeoutMs`. */
export async function waitForPong(port: number, timeoutMs = 5000): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  for (;;) {
    const ok = await new Promise<boolean>((resolve) => {
      const s = connect(port, '127.0.0.1');
      let buf = '';
      const done = (v: boolean): void => {
        s.destroy();
        resolve(v);
      };
      s.setTimeout(500, () => done(false));
      s.on('error', () => done(false));
      s.on('connect', () => s.write('PING\r\n'));
      s.on('data', (d) => {
        buf += d.toString();
        if (buf.includes('\r\n')) done(buf.startsWith('+PONG'));
      });
    });
    if (ok) return;
    if (Date.now() > deadline) throw new Error(`redis-server on port ${port} did not answer PING within ${timeoutMs} ms`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

/**
 * Starts `redis-server` on a free loopback port (or `port`) as a child process: without persistence,
 * or with an append-only file fsynced on every write in `aofDir` (a restart then reloads it).
 */
export async function throwawayRedis(options: ThrowawayOptions = {}): Promise<ThrowawayRedis> {
  const p = options.port ?? (await freePort());
  const persist = options.aofDir
    ? ['--dir', options.aofDir, '--appendonly', 'yes', '--appendfsync', 'always']
    : ['--appendonly', 'no'];
  let child: ChildProcess | undefined;
  const start = async (): Promise<void> => {
    child = spawn('redis-server', ['--port', String(p), '--bind', '127.0.0.1', '--save', '', ...persist, '--protected-mode', 'yes', '--loglevel', 'warning'], {
      stdio: 'ignore',
    });
    const c = child;
    await new Promise<void>((resolve, reject) => {
      c.once('error', (err) => reject(new Error(`could not start redis-server (is it installed?): ${err.message}`)));
      c.once('spawn', () => resolve());
    });
    await waitForPong(p);
  };
  const killWith = async (signal: NodeJS.Signals): Promise<void> => {
    const c = child;
    child = undefined;
    if (!c || c.exitCode !== null || c.signalCode !== null) return;
    const exited = new Promise<void>((resolve) => c.once('exit', () => resolve()));
    c.kill(signal);
    await exited;
  };
  await start();
  return {
    port: p,
    url: `redis://127.0.0.1:${p}`,
    get pid() {
      return child?.pid;
    },
    kill: () => killWith('SIGKILL'),
    restart: start,
    stop: () => killWith('SIGTERM'),
  };
}

export type ThrowawayOptions = { port?: number; aofDir?: string };

// ------------------------------------------------------------------ the soak

interface SoakFigures {
  seconds: number;
  sessions: number;
  concurrency: number;
  turns: number;
  reads: number;
  batch_writes: number;
  acknowledged_writes: number;
  committed_directly: number;
  queued_in_outbox: number;
  refused_outbox_full: number;
  errors: number;
  errors_by_stage: Record<string, number>;
  degraded_reads: number;
  outbox_peak: number;
  outbox_after_flush: number;
  lost_writes: number;
  duplicated_writes: number;
  /** Sessions erased mid-run (after the restart), and messages of theirs accepted before the erase found stored afterwards (must be 0). */
  erased_sessions: number;
  /** Erasures that never got through (the store unreachable for 20 s); their sessions count as not erased. */
  erase_failed: number;
  resurrected_writes: number;
  restart_at_s: number;
  down_ms: number;
  offered_ops_per_s: number;
  outbox_max: number;
  turns_per_s: number;
}

type Ack = 'commit' | 'queued' | 'refused' | 'error';

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  if (args.flags.has('steady')) {
    const { steadySoak } = await import('./lib/steady.js');
    const num = (name: string, def: number, min = 1): number => {
      const raw = args.values.get(name);
      const v = raw === undefined ? def : Number(raw);
      if (!Number.isInteger(v) || v < min) throw new RangeError(`--${name} must be an integer >= ${min}, got ${raw}`);
      return v;
    };
    return steadySoak(argv, args, num);
  }
  const int = (name: string, def: number, min: number, max: number): number => {
    const raw = args.values.get(name);
    const v = raw === undefined ? def : Number(raw);
    if (!Number.isInteger(v) || v < min || v > max) throw new RangeError(`--${name} must be an integer in [${min}, ${max}], got ${raw}`);
    return v;
  };
  const seconds = int('seconds', 20, 4, 600);
  const sessions = int('sessions', 300, 1, 100_000);
  const concurrency = Math.min(sessions, int('concurrency', 32, 1, 4096));
  const downMs = int('down-ms', 2000, 0, 60_000);
  // Open-loop pacing: users do not type faster while memory is degraded, so operations start on a
  // fixed schedule (a closed loop would multiply the offered load during the outage, when degraded
  // turns are instant, and measure that instead).
  const rate = int('rate', 400, 1, 1_000_000);
  const outboxMax = int('outbox-max', TIDEMARK_DEFAULTS.outbox.max, 0, 10_000_000);
  const json = args.flags.has('json');

  // Durability is the server's job: with an append-only file fsynced on every write, a SIGKILL loses
  // nothing Redis acknowledged, so any write missing afterwards was lost by the client side.
  const aofDir = mkdtempSync(join(tmpdir(), 'tidemark-soak-'));
  const redis = await throwawayRedis({ aofDir });
  const { RedisSlotStore } = await import('../adapters/redis/index.js');
  const prefix = 'tidemark-soak:';
  const store = new RedisSlotStore({ redis: redis.url, prefix });
  const tm = createTidemark({ store, tenant: 'soak', hashKey: 'soak-bench', outbox: { max: outboxMax } });
  const names = Array.from({ length: sessions }, (_, i) => `soak-${i}`);
  const hashes = new Map(names.map((s) => [tm.hashSession('soak', s), s]));
  const convo = scripts(sessions, 50, 31);

  // Acknowledgement bookkeeping, per session (see the module comment of load.ts for why the hash
  // identifies the turn): a commit event while the session has entries in the outbox is a drain of an
  // older write, not this turn's.
  const pending = new Map<string, (a: Ack) => void>();
  const outstanding = new Map<string, number>();
  const acked = new Map<string, number>();
  const errorsByStage: Record<string, number> = {};
  let errors = 0;
  let degraded = 0;
  let outboxPeak = 0;
  let droppedFromOutbox = 0;
  const settle = (hash: string | undefined, a: Ack): void => {
    const f = hash === undefined ? undefined : pending.get(hash);
    if (f) {
      pending.delete(hash!);
      f(a);
    }
  };
  tm.on('commit', (e) => {
    if ((outstanding.get(e.sessionHash) ?? 0) === 0) settle(e.sessionHash, 'commit');
  });
  tm.on('outbox', (e) => {
    outboxPeak = Math.max(outboxPeak, e.depth);
    if (!e.sessionHash) return;
    if (e.change === 'queued') {
      outstanding.set(e.sessionHash, (outstanding.get(e.sessionHash) ?? 0) + 1);
      settle(e.sessionHash, 'queued');
    } else if (e.change === 'drained') {
      outstanding.set(e.sessionHash, (outstanding.get(e.sessionHash) ?? 1) - 1);
    } else settle(e.sessionHash, 'refused');
  });
  tm.on('error', (e) => {
    errors++;
    errorsByStage[e.stage] = (errorsByStage[e.stage] ?? 0) + 1;
    // Connectivity failures of a write are followed by `queued`; anything else rejected the write.
    if (e.stage === 'write' && e.error.code !== ErrorCodes.STORE_UNAVAILABLE) settle(e.sessionHash, 'error');
    // A drained entry that failed for another reason than connectivity was dropped (and reported).
    if (e.stage === 'outbox' && e.error.code !== ErrorCodes.STORE_OUTBOX_FULL) droppedFromOutbox++;
  });
  tm.on('degraded', (e) => {
    if (e.stage === 'read') degraded++;
  });
  const wrapped = tm.wrap((input: WrapInput) => words(input.reply as string));

  const counts = { turns: 0, reads: 0, batches: 0, direct: 0, queued: 0, refused: 0 };
  /** Messages (user + assistant turns) each session's acknowledged writes carry. */
  // Erasures: at three quarters of the run, the first 5% of sessions are erased one after another;
  // workers leave a session alone while it is being erased. A message whose write started before its
  // session's erase ended is the erase's (erased, or refused with STORE_ERASED), never acknowledged.
  const erasedCount = Math.max(1, Math.floor(sessions / 20));
  const erasing = new Set<string>();
  const erasedAt = new Map<string, number>();
  let eraseFailed = 0;
  const ack = (session: string, a: Ack, messages: number, startedAt: number): void => {
    const e = erasedAt.get(session);
    if (e !== undefined && startedAt < e) return;
    if (a === 'commit' || a === 'queued') {
      acked.set(session, (acked.get(session) ?? 0) + messages);
      if (a === 'commit') counts.direct++;
      else counts.queued++;
    } else if (a === 'refused') counts.refused++;
  };

  const r = prng(99);
  const t0 = performance.now();
  const end = t0 + seconds * 1000;
  const restartAt = seconds / 2;
  let restarted = false;
  const restart = (async () => {
    await new Promise((res) => setTimeout(res, restartAt * 1000));
    await redis.kill();
    await new Promise((res) => setTimeout(res, downMs));
    await redis.restart();
    restarted = true;
  })();
  const erasures = (async () => {
    await new Promise((res) => setTimeout(res, seconds * 750));
    for (const s of names.slice(0, erasedCount)) {
      erasing.add(s);
      erasedAt.set(s, Number.POSITIVE_INFINITY);
      // The store may still be reconnecting after the restart: try again until it answers (bounded).
      let done = false;
      for (let attempt = 0; attempt < 200 && !done; attempt++) {
        try {
          await tm.erase({ session: s });
          done = true;
        } catch {
          await new Promise((res) => setTimeout(res, 100));
        }
      }
      if (done) {
        erasedAt.set(s, performance.now());
        acked.delete(s);
      } else {
        erasedAt.delete(s);
        eraseFailed++;
      }
      erasing.delete(s);
    }
  })();
  // A timeline every 250 ms: outbox depth, and writes acknowledged / reads degraded per second.
  const timeline: Array<{ t: number; outbox: number; acked_per_s: number; degraded_per_s: number }> = [];
  let lastAcked = 0;
  let lastDegraded = 0;
  const sampler = setInterval(() => {
    const ackedNow = counts.direct + counts.queued;
    timeline.push({ t: round((performance.now() - t0) / 1000, 2), outbox: tm.outboxDepth, acked_per_s: (ackedNow - lastAcked) * 4, degraded_per_s: (degraded - lastDegraded) * 4 });
    lastAcked = ackedNow;
    lastDegraded = degraded;
  }, 250);
  sampler.unref();
  const bar = process.stderr.isTTY && !json ? progressBar(seconds * 10, 'soak', process.stderr, 1) : { tick: () => undefined, done: () => undefined };
  const ticker = setInterval(() => bar.tick(Math.min(seconds * 10, Math.round((performance.now() - t0) / 100))), 100);
  ticker.unref();
  await Promise.all(
    Array.from({ length: concurrency }, async (_, w) => {
      let round = 0;
      let op = 0;
      const periodMs = (1000 * concurrency) / rate;
      while (performance.now() < end) {
        for (let i = w; i < sessions && performance.now() < end; i += concurrency) {
          const due = t0 + (w / concurrency + op++) * periodMs;
          const wait = due - performance.now();
          if (wait > 0) await new Promise((res) => setTimeout(res, wait));
          if (performance.now() >= end) break;
          const session = names[i]!;
          if (erasing.has(session)) continue;
          const startedAt = performance.now();
          const hash = tm.hashSession('soak', session);
          const sc = convo[i]!;
          const text = sc.user[round % sc.user.length]!;
          const reply = sc.reply[round % sc.reply.length]!;
          const x = r();
          if (x < 0.2) {
            // A plain read (a bot that looks something up without answering).
            await tm.read({ session, text });
            counts.reads++;
            continue;
          }
          const done = new Promise<Ack>((res) => pending.set(hash, res));
          try {
            if (x < 0.25) {
              // A batch import of one exchange through write().
              await tm.write([{ session, text }, { session, text: reply, role: 'assistant' }]);
              counts.batches++;
            } else {
              const stream = await wrapped({ session, text, reply });
              for await (const _c of stream) {
                // consumed
              }
              counts.turns++;
            }
          } catch {
            // Refused (outbox full) or rejected: reported through the events above.
          }
          // Bounded: a write that produced none of the events above within 30 s counts as an error.
          const a = await Promise.race([done, new Promise<Ack>((res) => setTimeout(() => res('error'), 30_000).unref())]);
          pending.delete(hash);
          ack(session, a, 2, startedAt);
        }
        round++;
      }
    }),
  );
  clearInterval(ticker);
  clearInterval(sampler);
  bar.done();
  const elapsed = (performance.now() - t0) / 1000;
  await restart;
  await erasures;
  // Let the outbox drain against the restarted server.
  const flushed = await tm.flush({ timeoutMs: 30_000 });
  await tm.close();

  // Verify with a fresh client and no caches: each session must hold exactly the messages acknowledged.
  const check = new RedisSlotStore({ redis: redis.url, prefix, cacheSessions: 0 });
  let lost = droppedFromOutbox * 2;
  let duplicated = 0;
  let resurrected = 0;
  for (const s of names) {
    const snap = await check.load({ tenant: 'soak', session: s });
    const stored = snap?.turns ?? 0;
    const expected = acked.get(s) ?? 0;
    if (stored < expected) lost += expected - stored;
    // In an erased session, a surplus is a write accepted before the erase that landed after it.
    if (stored > expected) {
      if (erasedAt.has(s)) resurrected += stored - expected;
      else duplicated += stored - expected;
    }
  }
  await check.close();
  await redis.stop();
  rmSync(aofDir, { recursive: true, force: true });

  const f: SoakFigures = {
    seconds: round(elapsed, 1),
    sessions,
    concurrency,
    turns: counts.turns,
    reads: counts.reads,
    batch_writes: counts.batches,
    acknowledged_writes: counts.direct + counts.queued,
    committed_directly: counts.direct,
    queued_in_outbox: counts.queued,
    refused_outbox_full: counts.refused,
    errors,
    errors_by_stage: errorsByStage,
    degraded_reads: degraded,
    outbox_peak: outboxPeak,
    outbox_after_flush: flushed.outboxDepth,
    lost_writes: lost,
    duplicated_writes: duplicated,
    erased_sessions: erasedAt.size,
    erase_failed: eraseFailed,
    resurrected_writes: resurrected,
    restart_at_s: restartAt,
    down_ms: downMs,
    offered_ops_per_s: rate,
    outbox_max: outboxMax,
    turns_per_s: Math.round((counts.turns + counts.batches) / elapsed),
  };
  console.log(`soak: ${f.seconds} s of mixed load (${rate} ops/s offered: 75% streamed turns, 20% plain reads, 5% batch writes) on a throwaway redis-server`);
  console.log(`(AOF fsync always; SIGKILL at ${restartAt} s, restarted after ${downMs} ms${restarted ? '' : ' — the restart did not happen'}), ${sessions} sessions, ${concurrency} users in flight, outbox max ${outboxMax}`);
  console.log(asciiTable(['figure', 'value'], [
    ['streamed turns / plain reads / batch writes', `${f.turns} / ${f.reads} / ${f.batch_writes}`],
    ['writes acknowledged (committed + queued)', `${f.acknowledged_writes} (${f.committed_directly} + ${f.queued_in_outbox})`],
    ['refused (outbox full)', f.refused_outbox_full],
    ['errors (by stage)', `${f.errors} ${JSON.stringify(f.errors_by_stage)}`],
    ['degraded reads', f.degraded_reads],
    ['outbox peak / after flush', `${f.outbox_peak} / ${f.outbox_after_flush}`],
    ['lost writes (messages; must be 0)', f.lost_writes],
    ['duplicated writes (messages; must be 0)', f.duplicated_writes],
    [`resurrected after erase (messages, ${f.erased_sessions} sessions erased, ${f.erase_failed} failed; must be 0)`, f.resurrected_writes],
  ]));
  const svg = lineChart({
    title: `soak: Redis SIGKILL at ${restartAt} s, back after ${downMs} ms; lost writes ${f.lost_writes}`, xLabel: 'seconds', yLabel: 'count', markers: false,
    series: [
      { name: 'outbox depth', x: timeline.map((p) => p.t), y: timeline.map((p) => p.outbox) },
      { name: 'acked writes/s', x: timeline.map((p) => p.t), y: timeline.map((p) => p.acked_per_s) },
      { name: 'degraded reads/s', x: timeline.map((p) => p.t), y: timeline.map((p) => p.degraded_per_s) },
    ],
  });
  const out = { ...f, timeline: timeline.filter((_, i) => i % 2 === 0), load: loadAverage(), machine: machine() };
  const paths = writeResult('soak', out, svg, ['soak', ...argv]);
  console.log(`wrote ${paths.json} and ${paths.svg}`);
  if (json) console.log(JSON.stringify(out));
}
