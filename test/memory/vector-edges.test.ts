// The vector helpers at their edges: lengths that are not a multiple of the unrolling, offsets,
// textbook cosines of vectors that are not unit length, zero vectors, and the top-k list's ties.

import { describe, expect, it } from 'vitest';
import { cosine, dot, dotSparse, normalizeInPlace, pushTopK, sparseOf } from '../../src/memory/vector.js';

const f32 = (...xs: number[]): Float32Array => Float32Array.from(xs);

describe('dot', () => {
  it('sums every product for each length 1..9 (the unrolled part and the tail)', () => {
    for (let n = 1; n <= 9; n++) {
      const a = f32(...Array.from({ length: n }, (_, j) => j + 1));
      const b = f32(...Array.from({ length: n }, (_, j) => 10 ** j));
      // 1*1 + 2*10 + 3*100 + ...: each product shows as its own decimal digit.
      const want = Array.from({ length: n }, (_, j) => (j + 1) * 10 ** j).reduce((x, y) => x + y, 0);
      expect(dot(a, b)).toBe(want);
    }
  });

  it('reads n entries of b from an offset, and n defaults to a\'s length', () => {
    const a = f32(1, 2, 3, 4, 5);
    const rows = f32(9, 9, 1, 1, 1, 1, 1, 7, 7);
    expect(dot(a, rows, 2)).toBe(15);
    expect(dot(a, rows, 2, 3)).toBe(6);
    expect(dot(a, rows, 0, 0)).toBe(0);
  });
});

describe('normalizeInPlace and cosine', () => {
  it('normalises to unit length and returns the old norm', () => {
    const v = f32(1, 2, 2);
    expect(normalizeInPlace(v)).toBe(3);
    expect([...v]).toEqual([1 / 3, 2 / 3, 2 / 3].map(Math.fround));
  });

  // Outside check: cos = a·b / (|a| |b|), the textbook definition.
  it('is the textbook cosine for vectors of any length, and 0 when either is zero', () => {
    expect(cosine([3, 4], [6, 8])).toBeCloseTo(1, 15);
    expect(cosine([1, 0], [0, 5])).toBe(0);
    expect(cosine([1, 2, 3], [4, 5, 6])).toBeCloseTo(32 / Math.sqrt(14 * 77), 15);
    expect(cosine([2, 0], [-1, 0])).toBe(-1);
    expect(cosine([0, 0], [1, 2])).toBe(0);
    expect(cosine([1, 2], [0, 0])).toBe(0);
    expect(cosine([], [])).toBe(0);
  });
});

describe('pushTopK', () => {
  it('does nothing for k <= 0', () => {
    const idx: number[] = [];
    const score: number[] = [];
    pushTopK(idx, score, 0, 1, 0);
    pushTopK(idx, score, 1, 1, -1);
    expect([idx, score]).toEqual([[], []]);
  });

  it('keeps the first of equal scores by default, the later index with laterWins', () => {
    const first: [number[], number[]] = [[], []];
    const later: [number[], number[]] = [[], []];
    for (const [i, s] of [[0, 0.5], [1, 0.7], [2, 0.5], [3, 0.5]] as const) {
      pushTopK(first[0], first[1], i, s, 3);
      pushTopK(later[0], later[1], i, s, 3, true);
    }
    expect(first[0]).toEqual([1, 0, 2]);
    expect(later[0]).toEqual([1, 3, 2]);
    expect(later[1]).toEqual([0.7, 0.5, 0.5]);
  });

  it('with laterWins an earlier index offered later does not pass an equal score', () => {
    const idx: number[] = [];
    const score: number[] = [];
    pushTopK(idx, score, 5, 0.5, 2, true);
    pushTopK(idx, score, 4, 0.5, 2, true);
    pushTopK(idx, score, 3, 0.5, 2, true);
    expect(idx).toEqual([5, 4]);
    pushTopK(idx, score, 6, 0.5, 2, true);
    expect(idx).toEqual([6, 5]);
  });

  it('a newcomer better than all goes first and pushes the last one out', () => {
    const idx = [1, 2];
    const score = [0.9, 0.8];
    pushTopK(idx, score, 3, 0.95, 2);
    expect([idx, score]).toEqual([[3, 1], [0.95, 0.9]]);
    pushTopK(idx, score, 4, 0.1, 2);
    expect([idx, score]).toEqual([[3, 1], [0.95, 0.9]]);
    pushTopK(idx, score, 5, 0.92, 2);
    expect([idx, score]).toEqual([[3, 5], [0.95, 0.92]]);
  });
});

describe('sparseOf and dotSparse', () => {
  it('takes exactly a quarter non-zero as sparse, one more as dense', () => {
    expect(sparseOf(f32(1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 1))).not.toBeNull(); // 2 of 12
    expect(sparseOf(f32(1, 0, 0, 1, 0, 0, 0, 0, 0, 0, 0, 1))).not.toBeNull(); // 3 of 12
    expect(sparseOf(f32(1, 1, 0, 1, 0, 0, 0, 0, 0, 0, 0, 1))).toBeNull(); // 4 of 12
    const empty = sparseOf(new Float32Array(6))!;
    expect([empty.idx.length, empty.split]).toEqual([0, 0]);
  });

  it('puts the split after the last entry below n rounded down to four', () => {
    expect(sparseOf(f32(0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 2))!.split).toBe(1); // n 16: no tail
    expect(sparseOf(f32(0, 0, 0, 3, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 2))!.split).toBe(2);
    expect(sparseOf(f32(0, 0, 0, 3, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 2))!.split).toBe(1); // n 18: 16, 17 tail
    const s = sparseOf(f32(0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 5, 0))!;
    expect([...s.idx, s.split]).toEqual([16, 0]);
  });

  it('adds each entry into its own lane and the tail after them', () => {
    // Entries at lanes 0..3 and in the tail, each times a distinct power of ten.
    const a = new Float32Array(22);
    a[0] = 1; a[5] = 2; a[10] = 3; a[15] = 4; a[21] = 5;
    const b = new Float32Array(30).map((_, j) => 10 ** (j % 8));
    const s = sparseOf(a)!;
    expect(s.split).toBe(4);
    for (const off of [0, 3, 8]) expect(dotSparse(s, b, off)).toBe(dot(a, b, off, 22));
    expect(dotSparse(s, b, 0)).toBe(1 * 1 + 2 * 1e5 + 3 * 1e2 + 4 * 1e7 + 5 * 1e5);
  });
});
