// Every threshold of the write planner tested just below, at and just above its value: the gate
// threshold, the overwrite threshold, the strength floor, the half-match of a bare correction
// (overwriteThreshold / 2) and the correction windows (CORRECTION_WINDOW, BARE_CORRECTION_WINDOW).
// Values "at" a threshold are the exact doubles the planner compares (read back from its outcome),
// so a `>=` turned into `>` (or `<` into `<=`) changes the result. Also the strength an overwrite
// carries over: max(gate, decayed old strength), with the old strength the larger one.

import { describe, expect, it } from 'vitest';
import type { Candidate } from '../../src/memory/extract.js';
import type { SlotTable } from '../../src/memory/slots.js';
import { BARE_CORRECTION_WINDOW, CORRECTION_WINDOW, planWrite, type KeyedCandidate, type WritePlanInput } from '../../src/memory/write.js';
import { basis, flatGate, rec, sigma, table, vec, writeParams } from './helpers.js';

const GATE = sigma(2);

/** The next double above / below x (x > 0). */
function nextUp(x: number): number {
  const b = new Float64Array([x]);
  const u = new BigInt64Array(b.buffer);
  u[0] = u[0]! + 1n;
  return b[0]!;
}
function nextDown(x: number): number {
  const b = new Float64Array([x]);
  const u = new BigInt64Array(b.buffer);
  u[0] = u[0]! - 1n;
  return b[0]!;
}

function cand(key: Float32Array, over: Partial<Candidate> = {}, turn = 't9'): KeyedCandidate {
  return { candidate: { key: 'my topic', value: 'a value', text: 'my topic is a value', pattern: 'my-x-is-y', ...over }, key, turn, role: 'user' };
}

function plan(t: SlotTable, candidates: KeyedCandidate[], over: Partial<WritePlanInput> = {}, params = {}) {
  let n = 0;
  return planWrite({
    table: t, now: 0, nowMs: 1000, params: writeParams({ gateWeights: flatGate(2), gateThreshold: 0.5, ...params }),
    tenant: 'shop', session: 's1', candidates, reinforce: [], newId: () => `new${++n}`, ...over,
  });
}

describe('edges: gate threshold', () => {
  const t = () => table(2, 3, []);
  it('a gate score exactly at the threshold is written; one double above the score is not', () => {
    expect(plan(t(), [cand(basis(3, 0))], {}, { gateThreshold: GATE }).outcomes[0]!.outcome).toBe('allocated');
    expect(plan(t(), [cand(basis(3, 0))], {}, { gateThreshold: nextDown(GATE) }).outcomes[0]!.outcome).toBe('allocated');
    expect(plan(t(), [cand(basis(3, 0))], {}, { gateThreshold: nextUp(GATE) }).outcomes[0]!.outcome).toBe('gated_out');
  });
});

describe('edges: overwrite threshold', () => {
  const t = () => table(2, 2, [rec('lvl', vec(1, 0), { keyText: 'my level', value: 'A2' })]);
  const c = () => cand(vec(0.8, 0.6), { key: 'my level', value: 'B1' });
  // The cosine the planner computes for this pair (float32 vectors, so not exactly 0.8).
  const cos = plan(t(), [c()], {}, { overwriteThreshold: 2 }).outcomes[0]!.cosine;

  it('overwrites when the cosine equals the threshold exactly', () => {
    expect(cos).toBeCloseTo(0.8, 6);
    const p = plan(t(), [c()], {}, { overwriteThreshold: cos });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', slot: 0, supersededId: 'lvl' });
  });
  it('overwrites just above the threshold and allocates just below it', () => {
    expect(plan(t(), [c()], {}, { overwriteThreshold: nextDown(cos) }).outcomes[0]!.outcome).toBe('overwritten');
    expect(plan(t(), [c()], {}, { overwriteThreshold: nextUp(cos) }).outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 1 });
  });
});

describe('edges: strength floor', () => {
  // No time passes (now = stamp), so the strength compared is exactly the stored one.
  const at = (s: number) => plan(table(2, 3, [rec('a', basis(3, 0), { strength: s, stamp: 5 })]), [], { now: 5 }, { strengthFloor: 0.02 });
  it('keeps a slot exactly at the floor and just above it; evicts it just below', () => {
    expect(at(0.02).evictions).toEqual([]);
    expect(at(nextUp(0.02)).evictions).toEqual([]);
    expect(at(nextDown(0.02)).evictions).toEqual([expect.objectContaining({ slot: 0, reason: 'decayed' })]);
  });
  it('uses the decayed strength: 0.04 one half-life later sits at the floor and stays', () => {
    const p = plan(table(2, 3, [rec('a', basis(3, 0), { strength: 0.04, halfLife: 10, stamp: 0 })]), [], { now: 10 }, { strengthFloor: 0.02 });
    expect(p.evictions).toEqual([]);
    const q = plan(table(2, 3, [rec('a', basis(3, 0), { strength: 0.04, halfLife: 10, stamp: 0 })]), [], { now: 10.001 }, { strengthFloor: 0.02 });
    expect(q.evictions).toEqual([expect.objectContaining({ slot: 0, reason: 'decayed' })]);
  });
});

