// The dashboard feed's cost: snapshot size and build time after 10,000 evictions of distinct lifetimes
// (made by the real middleware: small sessions, distinct facts), beside the size the survival curve had
// before it was downsampled; then the server's CPU with one and with five open tabs on the feed.
// `npm run bench -- feed [--evictions 10000] [--seconds 5] [--json]`. Figures are printed, never asserted.

import { createServer } from 'node:http';
import type { AddressInfo } from 'node:net';
import { createHttpAdapter } from '../adapters/http/index.js';
import { DashboardCollector } from '../src/metrics/collector.js';
import { FleetView } from '../src/metrics/fleet.js';
import { createTidemark } from '../src/middleware/tidemark.js';
import { parseArgs, percentile, round } from './lib/stats.js';

const WORDS = ['fern', 'olive', 'maple', 'clay', 'peat', 'cactus', 'orchid', 'basil', 'hazel', 'tulip', 'lavender', 'willow', 'moss', 'thyme', 'birch', 'aster'];

export default async function main(argv: string[]): Promise<void> {
  const { values, flags } = parseArgs(argv);
  const target = Number(values.get('evictions') ?? 10_000);
  const seconds = Number(values.get('seconds') ?? 5);

  // 1. Evictions through the real middleware: two slots per session, a new fact each turn.
  const tm = createTidemark({ capacity: 2 });
  const collector = new DashboardCollector();
  collector.attach(tm);
  let evictions = 0;
  tm.on('evict', () => evictions++);
  const t0 = performance.now();
  for (let i = 0; evictions < target; i++) {
    // A fact with a new key each time (two words out of 16 name the tray), so a full session evicts.
    const a = WORDS[i % WORDS.length]!;
    const b = WORDS[(i >> 4) % WORDS.length]!;
    await tm.write({ session: `plot-${i % 400}`, text: `My ${a} ${b} tray is number ${i * 13}.`, role: 'user' });
  }
  const fillS = (performance.now() - t0) / 1000;

  // 2. Snapshot size and build time (collector alone, and the full fleet view the feed sends).
  const fleet = new FleetView({ instance: 'bench', store: tm.store, collector });
  const times: number[] = [];
  const fleetTimes: number[] = [];
  let bytes = 0;
  let fleetBytes = 0;
  for (let i = 0; i < 60; i++) {
    const a = performance.now();
    const snap = collector.snapshot();
    const json = JSON.stringify(snap);
    times.push(performance.now() - a);
    bytes = Buffer.byteLength(json);
    const b = performance.now();
    const fj = JSON.stringify(await fleet.build());
    fleetTimes.push(performance.now() - b);
    fleetBytes = Buffer.byteLength(fj);
  }
  const ret = tm.retentionTracker.snapshot();
  const rawCurveBytes = Buffer.byteLength(JSON.stringify({ clock: ret.clock.steps, seconds: ret.seconds.steps }));

  // 3. CPU of the server with 1 and 5 feed clients (each reads raw bytes; no parsing on the client side).
  const adapter = createHttpAdapter({ tidemark: tm, handler: async () => 'ok', feedIntervalMs: 200, collector, health: false, instance: 'bench' });
  const server = createServer(adapter.listener);
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
  const url = `http://127.0.0.1:${(server.address() as AddressInfo).port}/dashboard/feed`;
  const cpuWith = async (tabs: number): Promise<{ cpuMs: number; frames: number }> => {
    const controllers = Array.from({ length: tabs }, () => new AbortController());
    let frames = 0;
    const c0 = process.cpuUsage();
    const readers = controllers.map(async (c) => {
      const res = await fetch(url, { signal: c.signal });
      const reader = res.body!.getReader();
      try {
        for (;;) {
          const r = await reader.read();
          if (r.done) break;
          frames++;
        }
      } catch {
        // aborted
      }
    });
    await new Promise((r) => setTimeout(r, seconds * 1000));
    const c1 = process.cpuUsage(c0);
    for (const c of controllers) c.abort();
    await Promise.allSettled(readers);
    return { cpuMs: (c1.user + c1.system) / 1000, frames };
  };
  const one = await cpuWith(1);
  const five = await cpuWith(5);
  adapter.close();
  await new Promise<void>((r) => server.close(() => r()));
  await tm.close();

  const out = {
    evictions,
    fillSeconds: round(fillS, 1),
    snapshotBytes: bytes,
    snapshotMsMedian: round(percentile(times, 50), 3),
    snapshotMsP95: round(percentile(times, 95), 3),
    feedSnapshotBytes: fleetBytes,
    feedSnapshotMsMedian: round(percentile(fleetTimes, 50), 3),
    survivalCurveBytesUndownsampled: rawCurveBytes,
    survivalSteps: { clock: ret.clock.steps.length, seconds: ret.seconds.steps.length },
    cpuMsOneTab: round(one.cpuMs, 1),
    cpuMsFiveTabs: round(five.cpuMs, 1),
    cpuRatioFiveToOne: round(five.cpuMs / one.cpuMs, 2),
    seconds,
  };
  console.log(`evictions ${out.evictions} (filled in ${out.fillSeconds} s through the middleware)`);
  console.log(`snapshot: ${out.snapshotBytes} B, build+serialise median ${out.snapshotMsMedian} ms (p95 ${out.snapshotMsP95} ms)`);
  console.log(`feed snapshot (fleet view, in-process store): ${out.feedSnapshotBytes} B, median ${out.feedSnapshotMsMedian} ms`);
  console.log(`survival curve before downsampling: ${out.survivalCurveBytesUndownsampled} B (${out.survivalSteps.clock} + ${out.survivalSteps.seconds} steps)`);
  console.log(`server CPU over ${seconds} s, feed every 200 ms: 1 tab ${out.cpuMsOneTab} ms, 5 tabs ${out.cpuMsFiveTabs} ms, ratio ${out.cpuRatioFiveToOne}`);
  if (flags.has('json')) console.log(JSON.stringify(out));
}
