// Renders recalled items as a text block for the model's prompt, best first, within a token budget.
// The default token counter is the common ~4 characters per token estimate (common practice for
// English with BPE tokenizers); bots pass their tokenizer's count for exact budgets.

import type { RecallItem } from '../types.js';

/** Counts tokens of a string. */
export type TokenCounter = (text: string) => number;

/** ceil(chars / 4): cheap and close enough for budgeting English text. */
export const approxTokens: TokenCounter = (text) => Math.ceil(text.length / 4);

export interface PromptOptions {
  /** Tokens the block may use, header included. @default 256 */
  tokenBudget: number;
  /** @default approxTokens */
  countTokens: TokenCounter;
  /** First line of the block. @default 'What this user has told us (most relevant first):' */
  header: string;
}

export const PROMPT_DEFAULTS: PromptOptions = {
  tokenBudget: 256,
  countTokens: approxTokens,
  header: 'What this user has told us (most relevant first):',
};

/** One line per item: "- key: value" (or just the value when key and value are the same text). */
export function itemLine(item: RecallItem): string {
  const older = item.source === 'archive' ? (item.reason === 'superseded' ? ' (earlier, since replaced)' : ' (older)') : '';
  return item.key && item.key !== item.value ? `- ${item.key}: ${item.value}${older}` : `- ${item.value}${older}`;
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