describe('edges: strength carried by an overwrite', () => {
  it('keeps the decayed old strength when it is above the gate (an update is as established as what it replaces)', () => {
    const t = table(2, 3, [rec('bike', basis(3, 0), { keyText: 'my bike', value: 'a green Corvane', strength: 1, halfLife: 10, stamp: 0 })]);
    const p = plan(t, [cand(vec(1, 0.2, 0), { key: 'my bike', value: 'a red Pennick' })], { now: 1 });
    expect(p.outcomes[0]!.outcome).toBe('overwritten');
    const old = 2 ** (-1 / 10); // 0.933 > gate 0.881
    expect(old).toBeGreaterThan(GATE);
    expect(p.ops[0]!.slot!.strength).toBeCloseTo(old, 12);
    expect(p.demoted[0]!.strength).toBeCloseTo(old, 12);
  });
  it('takes the gate when the decayed old strength is below it', () => {
    const t = table(2, 3, [rec('bike', basis(3, 0), { keyText: 'my bike', value: 'a green Corvane', strength: 1, halfLife: 10, stamp: 0 })]);
    const p = plan(t, [cand(vec(1, 0.2, 0), { key: 'my bike', value: 'a red Pennick' })], { now: 10 });
    expect(p.ops[0]!.slot!.strength).toBeCloseTo(GATE, 12); // 0.5 < 0.881
  });
});

describe('edges: a bare correction (no value of its own)', () => {
  const text = 'No, the kitchen speaker instead.';
  const correction = (key: Float32Array, turn = 't60') => cand(key, { key: 'kitchen speaker', value: text, text, pattern: 'correction', updates: { kind: 'latest' } }, turn);

  describe('half-match: cosine >= overwriteThreshold / 2 with a shared word replaces the best slot, however old', () => {
    // The fact is far outside the correction window, so only the half-match can reach it.
    const t = () => table(3, 2, [rec('spk', vec(1, 0), { keyText: 'play it on the kitchen speaker', value: 'play it on the kitchen speaker', stamp: 0, halfLife: 1000 })]);
    const key = vec(0.5, Math.sqrt(0.75));
    const cos = plan(t(), [correction(key)], { now: 60 }, { overwriteThreshold: 2 }).outcomes[0]!.cosine;
    it('at half the threshold it replaces the fact', () => {
      expect(60 - 0).toBeGreaterThan(CORRECTION_WINDOW);
      expect(cos).toBeCloseTo(0.5, 6);
      const p = plan(t(), [correction(key)], { now: 60 }, { overwriteThreshold: 2 * cos });
      expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', slot: 0, supersededId: 'spk' });
    });
    it('just above half the threshold it replaces the fact; just below it replaces nothing', () => {
      expect(plan(t(), [correction(key)], { now: 60 }, { overwriteThreshold: 2 * nextDown(cos) }).outcomes[0]!.outcome).toBe('overwritten');
      const below = plan(t(), [correction(key)], { now: 60 }, { overwriteThreshold: 2 * nextUp(cos) });
      expect(below.outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 1 });
      expect(below.outcomes[0]!.maybeReplaces).toBeUndefined();
      expect(below.demoted).toEqual([]);
    });
  });

  describe('window: a related fact with no key match is corrected only within CORRECTION_WINDOW turns', () => {
    // Orthogonal keys (cosine 0): only the window search can find the fact.
    const at = (age: number) => {
      const t = table(3, 2, [rec('spk', vec(1, 0), { keyText: 'play it on the kitchen speaker', value: 'play it on the kitchen speaker', stamp: 100 - age })]);
      return plan(t, [correction(vec(0, 1))], { now: 100 });
    };
    it(`at ${CORRECTION_WINDOW} turns and one below it replaces the fact`, () => {
      expect(at(CORRECTION_WINDOW - 1).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'spk' });
      expect(at(CORRECTION_WINDOW).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'spk' });
    });
    it(`at ${CORRECTION_WINDOW + 1} turns it replaces nothing and is not tied to it`, () => {
      const p = at(CORRECTION_WINDOW + 1);
      expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 1 });
      expect(p.outcomes[0]!.maybeReplaces).toBeUndefined();
      expect(p.demoted).toEqual([]);
    });
  });

  describe(`bare window: a correction sharing no word is kept beside the newest fact up to ${BARE_CORRECTION_WINDOW} turns back`, () => {
    const other = 'No, the other one instead.';
    const at = (age: number) => {
      const t = table(3, 2, [rec('spk', vec(1, 0), { keyText: 'play it in the kitchen', value: 'play it in the kitchen', stamp: 100 - age })]);
      return plan(t, [cand(vec(0, 1), { key: 'the other one', value: other, text: other, pattern: 'correction', updates: { kind: 'latest' } }, 't100')], { now: 100 });
    };
    it('below and at the window: allocated beside it', () => {
      expect(at(BARE_CORRECTION_WINDOW - 1).outcomes[0]).toMatchObject({ outcome: 'allocated', maybeReplaces: ['spk'] });
      expect(at(BARE_CORRECTION_WINDOW).outcomes[0]).toMatchObject({ outcome: 'allocated', maybeReplaces: ['spk'] });
    });
    it('one turn past it: allocated alone', () => {
      const p = at(BARE_CORRECTION_WINDOW + 1);
      expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated' });
      expect(p.outcomes[0]!.maybeReplaces).toBeUndefined();
    });
  });
});

