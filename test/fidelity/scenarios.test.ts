// Consistency of the fact-fidelity scenarios: the data must say what its probes claim it says.

import { describe, expect, it } from 'vitest';
import { FIDELITY_SCENARIOS, type FidelityProbe, type FidelityScenario, type FidelityTurn } from './scenarios.js';

const has = (text: string, needle: string): boolean => text.toLowerCase().includes(needle.toLowerCase());

const WEEKDAYS = ['sunday', 'monday', 'tuesday', 'wednesday', 'thursday', 'friday', 'saturday'];

/**
 * The date a relative phrase in `text` names, as YYYY-MM-DD, from the UTC date of `at`: "next
 * <weekday>" is the first such weekday strictly after that day, "tomorrow" the day after. Null when
 * the text has neither.
 */
function resolveRelative(text: string, at: string): string | null {
  const day = new Date(`${at.slice(0, 10)}T00:00:00Z`);
  const next = /\bnext (sunday|monday|tuesday|wednesday|thursday|friday|saturday)\b/i.exec(text);
  let add: number;
  if (next) {
    const want = WEEKDAYS.indexOf(next[1]!.toLowerCase());
    add = ((want - day.getUTCDay() + 7) % 7) || 7;
  } else if (/\btomorrow\b/i.test(text)) {
    add = 1;
  } else {
    return null;
  }
  return new Date(day.getTime() + add * 86_400_000).toISOString().slice(0, 10);
}

/** The turns a probe can see: all of them, or up to and including `after`. */
function visible(s: FidelityScenario, p: FidelityProbe): FidelityTurn[] {
  if (p.after === undefined) return s.turns;
  return s.turns.slice(0, s.turns.findIndex((t) => t.turn === p.after) + 1);
}

describe('fidelity scenarios', () => {
  it('has the three scenarios, each with its own session', () => {
    expect(FIDELITY_SCENARIOS.map((s) => s.name)).toEqual(['tutor', 'nursery', 'workshop']);
    for (const s of FIDELITY_SCENARIOS) {
      for (const t of s.turns) expect(t.session).toBe(`fidelity-${s.name}`);
      for (const p of s.probes) expect(p.session).toBe(`fidelity-${s.name}`);
    }
  });

  it('has unique probe ids across all scenarios', () => {
    const ids = FIDELITY_SCENARIOS.flatMap((s) => s.probes.map((p) => p.id));
    expect(new Set(ids).size).toBe(ids.length);
  });

  it('resolves the relative-date rule on known days', () => {
    expect(resolveRelative('next Friday', '2025-09-21T15:05:00Z')).toBe('2025-09-26'); // Sunday
    expect(resolveRelative('next Friday', '2025-09-19T10:00:00Z')).toBe('2025-09-26'); // a Friday: strictly after
    expect(resolveRelative('next Friday', '2025-09-18T10:00:00Z')).toBe('2025-09-19'); // Thursday
    expect(resolveRelative('tomorrow', '2025-10-31T10:00:00Z')).toBe('2025-11-01');
    expect(resolveRelative('on Friday', '2025-09-18T10:00:00Z')).toBeNull();
  });

  for (const s of FIDELITY_SCENARIOS) {
    describe(s.name, () => {
      const index = new Map(s.turns.map((t, i) => [t.turn, i]));

      it('has 50 to 80 turns and 18 to 30 probes', () => {
        expect(s.turns.length).toBeGreaterThanOrEqual(50);
        expect(s.turns.length).toBeLessThanOrEqual(80);
        expect(s.probes.length).toBeGreaterThanOrEqual(18);
        expect(s.probes.length).toBeLessThanOrEqual(30);
      });

      it('numbers turns t1, t2, ... with unique ids', () => {
        expect(s.turns.map((t) => t.turn)).toEqual(s.turns.map((_, i) => `t${i + 1}`));
        expect(index.size).toBe(s.turns.length);
      });

      it('has strictly increasing ISO-8601 timestamps', () => {
        let last = -Infinity;
        for (const t of s.turns) {
          expect(t.at, t.turn).toMatch(/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d+)?Z$/);
          const ms = Date.parse(t.at);
          expect(ms, t.turn).toBeGreaterThan(last);
          last = ms;
        }
      });

      it('alternates user and assistant, starting with the user', () => {
        s.turns.forEach((t, i) => expect(t.role, t.turn).toBe(i % 2 === 0 ? 'user' : 'assistant'));
      });

      for (const p of s.probes) {
        describe(p.id, () => {
          const expectTurns = p.expect.map((id) => s.turns[index.get(id) ?? -1]);

          it('points at turns that exist, at or before `after`', () => {
            expect(p.expect.length).toBeGreaterThan(0);
            for (const id of p.expect) expect(index.has(id), id).toBe(true);
            if (p.after !== undefined) {
              expect(index.has(p.after), p.after).toBe(true);
              for (const id of p.expect) expect(index.get(id)!).toBeLessThanOrEqual(index.get(p.after)!);
            }
          });

          it('finds every expectText in an expect turn', () => {
            expect(p.expectText.length).toBeGreaterThan(0);
            if (p.kind === 'relative-date') {
              // No turn spells the date out; it must follow from the documented rule.
              const resolved = expectTurns.map((t) => (t ? resolveRelative(t.text, t.at) : null)).find((d) => d !== null);
              expect(p.expectText).toEqual([resolved]);
              return;
            }
            for (const x of p.expectText) {
              expect(
                expectTurns.some((t) => t !== undefined && has(t.text, x)),
                `"${x}" in ${p.expect.join(', ')}`,
              ).toBe(true);
            }
          });

          it('keeps every rejectText out of the expect turns and has it in a turn the probe can see', () => {
            const seen = visible(s, p).filter((t) => !p.expect.includes(t.turn));
            for (const x of p.rejectText) {
              for (const t of expectTurns) expect(t !== undefined && has(t.text, x), `"${x}" in ${t?.turn}`).toBe(false);
              expect(
                seen.some((t) => has(t.text, x)),
                `"${x}" elsewhere`,
              ).toBe(true);
            }
          });
        });
      }
    });
  }

  it('keeps to the invented-data rules (drama-range phone numbers, example email domains)', () => {
    for (const s of FIDELITY_SCENARIOS) {
      for (const t of s.turns) {
        for (const m of t.text.matchAll(/\b0\d{3,4} ?\d{6}\b/g)) expect(m[0], t.turn).toMatch(/^07700 ?900\d{3}$/);
        for (const m of t.text.matchAll(/@([a-z0-9.-]+[a-z])/gi)) expect(m[1], t.turn).toMatch(/^example\.(com|org|net)$/);
      }
    }
  });
});
