// One fast-check seed per test run, printed and settable: TIDEMARK_FC_SEED=<integer> reruns a run's
// properties exactly, TIDEMARK_FC_SEED=random draws a new one (printed here, so a failure can be
// replayed). The default is fixed, so two runs of the same code draw the same cases. fast-check
// itself prints the seed and path of a failing case as well.
import type { TestProject } from 'vitest/node';

export const DEFAULT_FC_SEED = 20261203;

export function seedFromEnv(value: string | undefined): number {
  if (value === undefined || value === '') return DEFAULT_FC_SEED;
  if (value === 'random') return (Math.random() * 2 ** 31) | 0;
  const n = Number(value);
  if (!Number.isInteger(n)) throw new Error(`TIDEMARK_FC_SEED must be an integer or "random", got ${JSON.stringify(value)}`);
  return n;
}

export default function setup(project: TestProject): void {
  const seed = seedFromEnv(process.env.TIDEMARK_FC_SEED);
  console.log(`fast-check seed ${seed} (rerun with TIDEMARK_FC_SEED=${seed})`);
  project.provide('fcSeed', seed);
}

declare module 'vitest' {
  export interface ProvidedContext {
    fcSeed: number;
  }
}
