// Dates, times and quantities found in text: which words each rule takes (exact text and position),
// which words it must leave alone (a bare "sun", the verb "may", house and phone numbers), and the
// order of the rules (a date wins over a time over a number). Every expected value is read off the
// sentence by hand.

import { describe, expect, it } from 'vitest';
import { findAll, findValueExpr, hasValueExpr, type ValueKind } from '../../src/memory/values.js';

/** The expression expected at the start of `text`'s substring `expr`. */
function at(text: string, kind: ValueKind, expr: string): { kind: ValueKind; text: string; index: number } {
  const index = text.indexOf(expr);
  expect(index, `${expr} in ${text}`).toBeGreaterThanOrEqual(0);
  return { kind, text: expr, index };
}

const found = (text: string) => findValueExpr(text);

describe('findValueExpr: weekdays', () => {
  it.each([
    ['see you next Friday', 'next Friday'],
    ['lessons on Tuesdays', 'Tuesdays'],
    ['coming Thursday works', 'coming Thursday'],
    ['this Wednesday then', 'this Wednesday'],
    ['last Monday 14 March', 'last Monday 14 March'],
    ['on Saturday, the 4th of October please', 'Saturday, the 4th of October'],
    ['on Sunday the 5th', 'Sunday the 5th'],
    ['wed 5 is fine', 'wed 5'],
    ['Thurs, 12 then', 'Thurs, 12'],
    ['delivered Sat 27 September', 'Sat 27 September'],
  ])('%s -> %s', (text, expr) => {
    expect(found(text)).toEqual(at(text, 'date', expr));
  });

  it('a bare "sun" or "sat" is a word, not a day', () => {
    expect(found('the sun is out')).toBeNull();
    expect(found('we sat down')).toBeNull();
    expect(found('too much sun or too little water')).toBeNull();
  });
});

describe('findValueExpr: calendar dates', () => {
  it.each([
    ['the 14th of October', 'the 14th of October'],
    ['moved to October the 14th', 'October the 14th'],
    ['due Dec 25', 'Dec 25'],
    ['on 3 May', '3 May'],
    ['from the 2nd of sept', 'the 2nd of sept'],
    ['on 2026-12-03', '2026-12-03'],
    ['on 3/12', '3/12'],
    ['by 3/12/26', '3/12/26'],
    ['by 3/12/2026', '3/12/2026'],
    ['on the 14th', 'on the 14th'],
    ['the 1st', 'the 1st'],
  ])('%s -> %s', (text, expr) => {
    expect(found(text)).toEqual(at(text, 'date', expr));
  });

  it('an ISO date needs two-digit month and day', () => {
    expect(found('2026-1-3')).toEqual(at('2026-1-3', 'quantity', '2026'));
  });
});

describe('findValueExpr: relative days and months alone', () => {
  it.each([
    ['tomorrow', 'tomorrow'],
    ['the day after tomorrow', 'day after tomorrow'],
    ['tonight then', 'tonight'],
    ['sometime next week', 'next week'],
    ['next month', 'next month'],
    ['at the weekend', 'the weekend'],
    ['free this weekend', 'this weekend'],
    ['later this week', 'later this week'],
    ["it's in November instead", 'November'],
    ['until mid March', 'March'],
    ['by late June', 'June'],
    ['from early Jan', 'Jan'],
    ['for april', 'april'],
    ['till Sept', 'Sept'],
    ['of December', 'December'],
    ['in may', 'may'],
  ])('%s -> %s', (text, expr) => {
    expect(found(text)).toEqual(at(text, 'date', expr));
  });

  it('"may" is a month only after "in": never the verb', () => {
    expect(found('it may rain')).toBeNull();
    expect(found('the end of may')).toBeNull();
    expect(found('November rain')).toBeNull(); // a month alone needs "in", "by", "until"...
  });
});

describe('findValueExpr: times', () => {
  it.each([
    ['at 7pm', 'at 7pm'],
    ['at 7 pm', 'at 7 pm'],
    ['9:15 a.m. sharp', '9:15 a.m.'],
    ['by 11 p.m.', '11 p.m.'],
    ['10 AM', '10 AM'],
    ['at 10:30', '10:30'],
    ['noon', 'noon'],
    ['around midnight', 'midnight'],
  ])('%s -> %s', (text, expr) => {
    expect(found(text)).toEqual(at(text, 'time', expr));
  });

  it('a date wins over a time in the same sentence', () => {
    expect(found('at 9am on Friday')).toEqual(at('at 9am on Friday', 'date', 'Friday'));
  });
});

