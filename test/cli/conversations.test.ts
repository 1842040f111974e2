import { describe, expect, it } from 'vitest';
import { CONVERSATION_DEFAULTS, generateConversations, lexicalOverlap, type ConvTurn, type Conversations } from '../../bench/lib/conversations.js';

const DAY = 86_400_000;
const data = generateConversations();

const sessions = (c: Conversations): Map<string, ConvTurn[]> => {
  const m = new Map<string, ConvTurn[]>();
  for (const t of c.turns) m.set(t.session, [...(m.get(t.session) ?? []), t]);
  return m;
};
const bySession = sessions(data);
const meetingOf = (t: ConvTurn): string => t.turn.split(':')[0]!;
const midnight = (at: string): number => Date.UTC(Number(at.slice(0, 4)), Number(at.slice(5, 7)) - 1, Number(at.slice(8, 10)));
const iso = (t: number): string => new Date(t).toISOString().slice(0, 10);
// Month names from the platform, not from the generator, so the check is independent.
const monthName = (t: number, shift: number): string => {
  const d = new Date(t);
  return new Date(Date.UTC(d.getUTCFullYear(), d.getUTCMonth() + shift, 1)).toLocaleString('en-GB', { month: 'long', year: 'numeric', timeZone: 'UTC' });
};
const WEEKDAYS = ['sunday', 'monday', 'tuesday', 'wednesday', 'thursday', 'friday', 'saturday'];
const MONTHS = ['january', 'february', 'march', 'april', 'may', 'june', 'july', 'august', 'september', 'october', 'november', 'december'];

/** The resolution rule documented in bench/lib/conversations.ts, re-derived from a turn's text and time. */
function resolve(text: string, at: string): { kind: string; value: string } | undefined {
  const t = text.toLowerCase();
  const d = midnight(at);
  if (/\b(this morning|earlier today)\b/.test(t)) return { kind: 'today', value: iso(d) };
  if (/\bthe day before yesterday\b/.test(t)) return { kind: 'day-before', value: iso(d - 2 * DAY) };
  if (/\byesterday\b/.test(t)) return { kind: 'yesterday', value: iso(d - DAY) };
  const ago = /\b(three|four|five) days ago\b/.exec(t);
  if (ago) return { kind: 'days-ago', value: iso(d - (['three', 'four', 'five'].indexOf(ago[1]!) + 3) * DAY) };
  const wd = new RegExp(`\\blast (${WEEKDAYS.join('|')})\\b`).exec(t);
  if (wd) {
    for (let back = 1; back <= 7; back++) {
      if (new Date(d - back * DAY).getUTCDay() === WEEKDAYS.indexOf(wd[1]!)) {
        // Only said when unambiguous: neither yesterday nor a week or more back.
        expect(back).toBeGreaterThanOrEqual(2);
        expect(back).toBeLessThanOrEqual(6);
        return { kind: 'last-weekday', value: iso(d - back * DAY) };
      }
    }
  }
  if (/\blast month\b/.test(t)) return { kind: 'last-month', value: monthName(d, -1) };
  if (/\bnext month\b/.test(t)) return { kind: 'next-month', value: monthName(d, 1) };
  const back = new RegExp(`\\bback in (${MONTHS.join('|')})\\b`).exec(t);
  if (back) {
    const now = new Date(d).getUTCMonth();
    const diff = (now - MONTHS.indexOf(back[1]!) + 12) % 12;
    expect(diff).toBeGreaterThanOrEqual(2);
    return { kind: 'back-in', value: monthName(d, -diff) };
  }
  return undefined;
}

