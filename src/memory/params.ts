// The memory math's tunable parameters, their defaults in one constant, and their validation. The
// middleware resolves these once at construction; `sweep` varies them.

import { ConfigError, describeValue } from '../errors.js';
import { DEFAULT_GATE_WEIGHTS, type GateWeights } from './gate.js';

export interface ReadParams {
  /** Key strength beta: weight of cosine similarity in the score. @default 10 */
  beta: number;
  /** Weight gamma of the normalised BM25 score. @default 4 */
  gamma: number;
  /** Weight delta of ln(strength). @default 0.5 */
  delta: number;
  /** Softmax temperature tau. @default 1 */
  temperature: number;
  /** Items returned at most. @default 5 */
  k: number;
  /** Items below this attention weight are dropped (the best item is always kept on a hit). @default 0.02 */
  minWeight: number;
  /** Stop adding items once their cumulative weight reaches this mass. @default 0.99 */
  maxMass: number;
  /**
   * A slot is relevant when its cosine reaches this... The default, -1, lets every slot compete: a
   * read returns the top-k of working memory by attention, and `trace.result` says whether any of it
   * matched well (a hit). Raise it to return only close matches. @default -1
   */
  minCosine: number;
  /**
   * ...or its raw BM25 score reaches this. @default 0.25 — raw BM25 shrinks with the number of slots
   * (IDF of a term in 2 of 3 slots is 0.47), so 1 ignored single-word matches in small sessions.
   */
  minLexical: number;
  /** A read is a hit when its best relevant slot has cosine >= hitCosine or BM25 >= minLexical. @default 0.3 */
  hitCosine: number;
  /** Reads performed (1 = single hop; 2+ = multi-hop with q' = normalize(q + sum a_i v_i)). @default 1 */
  hops: number;
  /** When to search the archive: on a slot miss, on every read, or never. @default 'miss' */
  archive: 'miss' | 'always' | 'never';
  /** Archive items fetched per read. @default 3 */
  archiveK: number;
  /** Archive items below this cosine are ignored unless they match lexically. @default 0.3 */
  archiveMinCosine: number;
  /** Return superseded values ranked by their own score (history queries). @default false */
  history: boolean;
}

export interface WriteParams {
  /** Candidates with a gate score below this are dropped. @default 0.6 */
  gateThreshold: number;
  /** Gate weights (see gate.ts). */
  gateWeights: GateWeights;
  /** Key strength beta used for content addressing on write. @default 10 */
  beta: number;
  /** Overwrite when the best key cosine reaches this. @default 0.8 */
  overwriteThreshold: number;
  /** How far an overwritten slot's key moves toward the new key (0 keeps it, 1 replaces it). @default 0.5 */
  keyBlend: number;
  /** Initial half-life in clock units. @default 200 (turns) */
  halfLife: number;
  /** Slots whose strength falls below this are evicted as `decayed`. @default 0.02 */
  strengthFloor: number;
  /** Evict slots older than this many ms as `expired`; 0 never expires. @default 0 */
  maxAgeMs: number;
  /** Reinforcement on use: s' = s + (1 - s) * gain. @default 0.3 */
  reinforceGain: number;
  /** Half-life multiplier on use. @default 1.5 */
  halfLifeGrowth: number;
  /** Half-life cap in clock units. @default 20000 */
  maxHalfLife: number;
}

export interface MemoryParams {
  /** Slots per session. @default 64 */
  capacity: number;
  /** Clock of decay: messages seen in the session, or seconds. @default 'turns' */
  decayUnit: 'turns' | 'seconds';
  read: ReadParams;
  write: WriteParams;
}

export const READ_DEFAULTS: ReadParams = {
  beta: 10,
  gamma: 4,
  delta: 0.5,
  temperature: 1,
  k: 5,
  minWeight: 0.02,
  maxMass: 0.99,
  minCosine: -1,
  minLexical: 0.25,
  hitCosine: 0.3,
  hops: 1,
  archive: 'miss',
  archiveK: 3,
  archiveMinCosine: 0.3,
  history: false,
};

export const WRITE_DEFAULTS: WriteParams = {
  gateThreshold: 0.6,
  gateWeights: DEFAULT_GATE_WEIGHTS,
  beta: 10,
  overwriteThreshold: 0.8,
  keyBlend: 0.5,
  halfLife: 200,
  strengthFloor: 0.02,
  maxAgeMs: 0,
  reinforceGain: 0.3,
  halfLifeGrowth: 1.5,
  maxHalfLife: 20_000,
};

