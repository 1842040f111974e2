// Dates a turn mentions, resolved against the time the turn was said: "yesterday" said on 8 May 2023
// is 7 May 2023. The logbook indexes the resolved dates as terms, so "what happened in May 2023" finds
// the turn, and a recalled turn can show what its relative dates meant. Parsing is chrono-node's
// English casual parser (the field's common library for this); everything runs in UTC so a replay
// gives the same answer on every machine.

import { casual, type ParsedResult } from 'chrono-node/en';
import { textDigest } from './text.js';

/** How precise a resolved mention is. */
export type DateGrain = 'day' | 'week' | 'month' | 'year';

/** One date expression of a text, resolved. */
export interface DateMention {
  /** The expression as written ("last Saturday"). */
  text: string;
  /** Start offset in the text. */
  index: number;
  /** The resolved day, `YYYY-MM-DD` (UTC); for coarser grains, the first day of the period. */
  day: string;
  grain: DateGrain;
}

/**
 * Words without which a text holds no date worth keeping: a cheap test that spares the parser (about
 * 40 µs a text, measured here) on most chat turns. It also keeps out what chrono reads as today but
 * says nothing about a day in chat: "now", "in 5 minutes".
 */
const HINT =
  /\b(?:today|tonight|yesterday|tomorrow|ago|last|next|this|coming|past|since|weekends?|weeks?|months?|years?|days?|morning|afternoon|evening|night|mon|tue|wed|thu|fri|sat|sun|monday|tuesday|wednesday|thursday|friday|saturday|sunday|jan|feb|mar|apr|may|jun|jul|aug|sep|sept|oct|nov|dec|january|february|march|april|june|july|august|september|october|november|december|\d{4}|\d{1,2}(?:st|nd|rd|th)|\d{1,2}[/.-]\d{1,2})\b/i;

const WEEKDAYS = ['sunday', 'monday', 'tuesday', 'wednesday', 'thursday', 'friday', 'saturday'];
// A weekday's name or abbreviation, whole: "next month" is not "next Monday".
const NEXT_WEEKDAY = /^next\s+((?:mon|tues|wednes|thurs|fri|satur|sun)day|mon|tue|tues|wed|thu|thur|thurs|fri|sat|sun)(?![a-z])/i;
const DAY_MS = 86_400_000;

const iso = (ms: number): string => new Date(ms).toISOString().slice(0, 10);
const MONTH_NAMES = ['January', 'February', 'March', 'April', 'May', 'June', 'July', 'August', 'September', 'October', 'November', 'December'];

/**
 * How a mention reads in a prompt: "2023-05-07" (ISO 8601, unambiguous for people and models alike),
 * "May 2023", "2023", "week of 2023-05-01".
 */
export function formatMention(m: Pick<DateMention, 'day' | 'grain'>): string {
  const [y, mo] = m.day.split('-').map(Number) as [number, number];
  if (m.grain === 'year') return String(y);
  if (m.grain === 'month') return `${MONTH_NAMES[mo - 1]!} ${y}`;
  if (m.grain === 'week') return `week of ${m.day}`;
  return m.day;
}

function grainOf(r: ParsedResult): DateGrain | null {
  const s = r.start;
  const text = r.text.toLowerCase();
  if (/\bweeks?\b/.test(text) && !s.isCertain('weekday')) return 'week';
  if (s.isCertain('day') || s.isCertain('weekday')) return 'day';
  if (s.isCertain('month')) return 'month';
  if (s.isCertain('year')) return 'year';
  // "this morning", "tonight": a part of the day of speaking.
  if (/\b(?:today|tonight|morning|afternoon|evening|night)\b/.test(text)) return 'day';
  return null;
}

/**
 * Date mentions of `text`, resolved against `atMs` (when the text was said). "next Friday" is the
 * first Friday after the day of speaking (English is ambiguous here; this is the common reading in
 * chat, common practice), where chrono would take the Friday of the following week.
 */
export function resolveDates(text: string, atMs: number): DateMention[] {
  if (!HINT.test(text) || !Number.isFinite(atMs)) return [];
  // One parse per (text, moment): a turn's text is resolved by its read and again by its write, and a
  // slot's value on every read that returns it. Keyed by a digest: it keeps the date expressions found
  // ("last Saturday"), not the texts.
  const key = `${atMs}:${textDigest(text)}`;
  let found = resolved.get(key);
  if (!found) {
    found = parseDates(text, atMs);
    if (resolved.size >= RESOLVED_MAX) resolved.clear();
    resolved.set(key, found);
  }
  return found.map((m) => ({ ...m }));
}

/** Resolved mentions by `${atMs}:${digest}` (bounded; cleared when full). */
const resolved = new Map<string, readonly DateMention[]>();
const RESOLVED_MAX = 10_000;

function parseDates(text: string, atMs: number): DateMention[] {
  let results: ParsedResult[];
  try {
    results = casual.parse(text, { instant: new Date(atMs), timezone: 'UTC' });
  } catch {
    return [];
  }
  const out: DateMention[] = [];
  for (const r of results) {
    const grain = grainOf(r);
    if (!grain) continue;
    let ms = r.start.date().getTime();
    const next = NEXT_WEEKDAY.exec(r.text.trim());
    if (next) {
      const want = WEEKDAYS.findIndex((w) => w.startsWith(next[1]!.toLowerCase().slice(0, 3)));
      const today = new Date(atMs).getUTCDay();
      const ahead = ((want - today + 7) % 7) || 7;
      ms = Math.floor(atMs / DAY_MS) * DAY_MS + ahead * DAY_MS;
    }
    let day = iso(ms);
    if (grain === 'month') day = `${day.slice(0, 7)}-01`;
    else if (grain === 'year') day = `${day.slice(0, 4)}-01-01`;
    else if (grain === 'week') {
      // The Monday of that week (ISO 8601 weeks start on Monday).
      const wd = (new Date(ms).getUTCDay() + 6) % 7;
      day = iso(Math.floor(ms / DAY_MS) * DAY_MS - wd * DAY_MS);
    }
    out.push({ text: r.text, index: r.index, day, grain });
  }
  return out;
}

/**
 * Index terms of resolved mentions: the day, its month and its year, each as its own term family,
 * prefixed with a character no tokenizer emits so they never collide with words. A mention indexes
 * only the grains it knows (a month mention has no day term).
 */
export function dateTerms(mentions: readonly Pick<DateMention, 'day' | 'grain'>[]): string[] {
  const out = new Set<string>();
  for (const m of mentions) {
    if (m.grain === 'day') out.add(`§d${m.day}`);
    if (m.grain !== 'year') out.add(`§m${m.day.slice(0, 7)}`);
    out.add(`§y${m.day.slice(0, 4)}`);
  }
  return [...out];
}

/**
 * A question that asks when something happened ("When did ...", "What date ...", "How long ago ...",
 * "Which month ..."): the read then lifts turns that carry a date.
 */
export function asksWhen(text: string): boolean {
  return /\b(?:when|what (?:date|day|time|year|month|week)|which (?:date|day|year|month|week)|how long ago|since when|what time)\b/i.test(text);
}
