// The write planner: allocation, overwrite (demoted as superseded, linked to its successor, key
// blended), reinforcement of a repeated fact, eviction by capacity / decay / age, all-pinned tables,
// update candidates that retarget the slot holding a value of their kind, the fidelity rules (an
// overwrite needs shared words; a turn never overwrites itself; a bot's reply never overwrites the
// user; an ambiguous update replaces nothing), and the gate threshold. Gate values are made exact by
// passing explicit weights (all features weighted 0, so the gate is sigma(bias)).

import { describe, expect, it } from 'vitest';
import type { Candidate } from '../../src/memory/extract.js';
import { MAX_PROVENANCE } from '../../src/memory/write.js';
import { basis, flatGate, keyed as cand, planTurn as plan, rec, sigma, table, vec } from './helpers.js';

const GATE = sigma(2); // 0.8807970779778823

describe('planWrite: allocation', () => {
  it('puts a new fact into the first free slot with the gate as its strength', () => {
    const t = table(3, 3, [rec('a', basis(3, 0))]);
    const p = plan(t, [cand(basis(3, 1), { key: 'my bike', value: 'a green Corvane' })], { now: 4, nowMs: 5000 });
    expect(p.outcomes).toEqual([expect.objectContaining({ index: 0, outcome: 'allocated', slot: 1, id: 'new1', cosine: 0 })]);
    expect(p.outcomes[0]!.gate).toBeCloseTo(GATE, 15);
    expect(p.ops).toHaveLength(1);
    const op = p.ops[0]!;
    expect(op.index).toBe(1);
    expect(op.slot).toMatchObject({
      id: 'new1', keyText: 'my bike', value: 'a green Corvane', provenance: ['t9'], halfLife: 200, stamp: 4, created: 4, createdMs: 5000, updatedMs: 5000, reads: 0, pinned: false,
    });
    expect(op.slot!.strength).toBeCloseTo(GATE, 15);
    expect([...op.slot!.key]).toEqual([0, 1, 0]);
    expect(p.events).toEqual([{ type: 'allocate', slot: 1, id: 'new1', clock: 4, atMs: 5000 }]);
    expect(p.demoted).toEqual([]);
    expect(p.slotsInUse).toBe(2);
    expect(t.isUsed(1)).toBe(false); // the plan does not touch the table
  });

  it('reports cosine -1 against an empty memory', () => {
    const p = plan(table(2, 3, []), [cand(basis(3, 0))]);
    expect(p.outcomes[0]!.cosine).toBe(-1);
    expect(p.outcomes[0]!.features.novelty).toBe(1);
  });
});

describe('planWrite: stored vector', () => {
  it('addresses with the key but stores the `stored` vector when given', () => {
    const t = table(2, 3, [rec('a', basis(3, 0))]);
    const kc = { ...cand(vec(1, 0.2, 0), { key: 'key a', value: 'a red Pennick' }), stored: basis(3, 2) };
    // Addressing uses key (cosine 0.98 with slot 0): an overwrite, whose key blends toward `stored`.
    const over = plan(t, [kc]);
    expect(over.outcomes[0]!.outcome).toBe('overwritten');
    const k = over.ops[0]!.slot!.key;
    expect(k[0]).toBeCloseTo(Math.SQRT1_2, 6);
    expect(k[2]).toBeCloseTo(Math.SQRT1_2, 6);
    // A new slot stores `stored` itself.
    const fresh = plan(table(2, 3, []), [kc]);
    expect([...fresh.ops[0]!.slot!.key]).toEqual([0, 0, 1]);
  });
});

