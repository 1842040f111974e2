// Why this file is over ~400 lines: the rule extractor is one ordered list of rules (the first that
// matches a clause wins) together with the topic helpers those rules call (canonical topics, heads of
// phrases, booking keys, answers to the bot's own question). A rule's meaning depends on the rules
// before it and on those helpers, so they are read and changed together; sentence splitting and the
// value kinds (values.ts) already live apart.
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
  /** What a read recalls ("a green Corvane"). */
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
  /**
   * Facts of this kind add up rather than replace each other ("I like X", "I like Y"): the writer
   * overwrites a slot with the same key only when the sentence says it changes something.
   */
  accumulate?: boolean;
  /** Not the first clause of its sentence ("..., so no nut snacks please"): never read as a correction. */
  clause?: boolean;
  /** The sentence says it changes its (named) fact: it may replace a fact that would otherwise add up. */
  revises?: boolean;
  /** Whom the fact is about when not the speaker ("My brother wants 8 plant labels too": `brother`). */
  subject?: string;
  /**
   * Text that may say what a topic-less update is about: the sentence before it in the same turn
   * ("I need to move the Tourer's service. Could it be Friday instead?"), or the question it answers.
   * Evidence of the same speaker's turn; the other side's earlier turns only break ties (see planWrite).
   */
  context?: string;
}

/** What an extractor may know besides the turn's text. */
export interface ExtractContext {
  /** The turn just before, when known (often the other side's question this turn answers). */
  previous?: string;
}

/** Turns text into candidates. May be async (e.g. an LLM call). */
export interface Extractor {
  extract(text: string, role: Role, context?: ExtractContext): Candidate[] | Promise<Candidate[]>;
}

/**
 * Splits text into sentences on . ! ? and newlines (keeping decimals and times like 10.30 intact),
 * then into clauses where a conjunction starts a new first-person statement ("... and my bike is
 * ...", "..., so please ..."), so one message can carry several facts.
 */
export function splitSentences(text: string): string[] {
  return splitClauses(text).map((c) => c.text);
}

/** The clauses of a text, each marked with whether it opens its sentence. */
export function splitClauses(text: string): Array<{ text: string; first: boolean }> {
  return text
    .split(/(?<=[.!?])\s+|\n+/)
    .flatMap((s) =>
      s
        .split(/\s*;\s*|,?\s+(?:and|but|so|because|since)\s+(?=(?:i|i'm|i've|i'd|my|we|we're|our|please)\b)|,\s+(?=so\b)/i)
        .map((c, i) => ({ text: c.trim().replace(/^so\s+/i, ''), first: i === 0 })),
    )
    .filter((c) => c.text.length > 0);
}

