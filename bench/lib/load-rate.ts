// `npm run bench -- load --rate R --seconds S [--store redis|cluster|memory] [--processes N] ...`:
// fixed-rate load (see fixed-rate.ts), in this process or in a fleet of N bot processes on one
// shared key space, so one session's turns arrive from several processes (version conflicts and
// stale caches happen as they would behind a load balancer). Redis runs add INFO deltas per master.

import { spawn } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { loadAverage, openBackend, type BackendOptions, type StoreKind } from '../load.js';
import { throwawayRedis, type ThrowawayRedis } from '../soak.js';
import { mergeResults, runFixedRate, type FixedRateOptions, type FixedRateResult } from './fixed-rate.js';
import type { ChildJob } from './fleet-child.js';
import { deltaOf, describeDeltas, snapshot, totalPerTurn, type InfoDelta } from './redis-info.js';
import { asciiTable, lineChart, writeResult } from './results.js';
import type { parseArgs } from './stats.js';

type Args = ReturnType<typeof parseArgs>;

/** Starts one fleet process; `ready` resolves when its warm-up is done, `result` when it has run. */
function startChild(job: ChildJob): { ready: Promise<void>; start(at: number): void; result: Promise<FixedRateResult> } {
  const file = fileURLToPath(new URL('./fleet-child.ts', import.meta.url));
  const child = spawn(process.execPath, ['--import', 'tsx', file, JSON.stringify(job)], { stdio: ['pipe', 'pipe', 'inherit'] });
  let out = '';
  let onReady: () => void = () => undefined;
  const ready = new Promise<void>((r) => (onReady = r));
  child.stdout.on('data', (d: Buffer) => {
    out += d.toString();
    if (out.startsWith('ready\n')) onReady();
  });
  const result = new Promise<FixedRateResult>((resolve, reject) => {
    child.once('error', reject);
    child.once('exit', (code) => {
      const last = out.trim().split('\n').pop() ?? '';
      if (code !== 0 || !last.startsWith('{')) reject(new Error(`fleet process ${job.run.index} exited with ${code}`));
      else resolve(JSON.parse(last) as FixedRateResult);
    });
  });
  return { ready, start: (at) => child.stdin.end(`${at}\n`), result };
}

