// Which slot a candidate changes, rule by rule, each at its edge: the tie-breaks between equally close
// or equally weak slots, the window edges of a correction, the shape of a date an update aims at, the
// number swapped into a contrast ("12 people, not 10"), and what an overwrite or an allocation carries
// over (subject, owner, reply mark, provenance). Gates are flat (sigma(2), threshold 0.5), so every
// candidate passes and the expected slot follows from the rule alone.

import { describe, expect, it } from 'vitest';
import type { Candidate } from '../../src/memory/extract.js';
import { demotedEntry } from '../../src/memory/plan.js';
import { basis, keyed, planTurn, rec, table, vec } from './helpers.js';

/** An update candidate: its key matches nothing (basis 2), so only the update rules can target a slot. */
const update = (text: string, updates: NonNullable<Candidate['updates']>, over: Partial<Candidate> = {}, turn = 't9') =>
  keyed(basis(3, 2), { key: 'it', value: text, text, pattern: updates.kind === 'latest' ? 'correction' : 'update', updates, ...over }, turn);

describe('addressing: ties and generic words', () => {
  it('of two equally close slots, the first is overwritten', () => {
    const t = table(3, 3, [rec('red', basis(3, 0), { keyText: 'my bike', value: 'a red Corvane' }), rec('blue', basis(3, 0), { keyText: 'my bike', value: 'a blue Pennick' })]);
    expect(planTurn(t, [keyed(basis(3, 0), { key: 'my bike', value: 'a green Tandrel' })]).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'red' });
  });

  it('reports the novelty 1 - cosine of the best match', () => {
    const t = table(2, 3, [rec('a', basis(3, 0), { keyText: 'my bike' })]);
    const o = planTurn(t, [keyed(vec(1, 1, 0), { key: 'my saddle', value: 'leather' })]).outcomes[0]!;
    expect(o.cosine).toBeCloseTo(Math.SQRT1_2, 6);
    expect(o.features.novelty).toBeCloseTo(1 - Math.SQRT1_2, 6);
  });

  it('finds the best match in any slot, not only the first', () => {
    const t = table(3, 3, [rec('name', basis(3, 0), { keyText: 'my name', value: 'Dana' }), rec('bike', basis(3, 1), { keyText: 'my bike', value: 'a red Corvane' })]);
    const p = planTurn(t, [keyed(basis(3, 1), { key: 'my bike', value: 'a blue Pennick' })]);
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', slot: 1, supersededId: 'bike', cosine: 1 });
    // The same with keys of a hashing embedder's shape: few non-zero entries in a wide vector.
    const wide = table(3, 8, [rec('name', basis(8, 0), { keyText: 'my name', value: 'Dana' }), rec('bike', basis(8, 5), { keyText: 'my bike', value: 'a red Corvane' })]);
    const q = planTurn(wide, [keyed(basis(8, 5), { key: 'my bike', value: 'a blue Pennick' })]);
    expect(q.outcomes[0]).toMatchObject({ outcome: 'overwritten', slot: 1, supersededId: 'bike', cosine: 1 });
  });

  it('sharing only a word that names no fact ("new") is not the same fact', () => {
    const t = table(2, 3, [rec('saddle', basis(3, 0), { keyText: 'my new saddle', value: 'leather' })]);
    expect(planTurn(t, [keyed(basis(3, 0), { key: 'my new bell', value: 'brass' })]).outcomes[0]).toMatchObject({ outcome: 'allocated' });
  });

  it('a topic made only of such words is the same fact when it is the same wording', () => {
    const t = table(2, 3, [rec('want', basis(3, 0), { keyText: 'What I want!', value: 'a quiet room' })]);
    expect(planTurn(t, [keyed(basis(3, 0), { key: 'what I want', value: 'a room with a view' })]).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'want' });
  });

  it("a fact whose speaker is unknown is matched by any speaker's statement", () => {
    const t = table(2, 3, [rec('job', basis(3, 0), { keyText: 'my job', value: 'nurse', owner: 'Ana' })]);
    expect(planTurn(t, [keyed(basis(3, 0), { key: 'my job', value: 'midwife' })]).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'job' });
  });

  it('a fact about someone else (its subject) is changed only by a statement about them', () => {
    const t = table(2, 3, [rec('bday', basis(3, 0), { keyText: 'birthday', value: 'in May', subject: 'my sister' })]);
    const mine = keyed(basis(3, 0), { key: 'birthday', value: 'in June' });
    expect(planTurn(t, [mine]).outcomes[0]).toMatchObject({ outcome: 'allocated' });
    const hers = keyed(basis(3, 0), { key: 'birthday', value: 'in June', subject: 'my sister' });
    const p = planTurn(t, [hers]);
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'bday' });
    expect(p.ops[0]!.slot!.subject).toBe('my sister');
    // A new fact about someone keeps whom it is about.
    expect(planTurn(table(1, 3, []), [hers]).ops[0]!.slot!.subject).toBe('my sister');
  });
});

