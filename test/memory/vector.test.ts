// The sparse cosine path must be the dense one bit for bit: a ranking may not depend on which path
// scored it. Property tests (fast-check, fixed seed) over vectors with few and many non-zero entries.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { HashingEmbedder } from '../../src/embed/hashing.js';
import { dot, dotSparse, sparseOf } from '../../src/memory/vector.js';

const SEED = 12;

/** A vector of length n with the given entries set (others zero), as float32. */
function vectorOf(n: number, entries: ReadonlyArray<readonly [number, number]>): Float32Array {
  const v = new Float32Array(n);
  for (const [j, x] of entries) v[j % n] = x;
  return v;
}

describe('sparse dot product', () => {
  it('keeps the non-zero entries in order and splits off the unrolled loop\'s tail', () => {
    const s = sparseOf(vectorOf(14, [[1, 0.5], [12, -2], [13, 3]]))!;
    expect(Array.from(s.idx)).toEqual([1, 12, 13]);
    expect(Array.from(s.val)).toEqual([0.5, -2, 3]);
    // n = 14: entries 0..11 run in the unrolled loop, 12 and 13 in the tail.
    expect(s.split).toBe(1);
  });

  it('gives way to the dense path when more than a quarter of the entries are non-zero', () => {
    expect(sparseOf(vectorOf(8, [[0, 1], [1, 1]]))).not.toBeNull();
    expect(sparseOf(vectorOf(8, [[0, 1], [1, 1], [2, 1]]))).toBeNull();
    expect(sparseOf(new Float32Array(8).fill(0.3))).toBeNull();
  });

  it('equals the dense dot product bit for bit, at any offset and length (seed 12)', () => {
    console.log(`fast-check seed ${SEED}`);
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 70 }),
        fc.array(fc.tuple(fc.nat(), fc.float({ noNaN: true, noDefaultInfinity: true, min: -1, max: 1 })), { maxLength: 17 }),
        fc.array(fc.float({ noNaN: true, noDefaultInfinity: true, min: -1, max: 1 }), { minLength: 3 * 70, maxLength: 3 * 70 }),
        fc.integer({ min: 0, max: 2 }),
        (n, entries, rows, row) => {
          const a = vectorOf(n, entries);
          const s = sparseOf(a);
          fc.pre(s !== null);
          const b = Float32Array.from(rows);
          expect(dotSparse(s!, b, row * n)).toBe(dot(a, b, row * n, n) + 0);
        },
      ),
      { seed: SEED, numRuns: 2000 },
    );
  });

  it('takes the sparse path for the hashing embedder at 384 dimensions and scores as the dense path does', () => {
    const e = new HashingEmbedder({ dim: 384 });
    const q = e.embedOne('Can I book a chain check for Friday at 3pm?');
    const keys = ['my chain needs a check', 'book the saddle for Friday', 'the fern is repotted'].map((t) => e.embedOne(t));
    const s = sparseOf(q);
    expect(s).not.toBeNull();
    expect(s!.idx.length).toBeLessThan(96);
    for (const k of keys) expect(dotSparse(s!, k, 0)).toBe(dot(q, k) + 0);
  });
});
