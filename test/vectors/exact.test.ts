import { describe, expect, it } from 'vitest';
import { ExactVectorIndex } from '../../src/vectors/exact.js';

const v = (...xs: number[]): Float32Array => {
  const n = Math.hypot(...xs);
  return Float32Array.from(xs.map((x) => x / n));
};

describe('ExactVectorIndex', () => {
  it('returns exact cosines, best first, cut at k', () => {
    const a = new ExactVectorIndex(3, 1);
    a.add('x', v(1, 0, 0));
    a.add('y', v(0, 1, 0));
    a.add('xy', v(1, 1, 0));
    a.add('z', v(0, 0, 1));
    const r = a.search(v(1, 0, 0), 3);
    expect(r.map((m) => m.id)).toEqual(['x', 'xy', 'y']);
    expect(r[0]!.cosine).toBeCloseTo(1, 6);
    expect(r[1]!.cosine).toBeCloseTo(Math.SQRT1_2, 6);
    expect(r[2]!.cosine).toBeCloseTo(0, 6);
    // (3, 4, 0)/5 against (1, 1, 0)/√2: 7 / (5√2).
    expect(a.search(v(3, 4, 0), 1)).toEqual([{ id: 'xy', cosine: expect.closeTo(7 / (5 * Math.SQRT2), 6) }]);
    expect(a.search(v(0, 0, -1), 4).at(-1)).toEqual({ id: 'z', cosine: expect.closeTo(-1, 6) });
  });

  it('replaces a vector under the same id, and remove keeps the rest searchable', () => {
    const a = new ExactVectorIndex(2, 1);
    a.add('p', v(1, 0));
    a.add('q', v(0, 1));
    a.add('r', v(-1, 0));
    a.add('p', v(0, -1));
    expect(a.size).toBe(3);
    expect(a.search(v(0, -1), 1)).toEqual([{ id: 'p', cosine: expect.closeTo(1, 6) }]);
    expect(a.remove('q')).toBe(true);
    expect(a.remove('q')).toBe(false);
    expect(a.has('q')).toBe(false);
    expect(a.search(v(0, 1), 5).map((m) => m.id)).toEqual(['r', 'p']);
    a.clear();
    expect(a.size).toBe(0);
    expect(a.search(v(0, 1), 5)).toEqual([]);
  });

  it('rejects a vector of the wrong dimension and k <= 0 returns nothing', () => {
    const a = new ExactVectorIndex(2);
    expect(() => a.add('a', new Float32Array(3))).toThrow(RangeError);
    a.add('a', v(1, 0));
    expect(a.search(v(1, 0), 0)).toEqual([]);
  });
});
