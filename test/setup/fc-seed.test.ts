// The fast-check seed helper: TIDEMARK_FC_SEED parsing, and every file's properties run under the
// run's seed (so a printed seed replays the same cases).
import fc from 'fast-check';
import { describe, expect, inject, it } from 'vitest';
import { DEFAULT_FC_SEED, seedFromEnv } from './fc-seed.global.js';

describe('fast-check seed', () => {
  it('is fixed by default, an integer when given, drawn when "random", refused otherwise', () => {
    expect(seedFromEnv(undefined)).toBe(DEFAULT_FC_SEED);
    expect(seedFromEnv('')).toBe(DEFAULT_FC_SEED);
    expect(seedFromEnv('42')).toBe(42);
    expect(seedFromEnv('-7')).toBe(-7);
    expect(Number.isInteger(seedFromEnv('random'))).toBe(true);
    expect(() => seedFromEnv('4.5')).toThrow(/TIDEMARK_FC_SEED/);
    expect(() => seedFromEnv('abc')).toThrow(/TIDEMARK_FC_SEED/);
  });

  it("is the run's seed in this worker, and the same seed draws the same cases", () => {
    const seed = inject('fcSeed');
    expect(fc.readConfigureGlobal().seed).toBe(seed);
    const draw = () => fc.sample(fc.integer(), { numRuns: 5 });
    expect(draw()).toEqual(draw());
  });
});
