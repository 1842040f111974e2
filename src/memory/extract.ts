// Candidate extraction: splits a turn into key/value candidates for the write gate. The default is
// rule-based, for the common first-person statements bots hear ("my X is Y", "I live in Y", "call me
// Y", "remember that ..."), dated or counted statements, and updates ("actually, make it Friday").
// Anything else falls back to key = value = the sentence. Bots can plug in their own Extractor.

import type { Role } from '../types.js';
import { findValueExpr, type ValueKind } from './values.js';

/** One thing a turn might be worth remembering. */
export interface Candidate {
  /** The topic it is addressed by ("my bike"); embedded as the slot key. */
  key: string;
  /** What a read recalls ("a green Brompton"). */
  value: string;
  /** The sentence it came from (used for gate features). */
  text: string;
  /** Which rule produced it; `sentence` for the fallback. Extractors may use their own names. */
  pattern: string;
  /** An explicit "remember ..." cue was present. */
  remember?: boolean;
  /**
   * Set when the sentence changes an earlier value of this kind without naming the topic ("make it
   * Friday instead"): the writer resolves the key to the newest slot holding a value of that kind.
   */
  updates?: { kind: ValueKind; expr: string };
  /** Ask the writer to pin the slot. */
  pin?: boolean;
}

/** Turns text into candidates. May be async (e.g. an LLM call). */
export interface Extractor {
  extract(text: string, role: Role): Candidate[] | Promise<Candidate[]>;
}

/**
 * Splits text into sentences on . ! ? and newlines (keeping decimals and times like 10.30 intact),
 * then into clauses where a conjunction starts a new first-person statement ("... and my bike is
 * ...", "..., so please ..."), so one message can carry several facts.
 */
export function splitSentences(text: string): string[] {
  return text
    .split(/(?<=[.!?])\s+|\n+/)
    .flatMap((s) => s.split(/\s*;\s*|,?\s+(?:and|but|so|because|since)\s+(?=(?:i|i'm|i've|i'd|my|we|we're|our|please)\b)|,\s+(?=so\b)/i))
    .map((s) => s.trim().replace(/^so\s+/i, ''))
    .filter((s) => s.length > 0);
}

