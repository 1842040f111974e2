// Where benchmark runs leave their figures. A plain run writes `bench/results/runs/NAME-STAMP-ID.json`
// (and `.svg`) — a folder git ignores, one unique name per run (UTC date-time plus a random short id),
// so two runs never overwrite each other. `--save` also writes the same files to `bench/results/`, the
// committed reference results; nothing ever rewrites a file there. Each file records what it was
// measured on: git commit, package version, Node and Redis versions, machine and load average.

import { execFileSync } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { loadavg } from 'node:os';
import { dirname, join, relative } from 'node:path';
import { fileURLToPath } from 'node:url';
import { machine } from './stats.js';

/** bench/results, relative to this file (never an absolute machine path in what is written). */
export const RESULTS_DIR = join(dirname(fileURLToPath(import.meta.url)), '..', 'results');
/** Plain runs land here (git-ignored). */
export const RUNS_DIR = join(RESULTS_DIR, 'runs');
const REPO_ROOT = join(dirname(fileURLToPath(import.meta.url)), '..', '..');

/** `YYYY-MM-DD` in UTC. */
export const dateStamp = (d: Date = new Date()): string => d.toISOString().slice(0, 10);

/** `YYYY-MM-DDTHH-MM-SSZ` in UTC: sortable, and legal in file names everywhere. */
export const timeStamp = (d: Date = new Date()): string => `${d.toISOString().slice(0, 19).replace(/:/g, '-')}Z`;

/** What a figure was measured on; every results file carries one under `meta`. */
export interface RunMeta {
  git_commit: string;
  /** True when the work tree had uncommitted changes: the commit alone does not say what ran. */
  git_dirty: boolean;
  package_version: string;
  node: string;
  /** `redis_version` of each server the run used (one per master on a Cluster); empty without Redis. */
  redis: string[];
  machine: ReturnType<typeof machine>;
  /** 1, 5 and 15-minute load averages when the run ended: other work on the machine skews figures. */
  load: number[];
}

function git(args: string[]): string {
  try {
    return execFileSync('git', args, { cwd: REPO_ROOT, encoding: 'utf8', stdio: ['ignore', 'pipe', 'ignore'] }).trim();
  } catch {
    return '';
  }
}

export function runMeta(redis: readonly string[] = []): RunMeta {
  const pkg = JSON.parse(readFileSync(join(REPO_ROOT, 'package.json'), 'utf8')) as { version: string };
  return {
    git_commit: git(['rev-parse', '--short=12', 'HEAD']) || 'unknown',
    git_dirty: git(['status', '--porcelain', '--untracked-files=no']) !== '',
    package_version: pkg.version,
    node: process.version,
    redis: [...redis],
    machine: machine(),
    load: loadavg().map((x) => Math.round(x * 100) / 100),
  };
}

export interface WriteOptions {
  /** Redis versions to record (see redisVersions in ./redis-info.ts). */
  redis?: readonly string[];
  /** Also write to the committed folder; defaults to `--save` being among the arguments. */
  save?: boolean;
  date?: Date;
  /** The committed folder (its `runs/` holds plain runs); tests point it elsewhere. @default bench/results */
  dir?: string;
}

/**
 * Writes NAME-STAMP-ID.json (with `name`, `date`, `command` and `meta` added) and .svg to the runs
 * folder, and with `save` to bench/results/ as well; returns the paths relative to the repository
 * root, for printing (`json` is the committed copy when saved).
 */
export function writeResult(name: string, figures: Record<string, unknown>, svg: string, argv: readonly string[], opts: WriteOptions | Date = {}): { json: string; svg: string } {
  const o: WriteOptions = opts instanceof Date ? { date: opts } : opts;
  if (!/^[a-z0-9][a-z0-9.-]*$/.test(name)) throw new RangeError(`result name must be lowercase letters, digits, dots and dashes, got ${JSON.stringify(name)}`);
  const date = o.date ?? new Date();
  const save = o.save ?? argv.includes('--save');
  const file = `${name}-${timeStamp(date)}-${randomBytes(3).toString('hex')}`;
  const doc = { name, date: date.toISOString(), command: `npm run bench -- ${argv.join(' ')}`.trim(), meta: runMeta(o.redis), ...figures };
  const text = `${JSON.stringify(doc, null, 2)}\n`;
  let out = { json: '', svg: '' };
  const root = o.dir ?? RESULTS_DIR;
  for (const dir of save ? [join(root, 'runs'), root] : [join(root, 'runs')]) {
    mkdirSync(dir, { recursive: true });
    const base = join(dir, file);
    // 'wx': fail rather than replace, should a name ever repeat.
    writeFileSync(`${base}.json`, text, { flag: 'wx' });
    writeFileSync(`${base}.svg`, svg, { flag: 'wx' });
    out = { json: relative(REPO_ROOT, `${base}.json`), svg: relative(REPO_ROOT, `${base}.svg`) };
  }
  return out;
}