describe('generateConversations', () => {
  it('is deterministic for a seed, and a different seed gives different conversations', () => {
    expect(generateConversations()).toEqual(data);
    const other = generateConversations({ seed: 12 });
    expect(other.turns.map((t) => t.text)).not.toEqual(data.turns.map((t) => t.text));
  });

  it('produces the default sizes', () => {
    expect(bySession.size).toBe(CONVERSATION_DEFAULTS.conversations);
    expect(data.turns.length).toBeGreaterThan(2500);
    expect(data.turns.length).toBeLessThan(3600);
    expect(data.probes.length).toBeGreaterThanOrEqual(250);
    expect(data.probes.length).toBeLessThanOrEqual(400);
    for (const turns of bySession.values()) {
      const meetings = new Map<string, number>();
      for (const t of turns) meetings.set(meetingOf(t), (meetings.get(meetingOf(t)) ?? 0) + 1);
      expect(meetings.size).toBeGreaterThanOrEqual(CONVERSATION_DEFAULTS.minSessions);
      expect(meetings.size).toBeLessThanOrEqual(CONVERSATION_DEFAULTS.maxSessions);
      for (const n of meetings.values()) {
        expect(n).toBeGreaterThanOrEqual(CONVERSATION_DEFAULTS.minTurnsPerSession);
        expect(n).toBeLessThanOrEqual(CONVERSATION_DEFAULTS.maxTurnsPerSession);
      }
    }
    const kinds = new Set(data.probes.map((p) => p.kind));
    expect([...kinds].sort()).toEqual(['multi-hop', 'open', 'single-hop', 'temporal', 'update']);
  });

  it('honours the options', () => {
    const c = generateConversations({ seed: 3, conversations: 2, minSessions: 4, maxSessions: 5, minTurnsPerSession: 12, maxTurnsPerSession: 14 });
    const s = sessions(c);
    expect(s.size).toBe(2);
    for (const turns of s.values()) {
      const meetings = new Set(turns.map(meetingOf));
      expect(meetings.size).toBeGreaterThanOrEqual(4);
      expect(meetings.size).toBeLessThanOrEqual(5);
      for (const m of meetings) expect(turns.filter((t) => meetingOf(t) === m).length).toBeGreaterThanOrEqual(12);
    }
  });

  it('gives unique turn ids per session, dated turns in order, and plausible two-speaker meetings', () => {
    for (const turns of bySession.values()) {
      const ids = turns.map((t) => t.turn);
      expect(new Set(ids).size).toBe(ids.length);
      for (const id of ids) expect(id).toMatch(/^D\d+:\d+$/);
      const speakerOf = { user: turns.find((t) => t.role === 'user')!.speaker, assistant: turns.find((t) => t.role === 'assistant')!.speaker };
      expect(speakerOf.user).not.toBe(speakerOf.assistant);
      for (let i = 0; i < turns.length; i++) {
        const t = turns[i]!;
        expect(t.speaker).toBe(speakerOf[t.role]);
        expect(new Date(t.at).toISOString()).toBe(t.at);
        if (i > 0) expect(Date.parse(t.at)).toBeGreaterThan(Date.parse(turns[i - 1]!.at));
        // Nobody sends more than two messages in a row.
        if (i > 1) expect(t.role === turns[i - 1]!.role && t.role === turns[i - 2]!.role).toBe(false);
      }
      for (const m of new Set(turns.map(meetingOf))) {
        const roles = new Set(turns.filter((t) => meetingOf(t) === m).map((t) => t.role));
        expect(roles.size).toBe(2);
      }
    }
  });

  it('gives probes whose evidence exists, whose queries name a speaker, and which do not quote a turn', () => {
    const pids = data.probes.map((p) => p.id);
    expect(new Set(pids).size).toBe(pids.length);
    for (const p of data.probes) {
      const turns = bySession.get(p.session)!;
      const ids = new Set(turns.map((t) => t.turn));
      expect(p.id.startsWith(`${p.kind}:${p.session}:`)).toBe(true);
      expect(p.expect.length).toBeGreaterThan(0);
      for (const e of p.expect) expect(ids.has(e)).toBe(true);
      const names = [...new Set(turns.map((t) => t.speaker))];
      expect(names.some((n) => new RegExp(`\\b${n}\\b`).test(p.query))).toBe(true);
      const q = p.query.toLowerCase();
      expect(turns.some((t) => t.text.toLowerCase().includes(q))).toBe(false);
      if (p.expectText && p.kind !== 'temporal') {
        const ev = turns.filter((t) => p.expect.includes(t.turn)).map((t) => t.text.toLowerCase()).join(' ');
        for (const x of p.expectText) expect(ev).toContain(x.toLowerCase());
      }
    }
  });

  it('resolves every temporal probe from its evidence turn the documented way', () => {
    const temporal = data.probes.filter((p) => p.kind === 'temporal');
    expect(temporal.length).toBeGreaterThan(30);
    const kinds = new Set<string>();
    for (const p of temporal) {
      const ev = bySession.get(p.session)!.filter((t) => p.expect.includes(t.turn));
      const found = ev.map((t) => resolve(t.text, t.at)).filter((x) => x !== undefined);
      expect(found.length, p.query).toBe(1);
      expect(p.expectText).toEqual([found[0]!.value]);
      kinds.add(found[0]!.kind);
    }
    for (const k of ['yesterday', 'days-ago', 'last-weekday', 'last-month', 'next-month']) expect(kinds).toContain(k);
  });

  it('states the new value of every update after a turn holding the old one', () => {
    const updates = data.probes.filter((p) => p.kind === 'update');
    expect(updates.length).toBeGreaterThan(5);
    for (const p of updates) {
      expect(p.rejectText?.length).toBeGreaterThan(0);
      const turns = bySession.get(p.session)!;
      const at = Math.min(...p.expect.map((id) => turns.findIndex((t) => t.turn === id)));
      const ev = turns.filter((t) => p.expect.includes(t.turn)).map((t) => t.text.toLowerCase()).join(' ');
      for (const old of p.rejectText!) {
        expect(turns.slice(0, at).some((t) => t.text.toLowerCase().includes(old.toLowerCase())), p.query).toBe(true);
        expect(ev).not.toContain(old.toLowerCase());
      }
      for (const x of p.expectText ?? []) expect(ev).toContain(x.toLowerCase());
    }
  });

  it('is not solved by keyword overlap alone', () => {
    for (const stem of [false, true]) {
      const o = lexicalOverlap(data, stem);
      expect(o.meanShare).toBeGreaterThan(0.25);
      expect(o.meanShare).toBeLessThan(0.65);
      expect(o.beatenShare).toBeGreaterThanOrEqual(0.25);
    }
  });
});