describe("the bot's replies and named speakers", () => {
  it("a bot's reply may update what an earlier reply said, also within one plan", () => {
    const t = table(3, 3, [rec('offer', basis(3, 0), { keyText: 'the slot offered', value: 'Tuesday at 9', reply: true })]);
    const reply = (value: string, turn: string) => ({ ...keyed(basis(3, 0), { key: 'the slot offered', value }, turn), role: 'assistant' as const });
    expect(planTurn(t, [reply('Wednesday at 10', 't4')]).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'offer' });
    const two = planTurn(table(3, 3, []), [reply('Tuesday at 9', 't4'), reply('Wednesday at 10', 't5')]);
    expect(two.outcomes.map((o) => o.outcome)).toEqual(['allocated', 'overwritten']);
  });

  it("a bot's reply never overwrites a user's fact written earlier in the same plan", () => {
    const user = keyed(basis(3, 0), { key: 'the slot offered', value: 'Tuesday at 9' }, 't4');
    const reply = { ...keyed(basis(3, 0), { key: 'the slot offered', value: 'Wednesday at 10' }, 't5'), role: 'assistant' as const };
    expect(planTurn(table(3, 3, []), [user, reply]).outcomes.map((o) => o.outcome)).toEqual(['allocated', 'allocated']);
  });

  it("an assistant turn naming its speaker is that speaker's fact, and may change it", () => {
    const t = table(2, 3, [rec('job', basis(3, 0), { keyText: 'my job', value: 'nurse', owner: 'Ana' })]);
    const ana = { ...keyed(basis(3, 0), { key: 'my job', value: 'midwife' }), role: 'assistant' as const, owner: 'Ana' };
    expect(planTurn(t, [ana]).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'job' });
    const fresh = planTurn(table(1, 3, []), [ana]).ops[0]!.slot!;
    expect(fresh.owner).toBe('Ana');
    expect(fresh).not.toHaveProperty('reply');
    expect(fresh).not.toHaveProperty('maybeReplaces');
  });
});

