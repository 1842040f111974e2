// Promotion: a logbook value the turn used comes back into working memory as a slot, reinforced as a
// use (strength s + (1 - s) * gain, never under twice the floor; half-life * growth). What may come
// back: evicted slot values with a key of the table's width that are not already live; never a turn
// and never a superseded value. Expected values are worked by hand from the write defaults (gain 0.3,
// growth 1.5, floor 0.02, half-life 200).

import { describe, expect, it } from 'vitest';
import type { LogbookEntry } from '../../src/types.js';
import { basis, planTurn, rec, table } from './helpers.js';

function entry(id: string, over: Partial<LogbookEntry> = {}): LogbookEntry {
  return {
    id, kind: 'capacity', tenant: 'shop', session: 's1', value: `value ${id}`, keyText: `key ${id}`, provenance: [`t-${id}`],
    atMs: 500, createdMs: 40, clock: 3, seq: 0, key: basis(3, 2), strength: 0.5, halfLife: 10, ...over,
  };
}

describe('planWrite: promotion from the logbook', () => {
  it('puts an evicted value back into the first free slot, reinforced as a use', () => {
    const t = table(3, 3, [null, rec('a', basis(3, 0))]);
    const item = entry('back', { owner: 'Ana', provenance: ['t2', 't1'] });
    const p = planTurn(t, [], { promote: [item], now: 8, nowMs: 9000 });
    expect(p.promoted).toEqual([{ slot: 0, id: 'back' }]);
    expect(p.events).toEqual([{ type: 'allocate', slot: 0, id: 'back', clock: 8, atMs: 9000 }]);
    expect(p.ops.map((o) => o.index)).toEqual([0]);
    const s = p.ops[0]!.slot!;
    expect(s).toEqual({
      id: 'back', key: item.key, keyText: 'key back', value: 'value back', provenance: ['t2', 't1'],
      strength: expect.closeTo(0.5 + 0.5 * 0.3, 12), halfLife: 15, stamp: 8, created: 8,
      createdMs: 40, updatedMs: 9000, reads: 1, pinned: false, owner: 'Ana',
    });
    expect(s.provenance).not.toBe(item.provenance); // a copy: the logbook entry is not aliased
    expect(p.slotsInUse).toBe(2);
  });

  it('without a stored strength and half-life starts from twice the floor and the default half-life', () => {
    const item = entry('bare', { strength: undefined, halfLife: undefined });
    const s = planTurn(table(2, 3, []), [], { promote: [item] }).ops[0]!.slot!;
    expect(s.strength).toBeCloseTo(0.04 + 0.96 * 0.3, 12);
    expect(s.halfLife).toBe(300);
    expect(s).not.toHaveProperty('owner');
  });

  it('never comes back weaker than twice the floor', () => {
    const item = entry('faint', { strength: 0.01 });
    const s = planTurn(table(2, 3, []), [], { promote: [item] }, { reinforceGain: 0 }).ops[0]!.slot!;
    expect(s.strength).toBe(0.04);
  });

  it('evicts the weakest slot to make room when the table is full', () => {
    const t = table(2, 3, [rec('strong', basis(3, 0), { strength: 0.9 }), rec('weak', basis(3, 1), { strength: 0.3 })]);
    const p = planTurn(t, [], { promote: [entry('back')] });
    expect(p.evictions).toEqual([expect.objectContaining({ slot: 1, reason: 'capacity' })]);
    expect(p.promoted).toEqual([{ slot: 1, id: 'back' }]);
  });

  it('stops when every slot is pinned', () => {
    const t = table(2, 3, [rec('p1', basis(3, 0), { pinned: true }), rec('p2', basis(3, 1), { pinned: true })]);
    const p = planTurn(t, [], { promote: [entry('back'), entry('again', { key: basis(3, 0) })] });
    expect(p.promoted).toEqual([]);
    expect(p.ops).toEqual([]);
    expect(p.events).toEqual([]);
  });

  it('skips a value that is already live in a slot', () => {
    const t = table(3, 3, [rec('other', basis(3, 0)), rec('back', basis(3, 1))]);
    const p = planTurn(t, [], { promote: [entry('back')] });
    expect(p.promoted).toEqual([]);
    expect(p.ops).toEqual([]);
  });

  it.each([
    ['no key', { key: undefined }],
    ['a key of another width', { key: basis(4, 1) }],
    ['a turn', { kind: 'turn' as const }],
    ['a superseded value', { kind: 'superseded' as const }],
  ])('skips %s', (_what, over) => {
    const p = planTurn(table(2, 3, []), [], { promote: [entry('x', over)] });
    expect(p.promoted).toEqual([]);
    expect(p.ops).toEqual([]);
  });

  it('promotes the remaining values after skipping one', () => {
    const p = planTurn(table(3, 3, []), [], { promote: [entry('turn', { kind: 'turn' }), entry('back')] });
    expect(p.promoted).toEqual([{ slot: 0, id: 'back' }]);
  });
});