describe('planWrite: overwrite', () => {
  const oldKey = basis(3, 0);
  const newKey = vec(1, 0.2, 0); // cosine 1/sqrt(1.04) = 0.98 with the old key: above 0.8
  const make = () => table(2, 3, [rec('old', oldKey, { keyText: 'my bike', value: 'a green Corvane', strength: 0.4, provenance: ['t1'], createdMs: 10, created: 1 })]);

  it('replaces the value, demotes the old one as superseded with successor = new id, and blends the key', () => {
    const p = plan(make(), [cand(newKey, { key: 'my bike now', value: 'a red Pennick' })], { now: 7, nowMs: 3000 });
    const o = p.outcomes[0]!;
    expect(o).toMatchObject({ outcome: 'overwritten', slot: 0, id: 'new1', supersededId: 'old' });
    expect(o.cosine).toBeCloseTo(1 / Math.sqrt(1.04), 6);
    expect(p.demoted).toHaveLength(1);
    expect(p.demoted[0]).toMatchObject({ id: 'old', kind: 'superseded', successor: 'new1', value: 'a green Corvane', keyText: 'my bike', provenance: ['t1'], tenant: 'shop', session: 's1', clock: 7, atMs: 3000, createdMs: 10 });
    expect(p.demoted[0]!.strength).toBeCloseTo(0.4 * 2 ** (-7 / 10), 12);
    const slot = p.ops[0]!.slot!;
    expect(slot).toMatchObject({ id: 'new1', previous: 'old', keyText: 'my bike now', value: 'a red Pennick', provenance: ['t9'], created: 1, createdMs: 10, updatedMs: 3000, stamp: 7 });
    expect(slot.strength).toBeCloseTo(GATE, 15); // max(gate, decayed old strength)
    // keyBlend 0.5: normalize(0.5 * old + 0.5 * new)
    const mid = [0.5 + 0.5 * newKey[0]!, 0.5 * newKey[1]!, 0];
    const n = Math.hypot(...mid);
    expect(slot.key[0]).toBeCloseTo(mid[0]! / n, 6);
    expect(slot.key[1]).toBeCloseTo(mid[1]! / n, 6);
    expect(p.events).toEqual([{ type: 'overwrite', slot: 0, id: 'new1', clock: 7, atMs: 3000 }]);
  });

  it('keyBlend 0 keeps the old key and keyBlend 1 takes the new one', () => {
    const keep = plan(make(), [cand(newKey, { key: 'my bike', value: 'a red Pennick' })], {}, { keyBlend: 0 }).ops[0]!.slot!.key;
    expect([...keep]).toEqual([1, 0, 0]);
    const take = plan(make(), [cand(newKey, { key: 'my bike', value: 'a red Pennick' })], {}, { keyBlend: 1 }).ops[0]!.slot!.key;
    for (let j = 0; j < 3; j++) expect(take[j]).toBeCloseTo(newKey[j]!, 6);
  });

  it('a fact restated many times cites only its newest MAX_PROVENANCE turns', () => {
    const older = Array.from({ length: 40 }, (_, i) => `t${40 - i}`);
    const t = table(2, 3, [rec('old', oldKey, { keyText: 'my bike', value: 'a green Corvane', strength: 0.4, provenance: older, createdMs: 10, created: 1 })]);
    const p = plan(t, [cand(newKey, { key: 'my bike', value: 'a green Corvane' }, 't41')], { now: 10 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'reinforced', id: 'old' });
    const again = p.ops[0]!.slot!;
    expect(again.provenance).toEqual(['t41', ...older.slice(0, MAX_PROVENANCE - 1)]);
  });

  it('allocates instead when the best match is under the overwrite threshold', () => {
    const p = plan(make(), [cand(vec(1, 1, 0), { key: 'my bike', value: 'a red Pennick' })], {}, { overwriteThreshold: 0.8 }); // cosine 0.707
    expect(p.outcomes[0]!.outcome).toBe('allocated');
    expect(p.outcomes[0]!.slot).toBe(1);
    expect(p.demoted).toEqual([]);
  });

  it('reinforces instead when the value is the same fact again (case and punctuation aside)', () => {
    const p = plan(make(), [cand(newKey, { key: 'my bike', value: 'A green Corvane!' }, 't5')], { now: 10 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'reinforced', slot: 0, id: 'old' });
    const s = p.ops[0]!.slot!;
    expect(s.id).toBe('old');
    expect(s.value).toBe('a green Corvane');
    expect(s.provenance).toEqual(['t5', 't1']);
    // reinforce(0.4 * 2^-1 = 0.2) = 0.2 + 0.8 * 0.3 = 0.44, below the gate, so the gate wins
    expect(s.strength).toBeCloseTo(GATE, 15);
    expect(s.halfLife).toBe(15); // 10 * 1.5
    expect(s.stamp).toBe(10);
    expect(p.demoted).toEqual([]);
  });
});