describe('strength, pinning and eviction order', () => {
  it('of two equally weak slots, the first is evicted', () => {
    const t = table(3, 3, [rec('a', basis(3, 0), { strength: 0.3 }), rec('b', basis(3, 1), { strength: 0.3 }), rec('c', basis(3, 2), { strength: 0.9 })]);
    const p = planTurn(t, [keyed(vec(1, 1, 1), { key: 'my name', value: 'Dana' })], {}, { overwriteThreshold: 0.99 });
    expect(p.evictions.map((e) => e.slot)).toEqual([0]);
  });

  it('a slot written earlier in the same plan can be evicted for the next candidate', () => {
    const p = planTurn(table(1, 3, []), [keyed(basis(3, 0), { key: 'my name', value: 'Dana' }), keyed(basis(3, 1), { key: 'my bike', value: 'a red Corvane' })]);
    expect(p.outcomes.map((o) => o.outcome)).toEqual(['allocated', 'allocated']);
    expect(p.evictions).toEqual([expect.objectContaining({ slot: 0, reason: 'capacity' })]);
  });

  it('a slot reinforced by the read is superseded at its reinforced strength', () => {
    // 0.4 decays to 0.2 over one half-life; the read reinforces it to 0.2 + 0.8 * 0.3 = 0.44.
    const t = table(2, 3, [rec('bike', basis(3, 0), { keyText: 'my bike', value: 'a red Corvane', strength: 0.4, halfLife: 10 })]);
    const p = planTurn(t, [keyed(basis(3, 0), { key: 'my bike', value: 'a blue Pennick' })], { now: 10, reinforce: ['bike'] });
    expect(p.demoted).toEqual([expect.objectContaining({ id: 'bike', kind: 'superseded' })]);
    expect(p.demoted[0]!.strength).toBeCloseTo(0.44, 12);
  });

  it('restating a fact keeps it unpinned unless the candidate pins it', () => {
    const t = table(2, 3, [rec('bike', basis(3, 0), { keyText: 'my bike', value: 'a red Corvane' })]);
    const again = (pin?: boolean) => planTurn(t, [keyed(basis(3, 0), { key: 'my bike', value: 'a red Corvane', ...(pin ? { pin } : {}) })]).ops[0]!.slot!;
    expect(again().pinned).toBe(false);
    expect(again(true).pinned).toBe(true);
  });

  it('a turn cited already is not cited twice', () => {
    const t = table(2, 3, [rec('bike', basis(3, 0), { keyText: 'my bike', value: 'a red Corvane', provenance: ['t5', 't1'] })]);
    const p = planTurn(t, [keyed(basis(3, 0), { key: 'my bike', value: 'a red Corvane' }, 't5')]);
    expect(p.ops[0]!.slot!.provenance).toEqual(['t5', 't1']);
  });

  it('lists slot operations in slot order, whatever order the plan made them in', () => {
    const t = table(3, 3, [null, rec('faded', basis(3, 0), { strength: 0.01 }), rec('faded2', basis(3, 1), { strength: 0.01 })]);
    const p = planTurn(t, [keyed(basis(3, 2), { key: 'my name', value: 'Dana' })]);
    expect(p.ops.map((o) => o.index)).toEqual([0, 1, 2]);
  });

  it('the logbook entries of a user-scoped session name the user', () => {
    const t = table(2, 3, [rec('faded', basis(3, 0), { strength: 0.01 })]);
    expect(planTurn(t, [], { user: 'u7' }).demoted[0]).toMatchObject({ user: 'u7', tenant: 'shop', session: 's1' });
    expect(planTurn(t, []).demoted[0]).not.toHaveProperty('user');
  });

  it("a value leaving working memory keeps its speaker and a copy of its sources", () => {
    const r = rec('job', basis(3, 0), { owner: 'Ana', provenance: ['t2', 't1'] });
    const e = demotedEntry(r, { tenant: 'shop', session: 's1' }, 'capacity', 0.3, 7, 9000);
    expect(e).toMatchObject({ id: 'job', kind: 'capacity', owner: 'Ana', provenance: ['t2', 't1'], strength: 0.3, clock: 7, atMs: 9000 });
    expect(e.provenance).not.toBe(r.provenance);
    expect(e).not.toHaveProperty('successor');
    expect(demotedEntry(rec('x', basis(3, 0)), { tenant: 'shop', session: 's1' }, 'decayed', 0.01, 7, 9000)).not.toHaveProperty('owner');
  });
});

describe('an update of a fact named by its topic', () => {
  const lessons = () => table(3, 3, [rec('lessons', basis(3, 0), { keyText: 'my lessons', value: 'have my lessons on Tuesdays', provenance: ['t2'] })]);

  it('swaps the new value into the old sentence', () => {
    const c = keyed(basis(3, 0), { key: 'my lessons', value: 'move my lessons to Wednesday', text: 'move my lessons to Wednesday', pattern: 'update', updates: { kind: 'date', expr: 'Wednesday' } }, 't6');
    const p = planTurn(lessons(), [c], { now: 6 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', slot: 0, supersededId: 'lessons' });
    expect(p.ops[0]!.slot!).toMatchObject({ value: 'have my lessons on Wednesday', keyText: 'my lessons', provenance: ['t6', 't2'] });
  });

  it('when the old fact holds no value of that kind, is kept beside it', () => {
    const t = table(3, 3, [rec('lessons', basis(3, 0), { keyText: 'my lessons', value: 'with Mr Obi' }), rec('booking', basis(3, 1), { keyText: 'my booking', value: 'a service on Tuesday' })]);
    const c = keyed(basis(3, 0), { key: 'my lessons', value: 'lessons on Friday', text: 'lessons on Friday', pattern: 'update', updates: { kind: 'date', expr: 'Friday' } });
    const p = planTurn(t, [c]);
    // Not the other dated fact either: the update named its topic.
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 2, maybeReplaces: ['lessons'] });
    expect(p.demoted).toEqual([]);
  });

  it('an accumulating fact named by its topic is replaced by a correction of it', () => {
    const t = table(2, 3, [rec('like', basis(3, 0), { keyText: 'what I like: chocolate', value: 'dark chocolate', stamp: 0 })]);
    const c = keyed(basis(3, 0), { key: 'what I like: chocolate', value: 'the other one', text: 'no, the other one', pattern: 'correction', accumulate: true, updates: { kind: 'latest' } });
    expect(planTurn(t, [c], { now: 1 }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'like' });
  });
});

