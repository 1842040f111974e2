// The attention read: softmax, scores z = beta*cos + gamma*lex + delta*ln s on hand-made unit vectors,
// top-k / minWeight / maxMass selection, hit and miss, and the multi-hop query update.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { postingsOf } from '../../src/memory/bm25.js';
import { attend, nextQuery, queryTerms, slotDocStats, slotPostings, softmaxMasked } from '../../src/memory/attention.js';
import { basis, readParams, rec, softmaxRef, table, vec } from './helpers.js';

describe('softmaxMasked', () => {
  it('gives e^z / sum e^z over the masked entries and 0 elsewhere', () => {
    const z = Float64Array.from([1, 2, 3, 100]);
    const out = new Float64Array(4);
    softmaxMasked(z, (i) => i < 3, 1, out);
    const e = [Math.E, Math.E ** 2, Math.E ** 3];
    const s = e[0]! + e[1]! + e[2]!;
    expect(out[0]).toBeCloseTo(e[0]! / s, 15);
    expect(out[1]).toBeCloseTo(e[1]! / s, 15);
    expect(out[2]).toBeCloseTo(e[2]! / s, 15);
    expect(out[3]).toBe(0);
    expect(out[2]).toBeCloseTo(0.6652409557748219, 15); // softmax([1, 2, 3])[2]
  });

  it('divides by the temperature: tau = 2 on [0, ln 4] gives [1/3, 2/3]', () => {
    const out = new Float64Array(2);
    softmaxMasked(Float64Array.from([0, Math.log(4)]), () => true, 2, out);
    expect(out[0]).toBeCloseTo(1 / 3, 15);
    expect(out[1]).toBeCloseTo(2 / 3, 15);
  });

  it('is stable for large scores and uniform for equal ones', () => {
    const out = new Float64Array(3);
    softmaxMasked(Float64Array.from([1000, 1000, 1000]), () => true, 1, out);
    expect([...out]).toEqual([1 / 3, 1 / 3, 1 / 3]);
    softmaxMasked(Float64Array.from([-1e6, 0, 1e6]), () => true, 1, out);
    expect([...out]).toEqual([0, 0, 1]);
  });

  it('gives all zeros when nothing is masked in', () => {
    const out = Float64Array.from([5, 5]);
    softmaxMasked(Float64Array.from([1, 2]), () => false, 1, out);
    expect([...out]).toEqual([0, 0]);
  });
});