const UPDATE_CUE = /\b(actually|instead|rather|moved to|changed to|pushed back to|rescheduled (?:it |that )?(?:to|for)|(?:change|move|switch|swap) (?:it|that|(?:my|the|our) (?:\w+ )?\w+)(?: to| over to)?|make (?:it|that)|reschedule|no wait|correction|scratch that|i meant|from now on|no longer|not anymore|any more|now at|is now|are now|changed|the new one)\b/i;
/** Closings that start like a correction ("No, that is all") but change nothing. */
const CLOSING = /\b(?:that'?s|that is|that will be|that would be) (?:all|it|everything)\b|\bnothing else\b|\bno,? thanks?\b|\bno thank you\b|\ball i need/i;
/**
 * Words that mark a sentence as correcting an earlier choice. "No" counts only as an interjection
 * ("No, ...", "no wait"), not as a determiner ("no nut snacks please").
 */
const CORRECTION = /^(?:(?:no|nope)(?=\s*[,!.;:—-]|\s+(?:wait|sorry|actually|i meant|it'?s|that'?s|not|make|change|move))|(?:sorry|oops|wait)\b)[\s,!.]*|\b(?:instead|on second thought|changed my mind|not right|i meant|scratch that)\b/i;
const CORRECTION_ALL = new RegExp(CORRECTION.source, 'gi');
const REMEMBER = /^(?:please\s+|can you\s+|could you\s+)?(?:remember|note|don'?t forget|keep in mind|make a note)\s+(?:that\s+)?(.+)$/i;

const trimValue = (v: string): string => v.trim().replace(/^(?:a|an|the)\s+(?=\S)/i, (m) => m).replace(/[\s,;:.!?]+$/, '');

interface Rule {
  name: string;
  re: RegExp;
  build(m: RegExpMatchArray): { key: string; value: string; accumulate?: boolean } | null;
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
    // "Hi, I'm Nadia Corran": an introduction (a greeting, or two capitalised words) gives a name.
    name: 'intro',
    re: /^(?:(?:[Hh]i|[Hh]ello|[Hh]ey|[Mm]orning|[Gg]ood (?:morning|afternoon|evening))\b[\s,!.]*)(?:I['’]?m|I am|[Tt]his is|[Ii]t['’]?s)\s+(\p{Lu}[\p{L}'’-]+(?:\s+\p{Lu}[\p{L}'’-]+)?)\b|^(?:I['’]?m|I am|[Tt]his is)\s+(\p{Lu}[\p{L}'’-]+\s+\p{Lu}[\p{L}'’-]+)\b/u,
    build: (m) => ({ key: 'my name', value: (m[1] ?? m[2])! }),
  },
  {
    name: 'name',
    re: /\b(?:my name is|call me|i'?m called|i am called|you can call me|(?:my )?name['’]s)\s+([\p{L}][\p{L}'’-]*(?:\s+[\p{L}][\p{L}'’-]*)?)/iu,
    // A second word is part of the name only when capitalised ("Dana Whitfield", not "Dana and").
    build: (m) => {
      const [first, second] = m[1]!.split(/\s+/);
      return { key: 'my name', value: second && /^\p{Lu}/u.test(second) ? `${first} ${second}` : first! };
    },
  },
  {
    // "my phone number changed, the new one is ...", "my email has changed to ...".
    name: 'changed',
    re: /\bmy\s+((?:[\p{L}\p{N}'’-]+\s+){0,3}?[\p{L}\p{N}'’-]+)\s+(?:has\s+|have\s+)?changed\b[\s,:;-]*(?:(?:to|the new one is|it'?s now|now it'?s|it is now|now)\s+)?(.+)/iu,
    build: (m) => (CLAUSE_WORD.test(m[1]!) || m[2]!.trim().length === 0 ? null : { key: canonicalTopic(m[1]!), value: m[2]! }),
  },
  {
    // "I'm at A2 level", "I'm now at B1 level", "my level is B2".
    name: 'level',
    re: /\bi(?:'m| am)\s+(?:now\s+|currently\s+|probably\s+|about\s+)*(?:at\s+)?(?:an?\s+)?((?:[A-C][12]|beginner|intermediate|advanced|upper[- ]intermediate|pre[- ]intermediate|elementary)(?:\+)?)\s+level\b|\bmy\s+(?:current\s+)?level\s+is\s+(?:now\s+)?(?:about\s+)?([A-C][12]\+?|\p{L}+)/iu,
    build: (m) => ({ key: 'my level', value: (m[1] ?? m[2])! }),
  },
  {
    // "I work as a nurse", "I'm a hospital pharmacist": what someone does for work. "I'm a vegetarian"
    // ends like a trade (-ian) but is a diet, read by the diet rule, so it never replaces the job.
    name: 'job',
    re: /\bi\s+work\s+as\s+(?:an?\s+)?(.+)|\bi(?:'m| am)\s+(?:an?\s+)((?:[\p{L}-]+\s+){0,2}?(?!(?:vegetarian|pescatarian)\b)[\p{L}-]*(?:ist|er|or|ian|ant|ent|nurse|chef|doctor|vet|midwife|surgeon|pilot|coach|clerk|cook|tutor|student|apprentice))\b/iu,
    build: (m) => ({ key: 'my job (what I do for work)', value: (m[1] ?? m[2])! }),
  },
  {
    // "I'd rather you call than text", "please call rather than email".
    name: 'contact',
    re: /\b(?:i'?d|i would)\s+rather\s+you\s+(call|text|email|e-mail|message|phone|ring|write)\b(.*)|\bplease\s+(call|text|email|message|phone|ring)\s+(?:me\s+)?(?:rather|instead)\s+(?:than|of)\b(.*)/iu,
    // "please email me rather than phone": what they want, and what they do not beside it, never run
    // together ("email phone").
    build: (m) => {
      if (m[1] !== undefined) return { key: 'how I want to be contacted', value: `${m[1]}${m[2]!.replace(/[.!?]+$/, '')}` };
      const not = m[4]!.replace(/[.!?]+$/, '').trim();
      return { key: 'how I want to be contacted', value: not ? `${m[3]!} (not ${not})` : m[3]! };
    },
  },
  {
    name: 'my-x-is-y',
    // "My bike's a Corvane": a joined "'s" is "is" only before what starts a value (an article, a
    // preposition, a number); "my bike's saddle is torn" is a possessive.
    re: /\bmy\s+((?:[\p{L}\p{N}'’-]+\s+){0,4}?[\p{L}\p{N}-]+?)(?:\s+(?:is|are|was|were|'s|will be|has been)|['’]s(?=\s+(?:a|an|the|in|at|on|not|now|still|actually|\d)\b))\s+(?:now\s+|actually\s+)?(.+)/iu,
    // A topic is a noun phrase: "my office plant died while I was away" has no "my X is Y" in it.
    build: (m) => (CLAUSE_WORD.test(m[1]!) ? null : { key: canonicalTopic(m[1]!), value: m[2]! }),
  },
  {
    name: 'live-in',
    re: /\b(?:i|we)(?:'ve| have)?\s*(?:live|am living|'m living|are living|'re living|moved|just moved|relocated)\s+(?:house\s+)?(?:in|to|at|near)\s+(.+)/iu,
    build: (m) => ({ key: ADDRESS_KEY, value: m[1]! }),
  },
  {
    // "I work at ...", and starting a job there: "I started at Cindermoor Games on Monday", "I've
    // just joined Harrowgate Logistics", "I got a job at ..." (a place with a capitalised name, so
    // "I started at 9" is not a workplace).
    name: 'work-at',
    re: /\bi\s*(?:work|am working|'m working)\s+(?:at|for|in|as)\s+(.+)/iu,
    build: (m) => ({ key: 'where I work', value: m[1]! }),
  },
  {
    name: 'job-start',
    re: /\b[Ii](?:'ve| have)?\s+(?:just\s+|finally\s+)?(?:started(?:\s+(?:working|a new job))?\s+(?:at|for|with)|joined|got\s+(?:a\s+)?(?:new\s+)?job\s+(?:at|with))\s+(\p{Lu}.+)/u,
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
    // "I'd like to book ..." is a request, not a liking: only "I'd prefer" takes the conditional.
    re: /\bi(?:'d(?=\s+(?:really\s+|much\s+)?prefer)|\s+would(?=\s+(?:really\s+|much\s+)?prefer))?\s+(?:really\s+|much\s+|also\s+|still\s+)?(prefer|like|love|enjoy|hate|dislike|can'?t stand|don'?t like)\s+(.+)/iu,
    // One key per thing: "I prefer a female tutor, and I like grammar in English" are two facts,
    // and only a preference about the same thing ("... a male tutor from now on") replaces one.
    build: (m) => {
      const verb = m[1]!.toLowerCase();
      const negative = /hate|dislike|can'?t|don'?t/.test(verb);
      const thing = headOf(m[2]!);
      const what = negative ? 'what I dislike' : verb === 'prefer' ? 'what I prefer' : 'what I like';
      return { key: thing ? `${what}: ${thing}` : what, value: m[2]!, accumulate: verb !== 'prefer' };
    },
  },
  {
    name: 'have',
    re: /\bi(?:'ve)?\s+(have|own|ride|drive|use|got|bought|keep)\s+(?:a|an|the|two|three|\d+)\s+(.+)/iu,
    // The verb stays in the key ("what I ride: my roamer") so a question about riding finds it.
    // Possessions add up: "I've got the Tourer with me" does not replace "I've got two bikes".
    build: (m) => {
      // "I have two in the shop": the noun is left out, and a key made from later words ("my shop")
      // would be a guess. No candidate; the turn itself stays in the logbook.
      if (PHRASE_STOP.test(m[2]!.split(/\s/, 1)[0]!)) return null;
      const verb = m[1]!.toLowerCase();
      const noun = headOf(m[2]!) || lastNoun(m[2]!);
      return { key: verb === 'have' || verb === 'got' || verb === 'own' || verb === 'bought' ? `my ${noun}` : `what I ${verb}: my ${noun}`, value: m[2]!, accumulate: true };
    },
  },
  {
    // Facts about someone else: "Mel's daughter starts school in May", "my sister's flat is in Wexdale".
    name: 'their-x',
    re: /\b((?:my\s+)?(?:\p{L}+\s+)?\p{Lu}\p{L}+['’]s|my\s+(?:brother|sister|mum|mom|dad|father|mother|partner|husband|wife|son|daughter|friend|boss|neighbour|neighbor|cousin|aunt|uncle|grandmother|grandfather|nan|gran)['’]s)\s+((?:[\p{L}-]+\s+){0,2}?[\p{L}-]+)\s+(is|are|was|were|starts|started|begins|began|will be|has been|lives|works)\s+(.+)/u,
    build: (m) => ({ key: `${m[1]!.trim()} ${m[2]!.trim()}${/^(?:starts|started|begins|began|lives|works)$/.test(m[3]!) ? ` (${m[3]})` : ''}`, value: m[4]! }),
  },
  {
    name: 'booking',
    re: /\b(?:book|booked|booking|schedule|scheduled|reschedule|reserve|reserved|reservation|appointment|delivery|lessons?|class|visit|pickup|collection|service)\b/i,
    build: (m) => ({ key: bookingKey(m.input ?? ''), value: '' }),
  },
];

/**
 * The thing a liking or preference is about: the head of the object phrase, before a preposition,
 * a participle or a clause ("a female tutor from now on" -> "tutor", "grammar explained in English" ->
 * "grammar", "to print them out" -> "print").
 */
function headOf(phrase: string): string {
  const words = (phrase.split(/[,;:(]/)[0] ?? '').replace(/[^\p{L}\p{N}\s'’-]/gu, ' ').trim().split(/\s+/).filter(Boolean);
  const out: string[] = [];
  for (let i = 0; i < words.length; i++) {
    const w = words[i]!;
    const lw = w.toLowerCase();
    if (i === 0 && lw === 'to') continue;
    // After the noun, "that" opens a clause ("a cat that I love"); before it, it is a determiner.
    if (out.length > 0 && (/^(?:with|for|from|in|on|at|about|than|to|and|or|but|so|because|when|if|that|which|who|please|now|instead|anymore)$/.test(lw) || /(?:ed|ing)$/.test(lw))) break;
    if (/^(?:a|an|the|my|your|our|some|more|it|them|this|that|these|those|two|three|four|five|\d+)$/.test(lw)) continue;
    out.push(lw);
    if (out.length === 1 && words[0]!.toLowerCase() === 'to') break; // "to print ..." -> the verb
  }
  return out.length > 0 ? out[out.length - 1]! : '';
}

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
  [/^(?:(?:weekly|regular|usual|next|first)\s+)?(lessons?|class(?:es)?|appointments?|deliver(?:y|ies)|service|sessions?|visit|pickup|collection|reservation)$/, 'booking'],
];

function canonicalTopic(raw: string): string {
  const x = raw.toLowerCase().replace(/^(?:new|current|updated|latest|actual|usual|correct)\s+/, '').trim();
  for (const [re, key] of TOPIC_ALIASES) {
    const m = re.exec(x);
    if (!m) continue;
    // Booked things share the booking rule's key, so "my lessons are on Tuesdays" and "can we switch
    // my lessons to Wednesday" address one slot.
    return key === 'booking' ? `my booking (${singularOf(m[1]!)})` : key;
  }
  return `my ${x}`;
}

/** "lessons" -> "lesson", so a booking key is the same in the singular and the plural. */
const singular = (w: string): string => (w.length > 4 && /[^s]s$/.test(w) ? w.slice(0, -1) : w);
/** Also "deliveries" -> "delivery", "classes" -> "class". */
const singularOf = (w: string): string => (/ies$/.test(w) ? w.slice(0, -3) + 'y' : /sses$/.test(w) ? w.slice(0, -2) : singular(w));

/**
 * One key per booked thing ("my booking (service)", "my booking (exam)"): several bookings of one
 * session no longer overwrite each other, and "can we move the delivery to Friday" finds the delivery.
 * The thing is the first word after the verb ("book a service for ...") or the head of the subject
 * ("the oral exam is scheduled for ...").
 */
function bookingKey(sentence: string): string {
  const subject = /\b(?:the|my|our)\s+((?:[\p{L}]+\s+){0,2}?[\p{L}]+)\s+(?:is|was|got|has been)\s+(?:booked|scheduled|reserved|moved|rescheduled)\b/iu.exec(sentence);
  if (subject) return `my booking (${singular(subject[1]!.split(/\s+/).pop()!.toLowerCase())})`;
  // Skip a few common adjectives so "book a full service" is keyed by "service", not "full", and the
  // bot's "your" so "shall I book your service" is keyed by "service", not "your".
  const object = /\b(?:book|schedule|reschedule|reserve|move|arrange|change|switch|swap)\s+(?:in\s+)?(?:(?:a|an|the|my|our|your|another)\s+)?(?:(?:full|quick|basic|new|short|long|small|big|first|second|annual|regular|private|group)\s+)?([\p{L}]+)/iu.exec(sentence);
  if (object && !/^(?:it|that|this|them|for|on|at|in|to|me|us)$/i.test(object[1]!)) return `my booking (${singular(object[1]!.toLowerCase())})`;
  const noun = /\b(appointment|delivery|lessons?|class|visit|pickup|collection|reservation|session|service)\b/i.exec(sentence);
  return noun ? `my booking (${singular(noun[1]!.toLowerCase())})` : 'my booking';
}

/** Words that end a noun phrase ("a Corvane with a basket") or show its noun is missing ("two in the shop"). */
const PHRASE_STOP = /^(with|for|from|in|on|at|that|which|called|named|the|and|but|or)$/i;

/** The noun of a phrase that does not open with a PHRASE_STOP word. */
function lastNoun(phrase: string): string {
  const words = phrase.replace(/[^\p{L}\p{N}\s'’-]/gu, ' ').trim().split(/\s+/);
  // "a green Corvane with a basket" -> "Corvane": stop at the first preposition.
  const stop = words.findIndex((w) => PHRASE_STOP.test(w));
  const head = stop > 0 ? words.slice(0, stop) : words;
  // A model number is not the noun: "a Orrin Sprint 2" -> "sprint".
  const wordy = head.filter((w) => /\p{L}/u.test(w));
  return (wordy[wordy.length - 1] ?? head[head.length - 1] ?? phrase).toLowerCase();
}

/** Removes a value expression and update cues from a sentence, leaving its topic. */
function topicOf(sentence: string, expr: string | undefined): string {
  let t = expr ? sentence.replace(expr, ' ') : sentence;
  // Drop the cue's verbs, keep what it names: "change the order to 6" keeps "the order".
  t = t.replace(UPDATE_CUE, (cue) => cue.replace(CUE_WORDS, ' ')).replace(/\s+/g, ' ').trim();
  return t.length > 0 ? t : sentence;
}

/** The words of an update cue that say "this changes", as opposed to what changes. */
const CUE_WORDS = /\b(?:actually|instead|rather|moved?|changed?|pushed back|rescheduled?|switch|swap|make|over|to|for|it|that|no wait|correction|scratch that|i meant|from now on|no longer|not anymore|any more|now|is|are|the new one)\b/gi;

/** A polite request states what the user wants ("can I have my lessons on Tuesdays?"), like a statement. */
const REQUEST = /^(?:(?:hi|hey|hello|ok|okay|yes|no|sure|great|sorry|actually|then|and|so|well|also)\b[\s,!.]*)*(?:(?:can|could|would|will)\s+(?:you|we|i)\b|please\b|i(?:'d| would) like\b|let'?s\b)/i;

/**
 * A sentence about someone else: "My brother wants ...", "My colleague needs ...", "Our neighbour
 * rides ...": the subject is a relation, and the verb is theirs (third person), not the speaker's.
 */
const OTHER_PERSON = /^(?:\W*(?:and|also|oh|btw|by the way)\b[\s,]*)?(?:my|our)\s+(?:(?:older|younger|little|big|best|old|new)\s+)?(brother|sister|mum|mom|mother|dad|father|partner|husband|wife|son|daughter|friend|boss|manager|colleague|neighbour|neighbor|cousin|aunt|uncle|grandmother|grandfather|gran|nan|flatmate|roommate|kids?|children)\b(?:\s+\p{Lu}\p{L}+)?\s+(?:also\s+|just\s+|really\s+)?(?:wants|needs|has|had|is|was|lives|lived|works|worked|rides|rode|owns|loves|likes|hates|says|said|bought|got|goes|went|drives|uses|thinks|passed|speaks|keeps|grows|studies|plays)\b/iu;

/** The other side asked something, or offered a choice, that the next turn may answer. */
const ASKS = /\?\s*$|\b(?:i can do|i have|would you like|do you want|shall i|which (?:one|day|time)|let me know)\b/i;
/** "your number", "your email": a question about the speaker's own contact details or name. */
const YOUR = /\byour\s+((?:[\p{L}-]+\s+){0,2}?(?:name|number|phone(?:\s+number)?|mobile|email(?:\s+address)?|e-mail|address|birthday|postcode))\b/iu;

/** The topic of a question a short answer answers, as a key; null when it has none. */
function answerTopic(question: string, rules: (s: string) => { key: string } | null): string | null {
  const sentences = splitSentences(question);
  const q = [...sentences].reverse().find((x) => ASKS.test(x)) ?? sentences[sentences.length - 1] ?? question;
  const your = YOUR.exec(q);
  if (your) return canonicalTopic(your[1]!.replace(/^(?:best|usual|current|new)\s+/i, ''));
  if (/\b(?:best|good|right)\s+number\b|\bnumber to (?:reach|call|text)\b/i.test(q)) return 'my phone number (mobile)';
  const named = rules(question);
  if (named) return named.key;
  return contentWords(q).length > 0 ? q.replace(/\s+/g, ' ').trim() : null;
}

/** The default extractor (see module comment). */
export class RuleExtractor implements Extractor {
  extract(text: string, role: Role, context: ExtractContext = {}): Candidate[] {
    const out: Candidate[] = [];
    const clauses = splitClauses(text);
    clauses.forEach(({ text: raw, first }, i) => {
      let sentence = raw;
      let remember = false;
      const rm = REMEMBER.exec(sentence);
      if (rm) {
        remember = true;
        sentence = rm[1]!.trim();
      }
      const c = this.fromSentence(sentence, role, !first);
      const about = OTHER_PERSON.exec(sentence);
      if (about && c.pattern !== 'name' && c.pattern !== 'intro') c.subject = about[1]!.toLowerCase();
      if (remember) c.remember = true;
      if (!first) c.clause = true;
      c.text = raw;
      // A topic-less update or correction is about what was said just before it in the same turn
      // ("I need to move the Tourer's service. Could it be Friday instead?").
      if (c.updates && (c.pattern === 'update' || c.pattern === 'correction') && i > 0) c.context = clauses[i - 1]!.text;
      // A short answer to the other side's question ("It's 07700 900814", "Tuesday at 9, please")
      // takes its topic from the question.
      if (i === 0 && context.previous && (c.pattern === 'sentence' || c.pattern.startsWith('with-')) && contentWords(sentence).length <= 6 && !/\?\s*$/.test(sentence) && ASKS.test(context.previous)) {
        const topic = answerTopic(context.previous, (x) => this.namedTopic(x));
        if (topic) {
          c.key = topic;
          c.pattern = 'answer';
          c.context = context.previous;
        }
      }
      out.push(c);
    });
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

  private fromSentence(sentence: string, _role: Role, clause: boolean): Candidate {
    const expr = findValueExpr(sentence);
    const request = REQUEST.test(sentence);
    const isQuestion = /\?\s*$/.test(sentence) && !request;
    // An update names a new value but not always its topic: "can we move it to Friday instead?"
    if (expr && UPDATE_CUE.test(sentence) && !(clause && !CORRECTION.test(sentence) && !/\b(?:actually|instead|i meant)\b/i.test(sentence))) {
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
          // "Can I book a service for Tuesday?" -> key "my booking (service)", value the request itself.
          if (!expr) break;
          return { key: kv.key, value: sentence.replace(/^(?:can|could|would|may)\s+(?:i|we|you)\s+/i, '').replace(/[?.!]+$/, ''), text: sentence, pattern: rule.name };
        }
        const value = trimValue(kv.value);
        if (value.length === 0) continue;
        const c: Candidate = { key: kv.key, value, text: sentence, pattern: rule.name };
        if (kv.accumulate) c.accumulate = true;
        // A rule-named fact said as a change ("I'd prefer a male tutor from now on") may replace the
        // fact with the same key even when such facts usually add up; it names its topic, so it is
        // never aimed at whatever was said last.
        if (UPDATE_CUE.test(sentence)) c.revises = true;
        return c;
      }
    }
    // A correction states the user's choice even without a date or number in it, and replaces what it
    // corrects — the slot its topic addresses, else the choice made just before (`updates: latest`).
    // A later clause of a sentence ("..., so no nut snacks please") corrects nothing.
    if (!clause && CORRECTION.test(sentence) && !isQuestion && !CLOSING.test(sentence)) {
      const topic = topicOf(sentence.replace(CORRECTION_ALL, ' '), expr?.text);
      if (contentWords(topic).length >= 2 || expr) return { key: topic, value: sentence, text: sentence, pattern: 'correction', updates: expr ? { kind: expr.kind, expr: expr.text } : { kind: 'latest' } };
    }
    if (expr) {
      // A dated or counted statement: its topic is what remains without the date or number.
      return { key: topicOf(sentence, expr.text), value: sentence, text: sentence, pattern: `with-${expr.kind}` };
    }
    return { key: sentence, value: sentence, text: sentence, pattern: 'sentence' };
  }
}
