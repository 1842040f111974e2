// The struct-of-arrays slot table, the vector helpers and the shared text helpers.

import { describe, expect, it } from 'vitest';
import { SlotTable, emptyTable } from '../../src/memory/slots.js';
import { contentWords, fnv1a, textDigest, tokenize } from '../../src/memory/text.js';
import { cosine, dot, normalizeInPlace, pushTopK } from '../../src/memory/vector.js';
import { basis, rec, vec } from './helpers.js';

describe('SlotTable', () => {
  it('stores records in typed arrays and gives them back unchanged', () => {
    const t = new SlotTable(3, 2);
    const r = rec('a', vec(3, 4), { pinned: true, previous: 'z', reads: 4, provenance: ['t1', 't2'] });
    t.set(1, r);
    expect(t.get(1)).toEqual(r);
    expect(t.get(0)).toBeNull();
    expect([...t.keyRow(1)]).toEqual([...vec(3, 4)]);
    expect(t.isUsed(1) && t.isPinned(1)).toBe(true);
    expect(t.count()).toBe(1);
    expect(t.firstFree()).toBe(0);
  });

  it('copies keys and provenance in and out (no aliasing)', () => {
    const t = new SlotTable(1, 2);
    const r = rec('a', vec(1, 0));
    t.set(0, r);
    r.key[0] = 9;
    r.provenance.push('x');
    expect(t.get(0)!.key[0]).toBe(1);
    expect(t.get(0)!.provenance).toEqual(['t-a']);
    t.get(0)!.key[0] = 7;
    expect(t.keys[0]).toBe(1);
  });

  it('clear() frees a slot and zeroes its key; a full table has no free slot', () => {
    const t = new SlotTable(2, 2);
    t.set(0, rec('a', vec(1, 0)));
    t.set(1, rec('b', vec(0, 1)));
    expect(t.firstFree()).toBe(-1);
    t.clear(0);
    expect(t.get(0)).toBeNull();
    expect([...t.keyRow(0)]).toEqual([0, 0]);
    expect(t.firstFree()).toBe(0);
  });

  it('rejects a key of the wrong dimension', () => {
    expect(() => new SlotTable(1, 3).set(0, rec('a', vec(1, 0)))).toThrow(RangeError);
    expect(() => new SlotTable(1, 3).set(0, rec('a', vec(1, 0)))).toThrow('slot key has 2 dims, table holds 3');
  });

  it('a new table has one empty entry per slot in every column', () => {
    const t = new SlotTable(2, 2);
    expect(t.ids).toStrictEqual(['', '']);
    expect(t.keyText).toStrictEqual(['', '']);
    expect(t.value).toStrictEqual(['', '']);
    expect(t.provenance).toStrictEqual([[], []]);
    expect(t.provenance[0]).not.toBe(t.provenance[1]); // one list per slot, not one shared
    for (const col of [t.previous, t.owner, t.subject, t.maybeReplaces]) expect(col).toStrictEqual([undefined, undefined]);
  });

  it('gives back exactly the optional fields a record has, as copies', () => {
    const t = new SlotTable(2, 2);
    const plain = rec('a', vec(1, 0));
    t.set(0, plain);
    expect(t.get(0)).toStrictEqual(plain); // no previous, owner, subject, reply or maybeReplaces keys
    const full = rec('b', vec(0, 1), { previous: 'a', owner: 'Ana', subject: 'my sister', reply: true, maybeReplaces: ['x', 'y'] });
    t.set(1, full);
    expect(t.get(1)).toStrictEqual(full);
    full.maybeReplaces!.push('z');
    const out = t.get(1)!;
    expect(out.maybeReplaces).toEqual(['x', 'y']);
    out.maybeReplaces!.push('w');
    out.provenance.push('w');
    expect(t.get(1)).toMatchObject({ maybeReplaces: ['x', 'y'], provenance: ['t-b'] });
    // An empty maybeReplaces list is no list.
    t.set(0, rec('c', vec(1, 0), { maybeReplaces: [] }));
    expect(t.get(0)).not.toHaveProperty('maybeReplaces');
  });

  it('clear() empties every column of that slot only', () => {
    const t = new SlotTable(2, 2);
    t.set(0, rec('a', vec(1, 0), { owner: 'Ana', subject: 'my sister', reply: true, previous: 'z', maybeReplaces: ['x'] }));
    t.set(1, rec('b', vec(0, 1)));
    t.clear(1);
    expect([...t.keys]).toEqual([1, 0, 0, 0]);
    t.clear(0);
    expect([...t.keys]).toEqual([0, 0, 0, 0]);
    expect([t.ids[0], t.keyText[0], t.value[0], t.provenance[0]]).toStrictEqual(['', '', '', []]);
    expect([t.previous[0], t.owner[0], t.subject[0], t.reply[0], t.maybeReplaces[0]]).toStrictEqual([undefined, undefined, undefined, 0, undefined]);
    expect([t.strength[0], t.halfLife[0], t.stamp[0], t.created[0], t.createdMs[0], t.updatedMs[0], t.reads[0], t.flags[0]]).toEqual([0, 0, 0, 0, 0, 0, 0, 0]);
  });

  it('firstFree() finds a free slot after a used one', () => {
    const t = new SlotTable(3, 2);
    t.set(0, rec('a', vec(1, 0)));
    expect(t.firstFree()).toBe(1);
  });

  it('clone() deep-copies, and to a smaller capacity drops the slots beyond it', () => {
    const t = new SlotTable(3, 2);
    t.set(0, rec('a', vec(1, 0)));
    t.set(2, rec('c', vec(0, 1)));
    const c = t.clone();
    t.clear(0);
    expect(c.get(0)!.id).toBe('a');
    const small = c.clone(2);
    expect(small.capacity).toBe(2);
    expect(small.count()).toBe(1);
  });
});

