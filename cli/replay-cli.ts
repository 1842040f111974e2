// `tidemark replay` on the command line: reads the transcript, probe and config files, runs the
// replay with a progress bar, and prints a table or one JSON object. The replay itself is in replay.ts.

import { withDeprecatedReplayFields } from '../src/deprecated-fields.js';
import { ConfigError, describeValue, isTidemarkError } from '../src/errors.js';
import type { TidemarkOptions } from '../src/middleware/tidemark.js';
import type { ReadResult } from '../src/types.js';
import { parseProbes, parseTranscript, readText, type FormatIssue, type Probe, type TranscriptTurn } from './jsonl.js';
import { progressBar } from './progress.js';
import { runReplay, type RecallFigures, type ReplayResult } from './replay.js';

export interface ReplayCliOptions {
  probes?: string;
  k?: number | string;
  config?: string;
  json?: boolean;
  /** Repeatable: `bm25`, `flat` or `window:N`. */
  baseline?: string[] | string;
  strict?: boolean;
}

export interface CliIo {
  stdout: (text: string) => void;
  stderr: NodeJS.WriteStream | { write: (s: string) => unknown; isTTY?: boolean };
}

export const defaultIo = (): CliIo => ({ stdout: (s) => process.stdout.write(s), stderr: process.stderr });

/** Reads a JSON config file of createTidemark options. */
export async function loadConfig(path: string | undefined): Promise<TidemarkOptions> {
  if (!path) return {};
  const text = await readText(path, 'config');
  let v: unknown;
  try {
    v = JSON.parse(text);
  } catch (err) {
    throw new ConfigError(`config file ${path} is not valid JSON: ${(err as Error).message}`, { details: { option: 'config' } });
  }
  if (typeof v !== 'object' || v === null || Array.isArray(v)) {
    throw new ConfigError(`config file ${path} must hold a JSON object of createTidemark options, got ${describeValue(v)}`, { details: { option: 'config' } });
  }
  return v as TidemarkOptions;
}

/** Parses the transcript and probe files named on the command line. */
export async function loadReplayFiles(transcriptPath: string, probesPath: string | undefined, strict: boolean): Promise<{ turns: TranscriptTurn[]; probes: Probe[]; issues: FormatIssue[] }> {
  const t = parseTranscript(await readText(transcriptPath, 'transcript'), { strict, file: transcriptPath });
  const p = probesPath ? parseProbes(await readText(probesPath, 'probes'), { strict, file: probesPath }) : { items: [], issues: [] };
  return { turns: t.items, probes: p.items, issues: [...t.issues, ...p.issues] };
}

export function parseK(v: number | string | undefined): number | undefined {
  if (v === undefined) return undefined;
  const n = typeof v === 'number' ? v : Number(v);
  if (!Number.isInteger(n) || n < 1 || n > 1000) throw new ConfigError(`--k must be an integer in [1, 1000], got ${describeValue(v)}`, { details: { option: 'k', value: v } });
  return n;
}

const fmt = (x: number, d = 3): string => x.toFixed(d);
const int = (x: number): string => Math.round(x).toLocaleString('en-US');
const readsLine = (r: Record<ReadResult, number>): string => `${int(r.slot)} hit in slots, ${int(r.logbook)} in the logbook, ${int(r.miss)} miss`;