describe('findValueExpr: quantities', () => {
  it.each([
    ['3 people', '3 people'],
    ['2.5 kg of compost', '2.5 kg'],
    ['1,5 litres', '1,5 litres'],
    ['20% off', '20%'],
    ['50 percent', '50 percent'],
    ['30 psi', '30 psi'],
    ['a pair of 30mm tyres', '30mm'],
    ['5 €', '5 €'],
    ['four guests', 'four guests'],
    ['twelve kids', 'twelve kids'],
    ['make it 12', '12'],
    ['room 4 please', '4'],
    ['about 4 or 5', '4'],
    ['a 3-speed hub', '3'],
    ['it is 12345', '12345'],
  ])('%s -> %s', (text, expr) => {
    expect(found(text)).toEqual(at(text, 'quantity', expr));
  });

  it('a time wins over a number', () => {
    expect(found('3 people at 7pm')).toEqual(at('3 people at 7pm', 'time', 'at 7pm'));
  });

  it('numbers that name rather than count are not quantities', () => {
    expect(found('98 Fennel Street')).toBeNull(); // house number before a street name
    expect(found('call 0161 496 0000')).toBeNull(); // a phone number's digit groups
    expect(found('order 123456')).toBeNull(); // six digits or more: an identifier
    expect(found('code B12')).toBeNull(); // a code
    expect(found('one person')).toBeNull(); // a word number counts only listed things
    expect(found('')).toBeNull();
  });

  it('the number just after a lone digit group, or before one, is part of the group', () => {
    expect(found('flat 4 12')).toBeNull();
    expect(found('4 12')).toBeNull();
  });
});

describe('findAll', () => {
  const text = 'Tuesday at 9am or Friday at 10:30 with 3 people';

  it('returns every expression of the kind asked for, in the order they appear', () => {
    expect(findAll(text, 'date')).toEqual([at(text, 'date', 'Tuesday'), at(text, 'date', 'Friday')]);
    expect(findAll(text, 'time')).toEqual([at(text, 'time', 'at 9am'), at(text, 'time', '10:30')]);
    expect(findAll(text, 'quantity')).toEqual([at(text, 'quantity', '3 people')]);
  });

  it('orders by position across rules, not by rule', () => {
    const t = 'tomorrow or else 3/12';
    expect(findAll(t, 'date').map((e) => e.text)).toEqual(['tomorrow', '3/12']);
  });

  it('leaves out the hour and minutes of a time, and identifier numbers, when asked for quantities', () => {
    expect(findAll('Thursday at 10:30', 'quantity')).toEqual([]);
    expect(findAll('at 9:15 for 2 nights', 'quantity')).toEqual([at('at 9:15 for 2 nights', 'quantity', '2 nights')]);
    expect(findAll('98 Fennel Street, 2 bikes', 'quantity')).toEqual([at('98 Fennel Street, 2 bikes', 'quantity', '2')]);
  });

  it('judges a number by its own neighbours, not by words further along or further back', () => {
    const q = (t: string) => findAll(t, 'quantity').map((e) => e.text);
    expect(q('table for 3 at 10:30')).toEqual(['3']); // a time later on does not make 3 an hour
    expect(q('room for 4 with Dana')).toEqual(['4']); // a name later on does not make 4 a house number
    expect(q('1. 2 more')).toEqual(['1', '2']); // "1." two characters back is not a time
    expect(q('2.5 Tonnes')).toEqual(['2.5']); // a decimal before a capital is an amount, not a house number
    expect(q('98  Fennel Street')).toEqual([]); // however many spaces before the street name
    expect(q('9:5')).toEqual(['9']); // the 5 of "9:5" belongs to the 9
    expect(q('É5')).toEqual([]); // a code, also when its letter is the text's first character
  });

  it('finds nothing in text without values', () => {
    expect(findAll('nothing concrete here', 'date')).toEqual([]);
  });
});

describe('hasValueExpr', () => {
  it('is true exactly when some expression is found', () => {
    expect(hasValueExpr('book for Friday')).toBe(true);
    expect(hasValueExpr('2 bikes')).toBe(true);
    expect(hasValueExpr('the shop is open')).toBe(false);
  });
});
