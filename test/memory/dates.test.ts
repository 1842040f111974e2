// Relative dates resolved against when a turn was said. Expected days are computed here from the
// calendar with plain Date arithmetic in UTC (an independent path from chrono-node's parser), and the
// grains follow what the expression can know.

import { describe, expect, it } from 'vitest';
import { asksWhen, dateTerms, formatMention, resolveDates } from '../../src/memory/dates.js';

const SAID = Date.parse('2023-05-08T13:56:00Z'); // a Monday
const DAY = 86_400_000;
const iso = (ms: number): string => new Date(ms).toISOString().slice(0, 10);
const weekday = (ms: number): number => new Date(ms).getUTCDay();
const one = (text: string, at = SAID) => {
  const m = resolveDates(text, at);
  expect(m, text).toHaveLength(1);
  return m[0]!;
};

describe('resolveDates', () => {
  it('resolves days relative to the day of speaking', () => {
    expect(weekday(SAID)).toBe(1);
    expect(one('I went to a support group yesterday')).toMatchObject({ text: 'yesterday', day: iso(SAID - DAY), grain: 'day' });
    expect(one('See you tomorrow!')).toMatchObject({ day: iso(SAID + DAY), grain: 'day' });
    expect(one('Two days ago I ran a charity race.')).toMatchObject({ day: iso(SAID - 2 * DAY), grain: 'day' });
    // The Saturday before a Monday is two days back.
    expect(one('last Saturday was great')).toMatchObject({ day: iso(SAID - 2 * DAY), grain: 'day' });
  });

  it('"next Friday" is the first Friday after the day of speaking', () => {
    expect(one('See you next Friday at 9').day).toBe(iso(SAID + 4 * DAY));
    // Said on a Sunday (2025-09-21): the Friday five days later.
    expect(one("I'm flying to see my grandmother next Friday", Date.parse('2025-09-21T15:05:00Z')).day).toBe('2025-09-26');
  });

  it('keeps coarser grains coarse: weeks, months and years', () => {
    expect(one('We adopted a puppy last week!')).toMatchObject({ grain: 'week', day: '2023-05-01' }); // the Monday of the week before
    expect(one('It is in November instead')).toMatchObject({ grain: 'month', day: '2023-11-01' });
    expect(one('I painted that lake sunrise last year.')).toMatchObject({ grain: 'year', day: '2022-01-01' });
    expect(one('the 14th of October')).toMatchObject({ grain: 'day', day: '2023-10-14' });
  });

  it('a month mention starts on the 1st, a week mention on its Monday, whatever day they resolve to', () => {
    const WEDNESDAY = SAID + 2 * DAY; // 2023-05-10
    expect(one('a month ago')).toMatchObject({ grain: 'month', day: '2023-04-01' }); // 8 April -> April
    expect(one('We adopted a puppy last week!', WEDNESDAY)).toMatchObject({ grain: 'week', day: '2023-05-01' }); // 3 May -> its Monday
    expect(one('see you next week', WEDNESDAY)).toMatchObject({ grain: 'week', day: '2023-05-15' });
  });

  it('a weekday named in a week is a day; a part of the day of speaking is that day', () => {
    expect(one('Friday next week')).toMatchObject({ grain: 'day', day: '2023-05-19' });
    expect(one('I watered the ferns this morning')).toMatchObject({ grain: 'day', day: '2023-05-08' });
    expect(one('tonight')).toMatchObject({ grain: 'day', day: '2023-05-08' });
  });

  it("resolves in UTC whatever the machine's time zone", () => {
    // At UTC+14 the implied noon of a date is 22:00 UTC the day before: a local parse would shift it.
    const tz = process.env.TZ;
    process.env.TZ = 'Pacific/Kiritimati';
    try {
      expect(one('booked for the 15th of October')).toMatchObject({ grain: 'day', day: '2023-10-15' });
    } finally {
      if (tz === undefined) delete process.env.TZ;
      else process.env.TZ = tz;
    }
  });

  it('a time of day alone is no date, even beside a hint word', () => {
    expect(resolveDates('this is at 5pm', SAID)).toEqual([]);
  });

  it('finds nothing in texts without a date, and skips the parser on them', () => {
    expect(resolveDates('hello there, how are you', SAID)).toEqual([]);
    expect(resolveDates('It may rain', SAID)).toEqual([]);
    expect(resolveDates('at 5pm', SAID)).toEqual([]); // a time alone names no day
    expect(resolveDates('yesterday', Number.NaN)).toEqual([]);
  });

  it('"now" and "in 5 minutes" name no date, though the parser gives them one', () => {
    // chrono-node reads both as the day of speaking, certain; in chat they say nothing about a day
    // (over the SGD and long-conversation replays, 303 turns had such a mention and no hint word).
    expect(resolveDates("I'm at the shop now", SAID)).toEqual([]);
    expect(resolveDates('the bus comes in 5 minutes', SAID)).toEqual([]);
  });
});

describe('dateTerms, formatMention, asksWhen', () => {
  it('indexes only the grains a mention knows, in their own term families', () => {
    expect(dateTerms([{ day: '2023-05-07', grain: 'day' }])).toEqual(['§d2023-05-07', '§m2023-05', '§y2023']);
    expect(dateTerms([{ day: '2023-11-01', grain: 'month' }])).toEqual(['§m2023-11', '§y2023']);
    expect(dateTerms([{ day: '2022-01-01', grain: 'year' }])).toEqual(['§y2022']);
  });

  it('formats days as ISO 8601 and months by name', () => {
    expect(formatMention({ day: '2023-05-07', grain: 'day' })).toBe('2023-05-07');
    expect(formatMention({ day: '2023-11-01', grain: 'month' })).toBe('November 2023');
    expect(formatMention({ day: '2022-01-01', grain: 'year' })).toBe('2022');
    expect(formatMention({ day: '2023-05-01', grain: 'week' })).toBe('week of 2023-05-01');
  });

  it('recognises questions about when', () => {
    for (const t of ['When did Maren run her first 10k?', 'What date is the exam?', 'How long ago did they move?', 'Which month was the trip?']) expect(asksWhen(t), t).toBe(true);
    for (const t of ['Where does Kofi work?', 'What did Ana paint?']) expect(asksWhen(t), t).toBe(false);
  });
});

describe('resolveDates, parsed once per text and moment', () => {
  it('answers a repeated text as the first time, with copies a caller may change', () => {
    const first = resolveDates('I ran my first 10k last Saturday', SAID);
    expect(first).toEqual([{ text: 'last Saturday', index: 19, day: '2023-05-06', grain: 'day' }]);
    first[0]!.day = '1999-01-01';
    expect(resolveDates('I ran my first 10k last Saturday', SAID)[0]!.day).toBe('2023-05-06');
  });

  it('resolves the same text said at another moment against that moment', () => {
    expect(resolveDates('I saw the fern yesterday', SAID)[0]!.day).toBe('2023-05-07');
    expect(resolveDates('I saw the fern yesterday', SAID + 3 * DAY)[0]!.day).toBe('2023-05-10');
  });
});
