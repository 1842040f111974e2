// `npm run bench -- compare A.json B.json [--threshold 0.1] [--figures turns_per_s,latency.p99_ms] [--json]`:
// each numeric figure the two results files share, B / A, beside a noise band taken from the runs'
// own repeats (the relative spread (max - min) / median of the figure over a file's `runs`, the
// larger of the two files). A figure whose ratio leaves 1 ± (threshold + noise) is flagged, and any
// flag makes the exit code 1. The two files' commits, versions, machine and load are printed first:
// a difference there often explains a difference in figures.

import { readFileSync } from 'node:fs';
import { asciiTable } from './lib/results.js';
import { parseArgs, percentile, round } from './lib/stats.js';

/** Parts of a results file that describe the run rather than measure it. */
const NOT_FIGURES = new Set(['meta', 'machine', 'date', 'command', 'name', 'runs', 'timeline', 'windows', 'per_process', 'redis_info', 'load', 'inputs']);

/** Numeric leaves as dotted paths (arrays by index, at most 20 elements; long series are curves, not figures). */
export function figuresOf(doc: unknown, path = '', out = new Map<string, number>()): Map<string, number> {
  if (typeof doc === 'number' && Number.isFinite(doc)) out.set(path, doc);
  else if (Array.isArray(doc)) {
    if (doc.length <= 20) doc.forEach((v, i) => figuresOf(v, path ? `${path}.${i}` : String(i), out));
  } else if (doc && typeof doc === 'object') {
    for (const [k, v] of Object.entries(doc)) {
      if (path === '' && NOT_FIGURES.has(k)) continue;
      figuresOf(v, path ? `${path}.${k}` : k, out);
    }
  }
  return out;
}

/** Relative spread of a figure over a file's repeats (`runs: [{...}]`), matched by the figure's path or last name. */
export function noiseOf(doc: Record<string, unknown>, figure: string): number | undefined {
  const runs = doc.runs;
  if (!Array.isArray(runs) || runs.length < 2) return undefined;
  const last = figure.split('.').pop()!;
  const xs: number[] = [];
  for (const r of runs) {
    const f = figuresOf(r);
    const v = f.get(figure) ?? f.get(last) ?? f.get(figure.replace(/\./g, '_'));
    if (v !== undefined) xs.push(v);
  }
  if (xs.length < 2) return undefined;
  const med = percentile(xs, 50);
  return med === 0 ? undefined : (Math.max(...xs) - Math.min(...xs)) / Math.abs(med);
}

export interface Comparison {
  figure: string;
  a: number;
  b: number;
  ratio: number;
  noise: number | null;
  flagged: boolean;
}

export function compare(a: Record<string, unknown>, b: Record<string, unknown>, threshold: number, only?: readonly string[]): Comparison[] {
  const fa = figuresOf(a);
  const fb = figuresOf(b);
  const out: Comparison[] = [];
  for (const [k, va] of fa) {
    if (only && !only.includes(k)) continue;
    const vb = fb.get(k);
    if (vb === undefined || va === 0) continue;
    const ratio = vb / va;
    const na = noiseOf(a, k);
    const nb = noiseOf(b, k);
    const noise = na === undefined && nb === undefined ? null : Math.max(na ?? 0, nb ?? 0);
    out.push({ figure: k, a: va, b: vb, ratio, noise, flagged: Math.abs(ratio - 1) > threshold + (noise ?? 0) });
  }
  return out;
}

const describe = (doc: Record<string, unknown>): string => {
  const m = (doc.meta ?? {}) as Record<string, unknown>;
  const mach = (m.machine ?? doc.machine ?? {}) as Record<string, unknown>;
  return `${doc.name ?? '?'} ${doc.date ?? '?'} commit ${m.git_commit ?? '?'}${m.git_dirty ? '+dirty' : ''} v${m.package_version ?? '?'} node ${m.node ?? mach.node ?? '?'} redis ${(m.redis as string[] | undefined)?.join('/') || '-'} ${mach.cpus ?? '?'} cpus load ${JSON.stringify(m.load ?? doc.load ?? '?')}`;
};

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  const [fileA, fileB] = args.rest;
  if (!fileA || !fileB) throw new RangeError('usage: npm run bench -- compare A.json B.json [--threshold 0.1] [--figures a,b.c] [--json]');
  const threshold = Number(args.values.get('threshold') ?? 0.1);
  if (!(threshold >= 0)) throw new RangeError(`--threshold must be a number >= 0, got ${args.values.get('threshold')}`);
  const only = args.values.get('figures')?.split(',');
  const a = JSON.parse(readFileSync(fileA, 'utf8')) as Record<string, unknown>;
  const b = JSON.parse(readFileSync(fileB, 'utf8')) as Record<string, unknown>;
  const rows = compare(a, b, threshold, only);
  if (only) for (const f of only) if (!rows.some((r) => r.figure === f)) throw new RangeError(`figure ${f} is not in both files (or is 0 in A)`);
  console.log(`A: ${describe(a)}\nB: ${describe(b)}`);
  if (a.command !== b.command) console.log(`commands differ:\n  A: ${a.command}\n  B: ${b.command}`);
  console.log(asciiTable(['figure', 'A', 'B', 'B / A', 'noise ±', ''], rows.map((r) => [r.figure, r.a, r.b, round(r.ratio, 3), r.noise === null ? 'no repeats' : round(r.noise, 3), r.flagged ? 'PAST THRESHOLD' : ''])));
  const flagged = rows.filter((r) => r.flagged);
  console.log(`${rows.length} figures compared; ${flagged.length} past 1 ± (${threshold} + noise)`);
  if (args.flags.has('json')) console.log(JSON.stringify({ threshold, a: fileA, b: fileB, figures: rows, flagged: flagged.map((r) => r.figure) }));
  if (flagged.length > 0) process.exitCode = 1;
}
