// Candidate extraction: splits a turn into key/value candidates for the write gate. The default is
// rule-based, for the common first-person statements bots hear ("my X is Y", "I live in Y", "call me
// Y", "remember that ..."), dated or counted statements, and updates ("actually, make it Friday").
// Anything else falls back to key = value = the sentence. Bots can plug in their own Extractor.

import type { Role } from '../types.js';
import { contentWords } from './text.js';
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
  updates?: { kind: ValueKind; expr: string } | { kind: 'latest' };
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

const UPDATE_CUE = /\b(actually|instead|rather|moved to|changed to|pushed back to|rescheduled (?:it |that )?(?:to|for)|change (?:it|that|the \w+) to|make (?:it|that)|move (?:it|that|the \w+)(?: to)?|switch (?:it|that) to|reschedule|no wait|correction|scratch that)\b/i;
/** Closings that start like a correction ("No, that is all") but change nothing. */
const CLOSING = /\b(?:that'?s|that is|that will be|that would be) (?:all|it|everything)\b|\bnothing else\b|\bno,? thanks?\b|\bno thank you\b|\ball i need/i;
/** Words that mark a sentence as correcting an earlier choice. */
const CORRECTION = /^(?:(?:no|nope|sorry|oops|wait)\b[\s,!.]*)+|\b(?:instead|on second thought|changed my mind|not right|rather)\b/i;
const CORRECTION_ALL = new RegExp(CORRECTION.source, 'gi');
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
    // A topic is a noun phrase: "my office plant died while I was away" has no "my X is Y" in it.
    build: (m) => (CLAUSE_WORD.test(m[1]!) ? null : { key: canonicalTopic(m[1]!), value: m[2]! }),
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
    // "The exam got moved to May 3": an update that names its topic, so it addresses that slot.
    name: 'moved-to',
    re: /\b(?:my|the|our)\s+((?:[\p{L}'’-]+\s+){0,3}?[\p{L}'’-]+)\s+(?:got|was|has been|is|'s been|has)\s+(?:moved|changed|pushed back|brought forward|rescheduled|postponed)\s+(?:to|until|till|for)\s+(.+)/iu,
    build: (m) => ({ key: canonicalTopic(m[1]!), value: m[2]! }),
  },
  {
    name: 'from',
    re: /\bi(?:'m| am)\s+(?:originally\s+)?from\s+(.+)|\bi\s+grew up in\s+(.+)/iu,
    // "from" is a stopword: the key carries content words a question about it will use.
    build: (m) => ({ key: 'my hometown (the town I am from, where I grew up)', value: (m[1] ?? m[2])! }),
  },
  {
    name: 'learning',
    re: /\bi(?:'m| am)\s+(?:learning|studying)\s+(.+)|\bmy target language is\s+(.+)|\bi want to (?:learn|get better at|improve my)\s+(.+)/iu,
    build: (m) => ({ key: 'what I am learning (language or subject I study)', value: (m[1] ?? m[2] ?? m[3])! }),
  },
  {
    name: 'allergy',
    re: /\bi(?:'m| am)\s+(?:very\s+|quite\s+|a bit\s+|severely\s+)?(?:allergic|intolerant)\s+to\s+(.+)|\bi\s+(?:react badly|have a reaction|have an allergy)\s+to\s+(.+)|\bmy allerg(?:y|ies) (?:is|are)\s+(.+)/iu,
    build: (m) => ({ key: 'what I am allergic to (my allergy)', value: (m[1] ?? m[2] ?? m[3])! }),
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
    re: /\bi(?:'ve)?\s+(have|own|ride|drive|use|got|bought|keep)\s+(?:a|an|the|two|three|\d+)\s+(.+)/iu,
    // The verb stays in the key ("what I ride: my roamer") so a question about riding finds it.
    build: (m) => {
      const verb = m[1]!.toLowerCase();
      const noun = lastNoun(m[2]!);
      return { key: verb === 'have' || verb === 'got' || verb === 'own' || verb === 'bought' ? `my ${noun}` : `what I ${verb}: my ${noun}`, value: m[2]! };
    },
  },
  {
    name: 'booking',
    re: /\b(?:book|booked|booking|schedule|scheduled|reschedule|reserve|reserved|reservation|appointment|delivery|lessons?|class|visit|pickup|collection)\b/i,
    build: (m) => ({ key: bookingKey(m.input ?? ''), value: '' }),
  },
];

/** Words that mark a clause, not a noun phrase (pronouns, conjunctions). */
const CLAUSE_WORD = /\b(?:i|we|you|he|she|they|while|when|because|if|that|who|which)\b/i;

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

/** "lessons" -> "lesson", so a booking key is the same in the singular and the plural. */
const singular = (w: string): string => (w.length > 4 && /[^s]s$/.test(w) ? w.slice(0, -1) : w);

/**
 * One key per booked thing ("my booking (service)", "my booking (exam)"): several bookings of one
 * session no longer overwrite each other, and "can we move the delivery to Friday" finds the delivery.
 * The thing is the first word after the verb ("book a service for ...") or the head of the subject
 * ("the oral exam is scheduled for ...").
 */
function bookingKey(sentence: string): string {
  const subject = /\b(?:the|my|our)\s+((?:[\p{L}]+\s+){0,2}?[\p{L}]+)\s+(?:is|was|got|has been)\s+(?:booked|scheduled|reserved|moved|rescheduled)\b/iu.exec(sentence);
  if (subject) return `my booking (${singular(subject[1]!.split(/\s+/).pop()!.toLowerCase())})`;
  // Skip a few common adjectives so "book a full service" is keyed by "service", not "full".
  const object = /\b(?:book|schedule|reschedule|reserve|move|arrange|change)\s+(?:in\s+)?(?:(?:a|an|the|my|our|another)\s+)?(?:(?:full|quick|basic|new|short|long|small|big|first|second|annual|regular|private|group)\s+)?([\p{L}]+)/iu.exec(sentence);
  if (object && !/^(?:it|that|this|them|for|on|at|in|to|me|us)$/i.test(object[1]!)) return `my booking (${singular(object[1]!.toLowerCase())})`;
  const noun = /\b(appointment|delivery|lessons?|class|visit|pickup|collection|reservation|session)\b/i.exec(sentence);
  return noun ? `my booking (${singular(noun[1]!.toLowerCase())})` : 'my booking';
}

function lastNoun(phrase: string): string {
  const words = phrase.replace(/[^\p{L}\p{N}\s'’-]/gu, ' ').trim().split(/\s+/);
  // "a green Brompton with a basket" -> "Brompton": stop at the first preposition.
  const stop = words.findIndex((w, i) => i > 0 && /^(with|for|from|in|on|at|that|which|called|named|the|and|but)$/i.test(w));
  const head = stop > 0 ? words.slice(0, stop) : words;
  // A model number is not the noun: "a Kona Sprint 2" -> "sprint".
  const wordy = head.filter((w) => /\p{L}/u.test(w));
  return (wordy[wordy.length - 1] ?? head[head.length - 1] ?? phrase).toLowerCase();
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

  /** The key a topic-naming rule gives a sentence (the booking rule included), or null. */
  private namedTopic(sentence: string): { key: string; value: string; rule: string } | null {
    for (const rule of RULES) {
      if (rule.name === 'name' || rule.name === 'prefer' || rule.name === 'have') continue;
      const m = sentence.match(rule.re);
      if (!m) continue;
      const kv = rule.build(m);
      if (!kv) continue;
      return { key: kv.key, value: kv.value.length > 0 ? trimValue(kv.value) : sentence, rule: rule.name };
    }
    return null;
  }

  private fromSentence(sentence: string, _role: Role): Candidate {
    const expr = findValueExpr(sentence);
    const isQuestion = /\?\s*$/.test(sentence);
    // An update names a new value but not its topic: "can we move it to Friday instead?"
    if (expr && UPDATE_CUE.test(sentence)) {
      // When the update names its topic ("can we move the booking to Friday", "my exam is now on
      // May 3"), that topic is the key, so it addresses the slot holding it rather than whatever
      // slot last held a date.
      const named = this.namedTopic(sentence);
      if (named) return { key: named.key, value: named.value, text: sentence, pattern: `update-${named.rule}`, updates: { kind: expr.kind, expr: expr.text } };
      return { key: topicOf(sentence, expr.text), value: sentence, text: sentence, pattern: 'update', updates: { kind: expr.kind, expr: expr.text } };
    }
    if (!isQuestion || /\b(?:book|reserve|schedule|deliver|delivery)\b/i.test(sentence)) {
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
    if (CORRECTION.test(sentence) && !isQuestion && !CLOSING.test(sentence)) {
      // "No, play it on the patio speaker instead": a correction states the user's choice even
      // without a date or number in it, and replaces what it corrects — the slot its topic
      // addresses, else the choice made just before (`updates: latest`).
      const topic = topicOf(sentence.replace(CORRECTION_ALL, ' '), expr?.text);
      if (contentWords(topic).length >= 2) return { key: topic, value: sentence, text: sentence, pattern: 'correction', updates: { kind: 'latest' } };
    }
    if (expr) {
      // A dated or counted statement: its topic is what remains without the date or number.
      return { key: topicOf(sentence, expr.text), value: sentence, text: sentence, pattern: `with-${expr.kind}` };
    }
    return { key: sentence, value: sentence, text: sentence, pattern: 'sentence' };
  }
}
