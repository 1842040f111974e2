// The drift verdict of `bench soak --steady`: ordinary least squares (textbook worked values) and the
// rise of the fitted line over the run against the series mean.
import { describe, expect, it } from 'vitest';
import { driftOf, fitLine } from '../../bench/lib/steady.js';

describe('drift verdict', () => {
  it('fits y = 2x + 1 exactly and a textbook set by least squares', () => {
    expect(fitLine([0, 1, 2, 3], [1, 3, 5, 7])).toEqual({ slope: 2, intercept: 1 });
    // x = 1..5, y = 2, 4, 5, 4, 5: slope = Sxy / Sxx = 6 / 10 = 0.6, intercept = 4 − 0.6 × 3 = 2.2.
    const f = fitLine([1, 2, 3, 4, 5], [2, 4, 5, 4, 5]);
    expect(f.slope).toBeCloseTo(0.6, 12);
    expect(f.intercept).toBeCloseTo(2.2, 12);
  });

  it('calls a series steady within 10 % rise over the run and drifting past it, per hour of slope', () => {
    // 100 MB rising 0.1 MB/s over 60 s: rise 6 MB against a mean of 103 MB = 5.8 %.
    const x = Array.from({ length: 7 }, (_, i) => i * 10);
    const steady = driftOf(x, x.map((t) => 100 + 0.1 * t));
    expect(steady.drifts).toBe(false);
    expect(steady.slope_per_hour).toBeCloseTo(360, 9);
    expect(steady.rise_fraction).toBeCloseTo(6 / 103, 4);
    const drifting = driftOf(x, x.map((t) => 100 + 0.5 * t));
    expect(drifting.drifts).toBe(true);
    expect(drifting.rise_fraction).toBeCloseTo(30 / 115, 4);
    expect(driftOf(x, x.map(() => 50)).drifts).toBe(false);
  });
});
