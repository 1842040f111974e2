// The default extractor and the write gate, asserted on robust behaviour only: the rules and default
// weights are tuned elsewhere, so exact gate values here use explicit weights.

import { describe, expect, it } from 'vitest';
import { RuleExtractor, splitSentences } from '../../src/memory/extract.js';
import { DEFAULT_GATE_WEIGHTS, gateFeatures, gateScore, type GateWeights } from '../../src/memory/gate.js';
import { WRITE_DEFAULTS } from '../../src/memory/params.js';
import { findAll, findValueExpr } from '../../src/memory/values.js';

const ex = new RuleExtractor();
const one = (text: string) => {
  const cs = ex.extract(text, 'user');
  expect(cs).toHaveLength(1);
  return cs[0]!;
};
const defaultGate = (text: string) => {
  const c = one(text);
  return gateScore(gateFeatures(c, 'user', 1), DEFAULT_GATE_WEIGHTS);
};

describe('RuleExtractor', () => {
  it('splits "My name is Dana" into key "my name", value "Dana"', () => {
    expect(one('My name is Dana')).toMatchObject({ key: 'my name', value: 'Dana' });
    expect(one('Call me Dana Whitfield.')).toMatchObject({ key: 'my name', value: 'Dana Whitfield' });
  });

  it('keys a possession by its noun (up to the first preposition, skipping model numbers), and lets possessions add up', () => {
    const has = (text: string) => {
      const c = one(text);
      return [c.key, c.value, c.accumulate];
    };
    expect(has("I've got two bikes")).toEqual(['my bikes', 'bikes', true]);
    expect(has('I own an Orrin Sprint 2')).toEqual(['my sprint', 'Orrin Sprint 2', true]);
    expect(has('I bought a new saddle from the shop')).toEqual(['my saddle', 'new saddle from the shop', true]);
    expect(has('I have a cat named Tess')).toEqual(['my cat', 'cat named Tess', true]);
    // Other verbs stay in the key, so a question about riding finds it.
    expect(has('I ride a green Corvane with a basket')).toEqual(['what I ride: my corvane', 'green Corvane with a basket', true]);
    expect(has('I drive the old van for deliveries')).toEqual(['what I drive: my van', 'old van for deliveries', true]);
    expect(has('I use a 3 litre kettle')).toEqual(['what I use: my kettle', '3 litre kettle', true]);
  });

  it('splits "my X is Y" statements', () => {
    expect(one('My bike is a green Corvane.')).toMatchObject({ key: 'my bike', value: 'a green Corvane' });
  });

  it('finds several facts in one message', () => {
    const cs = ex.extract('Hi, my name is Dana and my bike is a green Corvane.', 'user');
    expect(cs.map((c) => [c.key, c.value])).toEqual([['my name', 'Dana'], ['my bike', 'a green Corvane']]);
  });

  it('marks an update of a date ("move it to Friday instead") with the new expression', () => {
    const c = one('Actually, can we move it to Friday instead?');
    expect(c.updates).toEqual({ kind: 'date', expr: 'Friday' });
  });

  it('flags "remember that ..." and falls back to key = value = the sentence', () => {
    const r = one('Remember that the shop closes early on bank holidays');
    expect(r.remember).toBe(true);
    const s = one('The weather was lovely');
    expect(s).toMatchObject({ key: 'The weather was lovely', value: 'The weather was lovely', pattern: 'sentence' });
  });

  it('splitSentences keeps times like 10.30 whole', () => {
    expect(splitSentences('Drop it off at 10.30 please. Thanks!')).toEqual(['Drop it off at 10.30 please.', 'Thanks!']);
  });
});

describe('value expressions', () => {
  it('finds weekdays as dates and lists every one in order', () => {
    expect(findValueExpr('book a service for Tuesday')).toMatchObject({ kind: 'date', text: 'Tuesday' });
    expect(findAll('Tuesday or Friday', 'date').map((e) => e.text)).toEqual(['Tuesday', 'Friday']);
    expect(findValueExpr('nothing concrete here')).toBeNull();
  });
});

describe('write gate', () => {
  it('with the default weights passes a stated fact and gates out a question or a greeting', () => {
    expect(defaultGate('My name is Dana')).toBeGreaterThan(WRITE_DEFAULTS.gateThreshold);
    expect(defaultGate('What time do you open?')).toBeLessThan(WRITE_DEFAULTS.gateThreshold);
    expect(defaultGate('hello')).toBeLessThan(WRITE_DEFAULTS.gateThreshold);
  });

  it('features are in [0, 1] and mark questions, first person and role', () => {
    const q = gateFeatures(one('What time do you open?'), 'user', 1);
    expect(q.question).toBe(1);
    const f = gateFeatures(one('My name is Dana'), 'assistant', 0.25);
    expect(f).toMatchObject({ statement: 1, question: 0, userRole: 0, firstPerson: 1, novelty: 0.25 });
    for (const v of Object.values(f)) {
      expect(v).toBeGreaterThanOrEqual(0);
      expect(v).toBeLessThanOrEqual(1);
    }
    expect(gateFeatures(one('My name is Dana'), 'user', 7).novelty).toBe(1); // clamped
  });

  it('is the logistic sigma(bias + sum w_f x_f): exact with explicit weights', () => {
    const w: GateWeights = { ...DEFAULT_GATE_WEIGHTS };
    for (const k of Object.keys(w) as Array<keyof GateWeights>) w[k] = 0;
    w.bias = -1;
    w.statement = 2;
    w.novelty = 0.5;
    const f = gateFeatures(one('My name is Dana'), 'user', 1); // statement 1, novelty 1
    expect(gateScore(f, w)).toBeCloseTo(1 / (1 + Math.exp(-1.5)), 15);
    expect(gateScore({ ...f, statement: 0, novelty: 0 }, w)).toBeCloseTo(1 / (1 + Math.E), 15);
  });
});

