import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { ExactVectorIndex } from '../../src/vectors/exact.js';
import { HNSW_VECTOR_INDEX_DEFAULTS, HnswVectorIndex } from '../../src/vectors/hnsw.js';
import { ErrorCodes, TidemarkError } from '../../src/errors.js';
import { dot, unitVectors } from './vectors.js';

const DIM = 32;
const dir = mkdtempSync(join(tmpdir(), 'tidemark-hnsw-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('HnswVectorIndex', () => {
  it('agrees with the exact scan on a small index (ids and cosines)', () => {
    const vs = unitVectors(300, DIM, 1);
    const qs = unitVectors(30, DIM, 2);
    const h = new HnswVectorIndex(DIM, { ef: 300 });
    const e = new ExactVectorIndex(DIM);
    vs.forEach((v, i) => (h.add(`v${i}`, v), e.add(`v${i}`, v)));
    expect(h.size).toBe(300);
    for (const q of qs) {
      const got = h.search(q, 10);
      const want = e.search(q, 10);
      expect(got.map((m) => m.id)).toEqual(want.map((m) => m.id));
      got.forEach((m, i) => expect(m.cosine).toBeCloseTo(want[i]!.cosine, 5));
    }
  });

  it('converts hnswlib distances to cosines: an indexed vector finds itself at cosine 1', () => {
    const [a, b] = unitVectors(2, DIM, 3);
    const h = new HnswVectorIndex(DIM);
    h.add('a', a!);
    h.add('b', b!);
    const r = h.search(a!, 2);
    expect(r[0]).toEqual({ id: 'a', cosine: expect.closeTo(1, 5) });
    expect(r[1]).toEqual({ id: 'b', cosine: expect.closeTo(dot(a!, b!), 5) });
  });

  it('replaces the vector of an existing id in place', () => {
    const [a, b, c] = unitVectors(3, DIM, 4);
    const h = new HnswVectorIndex(DIM);
    h.add('x', a!);
    h.add('y', b!);
    h.add('x', c!);
    expect(h.size).toBe(2);
    expect(h.search(c!, 1)).toEqual([{ id: 'x', cosine: expect.closeTo(1, 5) }]);
    expect(h.search(a!, 2).find((m) => m.id === 'x')!.cosine).toBeCloseTo(dot(a!, c!), 5);
  });

  it('grows past its initial capacity with resizeIndex, keeping ef', () => {
    const vs = unitVectors(100, DIM, 5);
    const h = new HnswVectorIndex(DIM, { initialCapacity: 4, ef: 77 });
    expect(h.capacity).toBe(4);
    vs.forEach((v, i) => h.add(`v${i}`, v));
    expect(h.size).toBe(100);
    expect(h.capacity).toBe(128);
    expect(h.ef).toBe(77);
    for (let i = 0; i < 100; i += 9) expect(h.search(vs[i]!, 1)[0]!.id).toBe(`v${i}`);
  });

  it('marks deletions, never returns a removed id, and rebuilds past the deleted share', () => {
    const vs = unitVectors(40, DIM, 6);
    const h = new HnswVectorIndex(DIM, { rebuildDeletedShare: 0.25, ef: 100 });
    vs.forEach((v, i) => h.add(`v${i}`, v));
    // 10 of 40 is exactly the share: not past it yet.
    for (let i = 0; i < 10; i++) expect(h.remove(`v${i}`)).toBe(true);
    expect(h.remove('v0')).toBe(false);
    expect(h.deletedCount).toBe(10);
    expect(h.rebuilds).toBe(0);
    for (let i = 0; i < 10; i++) {
      expect(h.has(`v${i}`)).toBe(false);
      const r = h.search(vs[i]!, 30);
      expect(r).toHaveLength(30);
      expect(r.some((m) => m.id === `v${i}`)).toBe(false);
    }
    h.remove('v10');
    expect(h.rebuilds).toBe(1);
    expect(h.deletedCount).toBe(0);
    expect(h.size).toBe(29);
    expect(h.ef).toBe(100);
    const all = h.search(vs[20]!, 40);
    expect(all.map((m) => m.id).sort()).toEqual(Array.from({ length: 29 }, (_, i) => `v${i + 11}`).sort());
    expect(all[0]).toEqual({ id: 'v20', cosine: expect.closeTo(1, 5) });
  });

  it('re-applies ef after loading a saved index (hnswlib does not save it)', () => {
    const vs = unitVectors(200, DIM, 7);
    const h = new HnswVectorIndex(DIM, { ef: 123 });
    vs.forEach((v, i) => h.add(`v${i}`, v));
    h.remove('v3');
    const file = join(dir, 'a.hnsw');
    h.saveSync(file);
    const loaded = HnswVectorIndex.loadSync(file, DIM, { ef: 123 });
    expect(loaded.ef).toBe(123);
    expect(loaded.size).toBe(199);
    expect(loaded.has('v3')).toBe(false);
    expect(loaded.deletedCount).toBe(1);
    const q = unitVectors(1, DIM, 8)[0]!;
    expect(loaded.search(q, 10)).toEqual(h.search(q, 10));
    // The kept vectors came back too: a later rebuild must not lose anything.
    loaded.add('v200', vs[0]!);
    expect(loaded.search(vs[150]!, 1)[0]!.id).toBe('v150');
    const other = HnswVectorIndex.loadSync(file, DIM, { ef: 31 });
    expect(other.ef).toBe(31);
  });

  it('search with k above the size returns every live entry; clear empties it', () => {
    const vs = unitVectors(5, DIM, 9);
    const h = new HnswVectorIndex(DIM);
    vs.forEach((v, i) => h.add(`v${i}`, v));
    expect(h.search(vs[0]!, 50)).toHaveLength(5);
    expect(h.search(vs[0]!, 0)).toEqual([]);
    h.clear();
    expect(h.size).toBe(0);
    expect(h.search(vs[0]!, 3)).toEqual([]);
    h.add('again', vs[1]!);
    expect(h.search(vs[1]!, 3).map((m) => m.id)).toEqual(['again']);
  });

  it('validates options with TIDEMARK_E_CONFIG, naming the option and the value', () => {
    const bad: [object, RegExp][] = [
      [{ M: 1 }, /M must be an integer in \[2, 100\], got 1/],
      [{ ef: 0 }, /ef must be an integer/],
      [{ efConstruction: 2.5 }, /efConstruction must be an integer.*got 2\.5/],
      [{ rebuildDeletedShare: 0 }, /rebuildDeletedShare must be a number in \(0, 1\], got 0/],
      [{ initialCapacity: '8' }, /initialCapacity must be an integer.*got "8"/],
    ];
    for (const [o, msg] of bad) {
      let err: unknown;
      try {
        new HnswVectorIndex(DIM, o as never);
      } catch (e) {
        err = e;
      }
      expect(err).toBeInstanceOf(TidemarkError);
      expect((err as TidemarkError).code).toBe(ErrorCodes.CONFIG);
      expect((err as Error).message).toMatch(msg);
    }
    expect(() => new HnswVectorIndex(DIM).add('a', new Float32Array(DIM + 1))).toThrow(RangeError);
    expect(HNSW_VECTOR_INDEX_DEFAULTS).toEqual({ M: 16, efConstruction: 64, ef: 48, initialCapacity: 1024, rebuildDeletedShare: 0.25, randomSeed: 100 });
  });
});