describe('a contrast ("Saturday, not Sunday")', () => {
  const sunday = (over: Parameters<typeof rec>[2] = {}) => ({ keyText: 'the meetup', value: 'meetup on Sunday morning', ...over });

  it('of two slots holding the rejected value, corrects the one written last (clock, then ms)', () => {
    const c = update("it's Saturday, not sunday", { kind: 'date', expr: 'Saturday' });
    const byClock = table(3, 3, [rec('old', basis(3, 0), sunday({ stamp: 3, updatedMs: 200 })), rec('new', basis(3, 1), sunday({ stamp: 5, updatedMs: 100 }))]);
    expect(planTurn(byClock, [c], { now: 6 }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'new' });
    const byMs = table(3, 3, [rec('new', basis(3, 0), sunday({ stamp: 5, updatedMs: 200 })), rec('old', basis(3, 1), sunday({ stamp: 5, updatedMs: 100 }))]);
    const p = planTurn(byMs, [c], { now: 6 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'new' });
    expect(p.ops[0]!.slot!.value).toBe('meetup on Saturday morning');
    const byMsSecond = table(3, 3, [rec('old', basis(3, 0), sunday({ stamp: 5, updatedMs: 100 })), rec('new', basis(3, 1), sunday({ stamp: 5, updatedMs: 200 }))]);
    expect(planTurn(byMsSecond, [c], { now: 6 }).outcomes[0]).toMatchObject({ supersededId: 'new' });
    // Written at the same moment: the first.
    const tie = table(3, 3, [rec('first', basis(3, 0), sunday({ stamp: 5, updatedMs: 100 })), rec('second', basis(3, 1), sunday({ stamp: 5, updatedMs: 100 }))]);
    expect(planTurn(tie, [c], { now: 6 }).outcomes[0]).toMatchObject({ supersededId: 'first' });
  });

  it('swaps the number for the number', () => {
    const t = table(2, 3, [rec('table', basis(3, 0), { keyText: 'the booking', value: 'a table for 10 people', provenance: ['t1'] })]);
    const p = planTurn(t, [update('12 people, not 10', { kind: 'quantity', expr: '12 people' })]);
    expect(p.ops[0]!.slot!).toMatchObject({ value: 'a table for 12 people', provenance: ['t9', 't1'] });
    // The rejected "2.5" is matched as written (its dot is no wildcard), not by the kind of value alone.
    const d = table(3, 3, [rec('ride', basis(3, 0), { keyText: 'the ride', value: 'a 2.5 hours ride', stamp: 0 }), rec('party', basis(3, 1), { keyText: 'the party', value: 'a table for 4 people', stamp: 0 })]);
    expect(planTurn(d, [update('3.25 hours, not 2.5', { kind: 'quantity', expr: '3.25 hours' })]).ops[0]!.slot!.value).toBe('a 3.25 hours ride');
  });

  it('a rejected phrase that does not open with a number takes the whole new expression ("12 people, not table 10")', () => {
    const t = table(2, 3, [rec('booking', basis(3, 0), { keyText: 'my booking', value: 'a booking for table 10' })]);
    expect(planTurn(t, [update('12 people, not table 10', { kind: 'quantity', expr: '12 people' })]).ops[0]!.slot!.value).toBe('a booking for 12 people');
  });

  it('a word corrected by a number takes the whole new expression', () => {
    const t = table(2, 3, [rec('bikes', basis(3, 0), { keyText: 'the hire', value: 'the tandem for the day' })]);
    expect(planTurn(t, [update('2 bikes, not the tandem', { kind: 'quantity', expr: '2 bikes' })]).ops[0]!.slot!.value).toBe('the 2 bikes for the day');
  });

  it('a correction without a value replaces the fact with its own sentence', () => {
    const t = table(2, 3, [rec('kettle', basis(3, 0), { keyText: 'which kettle', value: 'the red kettle', provenance: ['t1'] })]);
    const text = "it's the blue one, not the red";
    const p = planTurn(t, [update(text, { kind: 'latest' })], { now: 2 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'kettle' });
    expect(p.ops[0]!.slot!).toMatchObject({ value: text, provenance: ['t9', 't1'] });
  });

  it('held by no slot, falls back to the slot holding a value of the same kind', () => {
    const t = table(2, 3, [rec('booking', basis(3, 0), { keyText: 'my booking', value: 'a service on Tuesday' })]);
    const p = planTurn(t, [update('Friday, not Monday', { kind: 'date', expr: 'Friday' })]);
    expect(p.ops[0]!.slot!.value).toBe('a service on Friday');
  });

  it('a plain statement saying "not X" corrects nothing', () => {
    const t = table(2, 3, [rec('order', basis(3, 0), { keyText: 'my usual', value: 'a black coffee' })]);
    const c = keyed(basis(3, 1), { key: 'what I drink', value: 'tea, not coffee', text: 'I drink tea, not coffee' });
    expect(planTurn(t, [c]).outcomes[0]).toMatchObject({ outcome: 'allocated', slot: 1 });
  });

  it('does not retarget an update already aimed by its topic', () => {
    const t = table(3, 3, [
      rec('lessons', basis(3, 0), { keyText: 'my lessons', value: 'lessons on Tuesdays' }),
      rec('meetup', basis(3, 1), { keyText: 'the meetup', value: 'meetup on Sunday' }),
    ]);
    const c = keyed(basis(3, 0), { key: 'my lessons', value: 'lessons on Wednesday, not Sunday', text: 'lessons on Wednesday, not Sunday', pattern: 'update', updates: { kind: 'date', expr: 'Wednesday' } });
    expect(planTurn(t, [c]).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'lessons' });
  });
});

