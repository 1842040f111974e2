// A read's query, analysed once: the terms that score slots and logbook entries alike, the raw
// tokens that name speakers, the dates it mentions (resolved against when it is asked) and whether it
// asks "when".

import { asksWhen, dateTerms, resolveDates } from '../memory/dates.js';
import { analyzeTokens, tokenize } from '../memory/text.js';
import type { LogbookQuery } from './index.js';

/** Analyses a query text asked at `atMs`. */
export function analyseQuery(text: string, atMs: number): Omit<LogbookQuery, 'vector' | 'denseK'> {
  const tokens = tokenize(text);
  return {
    terms: analyzeTokens(tokens),
    tokens,
    dateTerms: dateTerms(resolveDates(text, atMs)),
    temporal: asksWhen(text),
  };
}
