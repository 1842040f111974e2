// `npm run bench -- plan --daily-users N --sessions-per-week S --expiry-days D --turns T|--turns-mix T:share,...
//   --peak R [--utilisation 0.6] [--replicas 1] [--headroom 0.3] [--masters 3] [--load FILE] [--memory FILE] [--json]`:
// sizes a deployment from measured results files — bot processes, Redis bytes per master and in
// total, Redis ops/s and network bytes/s at peak — and says for each which measured figure it came
// from. The arithmetic is in `plan()` (tested); the figures come from `bench load` (throughput per
// process, Redis commands and bytes per turn) and `bench memory` (bytes per session by length).
//
// Model (stated, so it can be argued with): sessions start at daily users × sessions per week / 7 a
// day; a session's keys live until `expiry` days after its last turn, so at steady state
// sessions/day × expiry days sessions are held, each at its full length (an upper bound: a session
// still in progress holds less). A turn is one exchange (the user's message and the reply).

import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { join, relative } from 'node:path';
import { RESULTS_DIR, RUNS_DIR } from './lib/results.js';
import { asciiTable } from './lib/results.js';
import { parseArgs } from './lib/stats.js';

export interface PlanInputs {
  daily_users: number;
  sessions_per_user_per_week: number;
  expiry_days: number;
  /** Exchanges per session: one length, or lengths with shares summing to 1. */
  turns_per_session: Array<{ turns: number; share: number }>;
  peak_turns_per_s: number;
  /** Fraction of a process's measured throughput to plan for at peak. */
  target_utilisation: number;
  replicas: number;
  /** Extra memory on top of the estimate (0.3 = 30 %). */
  headroom: number;
  masters: number;
}

/** The measured figures a plan needs, each with where it came from. */
export interface Measured {
  turns_per_s_per_process: Source;
  commands_per_turn: Source;
  net_bytes_per_turn: Source;
  /** Bytes per session at measured lengths (exchanges). */
  bytes_by_length: Array<{ exchanges: number; bytes: number }>;
  bytes_source: string;
}

export interface Source {
  value: number;
  from: string;
}

export interface Plan {
  processes: number;
  redis_bytes: { per_master: number; total: number; total_with_replicas: number; sessions_held: number; bytes_per_session: number };
  redis_ops_per_s: { total: number; per_master: number };
  network_bytes_per_s: number;
  inputs: PlanInputs;
  from: Record<string, string>;
}

/** Bytes per session at `n` exchanges: linear between measured lengths, extended by the last slope. */
export function bytesAt(points: ReadonlyArray<{ exchanges: number; bytes: number }>, n: number): number {
  const p = [...points].sort((a, b) => a.exchanges - b.exchanges);
  if (p.length === 0) throw new RangeError('no measured lengths');
  if (p.length === 1) return (p[0]!.bytes / p[0]!.exchanges) * n;
  let i = p.findIndex((x) => x.exchanges >= n);
  if (i === -1) i = p.length - 1;
  if (i === 0) i = 1;
  const a = p[i - 1]!;
  const b = p[i]!;
  return a.bytes + ((b.bytes - a.bytes) * (n - a.exchanges)) / (b.exchanges - a.exchanges);
}

export function plan(inputs: PlanInputs, m: Measured): Plan {
  const share = inputs.turns_per_session.reduce((s, x) => s + x.share, 0);
  if (Math.abs(share - 1) > 1e-6) throw new RangeError(`turn mix shares must sum to 1, got ${share}`);
  if (!(inputs.target_utilisation > 0 && inputs.target_utilisation <= 1)) throw new RangeError(`target utilisation must be in (0, 1], got ${inputs.target_utilisation}`);
  const perSession = inputs.turns_per_session.reduce((s, x) => s + x.share * bytesAt(m.bytes_by_length, x.turns), 0);
  const sessionsHeld = ((inputs.daily_users * inputs.sessions_per_user_per_week) / 7) * inputs.expiry_days;
  const total = sessionsHeld * perSession * (1 + inputs.headroom);
  const ops = inputs.peak_turns_per_s * m.commands_per_turn.value;
  return {
    processes: Math.ceil(inputs.peak_turns_per_s / (m.turns_per_s_per_process.value * inputs.target_utilisation)),
    redis_bytes: {
      per_master: Math.round(total / inputs.masters),
      total: Math.round(total),
      total_with_replicas: Math.round(total * (1 + inputs.replicas)),
      sessions_held: Math.round(sessionsHeld),
      bytes_per_session: Math.round(perSession),
    },
    redis_ops_per_s: { total: Math.round(ops), per_master: Math.round(ops / inputs.masters) },
    network_bytes_per_s: Math.round(inputs.peak_turns_per_s * m.net_bytes_per_turn.value),
    inputs,
    from: {
      processes: `${m.turns_per_s_per_process.value} turns/s per process (${m.turns_per_s_per_process.from}) at utilisation ${inputs.target_utilisation}`,
      redis_bytes: `bytes per session by length (${m.bytes_source}): ${m.bytes_by_length.map((p) => `${p.exchanges}: ${p.bytes}`).join(', ')}`,
      redis_ops_per_s: `${m.commands_per_turn.value} Redis commands per turn (${m.commands_per_turn.from})`,
      network_bytes_per_s: `${m.net_bytes_per_turn.value} bytes in + out per turn (${m.net_bytes_per_turn.from})`,
    },
  };
}

