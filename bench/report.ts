// `npm run bench -- report [FILE.json ...] [--out report.html]`: one self-contained HTML page (inline
// SVG charts, no scripts, no network) with every curve the results files hold — throughput and p99
// against offered rate, latency per window, Redis bytes by tier and logbook / raw text against
// conversation length, time per turn against history, soak windows — and the machine, date and
// commit of each file in the header. Without files it reads every result in bench/results/ and runs/.

import { existsSync, mkdirSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join, relative } from 'node:path';
import { lineChart, RESULTS_DIR, RUNS_DIR, runMeta, timeStamp, type LineSeries } from './lib/results.js';
import { parseArgs } from './lib/stats.js';

export type ResultDoc = Record<string, unknown> & { name: string; date: string };

const esc = (s: string): string => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
const newest = (docs: readonly ResultDoc[], prefix: string): ResultDoc | undefined =>
  docs.filter((d) => d.name.startsWith(prefix)).sort((a, b) => (a.date < b.date ? 1 : -1))[0];

interface Chart {
  id: string;
  caption: string;
  svg: string;
}

type Num = number;
type RateDoc = ResultDoc & { store: string; offered_per_s: Num; achieved_per_s: Num; latency: { p50_ms: Num; p99_ms: Num; p999_ms: Num }; windows: Array<{ t_s: Num; p50_ms: Num; p99_ms: Num; p999_ms: Num }>; redis_per_turn?: { commands: Num } | null; processes?: Num };
type MemoryDoc = ResultDoc & { store: string; points: Array<{ exchanges: Num; logbook_ratio: Num; bytes: Record<string, Num> }> };
type SteadyDoc = ResultDoc & { rate: Num; windows: Array<{ t_s: Num; p99_ms: Num }>; samples: Array<{ t: Num; rss_mb: Num; heap_mb: Num; redis_used_mb: Num }> };
type GrowthDoc = ResultDoc & { lengths: Num[]; tidemark_us: Num[]; baseline_us: Num[] };

