// Small measurement helpers shared by benchmarks: percentiles of sample arrays, argument parsing,
// machine notes. Figures are printed, never asserted.

import { cpus } from 'node:os';
import { setFlagsFromString } from 'node:v8';
import { runInNewContext } from 'node:vm';

/** Percentile by nearest rank (the definition used by most latency tooling; common practice). */
export function percentile(samples: ArrayLike<number>, p: number): number {
  const a = Float64Array.from(samples).sort();
  if (a.length === 0) return NaN;
  const rank = Math.min(a.length - 1, Math.max(0, Math.ceil((p / 100) * a.length) - 1));
  return a[rank]!;
}

export const round = (x: number, digits = 2): number => Number(x.toFixed(digits));

/** `--name value` and `--flag` parsing for bench scripts. */
export function parseArgs(argv: string[]): { flags: Set<string>; values: Map<string, string>; rest: string[] } {
  const flags = new Set<string>();
  const values = new Map<string, string>();
  const rest: string[] = [];
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i]!;
    if (a.startsWith('--')) {
      const eq = a.indexOf('=');
      if (eq > 0) values.set(a.slice(2, eq), a.slice(eq + 1));
      else if (i + 1 < argv.length && !argv[i + 1]!.startsWith('--')) values.set(a.slice(2), argv[++i]!);
      else flags.add(a.slice(2));
    } else rest.push(a);
  }
  return { flags, values, rest };
}

/** The machine a figure was measured on. */
export function machine(): { node: string; cpus: number; cpu: string; platform: string } {
  const c = cpus();
  return { node: process.version, cpus: c.length, cpu: c[0]?.model ?? 'unknown', platform: `${process.platform}-${process.arch}` };
}

/** A deterministic PRNG (mulberry32; common practice for reproducible benchmarks). */
export function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

let gc: (() => void) | undefined;

/**
 * Heap used plus array buffers after a full GC: what the process holds, for bytes-per-thing figures.
 * Exposes V8's gc() at run time (the --expose-gc flag set late, read back through a fresh context;
 * a documented V8 flag, used this way by common practice when the command line cannot be changed).
 */
export function heapBytes(): number {
  if (!gc) {
    setFlagsFromString('--expose-gc');
    gc = runInNewContext('gc') as () => void;
  }
  gc();
  gc();
  const m = process.memoryUsage();
  return m.heapUsed + m.arrayBuffers;
}