// ------------------------------------------------------------------ SVG plots

const W = 640;
const H = 360;
const M = { left: 70, right: 150, top: 40, bottom: 50 };
/** Colour-blind-safe qualitative palette (Okabe & Ito 2008, "Color Universal Design"). */
const COLOURS = ['#0072B2', '#D55E00', '#009E73', '#CC79A7', '#E69F00', '#56B4E9', '#000000'];

const esc = (s: string): string => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;');
const fmt = (v: number): string => (Math.abs(v) >= 1e6 ? `${+(v / 1e6).toPrecision(3)}M` : Math.abs(v) >= 1e4 ? `${+(v / 1e3).toPrecision(3)}k` : `${+v.toPrecision(3)}`);

function frame(title: string, body: string): string {
  return `<svg xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" font-family="sans-serif" font-size="12">
<rect width="${W}" height="${H}" fill="#fff"/>
<text x="${W / 2}" y="22" text-anchor="middle" font-size="14" font-weight="bold">${esc(title)}</text>
${body}</svg>
`;
}

/** "Nice" tick values over [lo, hi] (1-2-5 steps; common practice for axis labels). */
function ticks(lo: number, hi: number, n = 5): number[] {
  if (!(hi > lo)) return [lo];
  const raw = (hi - lo) / n;
  const mag = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((f) => f * mag).find((s) => s >= raw) ?? 10 * mag;
  const out: number[] = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(+v.toPrecision(12));
  return out;
}

function logTicks(lo: number, hi: number): number[] {
  const out: number[] = [];
  for (let e = Math.floor(Math.log10(lo)); e <= Math.ceil(Math.log10(hi)); e++) out.push(10 ** e);
  return out;
}

function legend(names: readonly string[]): string {
  return names
    .map((n, i) => {
      const y = M.top + 10 + i * 18;
      const x = W - M.right + 14;
      return `<rect x="${x}" y="${y - 9}" width="12" height="12" fill="${COLOURS[i % COLOURS.length]}"/><text x="${x + 18}" y="${y + 1}">${esc(n)}</text>`;
    })
    .join('\n');
}

export interface LineSeries {
  name: string;
  x: readonly number[];
  y: readonly number[];
}

/** A line plot, with markers unless `markers: false`; log scales on request (both axes positive then). */
export function lineChart(o: { title: string; xLabel: string; yLabel: string; series: readonly LineSeries[]; logX?: boolean; logY?: boolean; markers?: boolean }): string {
  const xs = o.series.flatMap((s) => s.x);
  const ys = o.series.flatMap((s) => s.y).filter(Number.isFinite);
  const tx = o.logX ? Math.log10 : (v: number) => v;
  const ty = o.logY ? Math.log10 : (v: number) => v;
  let [x0, x1] = [Math.min(...xs), Math.max(...xs)];
  let [y0, y1] = [o.logY ? Math.min(...ys) : 0, Math.max(...ys)];
  const xt = o.logX ? logTicks(x0, x1) : ticks(x0, x1);
  const yt = o.logY ? logTicks(y0, y1) : ticks(y0, y1 * 1.05);
  if (o.logX) [x0, x1] = [xt[0]!, xt[xt.length - 1]!];
  [y0, y1] = o.logY ? [yt[0]!, yt[yt.length - 1]!] : [0, Math.max(y1 * 1.05, yt[yt.length - 1]!)];
  const pw = W - M.left - M.right;
  const ph = H - M.top - M.bottom;
  const px = (v: number): number => M.left + ((tx(v) - tx(x0)) / (tx(x1) - tx(x0) || 1)) * pw;
  const py = (v: number): number => M.top + ph - ((ty(v) - ty(y0)) / (ty(y1) - ty(y0) || 1)) * ph;
  const parts: string[] = [];
  for (const v of yt) parts.push(`<line x1="${M.left}" x2="${M.left + pw}" y1="${py(v).toFixed(1)}" y2="${py(v).toFixed(1)}" stroke="#ddd"/><text x="${M.left - 6}" y="${(py(v) + 4).toFixed(1)}" text-anchor="end">${fmt(v)}</text>`);
  for (const v of xt) parts.push(`<line x1="${px(v).toFixed(1)}" x2="${px(v).toFixed(1)}" y1="${M.top + ph}" y2="${M.top + ph + 4}" stroke="#333"/><text x="${px(v).toFixed(1)}" y="${M.top + ph + 18}" text-anchor="middle">${fmt(v)}</text>`);
  parts.push(`<rect x="${M.left}" y="${M.top}" width="${pw}" height="${ph}" fill="none" stroke="#333"/>`);
  parts.push(`<text x="${M.left + pw / 2}" y="${H - 10}" text-anchor="middle">${esc(o.xLabel)}</text>`);
  parts.push(`<text transform="translate(16 ${M.top + ph / 2}) rotate(-90)" text-anchor="middle">${esc(o.yLabel)}</text>`);
  o.series.forEach((s, i) => {
    const c = COLOURS[i % COLOURS.length]!;
    const pts = s.x.map((x, n) => [px(x), py(s.y[n]!)] as const).filter(([, y]) => Number.isFinite(y));
    parts.push(`<polyline fill="none" stroke="${c}" stroke-width="2" points="${pts.map(([x, y]) => `${x.toFixed(1)},${y.toFixed(1)}`).join(' ')}"/>`);
    if (o.markers !== false) for (const [x, y] of pts) parts.push(`<circle cx="${x.toFixed(1)}" cy="${y.toFixed(1)}" r="3.5" fill="${c}"/>`);
  });
  parts.push(legend(o.series.map((s) => s.name)));
  return frame(o.title, parts.join('\n'));
}

