// The memory parameters: defaults merged under the caller's values, and every field checked at its
// range's edges (just outside, at, just inside), with an error that names the option, the range and
// the value received.

import { describe, expect, it } from 'vitest';
import { ConfigError, ErrorCodes } from '../../src/errors.js';
import { DEFAULT_GATE_WEIGHTS } from '../../src/memory/gate.js';
import {
  MEMORY_DEFAULTS, READ_DEFAULTS, SECONDS_HALF_LIFE, WRITE_DEFAULTS, resolveMemoryParams, type MemoryParamsInput,
} from '../../src/memory/params.js';

const MAX = Number.MAX_SAFE_INTEGER;

/** [option, min, max, integer, open at min] as the options are documented to accept them. */
const RANGES: Array<[string, number, number, boolean, boolean]> = [
  ['capacity', 1, 4096, true, false],
  ['read.beta', 0, 1000, false, false],
  ['read.gamma', 0, 1000, false, false],
  ['read.delta', 0, 100, false, false],
  ['read.temperature', 0, 1000, false, true],
  ['read.k', 1, 1000, true, false],
  ['read.minWeight', 0, 1, false, false],
  ['read.maxMass', 0, 1, false, true],
  ['read.minCosine', -1, 1, false, false],
  ['read.minLexical', 0, 1000, false, false],
  ['read.hitCosine', -1, 1, false, false],
  ['read.hops', 1, 5, true, false],
  ['read.hitCoverage', 0, 100, false, false],
  ['read.hitMargin', 1, 1000, false, false],
  ['read.slotPrior', 0, 100, false, false],
  ['read.provenanceWeight', 0, 100, false, false],
  ['read.othersWeight', 0, 10, false, false],
  ['read.recencyBoost', 0, 100, false, false],
  ['read.recencyHalfLife', 0, MAX, false, true],
  ['read.denseWeight', 0, 100, false, false],
  ['read.rrfK', 0, 10_000, false, false],
  ['read.k1', 0, 100, false, false],
  ['read.b', 0, 1, false, false],
  ['read.neighbourWeight', 0, 10, false, false],
  ['read.speakerBoost', 0, 100, false, false],
  ['read.nameWeight', 0, 10, false, false],
  ['read.dateWeight', 0, 100, false, false],
  ['read.temporalBoost', 0, 100, false, false],
  ['read.replyWeight', 0, 10, false, false],
  ['read.questionWeight', 0, 10, false, false],
  ['read.minShare', 0, 1, false, false],
  ['read.logbookLimit', 0, 10_000, true, false],
  ['write.gateThreshold', 0, 1, false, false],
  ['write.beta', 0, 1000, false, false],
  ['write.overwriteThreshold', -1, 1, false, false],
  ['write.keyBlend', 0, 1, false, false],
  ['write.halfLife', 0, MAX, false, true],
  ['write.strengthFloor', 0, 1, false, false],
  ['write.maxAgeMs', 0, MAX, false, false],
  ['write.reinforceGain', 0, 1, false, false],
  ['write.halfLifeGrowth', 1, 100, false, false],
  ['write.gateWeights.bias', -100, 100, false, false],
];

/** The input that sets one option ("read.k", "write.gateWeights.bias", "capacity") to `v`. */
function inputWith(name: string, v: unknown): MemoryParamsInput {
  const parts = name.split('.');
  const out: Record<string, unknown> = {};
  let at = out;
  parts.forEach((p, i) => {
    if (i === parts.length - 1) at[p] = v;
    else at = (at[p] = {}) as Record<string, unknown>;
  });
  // A half-life above the default cap needs a cap to match.
  if (name === 'write.halfLife') (out.write as Record<string, unknown>).maxHalfLife = MAX;
  return out as MemoryParamsInput;
}

function valueOf(p: unknown, name: string): unknown {
  return name.split('.').reduce((o, k) => (o as Record<string, unknown>)[k], p);
}

function errorOf(f: () => unknown): ConfigError {
  try {
    f();
  } catch (e) {
    return e as ConfigError;
  }
  throw new Error('expected a ConfigError');
}