describe('edges: maximum age', () => {
  const at = (ageMs: number) => plan(table(2, 3, [rec('a', basis(3, 0), { createdMs: 5000 - ageMs })]), [], { nowMs: 5000 }, { maxAgeMs: 1000 });
  it('keeps a slot exactly maxAgeMs old and younger; expires it one ms older', () => {
    expect(at(999).evictions).toEqual([]);
    expect(at(1000).evictions).toEqual([]);
    expect(at(1001).evictions).toEqual([expect.objectContaining({ slot: 0, reason: 'expired' })]);
  });
});

describe('what an overwrite or a restatement carries', () => {
  const bike = (over = {}) => table(2, 3, [rec('bike', basis(3, 0), { keyText: 'my bike', value: 'a green Corvane', strength: 1, halfLife: 10, ...over })]);
  it('a restated fact keeps a reinforced strength above the gate', () => {
    const p = plan(bike(), [cand(basis(3, 0), { key: 'my bike', value: 'a green Corvane' })]);
    expect(p.outcomes[0]!.outcome).toBe('reinforced');
    expect(p.ops[0]!.slot!.strength).toBe(1); // reinforce(1) = 1 > gate 0.88
    expect(p.events).toEqual([{ type: 'reinforce', slot: 0, id: 'bike', clock: 0, atMs: 1000 }]);
  });
  it('pinned stays pinned through an overwrite, and a pin request pins', () => {
    expect(plan(bike({ pinned: true }), [cand(basis(3, 0), { key: 'my bike', value: 'a red Pennick' })]).ops[0]!.slot!.pinned).toBe(true);
    expect(plan(bike(), [cand(basis(3, 0), { key: 'my bike', value: 'a red Pennick', pin: true })]).ops[0]!.slot!.pinned).toBe(true);
    expect(plan(bike(), [cand(basis(3, 0), { key: 'my bike', value: 'a red Pennick' })]).ops[0]!.slot!.pinned).toBe(false);
    expect(plan(bike(), [cand(basis(3, 0), { key: 'my bike', value: 'a green Corvane', pin: true })]).ops[0]!.slot!.pinned).toBe(true);
  });
  it('an overwrite keeps the old owner, or takes the speaker when the old had none', () => {
    const ana = { ...cand(basis(3, 0), { key: 'my bike', value: 'a red Pennick' }), owner: 'Ana' };
    expect(plan(bike(), [ana]).ops[0]!.slot!.owner).toBe('Ana');
    expect(plan(bike({ owner: 'ana' }), [ana]).ops[0]!.slot!.owner).toBe('ana');
    expect(plan(bike(), [cand(basis(3, 0), { key: 'my bike', value: 'a red Pennick' })]).ops[0]!.slot!.owner).toBeUndefined();
  });
  it('what a read used is reinforced with an event per slot', () => {
    const p = plan(bike(), [], { now: 10, reinforce: ['bike'] });
    expect(p.events).toEqual([{ type: 'reinforce', slot: 0, id: 'bike', clock: 10, atMs: 1000 }]);
  });
});
