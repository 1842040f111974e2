// The write gate: a logistic function of a candidate's features gives a salience in [0, 1] that
// decides whether it is written and how strongly (an input gate in the sense of LSTM, Hochreiter &
// Schmidhuber 1997, with hand-set features instead of learned ones). `sweep` tunes the weights.

import type { Role } from '../types.js';
import type { Candidate } from './extract.js';
import { STOPWORDS, tokenize } from './text.js';
import { hasValueExpr } from './values.js';

/** Feature values, each in [0, 1]. */
export interface GateFeatures {
  /** 1 − max cosine between the candidate key and existing slot keys (1 when memory is empty). */
  novelty: number;
  /** A first-person statement rule matched (not the plain-sentence fallback). */
  statement: number;
  /** "remember that ...", "don't forget ...". */
  remember: number;
  /** A date, time or quantity is present. */
  numberDate: number;
  /** A capitalised word that does not start the sentence (a name, a place, a brand). */
  properNoun: number;
  /** The sentence is a question. */
  question: number;
  /** Spoken by the user (1) or by the assistant/system (0). */
  userRole: number;
  /** First-person words (I, my, me, we, our). */
  firstPerson: number;
  /** Content-word count, log-scaled: ln(1 + n) / ln(1 + 20), capped at 1. */
  length: number;
  /** An update cue ("actually", "instead", "make it"). */
  update: number;
  /** Greeting, thanks or filler only. */
  smallTalk: number;
}

export type GateWeights = { bias: number } & { [K in keyof GateFeatures]: number };

/**
 * Default weights. Set by hand so that a stated fact ("my name is Dana": bias + statement + name +
 * user + first person ≈ 3.5, gate ≈ 0.97) passes, a question or a greeting (≈ −1.5, gate ≈ 0.2)
 * does not, and a plain first-person sentence with nothing concrete sits near the threshold.
 */
export const DEFAULT_GATE_WEIGHTS: GateWeights = {
  bias: -3,
  novelty: 1,
  statement: 2.5,
  remember: 4,
  numberDate: 1.2,
  properNoun: 0.8,
  question: -2.5,
  userRole: 1,
  firstPerson: 0.8,
  length: 1,
  update: 1.5,
  smallTalk: -3,
};

const SMALL_TALK = /^(?:hi|hello|hey|thanks|thank you|cheers|ok|okay|cool|great|nice|bye|goodbye|good (?:morning|afternoon|evening|night)|lol|haha|sure|yes|no|yep|nope)\b[\s!.,]*(?:there|so much|a lot|again|then|you)?[\s!.,]*$/i;
const QUESTION_START = /^(?:who|what|when|where|why|how|which|do|does|did|is|are|can|could|would|will|should|shall|may)\b/i;
const FIRST_PERSON = /\b(?:i|i'm|i've|i'd|i'll|my|me|mine|we|our|us)\b/i;
/**
 * A polite request ("could you book a table at Ming's?", "can we do Friday?", "please play it in the
 * kitchen") states what the user wants; in a task bot that is the fact to keep. It is not an
 * information-seeking question, which a wh-word or "do/does/is/are" start marks.
 */
const REQUEST = /^(?:(?:hi|hey|hello|ok|okay|yes|no|sure|great|sorry|actually|then|and|so|well|nope|oops)\b[\s,!.]*)*(?:(?:can|could|would|will)\s+(?:you|we|i)\b|please\b|i(?:'d| would) like\b|let'?s\b)/i;

/** Computes gate features for a candidate. `novelty` comes from addressing (1 − best key cosine). */
export function gateFeatures(c: Candidate, role: Role, novelty: number): GateFeatures {
  const text = c.text;
  const words = tokenize(text);
  const content = words.filter((w) => !STOPWORDS.has(w)).length;
  const trimmed = text.trim();
  const isQuestion = !REQUEST.test(trimmed) && (/\?$/.test(trimmed) || (QUESTION_START.test(trimmed) && !c.remember && c.pattern === 'sentence'));
  // Proper nouns: a capitalised word after the first word, excluding the pronoun "I".
  const tokens = trimmed.split(/\s+/);
  let proper = 0;
  for (let i = 1; i < tokens.length; i++) {
    const t = tokens[i]!.replace(/^[^\p{L}]+/u, '');
    if (/^\p{Lu}/u.test(t) && !/^I(?:'|’|$)/.test(t)) proper = 1;
  }
  return {
    novelty: Math.min(1, Math.max(0, novelty)),
    statement: c.pattern !== 'sentence' ? 1 : 0,
    remember: c.remember ? 1 : 0,
    numberDate: hasValueExpr(text) ? 1 : 0,
    properNoun: proper,
    question: isQuestion ? 1 : 0,
    userRole: role === 'user' ? 1 : 0,
    // A request is the user speaking of what they want, as much as "I want ..." is.
    firstPerson: FIRST_PERSON.test(text) || REQUEST.test(trimmed) ? 1 : 0,
    length: Math.min(1, Math.log1p(content) / Math.log1p(20)),
    update: c.updates ? 1 : 0,
    smallTalk: SMALL_TALK.test(trimmed) ? 1 : 0,
  };
}

/** The logistic gate: sigma(bias + sum_f w_f * x_f). */
export function gateScore(f: GateFeatures, w: GateWeights = DEFAULT_GATE_WEIGHTS): number {
  let z = w.bias;
  for (const k of Object.keys(f) as Array<keyof GateFeatures>) z += (w[k] ?? 0) * f[k];
  return 1 / (1 + Math.exp(-z));
}