describe('attend', () => {
  // Three slots on hand-made unit keys; query q = (0.8, 0.6, 0).
  // cos: slot 0 key (1,0,0) -> 0.8; slot 1 key (0,1,0) -> 0.6; slot 2 key (0.6,0.8,0) -> 0.96.
  const make = () =>
    table(4, 3, [
      rec('a', basis(3, 0), { keyText: 'my bike', value: 'a green Corvane', strength: 1 }),
      rec('b', basis(3, 1), { keyText: 'my booking', value: 'service on Tuesday', strength: 0.5 }),
      rec('c', vec(3, 4, 0), { keyText: 'my name', value: 'Dana', strength: 0.25, halfLife: 5 }),
      null,
    ]);
  const q = vec(4, 3, 0);
  const p = readParams({ beta: 2, gamma: 1, delta: 0.5, temperature: 1, k: 5, minWeight: 0, maxMass: 1, minCosine: 0.2, hitCosine: 0.3 });

  it('scores z = beta*cos + gamma*lex + delta*ln(s) and weights softmax(z)', () => {
    const r = attend(make(), 0, q, ['corvane'], p);
    expect(r.cosine[0]).toBeCloseTo(0.8, 6);
    expect(r.cosine[1]).toBeCloseTo(0.6, 6);
    expect(r.cosine[2]).toBeCloseTo(0.96, 6);
    // Only slot 0 has "corvane": its normalised BM25 is 1, the others' 0.
    expect([...r.lexical]).toEqual([1, 0, 0, 0]);
    expect(r.lexicalRaw[0]).toBeGreaterThan(0);
    const z = [2 * 0.8 + 1 + 0.5 * Math.log(1), 2 * 0.6 + 0.5 * Math.log(0.5), 2 * 0.96 + 0.5 * Math.log(0.25)];
    for (let i = 0; i < 3; i++) expect(r.score[i]).toBeCloseTo(z[i]!, 6);
    const w = softmaxRef(z);
    for (let i = 0; i < 3; i++) expect(r.weight[i]).toBeCloseTo(w[i]!, 6);
    expect(r.weight[3]).toBe(0); // the free slot
    expect(r.used).toBe(3);
    expect(r.topCosine).toBeCloseTo(0.96, 6);
    expect(r.topWeight).toBeCloseTo(Math.max(...w), 6);
    expect(r.entropy).toBeCloseTo(-w.reduce((s, x) => s + x * Math.log(x), 0), 6);
    expect(r.selected).toEqual([0, 2, 1]);
    expect(r.hit).toBe(true);
  });

  it('decays strengths to the read clock (pinned slots excepted)', () => {
    const t = make();
    const r = attend(t, 10, q, [], p); // half-life 10 for a and b, 5 for c
    expect(r.strength[0]).toBeCloseTo(0.5, 12);
    expect(r.strength[1]).toBeCloseTo(0.25, 12);
    expect(r.strength[2]).toBeCloseTo(0.25 / 4, 12);
    expect(r.score[0]).toBeCloseTo(2 * 0.8 + 0.5 * Math.log(0.5), 6);
    const pinned = table(1, 3, [rec('p', basis(3, 0), { strength: 0.4, pinned: true })]);
    expect(attend(pinned, 1000, q, [], p).strength[0]).toBe(0.4);
  });

  it('a higher temperature flattens the weights, a lower one sharpens them', () => {
    const hot = attend(make(), 0, q, [], { ...p, temperature: 10 });
    const cold = attend(make(), 0, q, [], { ...p, temperature: 0.1 });
    expect(hot.entropy).toBeGreaterThan(cold.entropy);
    const z = [1.6, 1.2 + 0.5 * Math.log(0.5), 1.92 + 0.5 * Math.log(0.25)];
    const w = softmaxRef(z, 10);
    for (let i = 0; i < 3; i++) expect(hot.weight[i]).toBeCloseTo(w[i]!, 6);
  });

  it('keeps at most k items, best first', () => {
    expect(attend(make(), 0, q, ['corvane'], { ...p, k: 2 }).selected).toEqual([0, 2]);
    expect(attend(make(), 0, q, ['corvane'], { ...p, k: 1 }).selected).toEqual([0]);
  });

  it('drops items under minWeight but always keeps the best one on a hit', () => {
    const r = attend(make(), 0, q, ['corvane'], { ...p, minWeight: 0.2 });
    const w = [...r.weight].slice(0, 3);
    expect(w[0]).toBeGreaterThan(0.2);
    expect(r.selected).toEqual([0, 2, 1].filter((i, n) => n === 0 || w[i]! >= 0.2));
    expect(attend(make(), 0, q, ['corvane'], { ...p, minWeight: 0.99 }).selected).toEqual([0]);
  });

  it('stops adding items once their cumulative weight reaches maxMass', () => {
    const r = attend(make(), 0, q, ['corvane'], { ...p, maxMass: 0.5 });
    // Slot 0 alone holds more than half the mass.
    expect(r.weight[0]).toBeGreaterThan(0.5);
    expect(r.selected).toEqual([0]);
    const r2 = attend(make(), 0, q, ['corvane'], { ...p, maxMass: r.weight[0]! + 0.01 });
    expect(r2.selected).toEqual([0, 2]);
  });

  it('leaves out slots that are neither similar (minCosine) nor lexical matches (minLexical)', () => {
    const r = attend(make(), 0, q, [], { ...p, minCosine: 0.7 });
    expect(r.selected).toEqual([0, 2]); // slot 1 has cosine 0.6 < 0.7; z0 = 1.6 > z2 = 1.92 + 0.5 ln 0.25
    // Its weight still takes part in the softmax over all used slots.
    expect(r.weight[0]! + r.weight[1]! + r.weight[2]!).toBeCloseTo(1, 12);
  });

  it('is a miss when the best relevant slot is under hitCosine and has no lexical match, yet still returns the relevant slots', () => {
    const r = attend(make(), 0, vec(0, 0.1, 1), [], { ...p, minCosine: 0, hitCosine: 0.3 });
    expect(r.topCosine).toBeLessThan(0.3);
    expect(r.hit).toBe(false);
    // Weak matches are still context; the caller searches the logbook too and reports a miss.
    expect(r.selected.length).toBeGreaterThan(0);
    for (const i of r.selected) expect(r.cosine[i]).toBeGreaterThanOrEqual(0);
    // With a relevance floor above every slot, nothing is returned.
    const none = attend(make(), 0, vec(0, 0.1, 1), [], { ...p, minCosine: 0.5, hitCosine: 0.3 });
    expect(none.selected).toEqual([]);
    // A lexical match alone makes the same read a hit.
    const lex = attend(make(), 0, vec(0, 0.1, 1), ['tuesday'], { ...p, minCosine: 0, hitCosine: 0.3, minLexical: 0.1 });
    expect(lex.hit).toBe(true);
    expect(lex.selected[0]).toBe(1);
  });

  it('on an empty table selects nothing and reports topCosine -1', () => {
    const r = attend(table(3, 3, []), 0, q, ['bike'], p);
    expect(r.used).toBe(0);
    expect(r.topCosine).toBe(-1);
    expect(r.selected).toEqual([]);
    expect([...r.weight]).toEqual([0, 0, 0]);
  });
});