/** The newest results file whose name starts with one of `names`, from runs/ or the committed folder. */
export function newestResult(names: readonly string[], usable: (doc: Record<string, unknown>) => boolean): string | undefined {
  const found: Array<{ file: string; date: string }> = [];
  for (const dir of [RUNS_DIR, RESULTS_DIR]) {
    if (!existsSync(dir)) continue;
    for (const f of readdirSync(dir)) {
      if (!f.endsWith('.json') || !names.some((n) => f.startsWith(`${n}-`))) continue;
      try {
        const doc = JSON.parse(readFileSync(join(dir, f), 'utf8')) as Record<string, unknown>;
        if (names.includes(String(doc.name)) && usable(doc)) found.push({ file: join(dir, f), date: String(doc.date) });
      } catch {
        // not a results file
      }
    }
  }
  return found.sort((a, b) => (a.date < b.date ? 1 : -1))[0]?.file;
}

/** Reads the figures a plan needs from a load result and a memory result. */
export function measuredFrom(loadFile: string, memoryFile: string): Measured {
  const load = JSON.parse(readFileSync(loadFile, 'utf8')) as Record<string, unknown>;
  const mem = JSON.parse(readFileSync(memoryFile, 'utf8')) as { points?: Array<{ exchanges: number; bytes: { total: number } }> };
  const lf = relative(process.cwd(), loadFile);
  const per = load.redis_per_turn as { commands: number; net_in_bytes: number; net_out_bytes: number } | null | undefined;
  if (!per) throw new RangeError(`${lf} has no redis_per_turn (run bench load on Redis)`);
  if (!mem.points?.length) throw new RangeError(`${memoryFile} has no points (run bench memory)`);
  const closed = typeof load.turns_per_s === 'number';
  const tput = closed ? (load.turns_per_s as number) : (load.achieved_per_s as number) / ((load.processes as number) || 1);
  return {
    turns_per_s_per_process: { value: tput, from: `${lf} ${closed ? 'turns_per_s (closed loop, saturated)' : 'achieved_per_s / processes (fixed rate: a lower bound unless it fell behind)'}` },
    commands_per_turn: { value: per.commands, from: `${lf} redis_per_turn.commands` },
    net_bytes_per_turn: { value: Math.round((per.net_in_bytes + per.net_out_bytes) * 100) / 100, from: `${lf} redis_per_turn.net_in_bytes + net_out_bytes` },
    bytes_by_length: mem.points.map((p) => ({ exchanges: p.exchanges, bytes: p.bytes.total })),
    bytes_source: `${relative(process.cwd(), memoryFile)} points[].bytes.total`,
  };
}

/** `10:0.5,200:0.3,2000:0.2` -> [{turns, share}]. */
export function parseMix(text: string): Array<{ turns: number; share: number }> {
  return text.split(',').map((part) => {
    const [t, s] = part.split(':').map(Number);
    if (!Number.isFinite(t) || !(t! > 0) || !Number.isFinite(s) || !(s! > 0)) throw new RangeError(`--turns-mix expects turns:share,..., got ${JSON.stringify(part)}`);
    return { turns: t!, share: s! };
  });
}

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  const n = (name: string, def?: number): number => {
    const raw = args.values.get(name);
    const v = raw === undefined ? def : Number(raw);
    if (v === undefined || !Number.isFinite(v) || v < 0) throw new RangeError(`--${name} must be a number >= 0${def === undefined ? ' and is required' : ''}, got ${raw}`);
    return v;
  };
  const inputs: PlanInputs = {
    daily_users: n('daily-users'),
    sessions_per_user_per_week: n('sessions-per-week'),
    expiry_days: n('expiry-days', 30),
    turns_per_session: args.values.has('turns-mix') ? parseMix(args.values.get('turns-mix')!) : [{ turns: n('turns'), share: 1 }],
    peak_turns_per_s: n('peak'),
    target_utilisation: n('utilisation', 0.6),
    replicas: n('replicas', 1),
    headroom: n('headroom', 0.3),
    masters: Math.max(1, n('masters', 3)),
  };
  const loadFile = args.values.get('load') ?? newestResult(['load-redis', 'load-cluster', 'load-rate-redis', 'load-rate-cluster'], (d) => d.redis_per_turn != null);
  const memFile = args.values.get('memory') ?? newestResult(['memory-redis', 'memory-cluster'], (d) => Array.isArray(d.points));
  if (!loadFile || !memFile) throw new RangeError('no results to plan from: run `bench load --store redis ...` and `bench memory`, or pass --load FILE --memory FILE');
  const p = plan(inputs, measuredFrom(loadFile, memFile));
  if (args.flags.has('json')) {
    console.log(JSON.stringify(p));
    return;
  }
  const gb = (b: number): string => `${(b / 2 ** 30).toFixed(1)} GiB`;
  console.log(asciiTable(['figure', 'value', 'from'], [
    ['bot processes', p.processes, p.from.processes!],
    ['sessions held (steady state)', p.redis_bytes.sessions_held, `${inputs.daily_users} × ${inputs.sessions_per_user_per_week} / 7 × ${inputs.expiry_days} days`],
    ['bytes per session', p.redis_bytes.bytes_per_session, p.from.redis_bytes!],
    ['Redis memory per master', gb(p.redis_bytes.per_master), `total / ${inputs.masters} masters`],
    ['Redis memory, primaries', gb(p.redis_bytes.total), `incl. ${inputs.headroom * 100} % headroom`],
    ['Redis memory with replicas', gb(p.redis_bytes.total_with_replicas), `${inputs.replicas} replica(s) each`],
    ['Redis ops/s at peak', p.redis_ops_per_s.total, `${p.redis_ops_per_s.per_master} per master; ${p.from.redis_ops_per_s}`],
    ['network bytes/s at peak', p.network_bytes_per_s, p.from.network_bytes_per_s!],
  ]));
}