describe('planWrite: eviction', () => {
  it('evicts the weakest non-pinned slot with reason capacity and demotes it', () => {
    const t = table(3, 3, [
      rec('pinnedWeak', basis(3, 0), { strength: 0.1, pinned: true }),
      rec('mid', basis(3, 1), { strength: 0.5 }),
      rec('weak', basis(3, 2), { strength: 0.3 }),
    ]);
    const p = plan(t, [cand(vec(1, 1, 1))], {}, { overwriteThreshold: 0.9 });
    expect(p.evictions).toEqual([expect.objectContaining({ slot: 2, reason: 'capacity', logged: true, strength: 0.3 })]);
    expect(p.demoted).toEqual([expect.objectContaining({ id: 'weak', kind: 'capacity', strength: 0.3 })]);
    expect(p.demoted[0]!.successor).toBeUndefined();
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 2, id: 'new1' });
    expect(p.events.map((e) => [e.type, e.slot, e.reason])).toEqual([['evict', 2, 'capacity'], ['allocate', 2, undefined]]);
    expect(p.slotsInUse).toBe(3);
  });

  it('evicts slots decayed under the strength floor as decayed, but never a pinned one', () => {
    const t = table(3, 3, [
      rec('faded', basis(3, 0), { strength: 0.03, halfLife: 10 }),
      rec('pinned', basis(3, 1), { strength: 0.01, halfLife: 10, pinned: true }),
      rec('fresh', basis(3, 2), { strength: 0.9, halfLife: 10 }),
    ]);
    const p = plan(t, [], { now: 10 }); // faded: 0.03 -> 0.015 < 0.02
    expect(p.evictions).toEqual([expect.objectContaining({ slot: 0, reason: 'decayed', logged: true })]);
    expect(p.evictions[0]!.strength).toBeCloseTo(0.015, 12);
    expect(p.demoted).toEqual([expect.objectContaining({ id: 'faded', kind: 'decayed', clock: 10 })]);
    expect(p.ops).toEqual([{ index: 0, slot: null }]);
    expect(p.slotsInUse).toBe(2);
  });

  it('evicts slots older than maxAgeMs as expired', () => {
    const t = table(2, 3, [rec('old', basis(3, 0), { createdMs: 0 }), rec('young', basis(3, 1), { createdMs: 1500 })]);
    const p = plan(t, [], { nowMs: 2000 }, { maxAgeMs: 1000 });
    expect(p.evictions.map((e) => [e.record.id, e.reason])).toEqual([['old', 'expired']]);
    expect(p.demoted[0]).toMatchObject({ id: 'old', kind: 'expired' });
    expect(plan(t, [], { nowMs: 2000 }, { maxAgeMs: 0 }).evictions).toEqual([]); // 0 never expires
  });

  it('drops the candidate when every slot is pinned', () => {
    const t = table(2, 3, [rec('p1', basis(3, 0), { pinned: true }), rec('p2', basis(3, 1), { pinned: true })]);
    const p = plan(t, [cand(basis(3, 2))]);
    expect(p.outcomes).toEqual([expect.objectContaining({ outcome: 'gated_out', slot: -1 })]);
    expect(p.ops).toEqual([]);
    expect(p.demoted).toEqual([]);
    expect(p.evictions).toEqual([]);
  });
});

