// The forget gate: each slot's strength decays with its own half-life,
//   s(t) = s(t0) * 2^(-(t - t0) / h),
// and a slot that is read and used is reinforced and its half-life grows (the spacing effect;
// compare half-life regression, Settles & Meeder 2016, "A Trainable Spaced Repetition Model").

/** Strength at clock `now` of a slot whose strength was `s0` at clock `t0`, with half-life `h`. */
export function decayed(s0: number, t0: number, h: number, now: number): number {
  if (!(h > 0)) return s0;
  const dt = now - t0;
  if (dt <= 0) return s0;
  return s0 * Math.pow(2, -dt / h);
}

export interface ReinforceParams {
  /** Fraction of the gap to 1 closed on each use: s' = s + (1 - s) * gain. */
  gain: number;
  /** Half-life multiplier on each use. */
  growth: number;
  /** Upper bound of a half-life. */
  maxHalfLife: number;
}

/** New strength and half-life after a slot is used at strength `s` (already decayed to now). */
export function reinforce(s: number, h: number, p: ReinforceParams): { strength: number; halfLife: number } {
  const strength = Math.min(1, s + (1 - s) * p.gain);
  const halfLife = Math.min(p.maxHalfLife, h * p.growth);
  return { strength, halfLife };
}
