// The built-in hashing embedder: unit norm, deterministic, configurable dimension, and similar texts
// closer than unrelated ones.

import { describe, expect, it } from 'vitest';
import { HashingEmbedder } from '../../src/embed/hashing.js';
import { cosine } from '../../src/memory/vector.js';

const norm = (v: Float32Array): number => Math.hypot(...v);

describe('HashingEmbedder', () => {
  const e = new HashingEmbedder();

  it('gives unit-length vectors of the default 384 dims', () => {
    for (const t of ['My bike is a green Corvane', 'what is it?', 'x', '', 'Über Straße — 東京 🚲']) {
      const v = e.embedOne(t);
      expect(v).toBeInstanceOf(Float32Array);
      expect(v.length).toBe(384);
      expect(norm(v)).toBeCloseTo(1, 6);
    }
  });

  it('is deterministic across calls and instances', () => {
    const a = e.embedOne('book a service for Tuesday');
    const b = new HashingEmbedder().embedOne('book a service for Tuesday');
    expect([...a]).toEqual([...b]);
    expect(e.id).toBe(new HashingEmbedder().id);
  });

  it('honours the dim option and puts it in the id', () => {
    const small = new HashingEmbedder({ dim: 64 });
    expect(small.dim).toBe(64);
    expect(small.embedOne('hello there').length).toBe(64);
    expect(small.id).not.toBe(e.id);
    expect(small.id).toContain('64');
  });

  it('rejects a dim out of range with TIDEMARK_E_CONFIG naming the option and value', () => {
    for (const dim of [0, 7, 8193, 1.5, Number.NaN]) {
      expect(() => new HashingEmbedder({ dim })).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_CONFIG' }));
    }
    expect(() => new HashingEmbedder({ dim: 7 })).toThrow(/dim .*got 7/);
  });

  it('puts similar texts closer than unrelated ones', () => {
    const q = e.embedOne('when is my bike service booked');
    const near = e.embedOne('bike service booked for Tuesday');
    const far = e.embedOne('I am allergic to chain wax');
    expect(cosine(q, near)).toBeGreaterThan(cosine(q, far) + 0.2);
    // Plurals and spelling variants share character trigrams.
    expect(cosine(e.embedOne('brake'), e.embedOne('brakes'))).toBeGreaterThan(cosine(e.embedOne('brake'), e.embedOne('saddle')));
  });

  it('embed and embedSync agree', async () => {
    const texts = ['one fact', 'another fact'];
    const [a, b] = await e.embed(texts);
    const [c, d] = e.embedSync(texts);
    expect([...a!]).toEqual([...c!]);
    expect([...b!]).toEqual([...d!]);
  });
});