export interface BarSeries {
  name: string;
  values: readonly number[];
}

/** Grouped bars: one group per label, one bar per series; a log scale on request. */
export function barChart(o: { title: string; yLabel: string; groups: readonly string[]; series: readonly BarSeries[]; logY?: boolean }): string {
  const ys = o.series.flatMap((s) => s.values).filter((v) => Number.isFinite(v) && (!o.logY || v > 0));
  const top = Math.max(...ys, 1e-9);
  const yt = o.logY ? logTicks(Math.min(...ys), top) : ticks(0, top * 1.05);
  const [y0, y1] = o.logY ? [yt[0]!, yt[yt.length - 1]!] : [0, Math.max(top * 1.05, yt[yt.length - 1]!)];
  const ty = o.logY ? Math.log10 : (v: number) => v;
  const pw = W - M.left - M.right;
  const ph = H - M.top - M.bottom;
  const py = (v: number): number => M.top + ph - ((ty(Math.max(v, y0)) - ty(y0)) / (ty(y1) - ty(y0) || 1)) * ph;
  const gw = pw / Math.max(1, o.groups.length);
  const bw = (gw * 0.8) / Math.max(1, o.series.length);
  const parts: string[] = [];
  for (const v of yt) parts.push(`<line x1="${M.left}" x2="${M.left + pw}" y1="${py(v).toFixed(1)}" y2="${py(v).toFixed(1)}" stroke="#ddd"/><text x="${M.left - 6}" y="${(py(v) + 4).toFixed(1)}" text-anchor="end">${fmt(v)}</text>`);
  o.groups.forEach((g, gi) => {
    parts.push(`<text x="${(M.left + gw * gi + gw / 2).toFixed(1)}" y="${M.top + ph + 18}" text-anchor="middle">${esc(g)}</text>`);
    o.series.forEach((s, si) => {
      const v = s.values[gi]!;
      if (!Number.isFinite(v)) return;
      const x = M.left + gw * gi + gw * 0.1 + bw * si;
      const y = py(v);
      parts.push(`<rect x="${x.toFixed(1)}" y="${y.toFixed(1)}" width="${(bw - 2).toFixed(1)}" height="${(M.top + ph - y).toFixed(1)}" fill="${COLOURS[si % COLOURS.length]}"><title>${esc(`${s.name} ${g}: ${fmt(v)}`)}</title></rect>`);
    });
  });
  parts.push(`<rect x="${M.left}" y="${M.top}" width="${pw}" height="${ph}" fill="none" stroke="#333"/>`);
  parts.push(`<text transform="translate(16 ${M.top + ph / 2}) rotate(-90)" text-anchor="middle">${esc(o.yLabel)}</text>`);
  parts.push(legend(o.series.map((s) => s.name)));
  return frame(o.title, parts.join('\n'));
}

/** A plain fixed-width table for the terminal. */
export function asciiTable(header: readonly string[], rows: ReadonlyArray<ReadonlyArray<string | number>>): string {
  const cells = [header, ...rows.map((r) => r.map(String))];
  const widths = header.map((_, i) => Math.max(...cells.map((r) => (r[i] ?? '').length)));
  const line = (r: readonly string[]): string => r.map((c, i) => (i === 0 ? c.padEnd(widths[i]!) : c.padStart(widths[i]!))).join('  ');
  return [line(cells[0]!), widths.map((w) => '-'.repeat(w)).join('  '), ...cells.slice(1).map(line)].join('\n');
}
