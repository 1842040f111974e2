// Recall benchmark: replays tidemark's two synthetic checks beside the baselines in one run and prints
// recall and value accuracy per probe kind, read cost and replay speed. `conversations` are long
// two-speaker conversations over many dated meetings (bench/lib/conversations.ts); `scenario` is the
// single-user bot scenario with planted facts and updates (bench/lib/scenario.ts).
// `npm run bench -- recall [--json] [--set conversations|scenario|both] [--k 10] [--capacity 64] [--seed N] [--sessions N]`.

import { checkProbe, checkTurn, type Probe, type TranscriptTurn } from '../cli/jsonl.js';
import { runReplay, type ReplayResult } from '../cli/replay.js';
import { formatReplayTable } from '../cli/replay-cli.js';
import { generateConversations, CONVERSATION_DEFAULTS } from './lib/conversations.js';
import { SCENARIO_DEFAULTS, generateScenario } from './lib/scenario.js';
import { intFlag } from './scenario.js';

const parsed = (turns: readonly object[], probes: readonly object[]): { turns: TranscriptTurn[]; probes: Probe[] } => ({
  turns: turns.map((t, i) => checkTurn(t as Record<string, unknown>, i + 1) as TranscriptTurn),
  probes: probes.map((p, i) => checkProbe(p as Record<string, unknown>, i + 1) as Probe),
});

/** The bot scenario as parsed replay input (through the same line checks as the files). */
export function scenarioInput(seed: number, sessions: number): { turns: TranscriptTurn[]; probes: Probe[] } {
  const sc = generateScenario({ seed, sessions });
  return parsed(sc.turns, sc.probes);
}

/** The long two-speaker conversations as parsed replay input. */
export function conversationInput(seed: number, conversations: number): { turns: TranscriptTurn[]; probes: Probe[] } {
  const g = generateConversations({ seed, conversations });
  return parsed(g.turns, g.probes);
}

function figures(name: string, r: ReplayResult, k: number) {
  const f = (x: { recall_at_k: number; recall_at_1: number; value_at_k: number | null; value_at_1: number | null; by_kind: Record<string, { recall_at_k: number; recall_at_1: number }> }) => ({
    recall_at_k: x.recall_at_k, recall_at_1: x.recall_at_1, value_at_k: x.value_at_k, value_at_1: x.value_at_1,
    by_kind: Object.fromEntries(Object.entries(x.by_kind).map(([kind, v]) => [kind, { at_k: v.recall_at_k, at_1: v.recall_at_1 }])),
  });
  const s = r.summary;
  return {
    set: name, k, turns: s.turns, probes: s.probes,
    tidemark: { ...f(s), hit_precision: s.hit_precision, read_us_p50: s.read_us.p50, read_us_p99: s.read_us.p99, turns_per_s: s.turns_per_s, turns_per_cpu_s: s.turns_per_cpu_s, tiers: s.tiers },
    baselines: Object.fromEntries(Object.entries(r.baselines).map(([n, b]) => [n, { ...f(b), read_us_p50: b.read_us.p50, items_kept: b.items_kept }])),
  };
}

export default async function main(argv: string[]): Promise<void> {
  const set = argv.includes('--set') ? argv[argv.indexOf('--set') + 1] ?? 'both' : 'both';
  if (!['conversations', 'scenario', 'both'].includes(set)) throw new RangeError(`--set must be conversations, scenario or both, got ${set}`);
  const capacity = intFlag(argv, 'capacity', 64);
  const out: unknown[] = [];
  if (set !== 'scenario') {
    const k = intFlag(argv, 'k', 10);
    const { turns, probes } = conversationInput(intFlag(argv, 'seed', CONVERSATION_DEFAULTS.seed), intFlag(argv, 'sessions', CONVERSATION_DEFAULTS.conversations));
    const r = await runReplay({ turns, probes, k, config: { capacity }, baselines: ['bm25', 'flat', 'window:20'] });
    process.stdout.write(`\n== long two-speaker conversations\n${formatReplayTable(r)}`);
    out.push(figures('conversations', r, k));
  }
  if (set !== 'conversations') {
    const k = intFlag(argv, 'k', 5);
    const { turns, probes } = scenarioInput(intFlag(argv, 'seed', SCENARIO_DEFAULTS.seed), intFlag(argv, 'sessions', SCENARIO_DEFAULTS.sessions));
    const r = await runReplay({ turns, probes, k, config: { capacity }, baselines: ['bm25', 'flat', 'window:20'] });
    process.stdout.write(`\n== bot scenario (planted facts and updates)\n${formatReplayTable(r)}`);
    out.push({ ...figures('scenario', r, k), targets: { fact_at_5: 0.9, latest_at_1: 0.9 } });
  }
  if (argv.includes('--json')) console.log(JSON.stringify({ bench: 'recall', capacity, sets: out }));
}
