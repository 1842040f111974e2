// Renders recalled items as a text block for the model's prompt, best first, within a token budget.
// The default token counter is the common ~4 characters per token estimate (common practice for
// English with BPE tokenizers); bots pass their tokenizer's count for exact budgets.

import type { RecallItem } from '../types.js';
import { formatMention } from './dates.js';

/** Counts tokens of a string. */
export type TokenCounter = (text: string) => number;

/** ceil(chars / 4): cheap and close enough for budgeting English text. */
export const approxTokens: TokenCounter = (text) => Math.ceil(text.length / 4);

export interface PromptOptions {
  /** Tokens the block may use, header included. @default 256 */
  tokenBudget: number;
  /** @default approxTokens */
  countTokens: TokenCounter;
  /** First line of the block. @default 'From memory (most relevant first):' */
  header: string;
}

export const PROMPT_DEFAULTS: PromptOptions = {
  tokenBudget: 256,
  countTokens: approxTokens,
  header: 'From memory (most relevant first):',
};

/** The day of an epoch-ms time, as a prompt shows it ("2023-05-07"). */
const dayOf = (ms: number): string => formatMention({ day: new Date(ms).toISOString().slice(0, 10), grain: 'day' });

/**
 * One line per item. A slot: "- key: value". A turn: "- [7 May 2023] Ana: text (last Saturday =
 * 6 May 2023)", so the model sees who said it, when, and what its relative dates meant. A value
 * that left working memory says whether it was replaced.
 */
export function itemLine(item: RecallItem): string {
  if (item.kind === 'turn') {
    const when = item.atMs !== undefined && Number.isFinite(item.atMs) ? `[${dayOf(item.atMs)}] ` : '';
    const who = item.speaker ?? item.role ?? 'user';
    const dates = item.dates && item.dates.length > 0 ? ` (${item.dates.map((d) => `${d.text} = ${formatMention(d)}`).join('; ')})` : '';
    return `- ${when}${who}: ${item.value}${dates}`;
  }
  const note =
    item.kind === 'superseded' ? ' (earlier, since replaced)'
    : item.kind === 'slot' ? (item.placed === 'ambiguous' ? ' (said later; may update the next item)' : '')
    : ' (older)';
  const dates = item.dates && item.dates.length > 0 ? ` (${item.dates.map((d) => `${d.text} = ${formatMention(d)}`).join('; ')})` : '';
  return item.key && item.key !== item.value ? `- ${item.key}: ${item.value}${dates}${note}` : `- ${item.value}${dates}${note}`;
}

/** The prompt block; empty string when there is nothing to say or the header alone busts the budget. */
export function renderPrompt(items: readonly RecallItem[], o: PromptOptions = PROMPT_DEFAULTS): string {
  if (items.length === 0) return '';
  let used = o.countTokens(o.header);
  if (used > o.tokenBudget) return '';
  const lines = [o.header];
  for (const item of items) {
    const line = itemLine(item);
    const cost = o.countTokens('\n' + line);
    if (used + cost > o.tokenBudget) continue;
    lines.push(line);
    used += cost;
  }
  return lines.length > 1 ? lines.join('\n') : '';
}
