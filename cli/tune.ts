// `tidemark tune`: replays one transcript + probes under a grid of settings (capacity, gate and
// overwrite thresholds, the read's speaker, neighbour, slot and recency weights, BM25's b), prints the
// frontier of recall against slots and against read cost, writes a self-contained SVG/HTML plot,
// and says which setting to pick: the cheapest one within 0.01 of the best recall.

import { writeFile } from 'node:fs/promises';
import { ConfigError, describeValue, isTidemarkError } from '../src/errors.js';
import { resolveMemoryParams } from '../src/memory/params.js';
import type { TidemarkOptions } from '../src/middleware/tidemark.js';
import { readText, type Probe, type TranscriptTurn } from './jsonl.js';
import { progressBar } from './progress.js';
import { runReplay } from './replay.js';
import { defaultIo, loadConfig, loadReplayFiles, parseK, type CliIo } from './replay-cli.js';

/** Parameter path (`capacity`, `read.gamma`, `write.halfLife`, ...) -> values to try. */
export type TuneAxes = Record<string, number[]>;

export interface TuneGrid {
  /** `axes`: the base point plus one axis changed at a time; `full`: every combination. @default 'axes' */
  mode?: 'axes' | 'full';
  axes: TuneAxes;
}

/**
 * 15 replays (the base point once): the levers of the merged read (speakers, neighbours, the slot
 * tier's priors, BM25's length normalisation) and of working memory (capacity, gate, overwrite).
 */
export const DEFAULT_GRID: TuneGrid = {
  mode: 'axes',
  axes: {
    capacity: [16, 128],
    'write.gateThreshold': [0.5, 0.7],
    'write.overwriteThreshold': [0.7, 0.9],
    'read.speakerBoost': [0.5, 2],
    'read.neighbourWeight': [0, 0.5],
    'read.slotPrior': [0, 2],
    'read.recencyBoost': [0, 2],
    'read.b': [0.4],
  },
};

const PATHS = new Set([
  'capacity', 'read.beta', 'read.gamma', 'read.delta', 'read.temperature', 'read.k', 'read.minWeight', 'read.hitCosine', 'read.minCosine', 'read.minLexical',
  'read.hitCoverage', 'read.hitMargin', 'read.slotPrior', 'read.provenanceWeight', 'read.recencyBoost', 'read.recencyHalfLife', 'read.denseWeight', 'read.rrfK',
  'read.k1', 'read.b', 'read.neighbourWeight', 'read.speakerBoost', 'read.nameWeight', 'read.dateWeight', 'read.temporalBoost', 'read.replyWeight', 'read.questionWeight',
  'read.logbookLimit', 'write.gateThreshold', 'write.overwriteThreshold', 'write.halfLife', 'write.keyBlend', 'write.reinforceGain', 'write.halfLifeGrowth', 'write.strengthFloor',
]);

/** Checks a grid read from a file; names the bad path or value. */
export function checkGrid(v: unknown): TuneGrid {
  if (typeof v !== 'object' || v === null || Array.isArray(v)) throw new ConfigError(`grid must be a JSON object { "mode"?, "axes": { path: [values] } }, got ${describeValue(v)}`, { details: { option: 'grid' } });
  const g = v as { mode?: unknown; axes?: unknown };
  if (g.mode !== undefined && g.mode !== 'axes' && g.mode !== 'full') throw new ConfigError(`grid.mode must be "axes" or "full", got ${describeValue(g.mode)}`, { details: { option: 'grid.mode' } });
  if (typeof g.axes !== 'object' || g.axes === null || Array.isArray(g.axes)) throw new ConfigError(`grid.axes must be an object of parameter path -> array of numbers, got ${describeValue(g.axes)}`, { details: { option: 'grid.axes' } });
  const axes: TuneAxes = {};
  for (const [path, values] of Object.entries(g.axes as Record<string, unknown>)) {
    if (!PATHS.has(path)) throw new ConfigError(`grid.axes has unknown parameter ${describeValue(path)}; expected one of ${[...PATHS].join(', ')}`, { details: { option: 'grid.axes', value: path } });
    if (!Array.isArray(values) || values.length === 0 || !values.every((x) => typeof x === 'number' && Number.isFinite(x))) {
      throw new ConfigError(`grid.axes.${path} must be a non-empty array of numbers, got ${describeValue(values)}`, { details: { option: `grid.axes.${path}` } });
    }
    axes[path] = values as number[];
  }
  return { mode: (g.mode as 'axes' | 'full' | undefined) ?? 'axes', axes };
}