describe('queryTerms and slotDocStats', () => {
  it('uses content words of the query, or all words when it has none', () => {
    expect(queryTerms('When is my Corvane ready?')).toEqual(['corvane', 'ready']);
    expect(queryTerms('what is it?')).toEqual(['what', 'is', 'it']);
  });

  it('indexes key and value text without stopwords and follows overwrites of a slot', () => {
    const t = table(2, 3, [rec('a', basis(3, 0), { keyText: 'my bike', value: 'a green Corvane' }), null]);
    expect([...slotDocStats(t)[0]!.tf.keys()]).toEqual(['bike', 'green', 'corvane']);
    expect(slotDocStats(t)[1]).toBeNull();
    t.set(0, rec('a2', basis(3, 0), { keyText: 'my bike', value: 'a red Tarrant' }));
    expect([...slotDocStats(t)[0]!.tf.keys()]).toEqual(['bike', 'red', 'tarrant']);
    t.clear(0);
    expect(slotDocStats(t)[0]).toBeNull();
  });

  it('keeps term postings in step with the slots, one changed slot at a time', () => {
    const t = table(3, 3, [rec('a', basis(3, 0), { keyText: 'my bike', value: 'a green Corvane' }), null, rec('b', basis(3, 1), { keyText: 'my fern', value: 'a green fern' })]);
    const first = slotPostings(t);
    expect(first.byTerm.get('green')).toEqual([0, 2]);
    expect(first.byTerm.get('fern')).toEqual([2]);
    expect([first.n, first.total]).toEqual([2, 6]);
    t.set(1, rec('c', basis(3, 2), { keyText: 'my pot', value: 'a green pot' }));
    expect(slotPostings(t).byTerm.get('green')).toEqual([0, 1, 2]);
    t.clear(0);
    expect(slotPostings(t).byTerm.get('corvane')).toBeUndefined();
    expect(slotPostings(t).byTerm.get('green')).toEqual([1, 2]);
    expect([slotPostings(t).n, slotPostings(t).total]).toEqual([2, 6]);
  });

  it('ends where postings built afresh would, over random writes and clears (fast-check, seed 5)', () => {
    const values = ['a green Corvane', 'a green fern', 'Friday at 9', 'the blue pot', 'blue chain wax', 'a fern and a pot'];
    console.log('fast-check seed 5');
    fc.assert(
      fc.property(fc.array(fc.tuple(fc.nat(5), fc.option(fc.nat(5), { nil: null })), { maxLength: 40 }), (steps) => {
        const t = table(6, 3, [null, null, null, null, null, null]);
        let rev = 0;
        for (const [slot, value] of steps) {
          if (value === null) t.clear(slot);
          else t.set(slot, rec(`v${rev++}`, basis(3, 0), { keyText: 'my thing', value: values[value]! }));
          slotPostings(t);
        }
        const fresh = postingsOf(slotDocStats(t));
        const kept = slotPostings(t);
        expect([kept.n, kept.total]).toEqual([fresh.n, fresh.total]);
        expect(new Map([...kept.byTerm].sort())).toEqual(new Map([...fresh.byTerm].sort()));
      }),
      { seed: 5, numRuns: 300 },
    );
  });
});

describe('nextQuery (multi-hop)', () => {
  it('is normalize(q + sum_i a_i v_i) over the selected slots', () => {
    const q = basis(3, 0);
    const r = { selected: [1, 2], weight: Float64Array.from([0.1, 0.6, 0.3]) } as unknown as Parameters<typeof nextQuery>[1];
    const values = [basis(3, 0), basis(3, 1), basis(3, 2)];
    const out = nextQuery(q, r, (i) => values[i]!);
    const raw = [1, 0.6, 0.3];
    const n = Math.hypot(...raw);
    expect(out[0]).toBeCloseTo(raw[0]! / n, 6);
    expect(out[1]).toBeCloseTo(raw[1]! / n, 6);
    expect(out[2]).toBeCloseTo(raw[2]! / n, 6);
    expect(q[0]).toBe(1); // the input is not mutated
  });
});
