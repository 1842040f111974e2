// The prompt block at its edges: a budget met exactly, a header that costs the whole budget, turns
// with no time, no speaker or no role, and the markers of each kind of value.

import { describe, expect, it } from 'vitest';
import { PROMPT_DEFAULTS, approxTokens, itemLine, renderPrompt } from '../../src/memory/prompt.js';
import type { RecallItem } from '../../src/types.js';

const item = (key: string, value: string, over: Partial<RecallItem> = {}): RecallItem => ({
  source: 'slot', kind: 'slot', id: key, key, value, provenance: ['t1'], weight: 0.5, score: 1, cosine: 0.5, lexical: 0, coverage: 0, strength: 1, placed: 'score', ...over,
});
const turn = (value: string, over: Partial<RecallItem> = {}): RecallItem => item('', value, { source: 'logbook', kind: 'turn', ...over });

describe('itemLine for turns', () => {
  it('leaves the day out when the time is missing or not finite', () => {
    expect(itemLine(turn('Is the shop open on Sunday?', { speaker: 'Ines' }))).toBe('- Ines: Is the shop open on Sunday?');
    expect(itemLine(turn('Is the shop open on Sunday?', { speaker: 'Ines', atMs: Number.NaN }))).toBe('- Ines: Is the shop open on Sunday?');
    expect(itemLine(turn('Is the shop open on Sunday?', { speaker: 'Ines', atMs: Number.POSITIVE_INFINITY }))).toBe('- Ines: Is the shop open on Sunday?');
    // Time 0 is a real time: the first day of 1970.
    expect(itemLine(turn('Hello', { speaker: 'Ines', atMs: 0 }))).toBe('- [1970-01-01] Ines: Hello');
  });

  it('names the speaker, else the role, else "user"', () => {
    expect(itemLine(turn('We close at six.', { speaker: 'Bo', role: 'assistant' }))).toBe('- Bo: We close at six.');
    expect(itemLine(turn('We close at six.', { role: 'assistant' }))).toBe('- assistant: We close at six.');
    expect(itemLine(turn('We close at six.'))).toBe('- user: We close at six.');
  });

  it('adds no brackets for an empty date list, and joins several dates with "; "', () => {
    expect(itemLine(turn('Pick up on Friday', { dates: [] }))).toBe('- user: Pick up on Friday');
    const two = turn('Drop off Monday, pick up Friday', {
      dates: [{ text: 'Monday', day: '2025-06-09', grain: 'day' }, { text: 'Friday', day: '2025-06-13', grain: 'day' }],
    });
    expect(itemLine(two)).toBe('- user: Drop off Monday, pick up Friday (Monday = 2025-06-09; Friday = 2025-06-13)');
  });
});

describe('itemLine for values', () => {
  it('shows a value\'s dates before its marker, and no key when there is none', () => {
    const dated = item('my booking', 'Friday', { dates: [{ text: 'Friday', day: '2025-06-13', grain: 'day' }] });
    expect(itemLine(dated)).toBe('- my booking: Friday (Friday = 2025-06-13)');
    expect(itemLine({ ...dated, kind: 'superseded', source: 'logbook' })).toBe('- my booking: Friday (Friday = 2025-06-13) (earlier, since replaced)');
    expect(itemLine(item('my booking', 'Friday', { dates: [] }))).toBe('- my booking: Friday');
    const both = item('my lessons', 'Monday and Friday', { dates: [{ text: 'Monday', day: '2025-06-09', grain: 'day' }, { text: 'Friday', day: '2025-06-13', grain: 'day' }] });
    expect(itemLine(both)).toBe('- my lessons: Monday and Friday (Monday = 2025-06-09; Friday = 2025-06-13)');
    expect(itemLine(item('', 'a green Corvane'))).toBe('- a green Corvane');
    expect(itemLine(item('', 'a green Corvane', { kind: 'capacity', source: 'logbook' }))).toBe('- a green Corvane (older)');
  });

  it('marks a slot placed by score or as a successor with nothing', () => {
    expect(itemLine(item('my fern', 'repotted', { placed: 'successor' }))).toBe('- my fern: repotted');
    expect(itemLine(item('my fern', 'repotted', { placed: 'score' }))).toBe('- my fern: repotted');
  });
});

describe('renderPrompt budget edges', () => {
  const ones = (s: string): number => (s.startsWith('\n') ? 2 : 3); // header 3 tokens, each line 2
  const items = [item('a', '1'), item('b', '2'), item('c', '3')];

  it('takes a line that meets the budget exactly and refuses one a token over', () => {
    expect(renderPrompt(items, { header: 'H', countTokens: ones, tokenBudget: 7 })).toBe('H\n- a: 1\n- b: 2');
    expect(renderPrompt(items, { header: 'H', countTokens: ones, tokenBudget: 6 })).toBe('H\n- a: 1');
    expect(renderPrompt(items, { header: 'H', countTokens: ones, tokenBudget: 9 })).toBe('H\n- a: 1\n- b: 2\n- c: 3');
  });

  it('keeps a header that costs the whole budget when the lines cost nothing', () => {
    const free = (s: string): number => (s.startsWith('\n') ? 0 : 5);
    expect(renderPrompt(items, { header: 'H', countTokens: free, tokenBudget: 5 })).toBe('H\n- a: 1\n- b: 2\n- c: 3');
    expect(renderPrompt(items, { header: 'H', countTokens: free, tokenBudget: 4 })).toBe('');
  });

  it('is empty when no line fits beside the header', () => {
    expect(renderPrompt(items, { header: 'H', countTokens: ones, tokenBudget: 4 })).toBe('');
  });

  it('counts each line with its newline, using the default counter and header', () => {
    // The header is 34 chars (9 tokens); "\n- a: 1" is 7 chars (2 tokens).
    expect(approxTokens(PROMPT_DEFAULTS.header)).toBe(9);
    expect(renderPrompt(items, { ...PROMPT_DEFAULTS, tokenBudget: 11 })).toBe(`${PROMPT_DEFAULTS.header}\n- a: 1`);
    expect(renderPrompt(items)).toBe(`${PROMPT_DEFAULTS.header}\n- a: 1\n- b: 2\n- c: 3`);
    expect(PROMPT_DEFAULTS.tokenBudget).toBe(256);
  });
});
