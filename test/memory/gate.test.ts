// The write gate's features, each computed by hand from its definition for invented sentences, and the
// logistic score sigma(bias + sum w_f x_f) on them. Each feature has a case where it is 1 and one where
// it is 0, so a feature that stops firing (or fires always) changes an expected value.

import { describe, expect, it } from 'vitest';
import type { Candidate } from '../../src/memory/extract.js';
import { DEFAULT_GATE_WEIGHTS, gateFeatures, gateScore, type GateFeatures, type GateWeights } from '../../src/memory/gate.js';

const c = (text: string, over: Partial<Candidate> = {}): Candidate => ({ key: 'k', value: 'v', text, pattern: 'sentence', ...over });
const len = (n: number): number => Math.min(1, Math.log1p(n) / Math.log1p(20));

describe('gateFeatures', () => {
  it('a stated fact with a name: statement, proper noun, first person, user', () => {
    const f = gateFeatures(c('My name is Dana.', { pattern: 'my-x-is-y' }), 'user', 0.25);
    expect(f).toEqual({
      novelty: 0.25, statement: 1, remember: 0, numberDate: 0, properNoun: 1, question: 0, userRole: 1, firstPerson: 1,
      length: len(2), update: 0, smallTalk: 0,
    } satisfies GateFeatures);
  });

  it('clamps novelty into [0, 1]', () => {
    expect(gateFeatures(c('x'), 'user', 1.7).novelty).toBe(1);
    expect(gateFeatures(c('x'), 'user', -0.3).novelty).toBe(0);
  });

  it('a plain sentence (the fallback pattern) is no statement', () => {
    expect(gateFeatures(c('the shop is open'), 'user', 1).statement).toBe(0);
    expect(gateFeatures(c('the shop is open', { pattern: 'my-x-is-y' }), 'user', 1).statement).toBe(1);
  });

  it('"I" alone, or as a contraction, is not a proper noun; a capitalised word after the first is', () => {
    expect(gateFeatures(c('so I think I’ll go'), 'user', 1).properNoun).toBe(0);
    expect(gateFeatures(c("then I'd say I am"), 'user', 1).properNoun).toBe(0);
    expect(gateFeatures(c('Yes I do'), 'user', 1).properNoun).toBe(0); // the first word does not count
    expect(gateFeatures(c('we ride to "Corvane" often'), 'user', 1).properNoun).toBe(1); // leading punctuation stripped
    expect(gateFeatures(c('we ride to Ilkeston'), 'user', 1).properNoun).toBe(1); // starts with I but is a name
    expect(gateFeatures(c('we ride to harlow'), 'user', 1).properNoun).toBe(0);
    expect(gateFeatures(c('we met at ("Corvane") today'), 'user', 1).properNoun).toBe(1); // all leading punctuation
    expect(gateFeatures(c('we ride to "harlow"'), 'user', 1).properNoun).toBe(0);
    expect(gateFeatures(c('my old iPhone'), 'user', 1).properNoun).toBe(0); // the first letter decides
    expect(gateFeatures(c('we use AI daily'), 'user', 1).properNoun).toBe(1); // "I" only as the whole word
    expect(gateFeatures(c('  Dana rides'), 'user', 1).properNoun).toBe(0); // leading spaces: still the first word
  });

  it('questions: a trailing "?" (spaces allowed), or a question word opening a plain sentence', () => {
    expect(gateFeatures(c('Is my bike ready?  '), 'user', 1).question).toBe(1);
    expect(gateFeatures(c('my bike is ready ?'), 'user', 1).question).toBe(1);
    expect(gateFeatures(c('what a day that was'), 'user', 1).question).toBe(1);
    expect(gateFeatures(c('  what a day that was'), 'user', 1).question).toBe(1);
    expect(gateFeatures(c('what a day that was', { pattern: 'my-x-is-y' }), 'user', 1).question).toBe(0);
    expect(gateFeatures(c('what a day that was', { remember: true }), 'user', 1).question).toBe(0);
    expect(gateFeatures(c('my bike is ready'), 'user', 1).question).toBe(0);
    expect(gateFeatures(c('my bike? it is ready'), 'user', 1).question).toBe(0); // "?" not at the end
    // A polite request states what the user wants.
    expect(gateFeatures(c('could you book a table at Ming’s?'), 'user', 1)).toMatchObject({ question: 0, firstPerson: 1 });
  });

  it('remember, numbers and dates, role, first person, updates and small talk', () => {
    expect(gateFeatures(c('remember that I park at bay 4', { remember: true }), 'user', 1)).toMatchObject({ remember: 1, numberDate: 1, firstPerson: 1 });
    expect(gateFeatures(c('the shop opens on Friday'), 'assistant', 1)).toMatchObject({ remember: 0, numberDate: 1, userRole: 0, firstPerson: 0 });
    expect(gateFeatures(c('the shop is open'), 'user', 1)).toMatchObject({ numberDate: 0, firstPerson: 0 });
    expect(gateFeatures(c('make it Friday instead', { updates: { kind: 'date', expr: 'Friday' } }), 'user', 1).update).toBe(1);
    expect(gateFeatures(c('Thanks so much!'), 'user', 1).smallTalk).toBe(1);
    expect(gateFeatures(c('Thanks, my saddle is fine'), 'user', 1).smallTalk).toBe(0);
  });

  it('length counts content words (stopwords left out), log-scaled and capped at 1', () => {
    // "the bike and the saddle" -> content words bike, saddle
    expect(gateFeatures(c('the bike and the saddle'), 'user', 1).length).toBeCloseTo(len(2), 15);
    const long = Array.from({ length: 30 }, (_, i) => `word${i}x`).join(' ');
    expect(gateFeatures(c(long), 'user', 1).length).toBe(1);
    expect(gateFeatures(c(''), 'user', 1).length).toBe(0);
  });
});

describe('gateScore', () => {
  it('is sigma(bias + sum of weight x feature)', () => {
    const f = gateFeatures(c('My name is Dana.', { pattern: 'my-x-is-y' }), 'user', 0.25);
    const w = DEFAULT_GATE_WEIGHTS;
    const z = w.bias + w.novelty * 0.25 + w.statement + w.properNoun + w.userRole + w.firstPerson + w.length * len(2);
    expect(gateScore(f)).toBeCloseTo(1 / (1 + Math.exp(-z)), 15);
  });
  it('uses the weights given, and treats a missing weight as 0', () => {
    const f = gateFeatures(c('Hello there!'), 'user', 1);
    const w = { bias: 0.5, smallTalk: -1 } as unknown as GateWeights;
    expect(gateScore(f, w)).toBeCloseTo(1 / (1 + Math.exp(-(0.5 - 1))), 15);
  });
});