describe('a correction without a value ("no, the patio instead")', () => {
  it('a fact named by its topic stays the target even when another fact shares the correction\'s words', () => {
    const t = table(3, 3, [
      rec('music', basis(3, 0), { keyText: 'where the music plays', value: 'in the kitchen', stamp: 4 }),
      rec('party', basis(3, 1), { keyText: 'the party', value: 'a party on the patio', stamp: 5 }),
    ]);
    const c = keyed(basis(3, 0), { key: 'where the music plays', value: 'no, the patio instead', text: 'no, the patio instead', pattern: 'correction', updates: { kind: 'latest' } });
    expect(planTurn(t, [c], { now: 6 }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'music' });
  });

  it('the sentence before it in the same turn says which fact it corrects', () => {
    const t = table(3, 3, [
      rec('music', basis(3, 0), { keyText: 'music room', value: 'play it in the kitchen', stamp: 4 }),
      rec('name', basis(3, 1), { keyText: 'my name', value: 'Dana', stamp: 5 }),
    ]);
    const c = update('No, the other one.', { kind: 'latest' }, { context: 'The music is too loud.' });
    const p = planTurn(t, [c], { now: 6 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'music' });
    expect(p.ops[0]!.slot!.provenance).toEqual(['t9', 't-music']);
  });

  it('of two related facts, replaces the one written last', () => {
    const t = table(3, 3, [
      rec('new', basis(3, 0), { keyText: 'kitchen speaker', value: 'play it in the kitchen', stamp: 5 }),
      rec('old', basis(3, 1), { keyText: 'kitchen light', value: 'the kitchen light on', stamp: 4 }),
    ]);
    expect(planTurn(t, [update('No, the kitchen radio.', { kind: 'latest' })], { now: 6 }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'new' });
  });

  it('finds the fact written last wherever it sits, and of two written at once the first', () => {
    const related = (a: number, b: number) => table(3, 3, [
      rec('a', basis(3, 0), { keyText: 'kitchen light', value: 'the kitchen light on', stamp: a }),
      rec('b', basis(3, 1), { keyText: 'kitchen speaker', value: 'play it in the kitchen', stamp: b }),
    ]);
    const radio = update('No, the kitchen radio.', { kind: 'latest' });
    expect(planTurn(related(4, 5), [radio], { now: 6 }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'b' });
    expect(planTurn(related(5, 5), [radio], { now: 6 }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'a' });
    const unrelated = (a: number, b: number) => table(3, 3, [
      rec('a', basis(3, 0), { keyText: 'my name', value: 'Dana', stamp: a }),
      rec('b', basis(3, 1), { keyText: 'my bike', value: 'a red Corvane', stamp: b }),
    ]);
    const other = update('No, the other one.', { kind: 'latest' });
    expect(planTurn(unrelated(4, 5), [other], { now: 6 }).outcomes[0]).toMatchObject({ maybeReplaces: ['b'] });
    expect(planTurn(unrelated(5, 5), [other], { now: 6 }).outcomes[0]).toMatchObject({ maybeReplaces: ['a'] });
  });

  it('never replaces a pinned fact, nor is kept beside one', () => {
    const t = table(3, 3, [
      rec('old', basis(3, 0), { keyText: 'my name', value: 'Dana', stamp: 4 }),
      rec('pin', basis(3, 1), { keyText: 'music room', value: 'play it in the kitchen', stamp: 5, pinned: true }),
    ]);
    const related = planTurn(t, [update('No, the kitchen radio.', { kind: 'latest' })], { now: 6 });
    expect(related.outcomes[0]).toMatchObject({ outcome: 'allocated', maybeReplaces: ['old'] });
    expect(related.demoted).toEqual([]);
  });

  it('unrelated to anything, is kept beside the newest fact of the last exchange', () => {
    const t = table(3, 3, [
      rec('new', basis(3, 0), { keyText: 'my name', value: 'Dana', stamp: 5 }),
      rec('old', basis(3, 1), { keyText: 'my bike', value: 'a red Corvane', stamp: 4 }),
    ]);
    expect(planTurn(t, [update('No, the other one.', { kind: 'latest' })], { now: 6 }).outcomes[0]).toMatchObject({ outcome: 'allocated', maybeReplaces: ['new'] });
  });

  it('a fact written over the sentence that keyed it takes the correction\'s topic', () => {
    const t = table(3, 3, [rec('kitchen', basis(3, 0), { keyText: 'play it in the kitchen', value: 'play it in the kitchen', stamp: 4 })]);
    const text = 'No, play it on the patio speaker instead.';
    const p = planTurn(t, [keyed(basis(3, 1), { key: 'patio speaker', value: text, text, pattern: 'correction', updates: { kind: 'latest' } }, 't6')], { now: 6 });
    expect(p.ops[0]!.slot!.keyText).toBe('patio speaker');
  });
});

