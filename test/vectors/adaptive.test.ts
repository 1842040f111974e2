import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { AdaptiveVectorIndex } from '../../src/vectors/adaptive.js';
import { ExactVectorIndex } from '../../src/vectors/exact.js';
import { hnswAvailable } from '../../src/vectors/hnsw.js';
import { VECTOR_INDEX_DEFAULTS, createVectorIndex } from '../../src/vectors/index.js';
import { ErrorCodes } from '../../src/errors.js';
import { dot, unitVectors } from './vectors.js';

const DIM = 8;
const THRESHOLD = 12;
// A small pool of ids so that replacing and re-adding a removed id happen often.
const ids = Array.from({ length: 30 }, (_, i) => `id${i}`);
const pool = unitVectors(64, DIM, 11);

type Op =
  | { kind: 'add'; id: string; v: number }
  | { kind: 'remove'; id: string }
  | { kind: 'search'; q: number; k: number };

const op: fc.Arbitrary<Op> = fc.oneof(
  { weight: 5, arbitrary: fc.record({ kind: fc.constant('add' as const), id: fc.constantFrom(...ids), v: fc.nat(63) }) },
  { weight: 2, arbitrary: fc.record({ kind: fc.constant('remove' as const), id: fc.constantFrom(...ids) }) },
  { weight: 2, arbitrary: fc.record({ kind: fc.constant('search' as const), q: fc.nat(63), k: fc.integer({ min: 0, max: 35 }) }) },
);

describe('AdaptiveVectorIndex', () => {
  it('behaves like the exact index across the switch to HNSW (property)', () => {
    let switched = 0;
    fc.assert(
      fc.property(fc.array(op, { minLength: 1, maxLength: 120, size: 'max' }), (ops) => {
        const a = new AdaptiveVectorIndex(DIM, { hnswThreshold: THRESHOLD, rebuildDeletedShare: 0.3 });
        const model = new ExactVectorIndex(DIM);
        const vectors = new Map<string, Float32Array>();
        let sawHnsw = false;
        for (const o of ops) {
          if (o.kind === 'add') {
            a.add(o.id, pool[o.v]!);
            model.add(o.id, pool[o.v]!);
            vectors.set(o.id, pool[o.v]!);
          } else if (o.kind === 'remove') {
            expect(a.remove(o.id)).toBe(model.remove(o.id));
            vectors.delete(o.id);
          } else {
            const q = pool[o.q]!;
            const got = a.search(q, o.k);
            expect(got).toHaveLength(Math.min(o.k, model.size));
            for (let i = 0; i < got.length; i++) {
              const m = got[i]!;
              // Only present ids, each at its true cosine, best first.
              expect(vectors.has(m.id)).toBe(true);
              expect(m.cosine).toBeCloseTo(dot(q, vectors.get(m.id)!), 5);
              if (i > 0) expect(m.cosine).toBeLessThanOrEqual(got[i - 1]!.cosine + 1e-6);
            }
            expect(new Set(got.map((m) => m.id)).size).toBe(got.length);
          }
          expect(a.size).toBe(model.size);
          for (const id of ids) expect(a.has(id)).toBe(model.has(id));
          if (a.strategy === 'hnsw') sawHnsw = true;
        }
        if (sawHnsw) switched++;
        // The switch happens once the size passes the threshold, and there is no way back.
        if (hnswAvailable()) expect(a.strategy).toBe(sawHnsw || a.size > THRESHOLD ? 'hnsw' : 'exact');
      }),
      { numRuns: 60, seed: 20240605 },
    );
    // The generator must really cross the switch point, or the property says nothing about HNSW.
    if (hnswAvailable()) expect(switched).toBeGreaterThan(30);
  });

  it('switches once the size passes hnswThreshold, and finds the same items after the switch', () => {
    const vs = unitVectors(40, DIM, 12);
    const a = new AdaptiveVectorIndex(DIM, { hnswThreshold: 20 });
    vs.slice(0, 20).forEach((v, i) => a.add(`v${i}`, v));
    expect(a.strategy).toBe('exact');
    const before = a.search(vs[3]!, 5);
    a.add('v20', vs[20]!);
    expect(a.strategy).toBe(hnswAvailable() ? 'hnsw' : 'exact');
    expect(a.size).toBe(21);
    const after = a.search(vs[3]!, 5);
    expect(after.map((m) => m.id)).toEqual(before.map((m) => m.id));
    // Removing below the threshold does not switch back.
    for (let i = 0; i < 15; i++) a.remove(`v${i}`);
    expect(a.strategy).toBe(hnswAvailable() ? 'hnsw' : 'exact');
    a.clear();
    expect(a.size).toBe(0);
    expect(a.strategy).toBe('exact');
  });

  it('hnswThreshold Infinity stays exact; 0 starts on HNSW', () => {
    const vs = unitVectors(50, DIM, 13);
    const never = createVectorIndex(DIM, { hnswThreshold: Infinity });
    const first = createVectorIndex(DIM, { hnswThreshold: 0 });
    vs.forEach((v, i) => (never.add(`v${i}`, v), first.add(`v${i}`, v)));
    expect(never.strategy).toBe('exact');
    expect(first.strategy).toBe(hnswAvailable() ? 'hnsw' : 'exact');
  });

  it('validates options at construction, HNSW ones included', () => {
    expect(() => createVectorIndex(DIM, { hnswThreshold: -1 })).toThrow(/hnswThreshold must be an integer >= 0 or Infinity, got -1/);
    expect(() => createVectorIndex(DIM, { ef: 0 })).toThrow(/ef must be an integer/);
    expect(() => createVectorIndex(0)).toThrow(/dim must be an integer in \[1, 65536\], got 0/);
    try {
      createVectorIndex(DIM, { M: 500 });
      expect.unreachable();
    } catch (e) {
      expect((e as { code: string }).code).toBe(ErrorCodes.CONFIG);
    }
    expect(VECTOR_INDEX_DEFAULTS.hnswThreshold).toBe(256);
    expect(VECTOR_INDEX_DEFAULTS.ef).toBe(48);
  });
});
