// Detection of dates, times and quantities in text: a gate feature, the anchor of update sentences
// ("make it Friday"), and what the writer swaps when an update changes one value of a fact.

/** Kinds of value expression the rules recognise. */
export type ValueKind = 'date' | 'time' | 'quantity';

export interface ValueExpr {
  kind: ValueKind;
  text: string;
  index: number;
}

// Full names, or an abbreviation before a day number ("Sat 27 September"): a bare "sun" or "sat" is
// usually a word, not a day.
const WEEKDAY = '(?:(?:mon|tues|wednes|thurs|fri|satur|sun)day|(?:mon|tue|tues|wed|thu|thur|thurs|fri|sat|sun)\\.?(?=,?\\s*\\d))';
const MONTH = '(?:jan(?:uary)?|feb(?:ruary)?|mar(?:ch)?|apr(?:il)?|may|june?|july?|aug(?:ust)?|sep(?:t(?:ember)?)?|oct(?:ober)?|nov(?:ember)?|dec(?:ember)?)';
const ORD = '\\d{1,2}(?:st|nd|rd|th)?';

const PATTERNS: Array<{ kind: ValueKind; re: RegExp }> = [
  { kind: 'date', re: new RegExp(`\\b(?:next|this|coming|last)?\\s*${WEEKDAY}(?:s?\\b|(?<=\\.))(?:,?\\s+(?:the\\s+)?${ORD}(?:\\s+(?:of\\s+)?${MONTH})?)?`, 'i') },
  { kind: 'date', re: new RegExp(`\\b(?:the\\s+)?${ORD}\\s+(?:of\\s+)?${MONTH}\\b|\\b${MONTH}\\s+(?:the\\s+)?${ORD}\\b`, 'i') },
  { kind: 'date', re: /\b\d{4}-\d{2}-\d{2}\b|\b\d{1,2}\/\d{1,2}(?:\/\d{2,4})?\b/ },
  { kind: 'date', re: /\b(?:tomorrow|day after tomorrow|tonight|next week|next month|the weekend|this weekend|later this week)\b/i },
  { kind: 'date', re: /\b(?:on\s+)?the\s+\d{1,2}(?:st|nd|rd|th)\b/i },
  // A month on its own ("it's in November instead"); "may" only with "in"/"of", never the verb.
  { kind: 'date', re: new RegExp(`(?<=\\b(?:in|of|for|until|till|by|from)\\s+(?:early\\s+|mid\\s+|late\\s+)?)(?:(?!may\\b)${MONTH}|(?<=\\bin\\s+)may)\\b`, 'i') },
  { kind: 'time', re: /\b(?:at\s+)?\d{1,2}(?::\d{2})?\s*(?:am|pm|a\.m\.|p\.m\.)|\b\d{1,2}:\d{2}\b|\b(?:noon|midnight)\b/i },
  {
    kind: 'quantity',
    re: /\b\d+(?:[.,]\d+)?\s*(?:%|percent|people|persons|guests|tickets|seats|rooms|nights|days|weeks|hours|minutes|kg|g|km|mm|cm|m|inch(?:es)?|ft|lbs?|oz|psi|miles|litres|liters|ml|euros?|dollars?|pounds?|usd|eur|gbp|€|\$|£)?(?=\W|$)|\b(?:one|two|three|four|five|six|seven|eight|nine|ten|eleven|twelve)\s+(?:people|persons|guests|tickets|seats|rooms|nights|days|weeks|hours|adults|kids|children)\b/i,
  },
];

/**
 * A bare number that is part of a name rather than an amount: a house number before a capitalised
 * street name ("98 Fennel Street"), or a long digit run (phone, order or account numbers). Treating
 * those as quantities made "make it 12" rewrite addresses and phone numbers.
 */
function isIdentifierNumber(text: string, index: number, match: string): boolean {
  if (!/^\d+$/.test(match)) return false;
  if (match.length >= 6) return true;
  const after = text.slice(index + match.length);
  // The hour or minutes of a time ("10:30", "at 9:15"), not an amount.
  if (/^[:.]\d{2}\b/.test(after) || /\d[:.]$/.test(text.slice(Math.max(0, index - 3), index))) return true;
  if (/^\s+\p{Lu}/u.test(after)) return true;
  // Part of a longer digit group ("0161 496 0000") or a code ("B12").
  const before = text.slice(Math.max(0, index - 2), index);
  return /\d\s$|\p{L}$/u.test(before) || /^\s\d/.test(after);
}

// Global copies of the patterns, compiled once: building a RegExp per call cost about 1 µs per
// pattern per text (measured here), on every turn's extraction and gate.
const GLOBAL = new WeakMap<RegExp, RegExp>();
function globalOf(re: RegExp): RegExp {
  let g = GLOBAL.get(re);
  if (!g) GLOBAL.set(re, (g = new RegExp(re.source, re.flags.includes('g') ? re.flags : re.flags + 'g')));
  // matchAll clones the regex (and its lastIndex), so sharing one compiled copy is safe.
  return g;
}

function matchAt(text: string, kind: ValueKind, re: RegExp): ValueExpr | null {
  for (const m of text.matchAll(globalOf(re))) {
    const lead = m[0].length - m[0].trimStart().length;
    const expr = { kind, text: m[0].trim(), index: (m.index ?? 0) + lead };
    if (kind === 'quantity' && isIdentifierNumber(text, expr.index, expr.text)) continue;
    return expr;
  }
  return null;
}

/** The first date, time or quantity expression in `text`, or null. Dates win over times over numbers. */
export function findValueExpr(text: string): ValueExpr | null {
  for (const { kind, re } of PATTERNS) {
    const m = matchAt(text, kind, re);
    if (m) return m;
  }
  return null;
}

/** Every expression of one kind in `text` (for swapping an old value for a new one). */
export function findAll(text: string, kind: ValueKind): ValueExpr[] {
  const out: ValueExpr[] = [];
  for (const p of PATTERNS) {
    if (p.kind !== kind) continue;
    for (const m of text.matchAll(globalOf(p.re))) {
      const lead = m[0].length - m[0].trimStart().length;
      const expr = { kind, text: m[0].trim(), index: (m.index ?? 0) + lead };
      if (kind === 'quantity' && isIdentifierNumber(text, expr.index, expr.text)) continue;
      out.push(expr);
    }
  }
  return out.sort((a, b) => a.index - b.index);
}

/** True when text holds any date, time or quantity. */
export function hasValueExpr(text: string): boolean {
  return findValueExpr(text) !== null;
}
