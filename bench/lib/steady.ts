// `npm run bench -- soak --steady [--seconds 180] [--rate 200] [--window 10] [--active-sessions 500] [--redis URL]`:
// a drift soak. No faults: a fixed rate on a redis-server of its own (or --redis URL), and per window
// the turn latency (p50/p99 from each turn's due time), this process's RSS and heap, and Redis
// used_memory. A least-squares line through each series gives its slope; a series "drifts" when the
// line rises by more than 10 % of its mean over the run (a rule of thumb: common practice, no source).
// Redis memory grows by design — the logbook keeps every turn — so it is reported per turn, not judged.

import type { Redis } from 'ioredis';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { loadAverage, openBackend } from '../load.js';
import { throwawayRedis, type ThrowawayRedis } from '../soak.js';
import { mergeResults, runFixedRate } from './fixed-rate.js';
import { deltaOf, describeDeltas, parseInfo, redisVersions, snapshot, totalPerTurn } from './redis-info.js';
import { asciiTable, lineChart, writeResult } from './results.js';
import type { parseArgs } from './stats.js';
import { round } from './stats.js';

/** Least-squares slope and intercept of y on x (textbook ordinary least squares). */
export function fitLine(x: readonly number[], y: readonly number[]): { slope: number; intercept: number } {
  const n = x.length;
  if (n < 2) return { slope: 0, intercept: y[0] ?? 0 };
  const mx = x.reduce((a, b) => a + b, 0) / n;
  const my = y.reduce((a, b) => a + b, 0) / n;
  let sxy = 0;
  let sxx = 0;
  for (let i = 0; i < n; i++) {
    sxy += (x[i]! - mx) * (y[i]! - my);
    sxx += (x[i]! - mx) ** 2;
  }
  const slope = sxx === 0 ? 0 : sxy / sxx;
  return { slope, intercept: my - slope * mx };
}

/** Rise of the fitted line over the run as a fraction of the series mean; drift past `limit`. */
export function driftOf(x: readonly number[], y: readonly number[], limit = 0.1): { slope_per_hour: number; rise_fraction: number; drifts: boolean } {
  const { slope } = fitLine(x, y);
  const mean = y.reduce((a, b) => a + b, 0) / Math.max(1, y.length);
  const span = x.length > 1 ? x[x.length - 1]! - x[0]! : 0;
  const rise = mean === 0 ? 0 : (slope * span) / mean;
  return { slope_per_hour: slope * 3600, rise_fraction: round(rise, 4), drifts: rise > limit };
}