describe('planWrite: updates', () => {
  const sentence = 'Actually, can we move it to Friday instead?';
  const update = (turn = 't4', over: Partial<Candidate> = {}) =>
    cand(vec(1, 1, 1), { key: ', can we move it to instead?', value: sentence, text: sentence, pattern: 'update', updates: { kind: 'date', expr: 'Friday' }, ...over }, turn);

  it('retargets the one slot of the last turns holding a date and swaps the date expression', () => {
    const t = table(4, 3, [
      rec('booking', basis(3, 0), { keyText: 'my booking', value: 'book a service for Tuesday', updatedMs: 100, stamp: 2, provenance: ['t2'] }),
      rec('name', basis(3, 1), { keyText: 'my name', value: 'Dana', updatedMs: 200, stamp: 3 }),
      // A date said long ago (outside the correction window) is not what "it" refers to.
      rec('dinner', basis(3, 2), { keyText: 'dinner', value: 'dinner on Monday', updatedMs: 50, stamp: -20 }),
    ]);
    const p = plan(t, [update()], { now: 4 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', slot: 0, supersededId: 'booking' });
    const s = p.ops[0]!.slot!;
    expect(s.value).toBe('book a service for Friday');
    expect(s.keyText).toBe('my booking');
    expect([...s.key]).toEqual([1, 0, 0]); // an update does not move the key
    expect(s.provenance).toEqual(['t4', 't2']);
    expect(p.demoted).toEqual([expect.objectContaining({ id: 'booking', value: 'book a service for Tuesday', kind: 'superseded', successor: s.id })]);
  });

  it('with two dated facts it could be about, replaces neither and is kept beside both, newest first', () => {
    const t = table(4, 3, [
      rec('exam', basis(3, 0), { keyText: 'my exam', value: 'on the 14th of October', updatedMs: 100, stamp: 1 }),
      rec('wedding', basis(3, 1), { keyText: "my friend's wedding", value: 'on the 18th of October', updatedMs: 200, stamp: 2 }),
    ]);
    const moved = update('t5', { value: "They moved it, it's in November instead.", text: "They moved it, it's in November instead.", updates: { kind: 'date', expr: 'November' } });
    const p = plan(t, [moved], { now: 5 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 2, maybeReplaces: ['wedding', 'exam'] });
    expect(p.ops.map((o) => o.index)).toEqual([2]);
    expect(p.ops[0]!.slot!.maybeReplaces).toEqual(['wedding', 'exam']);
    expect(p.demoted).toEqual([]);
    // The turn before says which one "it" is: then it is an update of that one.
    const asked = plan(t, [moved], { now: 5, context: ['How is prep for your exam going?'] });
    expect(asked.outcomes[0]).toMatchObject({ outcome: 'overwritten', slot: 0, supersededId: 'exam' });
    expect(asked.ops[0]!.slot!.value).toBe('on the 14th of November');
  });

  it('a contrast ("Saturday, not Sunday") corrects the slot holding the rejected value, whatever its age', () => {
    const t = table(3, 3, [
      rec('meetup', basis(3, 0), { keyText: 'the meetup', value: 'meetup at the library on Sunday morning', stamp: -50 }),
      rec('lesson', basis(3, 1), { keyText: 'my booking (lesson)', value: 'lessons on Tuesdays', stamp: 3 }),
    ]);
    const text = "no wait, it's Saturday not Sunday.";
    const p = plan(t, [cand(vec(0, 0, 1), { key: "it's", value: text, text, pattern: 'update', updates: { kind: 'date', expr: 'Saturday' } }, 't6')], { now: 6 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', slot: 0, supersededId: 'meetup' });
    expect(p.ops[0]!.slot!.value).toBe('meetup at the library on Saturday morning');
  });

  it('with no dated slot, allocates the update sentence as a new fact', () => {
    const t = table(2, 3, [rec('name', basis(3, 1), { value: 'Dana' })]);
    const c = cand(basis(3, 0), { value: 'move it to Friday', updates: { kind: 'date', expr: 'Friday' } });
    expect(plan(t, [c]).outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 1 });
  });
});

describe('planWrite: fidelity', () => {
  const allergy = () => table(3, 3, [rec('allergy', basis(3, 0), { keyText: 'what I am allergic to (my allergy)', value: 'peanuts', provenance: ['t13'], stamp: 13 })]);

  it('never overwrites on meaning alone: a close key that shares no word with the fact is kept beside it', () => {
    const p = plan(allergy(), [cand(vec(1, 0.1, 0), { key: 'the in-person sessions', value: 'no nut snacks at the in-person sessions please' }, 't15')], { now: 15 });
    expect(p.outcomes[0]!.cosine).toBeGreaterThan(0.99);
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 1 });
    expect(p.demoted).toEqual([]);
  });

  it('overwrites at the threshold and not just below it (shared words present)', () => {
    const t = () => table(2, 2, [rec('lvl', vec(1, 0), { keyText: 'my level', value: 'A2' })]);
    const at = (c: number) => cand(vec(c, Math.sqrt(1 - c * c)), { key: 'my level', value: 'B1' });
    expect(plan(t(), [at(0.8)], {}, { overwriteThreshold: 0.8 }).outcomes[0]!.outcome).toBe('overwritten');
    expect(plan(t(), [at(0.799)], {}, { overwriteThreshold: 0.8 }).outcomes[0]!.outcome).toBe('allocated');
  });

  it('one clause of a turn never overwrites another clause of the same turn', () => {
    const t = table(3, 3, []);
    const first = cand(basis(3, 0), { key: 'what I prefer: tutor', value: 'a female tutor' }, 't9');
    const second = cand(basis(3, 0), { key: 'what I prefer: tutor', value: 'grammar in English', clause: true }, 't9');
    const p = plan(t, [first, second]);
    expect(p.outcomes.map((o) => o.outcome)).toEqual(['allocated', 'allocated']);
    expect(p.demoted).toEqual([]);
    // The same key from a later turn is an update.
    const later = plan(t, [first, cand(basis(3, 0), { key: 'what I prefer: tutor', value: 'a male tutor' }, 't75')]);
    expect(later.outcomes.map((o) => o.outcome)).toEqual(['allocated', 'overwritten']);
  });

  it("a bot's reply never overwrites what the user said; a named speaker's turn is a peer's", () => {
    const reply = { ...cand(vec(1, 0.1, 0), { key: 'what I am allergic to', value: 'tree nuts' }, 't14'), role: 'assistant' as const };
    const p = plan(allergy(), [reply], { now: 14 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 1 });
    expect(p.ops[0]!.slot!.reply).toBe(true);
    expect(p.demoted).toEqual([]);
  });

  it("one speaker's fact is never overwritten by another speaker's", () => {
    const t = table(2, 3, [rec('job', basis(3, 0), { keyText: 'my job', value: 'nurse', owner: 'Ana' })]);
    const kofi = { ...cand(basis(3, 0), { key: 'my job', value: 'carpenter' }, 't8'), owner: 'Kofi' };
    expect(plan(t, [kofi]).outcomes[0]).toMatchObject({ outcome: 'allocated' });
    const ana = { ...cand(basis(3, 0), { key: 'my job', value: 'midwife' }, 't9'), owner: 'ana' };
    expect(plan(t, [ana]).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'job' });
  });

  it('facts that add up (likes, possessions) replace one another only when the sentence says it changes', () => {
    const t = table(2, 3, [rec('like', basis(3, 0), { keyText: 'what I like: chocolate', value: 'dark chocolate' })]);
    expect(plan(t, [cand(basis(3, 0), { key: 'what I like: chocolate', value: 'milk chocolate', accumulate: true })]).outcomes[0]!.outcome).toBe('allocated');
    expect(plan(t, [cand(basis(3, 0), { key: 'what I like: chocolate', value: 'milk chocolate', accumulate: true, revises: true })]).outcomes[0]!.outcome).toBe('overwritten');
    expect(plan(t, [cand(basis(3, 0), { key: 'what I like: chocolate', value: 'Dark chocolate.', accumulate: true })]).outcomes[0]!.outcome).toBe('reinforced');
  });

  it('a correction that shares no word with anything is kept beside the newest fact, not written over it', () => {
    const t = table(3, 3, [rec('kitchen', basis(3, 0), { keyText: 'play it in the kitchen', value: 'play it in the kitchen', stamp: 4 })]);
    const text = 'No, the other one instead.';
    const p = plan(t, [cand(basis(3, 1), { key: 'the other one', value: text, text, pattern: 'correction', updates: { kind: 'latest' } }, 't6')], { now: 6 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', maybeReplaces: ['kitchen'] });
    // Sharing a word with it, the correction replaces it.
    const text2 = 'No, play it on the patio speaker instead.';
    const q = plan(t, [cand(basis(3, 1), { key: 'patio speaker', value: text2, text: text2, pattern: 'correction', updates: { kind: 'latest' } }, 't6')], { now: 6 });
    expect(q.outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'kitchen' });
  });
});

describe('planWrite: gate and reinforcement of what was read', () => {
  it('drops a candidate under the threshold, unless it asks to be pinned', () => {
    const t = table(2, 3, []);
    const low = plan(t, [cand(basis(3, 0))], {}, { gateWeights: flatGate(-3) });
    expect(low.outcomes[0]).toMatchObject({ outcome: 'gated_out', slot: -1 });
    expect(low.outcomes[0]!.gate).toBeCloseTo(sigma(-3), 15);
    expect(low.ops).toEqual([]);
    const pinned = plan(t, [cand(basis(3, 0), { pin: true })], {}, { gateWeights: flatGate(-3) });
    expect(pinned.outcomes[0]!.outcome).toBe('allocated');
    expect(pinned.ops[0]!.slot).toMatchObject({ pinned: true });
    expect(pinned.ops[0]!.slot!.strength).toBeCloseTo(sigma(-3), 15);
  });

  it('reinforces the slots a read used: s + (1 - s) * gain at the decayed strength, half-life * growth', () => {
    const t = table(2, 3, [rec('a', basis(3, 0), { strength: 0.8, halfLife: 10, reads: 2 }), rec('b', basis(3, 1))]);
    const p = plan(t, [], { now: 10, reinforce: ['a', 'missing'] });
    expect(p.reinforced).toHaveLength(1);
    expect(p.reinforced[0]!.strength).toBeCloseTo(0.4 + 0.6 * 0.3, 12);
    expect(p.reinforced[0]!.halfLife).toBe(15);
    expect(p.ops[0]!.slot).toMatchObject({ id: 'a', reads: 3, stamp: 10, halfLife: 15 });
  });

  it('sees its own earlier candidates: a fact written twice in one plan is allocated once, then reinforced', () => {
    const t = table(2, 3, []);
    const p = plan(t, [cand(basis(3, 0), { value: 'Dana' }, 't1'), cand(basis(3, 0), { value: 'Dana' }, 't2')]);
    expect(p.outcomes.map((o) => o.outcome)).toEqual(['allocated', 'reinforced']);
    expect(p.ops).toHaveLength(1);
    expect(p.ops[0]!.slot!.provenance).toEqual(['t2', 't1']);
  });
});