/** Sets a dotted parameter path on a copy of createTidemark options. */
export function withParam(base: TidemarkOptions, path: string, value: number): TidemarkOptions {
  if (path === 'capacity') return { ...base, capacity: value };
  const [group, name] = path.split('.') as ['read' | 'write', string];
  return { ...base, [group]: { ...(base[group] ?? {}), [name]: value } } as TidemarkOptions;
}

/** The settings a grid asks for: each a map path -> value (empty = the base config). */
export function gridPoints(grid: TuneGrid): Array<Record<string, number>> {
  const entries = Object.entries(grid.axes);
  if (grid.mode === 'full') {
    let pts: Array<Record<string, number>> = [{}];
    for (const [path, values] of entries) pts = pts.flatMap((p) => values.map((v) => ({ ...p, [path]: v })));
    return pts;
  }
  const pts: Array<Record<string, number>> = [{}];
  for (const [path, values] of entries) for (const v of values) pts.push({ [path]: v });
  return pts;
}

export interface TunePoint {
  settings: Record<string, number>;
  capacity: number;
  recall_at_k: number;
  by_kind: Record<string, { probes: number; recall_at_1: number; recall_at_k: number }>;
  /** Mean slots in use per session at the end. */
  slots_per_session: number;
  read_us_p50: number;
  turns_per_s: number;
}

export interface TuneResult {
  k: number;
  points: TunePoint[];
  /** Indices into points, by increasing x. */
  frontier: { slots: number[]; cost: number[] };
  /** Index of the recommended point. */
  pick: number;
  advice: string;
}

/**
 * Pareto frontier for "more recall, less x": points not dominated by another point with x <= and
 * recall >=, one of them strict. Returned by increasing x.
 */
export function paretoFrontier(xs: readonly number[], ys: readonly number[]): number[] {
  const idx = xs.map((_, i) => i).sort((a, b) => xs[a]! - xs[b]! || ys[b]! - ys[a]!);
  const out: number[] = [];
  let best = -Infinity;
  for (const i of idx) {
    if (ys[i]! > best) {
      out.push(i);
      best = ys[i]!;
    }
  }
  return out;
}

/**
 * The cheapest point within `tolerance` of the best recall: fewest slots in use per session (what
 * memory costs to hold and to scan), then lowest read cost.
 */
export function pickPoint(points: readonly TunePoint[], tolerance = 0.01): number {
  const best = Math.max(...points.map((p) => p.recall_at_k));
  let pick = -1;
  points.forEach((p, i) => {
    if (p.recall_at_k < best - tolerance) return;
    const q = points[pick];
    if (!q || p.slots_per_session < q.slots_per_session || (p.slots_per_session === q.slots_per_session && p.read_us_p50 < q.read_us_p50)) pick = i;
  });
  return pick;
}

const label = (s: Record<string, number>): string => (Object.keys(s).length === 0 ? 'base' : Object.entries(s).map(([k, v]) => `${k}=${v}`).join(' '));

export interface TuneOptions {
  turns: readonly TranscriptTurn[];
  probes: readonly Probe[];
  k?: number;
  config?: TidemarkOptions;
  grid?: TuneGrid;
  onProgress?: (done: number, total: number) => void;
}

/** Runs every grid point and computes the frontiers and the pick. */
export async function runTune(o: TuneOptions): Promise<TuneResult> {
  if (o.probes.length === 0) throw new ConfigError('tune needs probes (--probes FILE): recall cannot be measured without them', { details: { option: 'probes' } });
  const grid = o.grid ?? DEFAULT_GRID;
  const base = o.config ?? {};
  const k = o.k ?? 5;
  const settings = gridPoints(grid);
  const points: TunePoint[] = [];
  // An axis value equal to the base setting would replay the base again: run each setting once.
  const seen = new Set<string>();
  for (const [n, s] of settings.entries()) {
    let config = base;
    for (const [path, v] of Object.entries(s)) config = withParam(config, path, v);
    const id = JSON.stringify(resolveMemoryParams(config));
    if (seen.has(id)) continue;
    seen.add(id);
    const r = await runReplay({ turns: o.turns, probes: o.probes, k, config });
    points.push({
      settings: s,
      capacity: r.summary.capacity,
      recall_at_k: r.summary.recall_at_k,
      by_kind: r.summary.by_kind,
      slots_per_session: Math.round((r.summary.slots_in_use / Math.max(1, r.summary.sessions)) * 10) / 10,
      read_us_p50: r.summary.read_us.p50,
      turns_per_s: r.summary.turns_per_s,
    });
    o.onProgress?.(n + 1, settings.length);
  }
  const ys = points.map((p) => p.recall_at_k);
  const frontier = { slots: paretoFrontier(points.map((p) => p.slots_per_session), ys), cost: paretoFrontier(points.map((p) => p.read_us_p50), ys) };
  const pick = pickPoint(points);
  const p = points[pick]!;
  const advice = `pick ${label(p.settings)} (capacity ${p.capacity}, ${p.slots_per_session} slots in use per session): recall@${k} ${p.recall_at_k.toFixed(3)}, read p50 ${p.read_us_p50.toFixed(0)} µs — the fewest slots within 0.01 of the best recall (${Math.max(...ys).toFixed(3)}).`;
  return { k, points, frontier, pick, advice };
}