const UPDATE_CUE = /\b(actually|instead|rather|change (?:it|that|the \w+) to|make (?:it|that)|move (?:it|that|the \w+)(?: to)?|switch (?:it|that) to|reschedule|no wait|correction|scratch that)\b/i;
const REMEMBER = /^(?:please\s+|can you\s+|could you\s+)?(?:remember|note|don'?t forget|keep in mind|make a note)\s+(?:that\s+)?(.+)$/i;

const trimValue = (v: string): string => v.trim().replace(/^(?:a|an|the)\s+(?=\S)/i, (m) => m).replace(/[\s,;:.!?]+$/, '');

interface Rule {
  name: string;
  re: RegExp;
  build(m: RegExpMatchArray): { key: string; value: string } | null;
}

// Order matters: the first rule that matches a sentence wins.
const RULES: Rule[] = [
  {
    // Before 'name': "call me on 0161 ..." gives a number, not a name.
    name: 'contact',
    re: /\b(?:reach|call|text|ring|phone|contact)\s+me\s+(?:on|at)\s+(\+?\d[\d\s-]{4,}\d)/iu,
    build: (m) => ({ key: 'my phone number (mobile)', value: m[1]! }),
  },
  {
    name: 'name',
    re: /\b(?:my name is|call me|i'?m called|i am called|you can call me|name'?s)\s+([\p{L}][\p{L}'’-]*(?:\s+[\p{L}][\p{L}'’-]*)?)/iu,
    // A second word is part of the name only when capitalised ("Dana Whitfield", not "Dana and").
    build: (m) => {
      const [first, second] = m[1]!.split(/\s+/);
      return { key: 'my name', value: second && /^\p{Lu}/u.test(second) ? `${first} ${second}` : first! };
    },
  },
  {
    name: 'my-x-is-y',
    re: /\bmy\s+((?:[\p{L}\p{N}'’-]+\s+){0,4}?[\p{L}\p{N}'’-]+)\s+(?:is|are|was|were|'s|will be|has been)\s+(?:now\s+|actually\s+)?(.+)/iu,
    build: (m) => ({ key: canonicalTopic(m[1]!), value: m[2]! }),
  },
  {
    name: 'live-in',
    re: /\b(?:i|we)(?:'ve| have)?\s*(?:live|am living|'m living|are living|'re living|moved|just moved|relocated)\s+(?:house\s+)?(?:in|to|at|near)\s+(.+)/iu,
    build: (m) => ({ key: ADDRESS_KEY, value: m[1]! }),
  },
  {
    name: 'work-at',
    re: /\bi\s*(?:work|am working|'m working)\s+(?:at|for|in|as)\s+(.+)/iu,
    build: (m) => ({ key: 'where I work', value: m[1]! }),
  },
  {
    name: 'from',
    re: /\bi(?:'m| am)\s+(?:originally\s+)?from\s+(.+)/iu,
    build: (m) => ({ key: 'where I am from', value: m[1]! }),
  },
  {
    name: 'allergy',
    re: /\bi(?:'m| am)\s+(?:very\s+|quite\s+|a bit\s+)?allergic to\s+(.+)/iu,
    build: (m) => ({ key: 'what I am allergic to (my allergy)', value: m[1]! }),
  },
  {
    name: 'diet',
    re: /\bi(?:'m| am)\s+(?:a\s+)?(vegan|vegetarian|pescatarian|gluten[- ]free|lactose[- ]intolerant|diabetic|pregnant)\b/iu,
    build: (m) => ({ key: 'my diet', value: m[1]! }),
  },
  {
    name: 'prefer',
    re: /\bi\s+(?:really\s+)?(prefer|like|love|hate|dislike|can'?t stand|don'?t like)\s+(.+)/iu,
    build: (m) => {
      const verb = m[1]!.toLowerCase();
      const negative = /hate|dislike|can'?t|don'?t/.test(verb);
      return { key: negative ? 'what I dislike' : 'what I like', value: m[2]! };
    },
  },
  {
    name: 'have',
    re: /\bi(?:'ve)?\s+(have|own|ride|drive|use|got)\s+(?:a|an|the|two|three|\d+)\s+(.+)/iu,
    // The verb stays in the key ("what I ride: my roamer") so a question about riding finds it.
    build: (m) => {
      const verb = m[1]!.toLowerCase();
      const noun = lastNoun(m[2]!);
      return { key: verb === 'have' || verb === 'got' || verb === 'own' ? `my ${noun}` : `what I ${verb}: my ${noun}`, value: m[2]! };
    },
  },
  {
    name: 'booking',
    re: /\b(?:book|booked|booking|schedule|scheduled|reserve|reserved|reservation|appointment)\b/i,
    build: () => ({ key: 'my booking', value: '' }),
  },
];

/** Key of every statement of where the user lives, so "I moved to ..." overwrites "my address is ...". */
const ADDRESS_KEY = 'my home address (where I live)';

/**
 * Common personal-data topics said in several ways share one key, so an update in other words still
 * addresses the same slot ("my mobile is ..." after "my phone number is ..."); passing modifiers
 * ("new", "current") are dropped for the same reason. Common practice for form-like chat slots.
 */
const TOPIC_ALIASES: Array<[RegExp, string]> = [
  [/^(?:home\s+|postal\s+|street\s+)?address$|^home$/, ADDRESS_KEY],
  [/^(?:phone|mobile|cell|telephone|contact)(?:\s+(?:phone|number|no))*$|^number$/, 'my phone number (mobile)'],
  [/^(?:e-?mail)(?:\s+address)?$/, 'my email address'],
  [/^(?:birthday|date of birth|birth date)$/, 'my birthday (date of birth)'],
];

function canonicalTopic(raw: string): string {
  const x = raw.toLowerCase().replace(/^(?:new|current|updated|latest|actual|usual|correct)\s+/, '').trim();
  for (const [re, key] of TOPIC_ALIASES) if (re.test(x)) return key;
  return `my ${x}`;
}

function lastNoun(phrase: string): string {
  const words = phrase.replace(/[^\p{L}\p{N}\s'’-]/gu, ' ').trim().split(/\s+/);
  // "a green Brompton with a basket" -> "Brompton": stop at the first preposition.
  const stop = words.findIndex((w, i) => i > 0 && /^(with|for|from|in|on|at|that|which|called|named|the|and|but)$/i.test(w));
  const head = stop > 0 ? words.slice(0, stop) : words;
  return (head[head.length - 1] ?? phrase).toLowerCase();
}

/** Removes a value expression and update cues from a sentence, leaving its topic. */
function topicOf(sentence: string, expr: string | undefined): string {
  let t = expr ? sentence.replace(expr, ' ') : sentence;
  t = t.replace(UPDATE_CUE, ' ').replace(/\s+/g, ' ').trim();
  return t.length > 0 ? t : sentence;
}

/** The default extractor (see module comment). */
export class RuleExtractor implements Extractor {
  extract(text: string, role: Role): Candidate[] {
    const out: Candidate[] = [];
    for (const raw of splitSentences(text)) {
      let sentence = raw;
      let remember = false;
      const rm = REMEMBER.exec(sentence);
      if (rm) {
        remember = true;
        sentence = rm[1]!.trim();
      }
      const c = this.fromSentence(sentence, role);
      if (remember) c.remember = true;
      c.text = raw;
      out.push(c);
    }
    return out;
  }

  private fromSentence(sentence: string, _role: Role): Candidate {
    const expr = findValueExpr(sentence);
    const isQuestion = /\?\s*$/.test(sentence);
    // An update names a new value but not its topic: "can we move it to Friday instead?"
    if (expr && UPDATE_CUE.test(sentence)) {
      return { key: topicOf(sentence, expr.text), value: sentence, text: sentence, pattern: 'update', updates: { kind: expr.kind, expr: expr.text } };
    }
    if (!isQuestion || /\b(?:book|reserve|schedule)\b/i.test(sentence)) {
      for (const rule of RULES) {
        const m = sentence.match(rule.re);
        if (!m) continue;
        const kv = rule.build(m);
        if (!kv) continue;
        if (rule.name === 'booking') {
          // "Can I book a service for Tuesday?" -> key "my booking", value the request itself.
          if (!expr) break;
          return { key: kv.key, value: sentence.replace(/^(?:can|could|would|may)\s+(?:i|we|you)\s+/i, '').replace(/[?.!]+$/, ''), text: sentence, pattern: rule.name };
        }
        const value = trimValue(kv.value);
        if (value.length === 0) continue;
        return { key: kv.key, value, text: sentence, pattern: rule.name };
      }
    }
    if (expr) {
      // A dated or counted statement: its topic is what remains without the date or number.
      return { key: topicOf(sentence, expr.text), value: sentence, text: sentence, pattern: `with-${expr.kind}` };
    }
    return { key: sentence, value: sentence, text: sentence, pattern: 'sentence' };
  }
}
