// What a fact's value becomes when an update or a correction changes one expression of it, and the
// date reading behind it: each case here once gave a wrong value (a wrong value is worse than a miss),
// or, with a setting validation accepts, no plan at all.
import { describe, expect, it } from 'vitest';
import type { Candidate } from '../../src/memory/extract.js';
import { resolveDates } from '../../src/memory/dates.js';
import { findValueExpr } from '../../src/memory/values.js';
import { basis, keyed, planTurn, rec, table } from './helpers.js';

const update = (text: string, updates: NonNullable<Candidate['updates']>, over: Partial<Candidate> = {}) =>
  keyed(basis(3, 2), { key: 'it', value: text, text, pattern: 'update', updates, ...over });
const SAID = Date.parse('2023-05-08T13:56:00Z'); // a Monday

describe('swapping a new value into a fact', () => {
  it('a bare month swaps the month alone ("make it November")', () => {
    const t = table(2, 3, [rec('exam', basis(3, 0), { keyText: 'my exam', value: 'the exam on the 14th of October', stamp: 4 })]);
    const p = planTurn(t, [update('they moved the exam to November', { kind: 'date', expr: 'November' }, { key: 'the exam' })], { now: 5 });
    expect(p.ops[0]!.slot!.value).toBe('the exam on the 14th of November');
  });

  it('replaces the whole date the fact holds, not a month inside it ("the 14th of October" -> "the 20th of October")', () => {
    const t = table(2, 3, [rec('exam', basis(3, 0), { keyText: 'my exam', value: 'the exam on the 14th of October', stamp: 4 })]);
    const p = planTurn(t, [update('they moved the exam to the 20th of October', { kind: 'date', expr: 'the 20th of October' }, { key: 'the exam' })], { now: 5 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'exam' });
    expect(p.ops[0]!.slot!.value).toBe('the exam on the 20th of October');
  });

  it('a contrast whose new value repeats the word before the old one does not repeat it ("dinner at 6" + "at 7pm, not 6")', () => {
    const t = table(2, 3, [rec('dinner', basis(3, 0), { keyText: 'dinner', value: 'dinner at 6', stamp: 4 })]);
    const p = planTurn(t, [update('at 7pm, not 6', { kind: 'time', expr: 'at 7pm' })], { now: 5 });
    expect(p.ops[0]!.slot!.value).toBe('dinner at 7pm');
  });

  it('an overwrite threshold of -1 (the lowest validation accepts) plans a first write instead of throwing', () => {
    const empty = table(2, 3, [null, null]);
    const p = planTurn(empty, [keyed(basis(3, 0), { key: 'my bike', value: 'a red Corvane' })], {}, { overwriteThreshold: -1 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated' });
  });
});

describe('the expressions found', () => {
  it('an abbreviated weekday with a full stop before the day number ("Tue. 3") is a date', () => {
    expect(findValueExpr('see you Tue. 3 at the shop')).toMatchObject({ kind: 'date', text: 'Tue. 3' });
    expect(findValueExpr('see you Tue 3 at the shop')).toMatchObject({ kind: 'date', text: 'Tue 3' });
  });
});

describe('resolving relative dates', () => {
  it('"next month" said on 8 May 2023 is June 2023 (its "mon" is not Monday)', () => {
    expect(resolveDates('next month', SAID)).toEqual([{ text: 'next month', index: 0, day: '2023-06-01', grain: 'month' }]);
    expect(resolveDates('last month', SAID)).toEqual([{ text: 'last month', index: 0, day: '2023-04-01', grain: 'month' }]);
    // "next Monday" keeps its reading: the first Monday after the day of speaking.
    expect(resolveDates('next Monday', SAID)).toEqual([{ text: 'next Monday', index: 0, day: '2023-05-15', grain: 'day' }]);
    expect(resolveDates('next mon.', SAID)[0]).toMatchObject({ day: '2023-05-15', grain: 'day' });
  });

  it('plural units are dates too ("in two months", "in 3 days")', () => {
    expect(resolveDates('we fly out in two months', SAID)).toEqual([expect.objectContaining({ day: '2023-07-01', grain: 'month' })]);
    expect(resolveDates('the parts arrive in 3 days', SAID)).toEqual([expect.objectContaining({ day: '2023-05-11', grain: 'day' })]);
  });
});