// ------------------------------------------------------------------ plot

const esc = (s: string): string => s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;');

function panel(points: readonly TunePoint[], xOf: (p: TunePoint) => number, frontier: readonly number[], pick: number, title: string, xLabel: string, ox: number, log: boolean): string {
  const W = 420, H = 300, L = 50, B = 40, T = 30, R = 15;
  const xs = points.map(xOf).map((x) => (log ? Math.log2(Math.max(x, 1e-6)) : x));
  const ys = points.map((p) => p.recall_at_k);
  let x0 = Math.min(...xs), x1 = Math.max(...xs);
  if (x1 === x0) (x0 -= 1), (x1 += 1);
  let y0 = Math.min(...ys), y1 = Math.max(...ys);
  if (y1 - y0 < 0.05) (y0 -= 0.025), (y1 += 0.025);
  const px = (x: number): number => ox + L + ((x - x0) / (x1 - x0)) * (W - L - R);
  const py = (y: number): number => T + (1 - (y - y0) / (y1 - y0)) * (H - T - B);
  const parts: string[] = [];
  parts.push(`<text x="${ox + W / 2}" y="18" text-anchor="middle" font-size="13" font-weight="bold">${esc(title)}</text>`);
  parts.push(`<line x1="${ox + L}" y1="${H - B}" x2="${ox + W - R}" y2="${H - B}" stroke="#888"/><line x1="${ox + L}" y1="${T}" x2="${ox + L}" y2="${H - B}" stroke="#888"/>`);
  for (let i = 0; i <= 4; i++) {
    const y = y0 + ((y1 - y0) * i) / 4;
    parts.push(`<text x="${ox + L - 6}" y="${py(y) + 4}" text-anchor="end" font-size="10">${y.toFixed(2)}</text>`);
    const x = x0 + ((x1 - x0) * i) / 4;
    const shown = log ? Math.pow(2, x) : x;
    parts.push(`<text x="${px(x)}" y="${H - B + 14}" text-anchor="middle" font-size="10">${shown >= 100 ? shown.toFixed(0) : shown.toFixed(1)}</text>`);
  }
  parts.push(`<text x="${ox + W / 2}" y="${H - 6}" text-anchor="middle" font-size="11">${esc(xLabel)}</text>`);
  parts.push(`<text x="${ox + 12}" y="${T + (H - T - B) / 2}" font-size="11" transform="rotate(-90 ${ox + 12} ${T + (H - T - B) / 2})" text-anchor="middle">recall@k</text>`);
  if (frontier.length > 1) parts.push(`<polyline fill="none" stroke="#d9480f" stroke-width="2" points="${frontier.map((i) => `${px(xs[i]!).toFixed(1)},${py(ys[i]!).toFixed(1)}`).join(' ')}"/>`);
  points.forEach((p, i) => {
    const on = frontier.includes(i);
    parts.push(`<circle cx="${px(xs[i]!).toFixed(1)}" cy="${py(ys[i]!).toFixed(1)}" r="${i === pick ? 6 : 4}" fill="${on ? '#d9480f' : '#4c6ef5'}" stroke="${i === pick ? '#000' : 'none'}" fill-opacity="0.8"><title>${esc(label(p.settings))}: recall ${p.recall_at_k.toFixed(3)}</title></circle>`);
  });
  return parts.join('');
}

/** A self-contained SVG: recall vs slots in use (log2 axis) and recall vs read p50 µs, frontiers in orange. */
export function tuneSvg(r: TuneResult): string {
  const body = panel(r.points, (p) => p.slots_per_session, r.frontier.slots, r.pick, 'recall vs slots', 'slots in use per session (log scale)', 0, true) +
    panel(r.points, (p) => p.read_us_p50, r.frontier.cost, r.pick, 'recall vs read cost', 'read p50 (µs)', 430, false);
  return `<svg xmlns="http://www.w3.org/2000/svg" width="860" height="330" viewBox="0 0 860 330" font-family="sans-serif"><rect width="860" height="330" fill="#fff"/>${body}<text x="10" y="322" font-size="11">${esc(r.advice)}</text></svg>\n`;
}

