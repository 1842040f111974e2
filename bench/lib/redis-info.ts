// Redis-side figures of a benchmark run: INFO snapshots of every master before and after, and their
// difference per master and per turn — commands by type, CPU µs, bytes in and out, used_memory.
// On a Redis shared with other work the deltas include that work too: `--own-redis` runs on a
// redis-server of the benchmark's own, where they are the run's alone.

import type { Cluster, Redis } from 'ioredis';

type Client = Redis | Cluster;

/** The masters behind a client: itself on a single Redis, each master node on a Cluster. */
export const masters = (c: Client): Redis[] => ((c as { isCluster?: boolean }).isCluster ? (c as Cluster).nodes('master') : [c as Redis]);

/** One master's counters at one moment (from INFO server, stats, cpu, memory, commandstats). */
export interface InfoSnapshot {
  node: string;
  version: string;
  cpu_us: number;
  net_in: number;
  net_out: number;
  commands: number;
  used_memory: number;
  by_command: Record<string, number>;
}

/** Parses the text of INFO into a field map (sections flattened; `# Section` lines skipped). */
export function parseInfo(text: string): Map<string, string> {
  const out = new Map<string, string>();
  for (const line of text.split(/\r?\n/)) {
    if (line === '' || line.startsWith('#')) continue;
    const i = line.indexOf(':');
    if (i > 0) out.set(line.slice(0, i), line.slice(i + 1));
  }
  return out;
}

/** A snapshot from INFO text; commandstats lines read `cmdstat_get:calls=3,usec=...`. */
export function snapshotOf(node: string, text: string): InfoSnapshot {
  const f = parseInfo(text);
  const n = (k: string): number => Number(f.get(k) ?? 0);
  const byCommand: Record<string, number> = {};
  for (const [k, v] of f) {
    if (!k.startsWith('cmdstat_')) continue;
    const calls = /(?:^|,)calls=(\d+)/.exec(v);
    if (calls) byCommand[k.slice('cmdstat_'.length)] = Number(calls[1]);
  }
  return {
    node,
    version: f.get('redis_version') ?? 'unknown',
    // used_cpu_* are seconds with microsecond resolution (Redis INFO docs).
    cpu_us: Math.round((n('used_cpu_sys') + n('used_cpu_user')) * 1e6),
    net_in: n('total_net_input_bytes'),
    net_out: n('total_net_output_bytes'),
    commands: n('total_commands_processed'),
    used_memory: n('used_memory'),
    by_command: byCommand,
  };
}

export async function snapshot(c: Client): Promise<InfoSnapshot[]> {
  return Promise.all(
    masters(c).map(async (m) => snapshotOf(`${m.options.host ?? '127.0.0.1'}:${m.options.port ?? 6379}`, String(await m.info('everything')))),
  );
}

export const redisVersions = async (c: Client): Promise<string[]> => (await snapshot(c)).map((s) => s.version);

/** One master's difference between two snapshots, and the same per turn. */
export interface InfoDelta {
  node: string;
  commands: number;
  /** Calls by command (only those that moved), e.g. `{ evalsha: 2000, hmget: 10 }`. */
  by_command: Record<string, number>;
  cpu_us: number;
  net_in_bytes: number;
  net_out_bytes: number;
  used_memory_delta: number;
  used_memory_after: number;
  per_turn: { commands: number; cpu_us: number; net_in_bytes: number; net_out_bytes: number };
}

export function deltaOf(before: readonly InfoSnapshot[], after: readonly InfoSnapshot[], turns: number): InfoDelta[] {
  return after.map((a) => {
    const b = before.find((x) => x.node === a.node) ?? { ...a, cpu_us: 0, net_in: 0, net_out: 0, commands: 0, used_memory: 0, by_command: {} };
    const by: Record<string, number> = {};
    for (const [k, v] of Object.entries(a.by_command)) {
      const d = v - (b.by_command[k] ?? 0);
      if (d > 0) by[k] = d;
    }
    const per = (x: number): number => (turns > 0 ? Math.round((x / turns) * 100) / 100 : 0);
    const d = { commands: a.commands - b.commands, cpu_us: a.cpu_us - b.cpu_us, net_in: a.net_in - b.net_in, net_out: a.net_out - b.net_out };
    return {
      node: a.node,
      commands: d.commands,
      by_command: by,
      cpu_us: d.cpu_us,
      net_in_bytes: d.net_in,
      net_out_bytes: d.net_out,
      used_memory_delta: a.used_memory - b.used_memory,
      used_memory_after: a.used_memory,
      per_turn: { commands: per(d.commands), cpu_us: per(d.cpu_us), net_in_bytes: per(d.net_in), net_out_bytes: per(d.net_out) },
    };
  });
}

/** The sum over masters, per turn: what the fleet of masters does for one turn. */
export function totalPerTurn(deltas: readonly InfoDelta[]): InfoDelta['per_turn'] {
  const t = { commands: 0, cpu_us: 0, net_in_bytes: 0, net_out_bytes: 0 };
  for (const d of deltas) {
    t.commands += d.per_turn.commands;
    t.cpu_us += d.per_turn.cpu_us;
    t.net_in_bytes += d.per_turn.net_in_bytes;
    t.net_out_bytes += d.per_turn.net_out_bytes;
  }
  const r = (x: number): number => Math.round(x * 100) / 100;
  return { commands: r(t.commands), cpu_us: r(t.cpu_us), net_in_bytes: r(t.net_in_bytes), net_out_bytes: r(t.net_out_bytes) };
}

/** Prints the deltas as lines for the terminal. */
export function describeDeltas(deltas: readonly InfoDelta[]): string {
  return deltas
    .map((d) => {
      const top = Object.entries(d.by_command).sort((x, y) => y[1] - x[1]).slice(0, 6).map(([k, v]) => `${k} ${v}`).join(', ');
      return `redis ${d.node}: per turn ${d.per_turn.commands} commands, ${d.per_turn.cpu_us} µs CPU, ${d.per_turn.net_in_bytes} B in, ${d.per_turn.net_out_bytes} B out; used_memory ${d.used_memory_delta >= 0 ? '+' : ''}${d.used_memory_delta} B (now ${d.used_memory_after}); commands: ${top}`;
    })
    .join('\n');
}
