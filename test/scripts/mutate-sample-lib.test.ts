// The sampled mutation score's arithmetic (scripts/mutate-sample-lib.mjs): the draw is uniform and
// nested, spans nest as Stryker's ranges expect, and the ratio estimate's interval matches a worked
// example and, for clusters of one mutant each, the textbook interval of a proportion.

import { describe, expect, it } from 'vitest';
import { draw, inside, keyOf, nodeKey, rangeOf, ratioInterval, roomOf } from '../../scripts/mutate-sample-lib.mjs';
import { rng } from '../../bench/lib/stats.js';

const span = (a: number, b: number, c: number, d: number) => ({ start: { line: a, column: b }, end: { line: c, column: d } });

describe('draw', () => {
  it('takes each item with the same chance (chi-square over 30,000 draws, seed 17)', () => {
    const items = Array.from({ length: 10 }, (_, i) => i);
    const counts = new Array<number>(10).fill(0);
    const random = rng(17);
    const reps = 30_000;
    for (let r = 0; r < reps; r++) for (const x of draw(items, 3, random)) counts[x]!++;
    const expected = (reps * 3) / 10;
    const chi2 = counts.reduce((a, c) => a + (c - expected) ** 2 / expected, 0);
    // 9 degrees of freedom: the 0.999 quantile is 27.88 (chi-square table, from memory).
    expect(chi2).toBeLessThan(27.88);
    // Each draw holds distinct items.
    const one = draw(items, 10, rng(3));
    expect(new Set(one).size).toBe(10);
    expect([...one].sort((a, b) => a - b)).toEqual(items);
  });

  it('draws a smaller size as the start of a larger one with the same seed, and at most every item', () => {
    const items = Array.from({ length: 50 }, (_, i) => `n${i}`);
    const small = draw(items, 5, rng(9));
    const large = draw(items, 20, rng(9));
    expect(large.slice(0, 5)).toEqual(small);
    expect(draw(items, 80, rng(9))).toHaveLength(50);
    expect(draw(items, 0, rng(9))).toEqual([]);
    // The input is not reordered.
    expect(items[0]).toBe('n0');
    expect(items[49]).toBe('n49');
  });
});

describe('spans, keys and rooms', () => {
  it('nests spans inclusively at both ends and compares columns only on the same line', () => {
    const outer = span(3, 4, 7, 10);
    expect(inside(outer, outer)).toBe(true);
    expect(inside(outer, span(3, 4, 3, 9))).toBe(true);
    expect(inside(outer, span(3, 3, 5, 0))).toBe(false);
    expect(inside(outer, span(6, 0, 7, 11))).toBe(false);
    expect(inside(outer, span(4, 0, 6, 99))).toBe(true);
    expect(inside(outer, span(2, 50, 4, 0))).toBe(false);
    expect(inside(outer, span(5, 0, 8, 0))).toBe(false);
  });

  it('writes Stryker ranges with lines from 1 and columns as given, and keys that tell mutants apart', () => {
    const location = span(0, 2, 4, 17);
    expect(rangeOf({ fileName: 'src/memory/gate.ts', location })).toBe('src/memory/gate.ts:1:2-5:17');
    expect(nodeKey('src/memory/gate.ts', location)).toBe('src/memory/gate.ts|0:2-4:17');
    expect(keyOf('a.ts', location, { mutatorName: 'EqualityOperator', replacement: 'x <= y' })).not.toBe(keyOf('a.ts', location, { mutatorName: 'EqualityOperator', replacement: 'x > y' }));
  });

  it('names the room of a file by its first two folders, top-level files together', () => {
    expect(roomOf('src/memory/write.ts')).toBe('src/memory');
    expect(roomOf('adapters/redis/codec.ts')).toBe('adapters/redis');
    expect(roomOf('src/errors.ts')).toBe('src (top level)');
  });
});

describe('ratioInterval', () => {
  it('matches a worked example of the ratio estimator', () => {
    // Four drawn nodes: 1 of 2, 2 of 2, 0 of 1 and 3 of 3 mutants detected. r = 6 / 8 = 0.75, mean size 2;
    // residuals d − r·m: −0.5, 0.5, −0.75, 0.75; s² = (0.25 + 0.25 + 0.5625 + 0.5625) / 3 = 0.541667;
    // half-width 1.96 · √(s² / 4) / 2 = 0.360630 (worked by hand).
    const got = ratioInterval([{ detected: 1, total: 2 }, { detected: 2, total: 2 }, { detected: 0, total: 1 }, { detected: 3, total: 3 }]);
    expect(got.score).toBe(0.75);
    expect(got.lo).toBeCloseTo(0.75 - 0.36063, 5);
    expect(got.hi).toBe(1);
  });

  it('is the normal interval of a proportion when every cluster is one mutant', () => {
    // With m = 1 each, s² = n·p(1−p)/(n−1) and the half-width is z·√(p(1−p)/(n−1)) (Cochran 1977, ch. 3, from memory).
    const clusters = [...Array.from({ length: 70 }, () => ({ detected: 1, total: 1 })), ...Array.from({ length: 30 }, () => ({ detected: 0, total: 1 }))];
    const got = ratioInterval(clusters);
    const half = 1.96 * Math.sqrt((0.7 * 0.3) / 99);
    expect(got.score).toBeCloseTo(0.7, 12);
    expect(got.lo).toBeCloseTo(0.7 - half, 12);
    expect(got.hi).toBeCloseTo(0.7 + half, 12);
    // A wider z gives a wider interval.
    expect(ratioInterval(clusters, 2.576).lo).toBeLessThan(got.lo);
  });

  it('gives no interval below two clusters and a score of 0 with nothing scored', () => {
    expect(ratioInterval([])).toEqual({ score: 0, lo: 0, hi: 1 });
    expect(ratioInterval([{ detected: 2, total: 3 }])).toEqual({ score: 2 / 3, lo: 0, hi: 1 });
    expect(ratioInterval([{ detected: 0, total: 0 }, { detected: 0, total: 0 }])).toEqual({ score: 0, lo: 0, hi: 1 });
    // All detected: the interval is the point.
    expect(ratioInterval([{ detected: 2, total: 2 }, { detected: 1, total: 1 }])).toEqual({ score: 1, lo: 1, hi: 1 });
  });
});