export async function steadySoak(argv: string[], args: ReturnType<typeof parseArgs>, num: (name: string, def: number, min?: number) => number): Promise<void> {
  const seconds = num('seconds', 180);
  const windowSeconds = num('window', 10);
  const rate = num('rate', 200);
  const json = args.flags.has('json');
  let own: ThrowawayRedis | undefined;
  if (!args.values.has('redis')) own = await throwawayRedis();
  const url = own?.url ?? args.values.get('redis')!;
  const backend = await openBackend('redis', url);
  try {
    const { store, prefix } = await backend.open();
    const client = backend.client as Redis;
    const tm = createTidemark({ store, tenant: 'bench', capacity: num('capacity', 64), hashKey: 'soak-bench' });
    const samples: Array<{ t: number; rss_mb: number; heap_mb: number; redis_used_mb: number; turns: number }> = [];
    let turns = 0;
    tm.on('commit', () => turns++);
    let t0 = 0;
    const sample = async (): Promise<void> => {
      const mu = process.memoryUsage();
      const used = Number(parseInfo(String(await client.info('memory'))).get('used_memory') ?? 0);
      samples.push({ t: round((performance.now() - t0) / 1000, 1), rss_mb: round(mu.rss / 2 ** 20, 1), heap_mb: round(mu.heapUsed / 2 ** 20, 1), redis_used_mb: round(used / 2 ** 20, 2), turns });
    };
    const info0 = await snapshot(client);
    let timer: NodeJS.Timeout | undefined;
    const result = await runFixedRate(tm, {
      rate, seconds, windowSeconds, activeSessions: num('active-sessions', 500), userSessions: 0, maxInFlight: num('max-in-flight', 4096), index: 0, of: 1, tenant: 'bench', warmup: num('warmup', 500, 0),
      ready: async () => {
        const at = Date.now() + 100;
        setTimeout(() => {
          t0 = performance.now();
          void sample();
          timer = setInterval(() => void sample(), windowSeconds * 1000);
        }, 100);
        return at;
      },
    });
    clearInterval(timer);
    await sample();
    await tm.close();
    const m = mergeResults([result], windowSeconds);
    const info = deltaOf(info0, await snapshot(client), turns);
    await backend.cleanup(prefix);
    const versions = await redisVersions(client);
    const x = samples.map((s) => s.t);
    const wx = m.windows.map((w) => w.t_s);
    // The first window is the process settling (JIT, pools, caches filling): left out of the fits
    // when there are 4 or more (common practice for steady-state checks).
    const skip = <T,>(a: readonly T[]): T[] => (a.length >= 4 ? a.slice(1) : [...a]);
    const verdict = {
      p99_ms: driftOf(skip(wx), skip(m.windows.map((w) => w.p99_ms))),
      rss_mb: driftOf(skip(x), skip(samples.map((s) => s.rss_mb))),
      heap_mb: driftOf(skip(x), skip(samples.map((s) => s.heap_mb))),
    };
    const redisPerTurn = fitLine(samples.map((s) => s.turns), samples.map((s) => s.redis_used_mb * 2 ** 20)).slope;
    const steady = !verdict.p99_ms.drifts && !verdict.rss_mb.drifts && !verdict.heap_mb.drifts;
    console.log(`steady soak: ${rate} turns/s for ${seconds} s on ${own ? 'a redis-server of its own' : url}, windows of ${windowSeconds} s; no faults`);
    console.log(asciiTable(['window (s)', 'turns', 'p50 ms', 'p99 ms'], m.windows.map((w) => [w.t_s, w.count, w.p50_ms, w.p99_ms])));
    console.log(asciiTable(['t (s)', 'RSS MB', 'heap MB', 'Redis used MB', 'turns'], samples.map((s) => [s.t, s.rss_mb, s.heap_mb, s.redis_used_mb, s.turns])));
    for (const [k, v] of Object.entries(verdict)) console.log(`${k}: slope ${round(v.slope_per_hour, 2)} per hour, fitted rise ${round(v.rise_fraction * 100, 1)} % of the mean -> ${v.drifts ? 'DRIFTS' : 'steady'}`);
    console.log(`Redis used_memory grows ${Math.round(redisPerTurn)} B per turn (the logbook keeps every turn; expected)`);
    console.log(describeDeltas(info));
    console.log(`verdict: ${steady ? 'steady' : 'drifts'}; overall p99 ${m.latency.p99_ms} ms, achieved ${m.achieved_per_s} turns/s of ${rate}`);
    const out = { steady, verdict, rate, seconds, window_s: windowSeconds, own_redis: own !== undefined, latency: m.latency, achieved_per_s: m.achieved_per_s, errors: m.errors, windows: m.windows, samples, redis_bytes_per_turn: Math.round(redisPerTurn), redis_info: info, redis_per_turn: totalPerTurn(info), runs: m.windows.map((w) => ({ p99_ms: w.p99_ms, p50_ms: w.p50_ms })), load: loadAverage() };
    const svg = lineChart({
      title: `steady soak at ${rate} turns/s: ${steady ? 'steady' : 'drifts'}`, xLabel: 'seconds', yLabel: 'MB / ms', markers: false,
      series: [
        { name: 'p99 ms', x: wx, y: m.windows.map((w) => w.p99_ms) },
        { name: 'RSS MB', x, y: samples.map((s) => s.rss_mb) },
        { name: 'heap MB', x, y: samples.map((s) => s.heap_mb) },
        { name: 'Redis MB', x, y: samples.map((s) => s.redis_used_mb) },
      ],
    });
    const paths = writeResult('soak-steady', out, svg, ['soak', ...argv], { redis: versions });
    console.log(`wrote ${paths.json} and ${paths.svg}`);
    if (json) console.log(JSON.stringify(out));
  } finally {
    await backend.close();
    await own?.stop();
  }
}