describe('vector helpers', () => {
  it('dot with an offset, cosine of unnormalised vectors, normalizeInPlace', () => {
    const keys = Float32Array.from([1, 2, 3, 4, 5, 6, 7, 8, 9, 10]);
    expect(dot(Float32Array.from([1, 1, 1, 1, 1]), keys, 5, 5)).toBe(40);
    expect(dot(Float32Array.from([2, 0, 1]), Float32Array.from([1, 5, 3]))).toBe(5);
    expect(cosine([3, 4], [6, 8])).toBeCloseTo(1, 15);
    expect(cosine([1, 0], [0, 0])).toBe(0);
    const v = Float32Array.from([3, 4]);
    expect(normalizeInPlace(v)).toBe(5);
    expect([...v]).toEqual([Math.fround(0.6), Math.fround(0.8)]);
    const z = Float32Array.from([0, 0]);
    expect(normalizeInPlace(z)).toBe(0);
    expect([...z]).toEqual([0, 0]);
  });

  it('pushTopK keeps the k best, best first', () => {
    const idx: number[] = [];
    const score: number[] = [];
    [0.3, 0.9, 0.1, 0.5, 0.7].forEach((s, i) => pushTopK(idx, score, i, s, 3));
    expect(idx).toEqual([1, 4, 3]);
    expect(score).toEqual([0.9, 0.7, 0.5]);
  });

  it('dot of a basis vector picks one coordinate', () => {
    expect(dot(basis(3, 1), Float32Array.from([4, 5, 6]))).toBe(5);
  });
});

describe('text helpers', () => {
  it('tokenize lower-cases, keeps letters and digits of any script, and drops possessive endings', () => {
    expect(tokenize("Dana's bike, 2 Corvane's; I'm Zoë — 東京!")).toEqual(['dana', 'bike', '2', 'corvane', 'i', 'zoë', '東京']);
    expect(contentWords('My bike is a green Corvane')).toEqual(['bike', 'green', 'corvane']);
  });

  // Outside check: FNV-1a 32-bit test vectors of the FNV reference (draft-eastlake-fnv; values from memory).
  it('fnv1a matches the published 32-bit FNV-1a test vectors', () => {
    expect(fnv1a('')).toBe(0x811c9dc5);
    expect(fnv1a('a')).toBe(0xe40c292c);
    expect(fnv1a('foobar')).toBe(0xbf9cf968);
  });

  it('textDigest is 16 hex chars, stable, and holds no text', () => {
    const d = textDigest('my name is Dana');
    expect(d).toMatch(/^[0-9a-f]{16}$/);
    expect(textDigest('my name is Dana')).toBe(d);
    expect(textDigest('my name is Dan')).not.toBe(d);
  });
});

describe('emptyTable', () => {
  it('hands out one empty table per shape, to plan a new session against', () => {
    const a = emptyTable(64, 384);
    expect(emptyTable(64, 384)).toBe(a);
    expect(a.count()).toBe(0);
    expect([a.capacity, a.dim]).toEqual([64, 384]);
    const b = emptyTable(16, 384);
    expect(b).not.toBe(a);
    expect([b.capacity, b.dim]).toEqual([16, 384]);
  });
});
