// The embedding cache (LRU eviction, hit and miss counts), checkVector's coded rejections, and
// embedCached batching only the texts it has not seen.

import { describe, expect, it } from 'vitest';
import { EmbeddingCache, checkVector, embedCached } from '../../src/embed/cache.js';
import type { Embedder } from '../../src/embed/embedder.js';
import { HashingEmbedder } from '../../src/embed/hashing.js';

const v = (...xs: number[]): Float32Array => Float32Array.from(xs);

describe('EmbeddingCache', () => {
  it('evicts the least recently used entry past maxEntries and counts hits and misses', () => {
    const c = new EmbeddingCache(2);
    c.set('a', v(1));
    c.set('b', v(2));
    expect(c.get('a')).toEqual(v(1)); // a is now most recent
    c.set('c', v(3)); // evicts b
    expect(c.get('b')).toBeUndefined();
    expect(c.get('a')).toEqual(v(1));
    expect(c.get('c')).toEqual(v(3));
    expect(c.stats()).toEqual({ hits: 3, misses: 1, size: 2 });
  });

  it('setting an existing key refreshes it instead of growing', () => {
    const c = new EmbeddingCache(2);
    c.set('a', v(1));
    c.set('b', v(2));
    c.set('a', v(9));
    c.set('c', v(3)); // evicts b, the least recent
    expect(c.get('a')).toEqual(v(9));
    expect(c.get('b')).toBeUndefined();
    expect(c.stats().size).toBe(2);
  });

  it('maxEntries 0 disables caching; clear() empties it', () => {
    const off = new EmbeddingCache(0);
    off.set('a', v(1));
    expect(off.get('a')).toBeUndefined();
    expect(off.stats().size).toBe(0);
    const c = new EmbeddingCache(5);
    c.set('a', v(1));
    c.clear();
    expect(c.stats().size).toBe(0);
  });
});

describe('checkVector', () => {
  const code = { code: 'TIDEMARK_E_EMBED_INVALID' };

  it('rejects NaN, Infinity, the wrong dimension, a zero vector and a non-vector with TIDEMARK_E_EMBED_INVALID', () => {
    expect(() => checkVector(v(1, Number.NaN, 0), 3, 'e')).toThrow(expect.objectContaining(code));
    expect(() => checkVector(v(1, Number.POSITIVE_INFINITY, 0), 3, 'e')).toThrow(expect.objectContaining(code));
    expect(() => checkVector(v(1, 0), 3, 'e')).toThrow(expect.objectContaining(code));
    expect(() => checkVector(v(0, 0, 0), 3, 'e')).toThrow(expect.objectContaining(code));
    expect(() => checkVector('nope', 3, 'e')).toThrow(expect.objectContaining(code));
    expect(() => checkVector(v(1, 0), 3, 'e')).toThrow(/2 dims but declares dim 3/);
    expect(() => checkVector(v(1, Number.NaN, 0), 3, 'e')).toThrow(/non-finite value \(NaN\) at index 1/);
  });

  it('normalises a good vector (arrays accepted)', () => {
    const out = checkVector([3, 4], 2, 'e');
    expect(out).toBeInstanceOf(Float32Array);
    expect(out[0]).toBeCloseTo(0.6, 6);
    expect(out[1]).toBeCloseTo(0.8, 6);
  });
});

describe('embedCached', () => {
  /** Counts texts embedded; optionally returns a broken vector. */
  function counting(dim = 8, broken?: Float32Array): Embedder & { calls: string[][] } {
    const inner = broken ? null : new HashingEmbedder({ dim });
    const calls: string[][] = [];
    return {
      id: `counting-${dim}`, dim, calls,
      embed: async (texts) => {
        calls.push([...texts]);
        return broken ? texts.map(() => broken) : inner!.embedSync(texts);
      },
    };
  }

  it('embeds only the texts not cached, in one batch, and returns them in input order', async () => {
    const e = counting();
    const cache = new EmbeddingCache(100);
    const first = await embedCached(e, cache, ['a b', 'c d']);
    const second = await embedCached(e, cache, ['c d', 'e f', 'a b']);
    expect(e.calls).toEqual([['a b', 'c d'], ['e f']]);
    expect([...second[0]!]).toEqual([...first[1]!]);
    expect([...second[2]!]).toEqual([...first[0]!]);
    expect(cache.stats()).toEqual({ hits: 2, misses: 3, size: 3 });
  });

  it('rejects an embedder that returns NaN or the wrong count', async () => {
    await expect(embedCached(counting(3, v(Number.NaN, 1, 0)), new EmbeddingCache(), ['x'])).rejects.toMatchObject({ code: 'TIDEMARK_E_EMBED_INVALID' });
    const short: Embedder = { id: 'short', dim: 2, embed: async () => [] };
    await expect(embedCached(short, new EmbeddingCache(), ['x'])).rejects.toMatchObject({ code: 'TIDEMARK_E_EMBED_INVALID' });
  });

  it('keys the cache by embedder id, so two embedders never share vectors', async () => {
    const cache = new EmbeddingCache(100);
    const a = counting(8);
    const b = { ...counting(8), id: 'other' };
    await embedCached(a, cache, ['same text']);
    await embedCached(b, cache, ['same text']);
    expect(b.calls).toEqual([['same text']]);
  });
});