/** The readable table: tidemark beside the baselines, then tidemark's counters. */
export function formatReplayTable(r: ReplayResult): string {
  const s = r.summary;
  const kinds = Object.keys(s.by_kind);
  const hasValues = s.value_at_k !== null;
  const head = [
    '', `recall@${s.k}`, 'recall@1', ...(hasValues ? [`value@${s.k}`, 'value@1'] : []),
    ...kinds.flatMap((k) => [`${k}@1`, `${k}@${s.k}`]), 'read p50 µs', 'read p99 µs', 'items kept',
  ];
  const opt = (x: number | null): string => (x === null ? '-' : fmt(x));
  const row = (name: string, f: RecallFigures, us: { p50: number; p99: number }, kept: number): string[] => [
    name,
    fmt(f.recall_at_k),
    fmt(f.recall_at_1),
    ...(hasValues ? [opt(f.value_at_k), opt(f.value_at_1)] : []),
    ...kinds.flatMap((k) => [fmt(f.by_kind[k]?.recall_at_1 ?? 0), fmt(f.by_kind[k]?.recall_at_k ?? 0)]),
    us.p50.toFixed(1),
    us.p99.toFixed(1),
    int(kept),
  ];
  const rows = [head, row('tidemark', s, s.read_us, s.slots_in_use + s.logbook_entries), ...Object.entries(r.baselines).map(([n, b]) => row(n, b, b.read_us, b.items_kept))];
  const widths = head.map((_, c) => Math.max(...rows.map((x) => x[c]!.length)));
  const lines = rows.map((x) => x.map((cell, c) => (c === 0 ? cell.padEnd(widths[c]!) : cell.padStart(widths[c]!))).join('  '));
  const t = s.tiers;
  const e = t.logbook.entries;
  const ret = t.logbook.retention;
  const out = [
    `replay: ${int(s.turns)} turns, ${s.sessions} sessions, ${s.probes} probes, k = ${s.k}, capacity ${s.capacity}${s.skipped ? `, ${s.skipped} lines skipped` : ''}`,
    '',
    ...lines,
    '',
    `reads      of turns: ${readsLine(s.reads)}; of probes: ${readsLine(s.probe_reads)} (hit precision ${opt(s.hit_precision)}, hit recall ${opt(s.hit_recall)})`,
    `working    ${int(t.working.slots_in_use)} slots in use (${fmt(t.working.slots_in_use / Math.max(1, s.sessions), 1)} per session of ${s.capacity}); ` +
      `allocated ${int(s.writes.allocated)}, overwritten ${int(s.writes.overwritten)}, ambiguous kept beside ${int(t.working.writes.ambiguous)}, reinforced ${int(s.writes.reinforced)}, gated out ${int(s.writes.gated_out)}`,
    `evictions  capacity ${int(s.evictions.capacity)}, decayed ${int(s.evictions.decayed)}, expired ${int(s.evictions.expired)}`,
    `logbook    ${int(s.logbook_entries)} entries: ${int(e.turn)} turns (${t.logbook.roles.join(' + ')}), ${int(e.superseded)} superseded, ` +
      `${int(e.capacity + e.decayed + e.expired)} evicted values; retention ${ret.max_age_ms > 0 ? `max age ${int(ret.max_age_ms / 86_400_000)} d` : 'no max age'}, ` +
      `${ret.max_entries > 0 ? `max ${int(ret.max_entries)} per scope` : 'no count cap'} (deleted: ${int(ret.dropped_age)} by age, ${int(ret.dropped_count)} by count)`,
    `speed      ${int(s.turns_per_s)} turns/s (${int(s.turns_per_cpu_s)} per CPU second)`,
  ];
  for (const i of r.issues.slice(0, 20)) out.push(`skipped    ${i.file} line ${i.line}: ${i.message}`);
  if (r.issues.length > 20) out.push(`skipped    ... and ${r.issues.length - 20} more`);
  return out.join('\n') + '\n';
}

/** `tidemark replay TRANSCRIPT [--probes FILE] [--k N] [--config FILE] [--json] [--baseline SPEC]... [--strict]`. Returns the exit code. */
export async function replayCli(transcriptPath: string, cli: ReplayCliOptions, io: CliIo = defaultIo()): Promise<number> {
  try {
    const strict = cli.strict === true;
    const k = parseK(cli.k);
    const config = await loadConfig(cli.config);
    const files = await loadReplayFiles(transcriptPath, cli.probes, strict);
    const bar = cli.json ? null : progressBar(files.turns.length, 'replay', io.stderr as NodeJS.WriteStream);
    const result = await runReplay({
      turns: files.turns,
      probes: files.probes,
      ...(k !== undefined ? { k } : {}),
      config,
      baselines: cli.baseline === undefined ? [] : Array.isArray(cli.baseline) ? cli.baseline : [cli.baseline],
      strict,
      issues: files.issues,
      ...(bar ? { onProgress: (d: number) => bar.tick(d) } : {}),
    });
    bar?.done();
    if (cli.json) io.stdout(JSON.stringify({ ...result, summary: withDeprecatedReplayFields(result.summary) }) + '\n');
    else io.stdout(formatReplayTable(result));
    for (const i of result.issues) if (cli.json) io.stderr.write(`${i.file} line ${i.line}: ${i.message}\n`);
    return 0;
  } catch (err) {
    io.stderr.write(`tidemark replay: ${isTidemarkError(err) ? `${(err as { code: string }).code}: ` : ''}${(err as Error).message}\n`);
    return isTidemarkError(err) ? 2 : 1;
  }
}