describe('an update naming a value but not its topic ("make it Friday")', () => {
  const dated = () => table(4, 3, [
    rec('lessons', basis(3, 0), { keyText: 'my lessons', value: 'lessons on Tuesdays', stamp: 4 }),
    rec('exam', basis(3, 1), { keyText: 'my exam', value: 'the exam in October', stamp: 5 }),
  ]);

  it('a weekday aims at the fact holding a weekday, a calendar date at the one holding a calendar date', () => {
    expect(planTurn(dated(), [update('make it Friday', { kind: 'date', expr: 'Friday' })], { now: 6 }).ops[0]!.slot!.value).toBe('lessons on Friday');
    expect(planTurn(dated(), [update('move it to November', { kind: 'date', expr: 'November' })], { now: 6 }).ops[0]!.slot!.value).toBe('the exam in November');
    // A date in digits is a calendar date too.
    const digits = table(3, 3, [rec('lessons', basis(3, 0), { keyText: 'my lessons', value: 'lessons on Tuesdays', stamp: 4 }), rec('exam', basis(3, 1), { keyText: 'my exam', value: 'the exam on 14/10', stamp: 5 })]);
    expect(planTurn(digits, [update('make it 3/11', { kind: 'date', expr: '3/11' })], { now: 6 }).ops[0]!.slot!.value).toBe('the exam on 3/11');
  });

  it('a date of neither shape could be about either, so it is kept beside both', () => {
    const p = planTurn(dated(), [update('make it tomorrow', { kind: 'date', expr: 'tomorrow' })], { now: 6 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', maybeReplaces: ['exam', 'lessons'] });
  });

  it('a fact holding dates of both shapes is a weekday fact too', () => {
    const t = table(2, 3, [rec('course', basis(3, 0), { keyText: 'my course', value: 'Tuesdays from the 3rd of May' })]);
    expect(planTurn(t, [update('make it Friday', { kind: 'date', expr: 'Friday' })]).outcomes[0]).toMatchObject({ outcome: 'overwritten' });
  });

  it('a fact holding no value of the kind is not a candidate', () => {
    const t = table(3, 3, [rec('name', basis(3, 0), { keyText: 'my name', value: 'Dana' }), rec('table', basis(3, 1), { keyText: 'the booking', value: 'a table for 4 people' })]);
    expect(planTurn(t, [update('make it 6 people', { kind: 'quantity', expr: '6 people' })]).ops[0]!.slot!.value).toBe('a table for 6 people');
  });

  it('the correction window reaches exactly CORRECTION_WINDOW clock units back', () => {
    const t = table(3, 3, [
      rec('edge', basis(3, 0), { keyText: 'my lessons', value: 'lessons on Tuesdays', stamp: 8 }),
      rec('older', basis(3, 1), { keyText: 'the meetup', value: 'meetup on Sunday', stamp: 7 }),
    ]);
    expect(planTurn(t, [update('make it Friday', { kind: 'date', expr: 'Friday' })], { now: 20 }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'edge' });
  });

  it('the one fact of its kind is updated however long ago it was said', () => {
    const t = table(2, 3, [rec('lessons', basis(3, 0), { keyText: 'my lessons', value: 'lessons on Tuesdays', stamp: 0, halfLife: 1000 })]);
    expect(planTurn(t, [update('make it Friday', { kind: 'date', expr: 'Friday' })], { now: 100 }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'lessons' });
  });

  it('kept beside at most the four newest facts it could be about', () => {
    const t = table(6, 3, Array.from({ length: 5 }, (_, i) => rec(`d${i}`, basis(3, 0), { keyText: `fact ${i}`, value: `on the ${i + 1}th of May`, stamp: i })));
    const p = planTurn(t, [update('make it the 9th of June', { kind: 'date', expr: 'the 9th of June' })], { now: 6 });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', maybeReplaces: ['d4', 'd3', 'd2', 'd1'] });
  });

  it("the update's own words, or its turn's sentence before it, may name the fact", () => {
    const t = () => table(4, 3, [
      rec('exam', basis(3, 0), { keyText: 'my exam', value: 'on the 14th of October', stamp: 4 }),
      rec('wedding', basis(3, 1), { keyText: 'the wedding', value: 'on the 18th of October', stamp: 5 }),
    ]);
    const before = update('they moved it to November', { kind: 'date', expr: 'November' }, { context: 'My exam is a worry.' });
    expect(planTurn(t(), [before], { now: 6 }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'exam' });
    const own = update('they moved the exam to November', { kind: 'date', expr: 'November' }, { key: 'the exam' });
    expect(planTurn(t(), [own], { now: 6, context: ['Sure'] }).outcomes[0]).toMatchObject({ outcome: 'overwritten', supersededId: 'exam' });
  });

  it('when the turns before talk of two of the facts, is kept beside those two', () => {
    const t = table(4, 3, [
      rec('exam', basis(3, 0), { keyText: 'my exam', value: 'on the 14th of October', stamp: 3 }),
      rec('wedding', basis(3, 1), { keyText: 'the wedding', value: 'on the 18th of October', stamp: 4 }),
      rec('party', basis(3, 2), { keyText: 'the party', value: 'on the 20th of October', stamp: 5 }),
    ]);
    const p = planTurn(t, [update('they moved it to November', { kind: 'date', expr: 'November' })], { now: 6, context: ['the exam and the wedding clash'] });
    expect(p.outcomes[0]).toMatchObject({ outcome: 'allocated', maybeReplaces: ['wedding', 'exam'] });
  });
});
