// The prompt block: one line per recalled item, best first, within a token budget.

import { describe, expect, it } from 'vitest';
import { PROMPT_DEFAULTS, approxTokens, itemLine, renderPrompt } from '../../src/memory/prompt.js';
import type { RecallItem } from '../../src/types.js';

const item = (key: string, value: string, over: Partial<RecallItem> = {}): RecallItem => ({
  source: 'slot', kind: 'slot', id: key, key, value, provenance: ['t1'], weight: 0.5, score: 1, cosine: 0.5, lexical: 0, coverage: 0, strength: 1, placed: 'score', ...over,
});

describe('renderPrompt', () => {
  const items = [item('my booking', 'Friday at 9'), item('my name', 'Dana'), item('my bike', 'a green Corvane')];

  it('renders a header and "- key: value" lines in rank order', () => {
    expect(renderPrompt(items)).toBe([PROMPT_DEFAULTS.header, '- my booking: Friday at 9', '- my name: Dana', '- my bike: a green Corvane'].join('\n'));
  });

  it('writes only the value when key and value are the same text, and marks values that left working memory', () => {
    expect(itemLine(item('same text', 'same text'))).toBe('- same text');
    expect(itemLine(item('my booking', 'Tuesday', { source: 'logbook', kind: 'superseded' }))).toBe('- my booking: Tuesday (earlier, since replaced)');
    expect(itemLine(item('my bike', 'a Larkspur roadster', { source: 'logbook', kind: 'capacity' }))).toBe('- my bike: a Larkspur roadster (older)');
    expect(itemLine(item('my exam', 'They moved it to November', { placed: 'ambiguous' }))).toBe('- my exam: They moved it to November (said later; may update the next item)');
  });

  it('shows a turn with its day, its speaker and what its relative dates meant', () => {
    const turn = item('', 'I ran my first 10k last Saturday!', {
      source: 'logbook', kind: 'turn', speaker: 'Maren', atMs: Date.parse('2025-06-11T18:00:00Z'),
      dates: [{ text: 'last Saturday', day: '2025-06-07', grain: 'day' }],
    });
    expect(itemLine(turn)).toBe('- [2025-06-11] Maren: I ran my first 10k last Saturday! (last Saturday = 2025-06-07)');
    expect(itemLine({ ...turn, speaker: undefined, role: 'assistant', dates: undefined } as RecallItem)).toBe('- [2025-06-11] assistant: I ran my first 10k last Saturday!');
  });

  it('stays within the token budget, skipping lines that do not fit', () => {
    const count = (s: string): number => s.split(/\s+/).filter(Boolean).length; // words as tokens
    const header = 'Memory:'; // 1 token
    // '\n- my booking: Friday at 9' = 6 tokens, '\n- my name: Dana' = 4, '\n- my bike: a green Corvane' = 6
    expect(renderPrompt(items, { header, countTokens: count, tokenBudget: 11 })).toBe('Memory:\n- my booking: Friday at 9\n- my name: Dana');
    expect(renderPrompt(items, { header, countTokens: count, tokenBudget: 8 })).toBe('Memory:\n- my booking: Friday at 9');
    // A line too long is skipped, a later shorter one still fits.
    expect(renderPrompt(items, { header, countTokens: count, tokenBudget: 5 })).toBe('Memory:\n- my name: Dana');
    for (const budget of [0, 1, 3, 7, 12, 100]) {
      const out = renderPrompt(items, { header, countTokens: count, tokenBudget: budget });
      expect(out === '' || count(out) <= budget).toBe(true);
    }
  });

  it('is empty with no items, or when the header alone busts the budget', () => {
    expect(renderPrompt([])).toBe('');
    expect(renderPrompt(items, { ...PROMPT_DEFAULTS, tokenBudget: 3 })).toBe('');
  });

  it('the default counter is ceil(chars / 4)', () => {
    expect(approxTokens('')).toBe(0);
    expect(approxTokens('abcd')).toBe(1);
    expect(approxTokens('abcde')).toBe(2);
  });
});
