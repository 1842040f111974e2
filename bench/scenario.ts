// Writes the synthetic scenario as replay files: `npm run bench -- scenario --out DIR [--seed N]
// [--sessions N] [--min-turns N] [--max-turns N]` -> DIR/transcript.jsonl and DIR/probes.jsonl.

import { mkdirSync, writeFileSync } from 'node:fs';
import { toJsonl } from '../cli/jsonl.js';
import { SCENARIO_DEFAULTS, generateScenario, scenarioFiles } from './lib/scenario.js';

export function flag(argv: string[], name: string): string | undefined {
  const i = argv.indexOf(`--${name}`);
  return i >= 0 ? argv[i + 1] : undefined;
}

export function intFlag(argv: string[], name: string, dflt: number): number {
  const v = flag(argv, name);
  if (v === undefined) return dflt;
  const n = Number(v);
  if (!Number.isInteger(n) || n < 1) throw new Error(`--${name} must be a positive integer, got ${v}`);
  return n;
}

export default async function main(argv: string[]): Promise<void> {
  const out = flag(argv, 'out');
  if (!out) throw new Error('usage: npm run bench -- scenario --out DIR [--seed N] [--sessions N] [--min-turns N] [--max-turns N]');
  const sc = generateScenario({
    seed: intFlag(argv, 'seed', SCENARIO_DEFAULTS.seed),
    sessions: intFlag(argv, 'sessions', SCENARIO_DEFAULTS.sessions),
    minTurns: intFlag(argv, 'min-turns', SCENARIO_DEFAULTS.minTurns),
    maxTurns: intFlag(argv, 'max-turns', SCENARIO_DEFAULTS.maxTurns),
  });
  mkdirSync(out, { recursive: true });
  const files = scenarioFiles(out);
  writeFileSync(files.transcript, toJsonl(sc.turns));
  writeFileSync(files.probes, toJsonl(sc.probes));
  const summary = { transcript: files.transcript, probes: files.probes, turns: sc.turns.length, probeCount: sc.probes.length };
  console.log(argv.includes('--json') ? JSON.stringify(summary) : `wrote ${sc.turns.length} turns to ${files.transcript} and ${sc.probes.length} probes to ${files.probes}`);
}