/** Half-life default when `decayUnit: 'seconds'`: 7 days (common practice for chat memory, not sourced). */
export const SECONDS_HALF_LIFE = 7 * 24 * 3600;

export const MEMORY_DEFAULTS: MemoryParams = {
  capacity: 64,
  decayUnit: 'turns',
  read: READ_DEFAULTS,
  write: WRITE_DEFAULTS,
};

export type MemoryParamsInput = Partial<Omit<MemoryParams, 'read' | 'write'>> & {
  read?: Partial<ReadParams>;
  write?: Partial<Omit<WriteParams, 'gateWeights'>> & { gateWeights?: Partial<GateWeights> };
};

function num(name: string, v: unknown, min: number, max: number, opts: { integer?: boolean; openMin?: boolean } = {}): number {
  const ok =
    typeof v === 'number' && Number.isFinite(v) && (opts.openMin ? v > min : v >= min) && v <= max && (!opts.integer || Number.isInteger(v));
  if (!ok) {
    const range = `${opts.openMin ? '(' : '['}${min}, ${max}]`;
    throw new ConfigError(`option ${name} must be ${opts.integer ? 'an integer' : 'a number'} in ${range}, got ${describeValue(v)}`, {
      details: { option: name, value: v, expected: range },
    });
  }
  return v as number;
}

/** Merges input over the defaults and validates every field; never mutates the input. */
export function resolveMemoryParams(input: MemoryParamsInput = {}): MemoryParams {
  const decayUnit = input.decayUnit ?? MEMORY_DEFAULTS.decayUnit;
  if (decayUnit !== 'turns' && decayUnit !== 'seconds') {
    throw new ConfigError(`option decayUnit must be 'turns' or 'seconds', got ${describeValue(decayUnit)}`, { details: { option: 'decayUnit' } });
  }
  const read: ReadParams = { ...READ_DEFAULTS, ...input.read };
  const writeDefaults = decayUnit === 'seconds' ? { ...WRITE_DEFAULTS, halfLife: SECONDS_HALF_LIFE, maxHalfLife: 100 * SECONDS_HALF_LIFE } : WRITE_DEFAULTS;
  const write: WriteParams = {
    ...writeDefaults,
    ...input.write,
    gateWeights: { ...DEFAULT_GATE_WEIGHTS, ...input.write?.gateWeights },
  } as WriteParams;
  const p: MemoryParams = { capacity: input.capacity ?? MEMORY_DEFAULTS.capacity, decayUnit, read, write };
  num('capacity', p.capacity, 1, 4096, { integer: true });
  num('read.beta', read.beta, 0, 1000);
  num('read.gamma', read.gamma, 0, 1000);
  num('read.delta', read.delta, 0, 100);
  num('read.temperature', read.temperature, 0, 1000, { openMin: true });
  num('read.k', read.k, 1, 1000, { integer: true });
  num('read.minWeight', read.minWeight, 0, 1);
  num('read.maxMass', read.maxMass, 0, 1, { openMin: true });
  num('read.minCosine', read.minCosine, -1, 1);
  num('read.minLexical', read.minLexical, 0, 1000);
  num('read.hitCosine', read.hitCosine, -1, 1);
  num('read.hops', read.hops, 1, 5, { integer: true });
  if (!['miss', 'always', 'never'].includes(read.archive)) {
    throw new ConfigError(`option read.archive must be 'miss', 'always' or 'never', got ${describeValue(read.archive)}`, { details: { option: 'read.archive' } });
  }
  num('read.archiveK', read.archiveK, 0, 1000, { integer: true });
  num('read.archiveMinCosine', read.archiveMinCosine, -1, 1);
  num('write.gateThreshold', write.gateThreshold, 0, 1);
  num('write.beta', write.beta, 0, 1000);
  num('write.overwriteThreshold', write.overwriteThreshold, -1, 1);
  num('write.keyBlend', write.keyBlend, 0, 1);
  num('write.halfLife', write.halfLife, 0, Number.MAX_SAFE_INTEGER, { openMin: true });
  num('write.strengthFloor', write.strengthFloor, 0, 1);
  num('write.maxAgeMs', write.maxAgeMs, 0, Number.MAX_SAFE_INTEGER);
  num('write.reinforceGain', write.reinforceGain, 0, 1);
  num('write.halfLifeGrowth', write.halfLifeGrowth, 1, 100);
  num('write.maxHalfLife', write.maxHalfLife, write.halfLife, Number.MAX_SAFE_INTEGER);
  for (const [k, v] of Object.entries(write.gateWeights)) num(`write.gateWeights.${k}`, v, -100, 100);
  return p;
}
