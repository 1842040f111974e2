// The attention read at its thresholds: relevance floors (minCosine, minLexical), the hit (hitCosine),
// minWeight and maxMass met exactly, ties broken by cosine, strengths that decayed to nothing, a
// softmax whose masked-out entries would overflow, and a multi-hop query that cancels out.

import { describe, expect, it } from 'vitest';
import { attend, nextQuery, queryTermsOf, slotDocStats, softmaxMasked, textStats } from '../../src/memory/attention.js';
import { basis, readParams, rec, softmaxRef, table, vec } from './helpers.js';

const open = readParams({ beta: 1, gamma: 0, delta: 0, temperature: 1, k: 10, minWeight: 0, maxMass: 1, minCosine: -1, minLexical: 1000, hitCosine: 1 });

describe('softmaxMasked', () => {
  it('takes the maximum over the masked entries only, so a huge masked-out score cannot zero the rest', () => {
    const out = new Float64Array(3);
    softmaxMasked(Float64Array.from([0, Math.log(3), 1e5]), (i) => i < 2, 1, out);
    expect(out[0]).toBeCloseTo(0.25, 15);
    expect(out[1]).toBeCloseTo(0.75, 15);
    expect(out[2]).toBe(0);
  });

  it('subtracts the largest score, not the last one, so a large first score does not overflow', () => {
    const out = new Float64Array(3);
    softmaxMasked(Float64Array.from([1e6, 0, -5]), () => true, 1, out);
    expect([...out]).toEqual([1, 0, 0]);
  });

  it('agrees with the textbook softmax on any temperature (entries masked out stay 0)', () => {
    const z = [0.3, -1.2, 2.5, 0.9];
    const out = new Float64Array(4);
    softmaxMasked(Float64Array.from(z), (i) => i !== 1, 0.5, out);
    const want = softmaxRef([0.3, 2.5, 0.9], 0.5);
    expect(out[0]).toBeCloseTo(want[0]!, 15);
    expect(out[1]).toBe(0);
    expect(out[2]).toBeCloseTo(want[1]!, 15);
    expect(out[3]).toBeCloseTo(want[2]!, 15);
  });
});