describe('RuleExtractor: facts as people say them', () => {
  const all = (text: string, context = {}) => ex.extract(text, 'user', context);

  it('one key per thing preferred or liked; likes add up, a preference said as a change revises', () => {
    const [tutor, grammar] = all('I prefer a female tutor, and I like grammar explained in English.');
    expect(tutor).toMatchObject({ key: 'what I prefer: tutor', value: 'a female tutor', pattern: 'prefer' });
    expect(tutor!.accumulate).toBeUndefined();
    expect(grammar).toMatchObject({ key: 'what I like: grammar', accumulate: true, clause: true });
    expect(one("Actually, I'd prefer a male tutor from now on.")).toMatchObject({ key: 'what I prefer: tutor', revises: true });
    // A request is not a liking.
    expect(one("I'd like to book a service.").pattern).not.toBe('prefer');
  });

  it('levels, jobs, introductions, workplaces and changed details get their own keys', () => {
    expect(one("I'm at A2 level, I think.")).toMatchObject({ key: 'my level', value: 'A2' });
    expect(one("Good news, I'm now at B1 level!")).toMatchObject({ key: 'my level', value: 'B1' });
    expect(one("I'm a hospital pharmacist.")).toMatchObject({ key: 'my job (what I do for work)', value: 'hospital pharmacist' });
    expect(one("Hi, I'm Nadia Corran.")).toMatchObject({ key: 'my name', value: 'Nadia Corran' });
    expect(one("I'm Italian.").key).not.toBe('my name');
    expect(one('I started at Cindermoor Games on Monday.')).toMatchObject({ key: 'where I work' });
    expect(one('I started at 9 this morning.').key).not.toBe('where I work');
    expect(one('My phone number changed, the new one is 07700 900123.')).toMatchObject({ key: 'my phone number (mobile)', value: '07700 900123' });
    expect(one("I'd rather you call than text.")).toMatchObject({ key: 'how I want to be contacted', value: 'call than text' });
    expect(one("Mel's daughter starts school in May.")).toMatchObject({ key: "Mel's daughter (starts)", pattern: 'their-x' });
    // "names" is not a name.
    expect(all("I'm a pharmacist, so medicine names and patients matter.").map((c) => c.key)).not.toContain('my name');
  });

  it('a booked thing keeps one key whether it is stated, requested or switched', () => {
    expect(one('Can I have my weekly lessons on Tuesdays?').key).toBe('my booking (lesson)');
    expect(one('My lessons are on Tuesdays.').key).toBe('my booking (lesson)');
    expect(one('Can we switch my lessons to Wednesday?')).toMatchObject({ key: 'my booking (lesson)', updates: { kind: 'date', expr: 'Wednesday' } });
  });

  it('a later clause of a sentence is never a correction; "no" as a determiner corrects nothing', () => {
    const [allergy, snacks] = all("I'm allergic to peanuts, so no nut snacks at the in-person sessions please.");
    expect(allergy).toMatchObject({ key: 'what I am allergic to (my allergy)', value: 'peanuts' });
    expect(snacks!.clause).toBe(true);
    expect(snacks!.updates).toBeUndefined();
    expect(one('No nut snacks at the session, please.').updates).toBeUndefined();
    expect(one('No, the other one instead.').updates).toEqual({ kind: 'latest' });
    expect(one("no wait, it's Saturday not Sunday.").updates).toEqual({ kind: 'date', expr: 'Saturday' });
  });

  it('a short answer takes its topic from the question it answers', () => {
    expect(all("It's 07700 900814.", { previous: "What's the best number to reach you on?" })[0]).toMatchObject({ key: 'my phone number (mobile)', pattern: 'answer' });
    expect(all('Tuesday at 9, please.', { previous: 'A full service would be sensible. I can do Tuesday at 9am or Wednesday at 2pm.' })[0]).toMatchObject({ key: 'my booking (service)', pattern: 'answer' });
    // Not after a statement, and not for a long message that says its own topic.
    expect(all("It's 07700 900814.", { previous: 'Thanks for coming in.' })[0]!.pattern).not.toBe('answer');
  });

  it('a topic-less update carries the sentence before it as context', () => {
    const [, update] = all("I need to move the Tourer's service. Could it be Friday 17 October instead, same time?");
    expect(update).toMatchObject({ updates: { kind: 'date', expr: 'Friday 17 October' }, context: "I need to move the Tourer's service." });
  });
});

describe('value expressions: days people write', () => {
  it('plural weekdays, a month on its own, an abbreviation only before a day number', () => {
    expect(findValueExpr('lessons on Tuesdays')).toMatchObject({ kind: 'date', text: 'Tuesdays' });
    expect(findValueExpr("it's in November instead")).toMatchObject({ kind: 'date', text: 'November' });
    expect(findValueExpr('delivered Sat 27 September')).toMatchObject({ kind: 'date', text: 'Sat 27 September' });
    expect(findValueExpr('too much sun or too little water')).toBeNull();
    expect(findValueExpr('it may rain')).toBeNull();
    expect(findValueExpr('a pair of 30mm tyres')).toMatchObject({ kind: 'quantity', text: '30mm' });
    // The hour of a time is not an amount.
    expect(findAll('Thursday at 10:30', 'quantity')).toEqual([]);
  });
});