/** Every chart the documents support; a kind of result that is absent gives no chart (and a note). */
export function charts(docs: readonly ResultDoc[]): { charts: Chart[]; missing: string[] } {
  const out: Chart[] = [];
  const missing: string[] = [];
  const rate = docs.filter((d) => d.name.startsWith('load-rate-')) as RateDoc[];
  if (rate.length > 0) {
    const byStore = new Map<string, RateDoc[]>();
    for (const d of rate) byStore.set(`${d.store}${(d.processes ?? 1) > 1 ? ` ×${d.processes}` : ''}`, [...(byStore.get(`${d.store}${(d.processes ?? 1) > 1 ? ` ×${d.processes}` : ''}`) ?? []), d]);
    const series = (f: (d: RateDoc) => number): LineSeries[] =>
      [...byStore].map(([k, ds]) => {
        const s = [...ds].sort((a, b) => a.offered_per_s - b.offered_per_s);
        return { name: k, x: s.map((d) => d.offered_per_s), y: s.map(f) };
      });
    out.push({ id: 'throughput-vs-rate', caption: 'Achieved against offered turns/s (fixed-rate load)', svg: lineChart({ title: 'achieved turns/s against offered', xLabel: 'offered turns/s', yLabel: 'achieved turns/s', series: series((d) => d.achieved_per_s) }) });
    out.push({ id: 'p99-vs-rate', caption: 'Turn p99 against offered rate, from each turn\u2019s scheduled start', svg: lineChart({ title: 'p99 against offered rate', xLabel: 'offered turns/s', yLabel: 'p99 ms', series: series((d) => d.latency.p99_ms) }) });
    const withRedis = rate.filter((d) => d.redis_per_turn);
    if (withRedis.length > 0) {
      out.push({ id: 'redis-commands-vs-rate', caption: 'Redis commands per turn (INFO deltas, all masters)', svg: lineChart({ title: 'Redis commands per turn', xLabel: 'offered turns/s', yLabel: 'commands per turn', series: series((d) => d.redis_per_turn?.commands ?? NaN).filter((s) => s.y.some(Number.isFinite)) }) });
    }
    const last = newest(rate, 'load-rate-') as RateDoc;
    out.push({
      id: 'windows', caption: `Latency per window, newest fixed-rate run (${last.offered_per_s} turns/s, ${esc(last.date)})`,
      svg: lineChart({ title: `latency per window at ${last.offered_per_s} turns/s`, xLabel: 'seconds', yLabel: 'ms', logY: true, series: (['p50_ms', 'p99_ms', 'p999_ms'] as const).map((p) => ({ name: p.replace('_ms', ''), x: last.windows.map((w) => w.t_s), y: last.windows.map((w) => Math.max(0.001, w[p])) })) }),
    });
  } else missing.push('fixed-rate load (npm run bench -- load --store redis --rate R --seconds S)');
  const mem = newest(docs, 'memory-') as MemoryDoc | undefined;
  if (mem) {
    const xs = mem.points.map((p) => p.exchanges);
    out.push({ id: 'bytes-by-tier', caption: `Redis bytes per session by tier against length (${esc(mem.store)}, ${esc(mem.date)})`, svg: lineChart({ title: 'bytes per session by tier', xLabel: 'exchanges per session', yLabel: 'bytes', logX: true, logY: true, series: ['slots', 'events', 'logbook_entries', 'logbook_index', 'total'].map((k) => ({ name: k.replace('_', ' '), x: xs, y: mem.points.map((p) => Math.max(1, p.bytes[k] ?? 0)) })) }) });
    out.push({ id: 'logbook-ratio', caption: 'Logbook bytes (entries + index) over the raw UTF-8 text kept; target ≤ 1.5', svg: lineChart({ title: 'logbook bytes / raw text', xLabel: 'exchanges per session', yLabel: 'ratio', logX: true, series: [{ name: 'measured', x: xs, y: mem.points.map((p) => p.logbook_ratio) }, { name: 'target', x: xs, y: xs.map(() => 1.5) }] }) });
  } else missing.push('memory by length (npm run bench -- memory)');
  const growth = newest(docs, 'growth') as GrowthDoc | undefined;
  if (growth?.lengths) {
    out.push({ id: 'cost-vs-length', caption: `Time per turn against history length (${esc(growth.date)})`, svg: lineChart({ title: 'µs per turn against history', xLabel: 'exchanges of history', yLabel: 'µs per turn', logX: true, logY: true, series: [{ name: 'tidemark', x: growth.lengths, y: growth.tidemark_us }, { name: 'scan every turn', x: growth.lengths, y: growth.baseline_us }] }) });
  } else missing.push('growth (npm run bench -- growth)');
  const soak = newest(docs, 'soak-steady') as SteadyDoc | undefined;
  if (soak) {
    const x = soak.samples.map((s) => s.t);
    out.push({ id: 'soak-latency', caption: `Steady soak at ${soak.rate} turns/s: p99 per window (${esc(soak.date)})`, svg: lineChart({ title: 'soak: p99 per window', xLabel: 'seconds', yLabel: 'ms', series: [{ name: 'p99', x: soak.windows.map((w) => w.t_s), y: soak.windows.map((w) => w.p99_ms) }] }) });
    out.push({ id: 'soak-memory', caption: 'Steady soak: process RSS and heap, Redis used_memory', svg: lineChart({ title: 'soak: memory', xLabel: 'seconds', yLabel: 'MB', series: [{ name: 'RSS', x, y: soak.samples.map((s) => s.rss_mb) }, { name: 'heap', x, y: soak.samples.map((s) => s.heap_mb) }, { name: 'Redis', x, y: soak.samples.map((s) => s.redis_used_mb) }] }) });
  } else missing.push('steady soak (npm run bench -- soak --steady)');
  return { charts: out, missing };
}