export function tuneHtml(r: TuneResult): string {
  const rows = r.points.map((p, i) => `<tr${i === r.pick ? ' style="font-weight:bold"' : ''}><td>${esc(label(p.settings))}</td><td>${p.capacity}</td><td>${p.recall_at_k.toFixed(3)}</td><td>${p.slots_per_session}</td><td>${p.read_us_p50.toFixed(0)}</td></tr>`).join('');
  return `<!doctype html><html><head><meta charset="utf-8"><title>tidemark tune</title></head><body style="font-family:sans-serif">${tuneSvg(r)}<p>${esc(r.advice)}</p><table border="1" cellpadding="4" style="border-collapse:collapse"><tr><th>settings</th><th>capacity</th><th>recall@${r.k}</th><th>slots/session</th><th>read p50 µs</th></tr>${rows}</table></body></html>\n`;
}

export function formatTuneTable(r: TuneResult): string {
  const kinds = [...new Set(r.points.flatMap((p) => Object.keys(p.by_kind)))].sort();
  const head = ['settings', 'capacity', `recall@${r.k}`, ...kinds.flatMap((k) => [`${k}@1`, `${k}@${r.k}`]), 'slots/session', 'read p50 µs', 'turns/s', 'frontier'];
  const rows = [head, ...r.points.map((p, i) => [
    label(p.settings) + (i === r.pick ? ' *' : ''), String(p.capacity), p.recall_at_k.toFixed(3),
    ...kinds.flatMap((k) => [(p.by_kind[k]?.recall_at_1 ?? 0).toFixed(3), (p.by_kind[k]?.recall_at_k ?? 0).toFixed(3)]),
    p.slots_per_session.toFixed(1), p.read_us_p50.toFixed(0), String(p.turns_per_s),
    [r.frontier.slots.includes(i) ? 'slots' : '', r.frontier.cost.includes(i) ? 'cost' : ''].filter(Boolean).join('+'),
  ])];
  const widths = head.map((_, c) => Math.max(...rows.map((x) => x[c]!.length)));
  return rows.map((x) => x.map((cell, c) => (c === 0 ? cell.padEnd(widths[c]!) : cell.padStart(widths[c]!))).join('  ')).join('\n') + `\n\n${r.advice}\n`;
}

export interface TuneCliOptions {
  probes?: string;
  k?: number | string;
  grid?: string;
  config?: string;
  out?: string;
  json?: boolean;
  strict?: boolean;
}

/** `tidemark tune TRANSCRIPT --probes FILE [--grid FILE] [--config FILE] [--k N] [--json] [--out plot.svg|html]`. Returns the exit code. */
export async function tuneCli(transcriptPath: string, cli: TuneCliOptions, io: CliIo = defaultIo()): Promise<number> {
  try {
    if (!cli.probes) throw new ConfigError('tune needs --probes FILE', { details: { option: 'probes' } });
    if (cli.out && !/\.(svg|html?)$/i.test(cli.out)) throw new ConfigError(`--out must end in .svg or .html, got ${describeValue(cli.out)}`, { details: { option: 'out' } });
    const k = parseK(cli.k);
    const config = await loadConfig(cli.config);
    let grid = DEFAULT_GRID;
    if (cli.grid) {
      const text = await readText(cli.grid, 'grid');
      let v: unknown;
      try {
        v = JSON.parse(text);
      } catch (err) {
        throw new ConfigError(`grid file ${cli.grid} is not valid JSON: ${(err as Error).message}`, { details: { option: 'grid' } });
      }
      grid = checkGrid(v);
    }
    const files = await loadReplayFiles(transcriptPath, cli.probes, cli.strict === true);
    for (const i of files.issues) io.stderr.write(`${i.file} line ${i.line}: ${i.message}\n`);
    const bar = cli.json ? null : progressBar(gridPoints(grid).length, 'tune', io.stderr as NodeJS.WriteStream, 1);
    const r = await runTune({ turns: files.turns, probes: files.probes, ...(k !== undefined ? { k } : {}), config, grid, ...(bar ? { onProgress: (d: number) => bar.tick(d) } : {}) });
    bar?.done();
    if (cli.out) await writeFile(cli.out, /\.svg$/i.test(cli.out) ? tuneSvg(r) : tuneHtml(r));
    io.stdout(cli.json ? JSON.stringify(r) + '\n' : formatTuneTable(r) + (cli.out ? `plot written to ${cli.out}\n` : ''));
    return 0;
  } catch (err) {
    io.stderr.write(`tidemark tune: ${isTidemarkError(err) ? `${(err as { code: string }).code}: ` : ''}${(err as Error).message}\n`);
    return isTidemarkError(err) ? 2 : 1;
  }
}
