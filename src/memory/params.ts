// The memory math's tunable parameters, their defaults in one constant, and their validation. The
// middleware resolves these once at construction; `sweep` varies them.

import { ConfigError, describeValue } from '../errors.js';
import { DEFAULT_GATE_WEIGHTS, type GateWeights } from './gate.js';

export interface ReadParams {
  /** Key strength beta: weight of cosine similarity in the slot attention score. @default 10 */
  beta: number;
  /** Weight gamma of the normalised BM25 score in the slot attention score. @default 4 */
  gamma: number;
  /** Weight delta of ln(strength) in the slot attention score. @default 0.5 */
  delta: number;
  /** Softmax temperature tau of the slot attention. @default 1 */
  temperature: number;
  /** Items returned at most, over both tiers. @default 8 */
  k: number;
  /** Slots below this attention weight are not counted as attended (trace and multi-hop). @default 0.02 */
  minWeight: number;
  /** Multi-hop reads stop adding slots once their cumulative attention reaches this mass. @default 0.99 */
  maxMass: number;
  /** Slots whose cosine is below this take no part in multi-hop reads... @default -1 */
  minCosine: number;
  /** ...unless their raw BM25 over the slots reaches this. @default 0.25 */
  minLexical: number;
  /**
   * With a dense list (a semantic embedder), the top item is also a hit when its cosine reaches this.
   * @default 0.5 — sentence-embedding cosines of unrelated chat turns sit mostly below 0.4 (common practice).
   */
  hitCosine: number;
  /** Reads of working memory (1 = single hop; 2+ = multi-hop with q' = normalize(q + sum a_i v_i)). @default 1 */
  hops: number;
  /** Return superseded values ranked by their own score (history queries). @default false */
  history: boolean;
  /**
   * Which tiers a read ranks: both (the default), working memory alone, or the logbook alone — for
   * ablations (`sweep`) and for bots that want only one of them. @default 'both'
   */
  tiers: 'both' | 'slots' | 'logbook';
  /**
   * The top item is a hit when its coverage — its own BM25 over the query's maximum (the sum of the
   * query terms' IDF) — reaches this, and it stands clear of the next item (`hitMargin`). Calibrated on
   * the project's checks: see the README for the precision this gives. @default 0.3
   */
  hitCoverage: number;
  /** ...and its score is at least hitMargin × the second item's. @default 1.3 */
  hitMargin: number;
  /** A slot's lexical score × (1 + slotPrior × strength): the working-memory tier's precedence. @default 0.5 */
  slotPrior: number;
  /** A slot also scores this share of the best lexical score among the turns it came from. @default 0.5 */
  provenanceWeight: number;
  /** A fact about someone else ("my brother wants ...") scores × othersWeight unless the query names them. @default 0.5 */
  othersWeight: number;
  /**
   * Working memory's precedence for what was just said: a slot written `age` clock units ago scores
   * × (1 + recencyBoost × 2^(−age / recencyHalfLife)), so of two slots on one topic the newer leads. @default 1
   */
  recencyBoost: number;
  /** @default 20 (clock units: turns, or seconds with decayUnit 'seconds') */
  recencyHalfLife: number;
  /** Weight of the dense list in reciprocal rank fusion; used only when there is one (see logbook.vectors). @default 1 */
  denseWeight: number;
  /** The constant of reciprocal rank fusion (60 in Cormack et al. 2009). @default 60 */
  rrfK: number;
  /** BM25 k1 (term-frequency saturation) for slots and logbook alike. @default 1.2 */
  k1: number;
  /** BM25 b (length normalisation). @default 0.75 */
  b: number;
  /** Share of each neighbouring turn's score a logbook turn receives. @default 0.3 */
  neighbourWeight: number;
  /** An item said by (or about the facts of) a person the query names scores × (1 + speakerBoost). @default 1 */
  speakerBoost: number;
  /** Weight of a speaker's name as a plain query term. @default 0.2 */
  nameWeight: number;
  /** Weight of a query's resolved-date terms. @default 1 */
  dateWeight: number;
  /** On a "when" question, a turn that mentions a date scores × (1 + temporalBoost). @default 0.3 */
  temporalBoost: number;
  /** A bot's own reply (assistant turn, no speaker named) in the logbook scores × replyWeight. @default 0.4 */
  replyWeight: number;
  /** A logbook turn that only asks for information scores × questionWeight (it is context, rarely the fact). @default 0.7 */
  questionWeight: number;
  /** Items scoring below this share of the best item's score are left out (noise in a prompt). @default 0.1 */
  minShare: number;
  /** Logbook entries taken from the lexical ranking per read (before merging). @default 50 */
  logbookLimit: number;
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
  k: 8,
  minWeight: 0.02,
  maxMass: 0.99,
  minCosine: -1,
  minLexical: 0.25,
  hitCosine: 0.5,
  hops: 1,
  history: false,
  tiers: 'both',
  hitCoverage: 0.3,
  hitMargin: 1.3,
  slotPrior: 0.5,
  provenanceWeight: 0.5,
  othersWeight: 0.5,
  recencyBoost: 1,
  recencyHalfLife: 20,
  denseWeight: 1,
  rrfK: 60,
  k1: 1.2,
  b: 0.75,
  neighbourWeight: 0.3,
  speakerBoost: 1,
  nameWeight: 0.2,
  dateWeight: 1,
  temporalBoost: 0.3,
  replyWeight: 0.4,
  questionWeight: 0.7,
  minShare: 0.1,
  logbookLimit: 50,
}

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
  if (typeof read.history !== 'boolean') throw new ConfigError(`option read.history must be a boolean, got ${describeValue(read.history)}`, { details: { option: 'read.history' } });
  if (!['both', 'slots', 'logbook'].includes(read.tiers)) {
    throw new ConfigError(`option read.tiers must be 'both', 'slots' or 'logbook', got ${describeValue(read.tiers)}`, { details: { option: 'read.tiers' } });
  }
  num('read.hitCoverage', read.hitCoverage, 0, 100);
  num('read.hitMargin', read.hitMargin, 1, 1000);
  num('read.slotPrior', read.slotPrior, 0, 100);
  num('read.provenanceWeight', read.provenanceWeight, 0, 100);
  num('read.othersWeight', read.othersWeight, 0, 10);
  num('read.recencyBoost', read.recencyBoost, 0, 100);
  num('read.recencyHalfLife', read.recencyHalfLife, 0, Number.MAX_SAFE_INTEGER, { openMin: true });
  num('read.denseWeight', read.denseWeight, 0, 100);
  num('read.rrfK', read.rrfK, 0, 10_000);
  num('read.k1', read.k1, 0, 100);
  num('read.b', read.b, 0, 1);
  num('read.neighbourWeight', read.neighbourWeight, 0, 10);
  num('read.speakerBoost', read.speakerBoost, 0, 100);
  num('read.nameWeight', read.nameWeight, 0, 10);
  num('read.dateWeight', read.dateWeight, 0, 100);
  num('read.temporalBoost', read.temporalBoost, 0, 100);
  num('read.replyWeight', read.replyWeight, 0, 10);
  num('read.questionWeight', read.questionWeight, 0, 10);
  num('read.minShare', read.minShare, 0, 1);
  num('read.logbookLimit', read.logbookLimit, 0, 10_000, { integer: true });
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
