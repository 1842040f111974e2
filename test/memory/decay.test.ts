// The forget gate: per-slot half-life decay and reinforcement on use, with exact expected values.

import { describe, expect, it } from 'vitest';
import { decayed, reinforce } from '../../src/memory/decay.js';

describe('decayed', () => {
  // Outside check — the meaning of "half-life": after exactly h clock units the strength is halved,
  // after 2h it is a quarter (common practice; s(t) = s0 * 2^(-t/h)).
  it('halves the strength after exactly one half-life and quarters it after two', () => {
    for (const h of [1, 3, 200, 7 * 24 * 3600]) {
      expect(decayed(1, 0, h, h)).toBe(0.5);
      expect(decayed(1, 0, h, 2 * h)).toBe(0.25);
      expect(decayed(0.8, 10, h, 10 + h)).toBeCloseTo(0.4, 15);
    }
  });

  it('follows s0 * 2^(-dt/h) between half-lives', () => {
    expect(decayed(1, 5, 10, 10)).toBeCloseTo(Math.SQRT1_2, 15); // half a half-life: 1/sqrt(2)
    expect(decayed(0.6, 0, 4, 1)).toBeCloseTo(0.6 * 2 ** -0.25, 15);
  });

  it('leaves the strength unchanged when no time has passed, when the clock runs backwards, or when h is not positive', () => {
    expect(decayed(0.7, 3, 10, 3)).toBe(0.7);
    expect(decayed(0.7, 3, 10, 1)).toBe(0.7);
    expect(decayed(0.7, 0, 0, 100)).toBe(0.7);
    expect(decayed(0.7, 0, Number.NaN, 100)).toBe(0.7);
  });
});

describe('reinforce', () => {
  const p = { gain: 0.3, growth: 1.5, maxHalfLife: 1000 };

  it('closes a fixed fraction of the gap to 1 and grows the half-life', () => {
    const r = reinforce(0.5, 200, p);
    expect(r.strength).toBeCloseTo(0.65, 15); // 0.5 + 0.5 * 0.3
    expect(r.halfLife).toBe(300);
  });

  it('keeps strength at most 1 and caps the half-life', () => {
    expect(reinforce(1, 900, p)).toEqual({ strength: 1, halfLife: 1000 });
    expect(reinforce(0.9, 800, { gain: 1, growth: 2, maxHalfLife: 1000 })).toEqual({ strength: 1, halfLife: 1000 });
  });

  it('with gain 0 and growth 1 changes nothing', () => {
    expect(reinforce(0.42, 17, { gain: 0, growth: 1, maxHalfLife: 1000 })).toEqual({ strength: 0.42, halfLife: 17 });
  });
});