describe('attend at its thresholds', () => {
  // Keys at known cosines to q = e0: 1, 0.6, 0 (unit vectors).
  const make = () =>
    table(4, 2, [
      rec('a', basis(2, 0), { keyText: 'my bike', value: 'green' }),
      rec('b', vec(3, 4), { keyText: 'my fern', value: 'on the sill' }),
      rec('c', basis(2, 1), { keyText: 'my lesson', value: 'on Friday' }),
      null,
    ]);
  const q = basis(2, 0);

  it('keeps a slot whose cosine equals minCosine, or whose raw BM25 equals minLexical', () => {
    const t = make();
    const cos = attend(t, 0, q, [], { ...open, minCosine: Math.fround(0.6) });
    expect(cos.selected.sort()).toEqual([0, 1]);
    const lexRaw = attend(t, 0, q, ['friday'], open).lexicalRaw[2]!;
    expect(lexRaw).toBeGreaterThan(0);
    const lex = attend(t, 0, q, ['friday'], { ...open, minCosine: 0.7, minLexical: lexRaw });
    expect(lex.selected.sort()).toEqual([0, 2]);
    const above = attend(t, 0, q, ['friday'], { ...open, minCosine: 0.7, minLexical: lexRaw * 1.0001 });
    expect(above.selected).toEqual([0]);
  });

  it('is a hit when the best slot\'s cosine equals hitCosine or its BM25 equals minLexical, a miss just under', () => {
    const t = table(2, 2, [rec('b', vec(3, 4), { keyText: 'my fern', value: 'on the sill' }), null]);
    const c = attend(t, 0, q, [], open).cosine[0]!;
    expect(attend(t, 0, q, [], { ...open, hitCosine: c }).hit).toBe(true);
    expect(attend(t, 0, q, [], { ...open, hitCosine: c + 1e-6 }).hit).toBe(false);
    const raw = attend(t, 0, q, ['fern'], open).lexicalRaw[0]!;
    expect(attend(t, 0, q, ['fern'], { ...open, hitCosine: 1, minLexical: raw }).hit).toBe(true);
    expect(attend(t, 0, q, ['fern'], { ...open, hitCosine: 1, minLexical: raw + 1e-9 }).hit).toBe(false);
  });

  it('keeps a slot whose weight equals minWeight, and stops when the mass reaches maxMass exactly', () => {
    // Three slots with cosine 0 to the query: equal scores, weights 1/3 each.
    const t = table(3, 2, [rec('x', basis(2, 1)), rec('y', basis(2, 1)), rec('z', basis(2, 1))]);
    const w = attend(t, 0, q, [], open).weight[0]!;
    expect(w).toBeCloseTo(1 / 3, 15);
    expect(attend(t, 0, q, [], { ...open, minWeight: w }).selected).toEqual([0, 1, 2]);
    expect(attend(t, 0, q, [], { ...open, minWeight: w + 1e-12 }).selected).toEqual([0]);
    expect(attend(t, 0, q, [], { ...open, maxMass: 2 * w }).selected).toEqual([0, 1]);
    expect(attend(t, 0, q, [], { ...open, maxMass: 2 * w + 1e-9 }).selected).toEqual([0, 1, 2]);
    expect(attend(t, 0, q, [], { ...open, k: 2 }).selected).toEqual([0, 1]);
  });

  it('orders slots by weight, and equal weights by cosine', () => {
    // beta 0: the scores are all 0 and the weights equal; cosine alone orders them.
    const r = attend(make(), 0, q, [], { ...open, beta: 0 });
    expect(r.weight[0]).toBe(r.weight[2]);
    expect(r.selected).toEqual([0, 1, 2]);
    const flipped = attend(make(), 0, basis(2, 1), [], { ...open, beta: 0 });
    expect(flipped.selected).toEqual([2, 1, 0]);
  });

  it('normalises BM25 by the best slot of the read, and gives all zeros when nothing matches', () => {
    const t = make();
    const r = attend(t, 0, q, ['fern', 'friday', 'sill'], open);
    const max = Math.max(...r.lexicalRaw);
    expect(r.lexical[1]).toBe(1);
    expect(r.lexical[2]).toBeCloseTo(r.lexicalRaw[2]! / max, 15);
    expect(r.lexical[0]).toBe(0);
    expect([...attend(t, 0, q, ['kayak'], open).lexical]).toEqual([0, 0, 0, 0]);
  });

  it('weighs a slot whose strength decayed to 0 (or was stored as 0) at ln(1e-9), pinned or not', () => {
    const t = table(2, 2, [rec('p', basis(2, 0), { strength: 0, pinned: true }), rec('u', basis(2, 0), { strength: 1, halfLife: 1 })]);
    const r = attend(t, 5000, q, [], { ...open, delta: 1 });
    expect(r.strength[0]).toBe(1e-9);
    expect(r.strength[1]).toBe(1e-9);
    expect(r.score[0]).toBeCloseTo(1 + Math.log(1e-9), 12);
    expect(r.score[1]).toBeCloseTo(1 + Math.log(1e-9), 12);
    expect(r.weight[0]).toBeCloseTo(0.5, 15);
  });

  it('reports the top weight, the entropy of the weights and the number of used slots', () => {
    const r = attend(make(), 0, q, [], open);
    const w = softmaxRef([1, Math.fround(0.6), 0]);
    expect(r.used).toBe(3);
    expect(r.topWeight).toBeCloseTo(w[0]!, 6);
    expect(r.entropy).toBeCloseTo(-w.reduce((s, x) => s + x * Math.log(x), 0), 6);
    expect(r.topCosine).toBe(1);
    const one = attend(table(2, 2, [rec('a', basis(2, 0)), null]), 0, q, [], open);
    expect([one.topWeight, one.entropy]).toEqual([1, 0]);
  });

  it('scores a dense query (more than a quarter non-zero) as the sparse one would', () => {
    const t = table(2, 4, [rec('a', vec(1, 2, 3, 4)), rec('b', vec(4, 0, 0, 1))]);
    const dense = vec(1, 1, 1, 1);
    const sparse = vec(1, 0, 0, 0);
    const d = attend(t, 0, dense, [], open);
    expect(d.cosine[0]).toBeCloseTo(10 / (2 * Math.sqrt(30)), 6);
    expect(d.cosine[1]).toBeCloseTo(5 / (2 * Math.sqrt(17)), 6);
    const s = attend(t, 0, sparse, [], open);
    expect(s.cosine[0]).toBeCloseTo(1 / Math.sqrt(30), 6);
    expect(s.cosine[1]).toBeCloseTo(4 / Math.sqrt(17), 6);
  });
});

describe('slot statistics cache', () => {
  it('re-counts a slot written with a new revision, and a slot written again after being freed', () => {
    const t = table(2, 2, [rec('a', basis(2, 0), { keyText: 'my bike', value: 'green' }), null]);
    expect([...slotDocStats(t)[0]!.tf.keys()]).toEqual(['bike', 'green']);
    t.clear(0);
    expect(slotDocStats(t)[0]).toBeNull();
    expect(slotDocStats(t)).toHaveLength(2); // one entry per slot, no more
    t.set(0, rec('a', basis(2, 0), { keyText: 'my bike', value: 'blue' }));
    expect([...slotDocStats(t)[0]!.tf.keys()]).toEqual(['bike', 'blue']);
    expect(textStats('my fern', 'the fern pot')).toEqual({ tf: new Map([['fern', 2], ['pot', 1]]), len: 3 });
  });
});

describe('queryTermsOf', () => {
  it('hands back its own array even when it falls back to every word', () => {
    const words = ['what', 'is', 'it'];
    const terms = queryTermsOf(words);
    expect(terms).toEqual(words);
    terms.push('fern');
    expect(words).toEqual(['what', 'is', 'it']);
  });
});

describe('nextQuery', () => {
  it('returns the zero vector when the values cancel the query', () => {
    const r = { selected: [0], weight: Float64Array.from([1]) } as unknown as Parameters<typeof nextQuery>[1];
    const out = nextQuery(basis(2, 0), r, () => Float32Array.from([-1, 0]));
    expect([...out]).toEqual([0, 0]);
  });

  it('adds only the selected slots\' values', () => {
    const r = { selected: [1], weight: Float64Array.from([0.9, 1]) } as unknown as Parameters<typeof nextQuery>[1];
    const out = nextQuery(basis(2, 0), r, (i) => (i === 1 ? basis(2, 1) : Float32Array.from([100, 100])));
    expect(out[0]).toBeCloseTo(Math.SQRT1_2, 6);
    expect(out[1]).toBeCloseTo(Math.SQRT1_2, 6);
  });
});
