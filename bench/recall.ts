// Recall benchmark: replays the synthetic scenario through tidemark beside the window and flat
// baselines in one run and prints recall per probe kind, read cost and replay speed.
// `npm run bench -- recall [--json] [--k 5] [--capacity 64] [--window 20] [--seed 7] [--sessions 20]`.

import { runReplay, formatReplayTable } from '../src/cli/replay.js';
import { checkProbe, checkTurn, type Probe, type TranscriptTurn } from '../src/cli/jsonl.js';
import { SCENARIO_DEFAULTS, generateScenario } from './lib/scenario.js';
import { intFlag } from './scenario.js';

/** The scenario as parsed replay input (through the same line checks as the files). */
export function scenarioInput(seed: number, sessions: number): { turns: TranscriptTurn[]; probes: Probe[] } {
  const sc = generateScenario({ seed, sessions });
  const turns = sc.turns.map((t, i) => checkTurn(t as unknown as Record<string, unknown>, i + 1) as TranscriptTurn);
  const probes = sc.probes.map((p, i) => checkProbe(p as unknown as Record<string, unknown>, i + 1) as Probe);
  return { turns, probes };
}

export default async function main(argv: string[]): Promise<void> {
  const k = intFlag(argv, 'k', 5);
  const capacity = intFlag(argv, 'capacity', 64);
  const window = intFlag(argv, 'window', 20);
  const { turns, probes } = scenarioInput(intFlag(argv, 'seed', SCENARIO_DEFAULTS.seed), intFlag(argv, 'sessions', SCENARIO_DEFAULTS.sessions));
  const result = await runReplay({ turns, probes, k, config: { capacity }, baselines: [`window:${window}`, 'flat'] });
  const line = (name: string, f: { by_kind: Record<string, { recall_at_1: number; recall_at_k: number }> }) => ({
    name,
    fact_at_k: f.by_kind.fact?.recall_at_k ?? null,
    latest_at_1: f.by_kind.latest?.recall_at_1 ?? null,
  });
  const figures = {
    bench: 'recall',
    k,
    capacity,
    turns: result.summary.turns,
    probes: result.summary.probes,
    tidemark: { ...line('tidemark', result.summary), recall_at_k: result.summary.recall_at_k, read_us_p50: result.summary.read_us.p50, read_us_p99: result.summary.read_us.p99, slots_in_use: result.summary.slots_in_use, turns_per_s: result.summary.turns_per_s, turns_per_cpu_s: result.summary.turns_per_cpu_s, writes: result.summary.writes, evictions: result.summary.evictions, reads: result.summary.reads },
    baselines: Object.fromEntries(Object.entries(result.baselines).map(([n, b]) => [n, { ...line(n, b), recall_at_k: b.recall_at_k, read_us_p50: b.read_us.p50, items_kept: b.items_kept }])),
    targets: { fact_at_5: 0.9, latest_at_1: 0.9, turns_per_s: 5000 },
  };
  process.stdout.write(formatReplayTable(result));
  if (argv.includes('--verbose')) {
    for (const p of result.probes) if (p.recall < 1) console.log(`miss ${p.id} expect ${probes.find((q) => q.id === p.id)!.expect.join(',')} got ${p.retrieved.join(',')}`);
  }
  if (argv.includes('--json')) console.log(JSON.stringify(figures));
}