describe('resolveMemoryParams', () => {
  it('gives the documented defaults when nothing is passed', () => {
    const p = resolveMemoryParams();
    expect(p).toEqual({ capacity: 64, decayUnit: 'turns', read: READ_DEFAULTS, write: WRITE_DEFAULTS });
    expect(p).toEqual(MEMORY_DEFAULTS);
    expect(p.read).not.toBe(READ_DEFAULTS); // a copy: a caller changing it changes no default
    expect(p.write.gateWeights).toEqual(DEFAULT_GATE_WEIGHTS);
    expect(p.write.gateWeights).not.toBe(DEFAULT_GATE_WEIGHTS);
    expect(resolveMemoryParams({})).toEqual(p);
  });

  it('merges the caller\'s fields over the defaults field by field and never mutates the input', () => {
    const input: MemoryParamsInput = { capacity: 8, read: { k: 3 }, write: { halfLife: 50, gateWeights: { bias: -1 } } };
    const frozen = JSON.stringify(input);
    const p = resolveMemoryParams(input);
    expect(JSON.stringify(input)).toBe(frozen);
    expect(p.capacity).toBe(8);
    expect(p.read).toEqual({ ...READ_DEFAULTS, k: 3 });
    expect(p.write).toEqual({ ...WRITE_DEFAULTS, halfLife: 50, gateWeights: { ...DEFAULT_GATE_WEIGHTS, bias: -1 } });
  });

  it('with decayUnit "seconds" the half-life defaults to 7 days and its cap to 100 of them; an own half-life wins', () => {
    expect(SECONDS_HALF_LIFE).toBe(604_800);
    const p = resolveMemoryParams({ decayUnit: 'seconds' });
    expect(p.decayUnit).toBe('seconds');
    expect(p.write.halfLife).toBe(604_800);
    expect(p.write.maxHalfLife).toBe(60_480_000);
    expect(p.write.strengthFloor).toBe(WRITE_DEFAULTS.strengthFloor);
    expect(resolveMemoryParams({ decayUnit: 'seconds', write: { halfLife: 60 } }).write.halfLife).toBe(60);
    expect(resolveMemoryParams({ decayUnit: 'turns' }).write.halfLife).toBe(200);
  });

  it('refuses a decay unit other than turns or seconds, naming it', () => {
    const e = errorOf(() => resolveMemoryParams({ decayUnit: 'days' as 'turns' }));
    expect(e).toBeInstanceOf(ConfigError);
    expect(e.code).toBe(ErrorCodes.CONFIG);
    expect(e.message).toBe(`option decayUnit must be 'turns' or 'seconds', got "days"`);
    expect(e.details).toEqual({ option: 'decayUnit' });
  });

  it('refuses a history flag that is not a boolean and tiers outside both / slots / logbook', () => {
    const h = errorOf(() => resolveMemoryParams({ read: { history: 1 as unknown as boolean } }));
    expect(h.message).toBe('option read.history must be a boolean, got 1');
    expect(h.details).toEqual({ option: 'read.history' });
    for (const tiers of ['both', 'slots', 'logbook'] as const) expect(resolveMemoryParams({ read: { tiers } }).read.tiers).toBe(tiers);
    const t = errorOf(() => resolveMemoryParams({ read: { tiers: 'all' as 'both' } }));
    expect(t.message).toBe(`option read.tiers must be 'both', 'slots' or 'logbook', got "all"`);
    expect(t.details).toEqual({ option: 'read.tiers' });
  });

  for (const [name, min, max, integer, openMin] of RANGES) {
    const range = `${openMin ? '(' : '['}${min}, ${max}]`;
    const what = integer ? 'an integer' : 'a number';
    const step = integer ? 1 : Math.max(1e-6, Math.abs(max) * 1e-9);
    it(`${name}: accepts ${range}${integer ? ' (integers)' : ''}, refuses just outside it`, () => {
      const inside = openMin ? min + step : min;
      expect(valueOf(resolveMemoryParams(inputWith(name, inside)), name)).toBe(inside);
      expect(valueOf(resolveMemoryParams(inputWith(name, max)), name)).toBe(max);
      const refused = [openMin ? min : min - step, max + (max === MAX ? MAX : step), Number.NaN, Number.POSITIVE_INFINITY, '1'];
      if (integer) refused.push(min + 0.5);
      for (const v of refused) {
        const e = errorOf(() => resolveMemoryParams(inputWith(name, v)));
        expect(e).toBeInstanceOf(ConfigError);
        expect(e.message).toBe(`option ${name} must be ${what} in ${range}, got ${typeof v === 'string' ? JSON.stringify(v) : String(v)}`);
        expect(e.details).toEqual({ option: name, value: v, expected: range });
      }
    });
  }

  it('write.maxHalfLife: at least the half-life in force', () => {
    expect(resolveMemoryParams({ write: { halfLife: 300, maxHalfLife: 300 } }).write.maxHalfLife).toBe(300);
    const e = errorOf(() => resolveMemoryParams({ write: { halfLife: 300, maxHalfLife: 299 } }));
    expect(e.message).toBe(`option write.maxHalfLife must be a number in [300, ${MAX}], got 299`);
    expect(errorOf(() => resolveMemoryParams({ write: { maxHalfLife: 199 } })).message).toContain('in [200, ');
  });

  it('checks every gate weight by its own name', () => {
    for (const k of Object.keys(DEFAULT_GATE_WEIGHTS)) {
      const e = errorOf(() => resolveMemoryParams({ write: { gateWeights: { [k]: 101 } } }));
      expect(e.message).toBe(`option write.gateWeights.${k} must be a number in [-100, 100], got 101`);
    }
  });
});