export function renderReport(docs: readonly ResultDoc[], now = new Date()): string {
  const { charts: list, missing } = charts(docs);
  const here = runMeta();
  const rows = [...docs]
    .sort((a, b) => (a.date < b.date ? -1 : 1))
    .map((d) => {
      const m = (d.meta ?? {}) as { git_commit?: string; git_dirty?: boolean; node?: string; redis?: string[]; machine?: { cpus?: number; cpu?: string }; load?: number[] };
      const mach = m.machine ?? (d.machine as { cpus?: number; cpu?: string } | undefined) ?? {};
      return `<tr><td>${esc(d.name)}</td><td>${esc(d.date)}</td><td>${esc(m.git_commit ?? '—')}${m.git_dirty ? '+dirty' : ''}</td><td>${esc(m.node ?? '—')}</td><td>${esc(m.redis?.join(', ') || '—')}</td><td>${esc(`${mach.cpus ?? '?'} × ${mach.cpu ?? '?'}`)}</td><td>${esc(JSON.stringify(m.load ?? d.load ?? '—'))}</td><td><code>${esc(String(d.command ?? ''))}</code></td></tr>`;
    })
    .join('\n');
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>tidemark benchmarks ${esc(now.toISOString().slice(0, 10))}</title>
<style>
body{font-family:system-ui,sans-serif;margin:1.5rem auto;max-width:1400px;color:#222}
header{border-bottom:2px solid #0072B2;margin-bottom:1rem}
.grid{display:flex;flex-wrap:wrap;gap:1rem}
figure{margin:0;border:1px solid #ddd;padding:.5rem}
figcaption{font-size:.9rem;max-width:640px}
table{border-collapse:collapse;font-size:.8rem}td,th{border:1px solid #ddd;padding:2px 6px;text-align:left}
</style></head>
<body>
<header><h1>tidemark benchmarks</h1>
<p>Report made ${esc(now.toISOString())} at commit <b>${esc(here.git_commit)}${here.git_dirty ? '+dirty' : ''}</b>, package ${esc(here.package_version)}, Node ${esc(here.node)}, on ${here.machine.cpus} × ${esc(here.machine.cpu)} (${esc(here.machine.platform)}), load ${esc(here.load.join(' / '))}. Each chart's figures come from the results files listed at the end, with their own machine, date and commit.</p></header>
<div class="grid">
${list.map((c) => `<figure class="chart" id="${c.id}">${c.svg}<figcaption>${c.caption}</figcaption></figure>`).join('\n')}
</div>
${missing.length ? `<p>No results yet for: ${missing.map(esc).join('; ')}.</p>` : ''}
<h2>Results files</h2>
<table><tr><th>benchmark</th><th>date</th><th>commit</th><th>node</th><th>redis</th><th>machine</th><th>load</th><th>command</th></tr>
${rows}
</table>
</body></html>
`;
}

export function readResults(files?: readonly string[]): ResultDoc[] {
  const list = files && files.length > 0 ? [...files] : [RESULTS_DIR, RUNS_DIR].filter(existsSync).flatMap((d) => readdirSync(d).filter((f) => f.endsWith('.json')).map((f) => join(d, f)));
  const docs: ResultDoc[] = [];
  for (const f of list) {
    const d = JSON.parse(readFileSync(f, 'utf8')) as ResultDoc;
    if (typeof d.name === 'string' && typeof d.date === 'string') docs.push(d);
  }
  return docs;
}

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  const docs = readResults(args.rest);
  const html = renderReport(docs);
  const out = args.values.get('out') ?? join(RUNS_DIR, `report-${timeStamp()}.html`);
  mkdirSync(join(out, '..'), { recursive: true });
  writeFileSync(out, html);
  console.log(`wrote ${relative(process.cwd(), out)} (${docs.length} results files, ${charts(docs).charts.length} charts)`);
}