export async function loadAtRate(argv: string[], args: Args, num: (name: string, def: number, min?: number) => number): Promise<void> {
  const kind = (args.values.get('store') ?? 'memory') as StoreKind;
  const json = args.flags.has('json');
  const processes = num('processes', 1);
  if (processes > 1 && kind === 'memory') throw new RangeError('--processes N needs --store redis or --store cluster (a shared key space)');
  const capacity = num('capacity', 64);
  const windowSeconds = num('window', 5);
  const run: FixedRateOptions = {
    rate: num('rate', 100),
    seconds: num('seconds', 60),
    activeSessions: num('active-sessions', 1000),
    userSessions: num('user-sessions', 0, 0),
    windowSeconds,
    maxInFlight: num('max-in-flight', 4096),
    index: 0,
    of: processes,
    tenant: 'bench',
    warmup: num('warmup', 500, 0),
  };
  const backendOpts: BackendOptions = {};
  if (args.values.has('cache-sessions')) backendOpts.cacheSessions = num('cache-sessions', 1000, 0);
  if (args.values.has('command-timeout')) backendOpts.commandTimeoutMs = num('command-timeout', 1000, 0);
  if (args.values.has('cluster-seeds')) backendOpts.clusterSeeds = args.values.get('cluster-seeds')!;
  let own: ThrowawayRedis | undefined;
  if (args.flags.has('own-redis')) {
    if (kind !== 'redis') throw new RangeError('--own-redis goes with --store redis');
    own = await throwawayRedis();
  }
  const redisUrl = own?.url ?? args.values.get('redis') ?? process.env.REDIS_URL ?? 'redis://127.0.0.1:6379';
  const backend = await openBackend(kind, redisUrl, false, backendOpts);
  let deltas: InfoDelta[] = [];
  let versions: string[] = [];
  try {
    const { store, prefix } = await backend.open();
    const before = backend.client ? await snapshot(backend.client) : [];
    versions = before.map((b) => b.version);
    let parts: FixedRateResult[];
    if (processes === 1) {
      const tm = createTidemark({ store, tenant: run.tenant, capacity, hashKey: 'load-bench' });
      parts = [await runFixedRate(tm, run)];
      await tm.close();
    } else {
      const { ready: _r, ...plain } = run;
      const kids = Array.from({ length: processes }, (_, index) =>
        startChild({ kind, redisUrl, capacity, backend: { ...backendOpts, prefix: prefix! }, run: { ...plain, index } }),
      );
      // Every process warms up, then all start the schedule at the same wall-clock moment.
      await Promise.race([Promise.all(kids.map((k) => k.ready)), Promise.all(kids.map((k) => k.result))]);
      const at = Date.now() + 200;
      for (const k of kids) k.start(at);
      parts = await Promise.all(kids.map((k) => k.result));
    }
    const m = mergeResults(parts, windowSeconds);
    // Per turn over every turn the run sent, warm-up included (the snapshots bracket both).
    if (backend.client) deltas = deltaOf(before, await snapshot(backend.client), m.completed + (run.warmup ?? 0) * processes);
    await backend.cleanup(prefix);

    console.log(`fixed-rate load on ${kind}${own ? ' (own redis-server)' : ''}: ${run.rate} turns/s offered for ${run.seconds} s by ${processes} process(es), ${run.activeSessions} active sessions${run.userSessions ? `, ${run.userSessions} sessions per user` : ''}, cache ${backendOpts.cacheSessions ?? 'default'}`);
    console.log(asciiTable(['window (s)', 'turns due', 'committed/s', 'p50 ms', 'p99 ms', 'p99.9 ms', 'max ms'], m.windows.map((w) => [w.t_s, w.count, w.achieved_per_s, w.p50_ms, w.p99_ms, w.p999_ms, w.max_ms])));
    console.log(`overall: p50 ${m.latency.p50_ms} ms, p99 ${m.latency.p99_ms} ms, p99.9 ${m.latency.p999_ms} ms, max ${m.latency.max_ms} ms (from each turn's scheduled start to its commit)`);
    console.log(`achieved ${m.achieved_per_s} turns/s of ${m.offered_per_s} offered; ${m.completed}/${m.scheduled} committed, ${m.errors} errors${m.errors ? ` ${JSON.stringify(m.error_codes)}` : ''}, ${m.conflict_retries} conflict retries; driver lag max ${m.max_start_lag_ms} ms`);
    if (deltas.length > 0) console.log(describeDeltas(deltas));
    const out = {
      store: kind, own_redis: own !== undefined, processes, capacity, ...run, index: undefined, of: undefined,
      cache_sessions: backendOpts.cacheSessions ?? null,
      ...m,
      // Windows are repeats of one measurement in time: `bench compare` takes its noise band from them.
      runs: m.windows.map((w) => ({ achieved_per_s: w.achieved_per_s, p50_ms: w.p50_ms, p99_ms: w.p99_ms, p999_ms: w.p999_ms })),
      per_process: parts.map((p) => ({ completed: p.completed, achieved_per_s: p.achieved_per_s, conflict_retries: p.conflict_retries, errors: p.errors })),
      redis_info: deltas,
      redis_per_turn: deltas.length ? totalPerTurn(deltas) : null,
      load: loadAverage(),
    };
    const svg = lineChart({
      title: `${run.rate} turns/s offered on ${kind}, ${processes} process(es): latency per ${windowSeconds} s window`, xLabel: 'seconds', yLabel: 'ms', logY: true,
      series: (['p50_ms', 'p99_ms', 'p999_ms'] as const).map((p) => ({ name: p.replace('_ms', '').replace('p999', 'p99.9'), x: m.windows.map((w) => w.t_s), y: m.windows.map((w) => Math.max(0.001, w[p])) })),
    });
    const paths = writeResult(`load-rate-${kind}`, out, svg, ['load', ...argv], { redis: versions });
    console.log(`wrote ${paths.json} and ${paths.svg}`);
    if (json) console.log(JSON.stringify({ ...out, meta_file: paths.json }));
  } finally {
    await backend.close();
    await own?.stop();
  }
}
