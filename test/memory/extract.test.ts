// The default extractor and the write gate, asserted on robust behaviour only: the rules and default
// weights are tuned elsewhere, so exact gate values here use explicit weights.

import { describe, expect, it } from 'vitest';
import { RuleExtractor, splitSentences } from '../../src/memory/extract.js';
import { DEFAULT_GATE_WEIGHTS, gateFeatures, gateScore, type GateWeights } from '../../src/memory/gate.js';
import { WRITE_DEFAULTS } from '../../src/memory/params.js';
import { findAll, findValueExpr } from '../../src/memory/values.js';

const ex = new RuleExtractor();
const one = (text: string) => {
  const cs = ex.extract(text, 'user');
  expect(cs).toHaveLength(1);
  return cs[0]!;
};
const defaultGate = (text: string) => {
  const c = one(text);
  return gateScore(gateFeatures(c, 'user', 1), DEFAULT_GATE_WEIGHTS);
};

describe('RuleExtractor', () => {
  it('splits "My name is Dana" into key "my name", value "Dana"', () => {
    expect(one('My name is Dana')).toMatchObject({ key: 'my name', value: 'Dana' });
    expect(one('Call me Dana Whitfield.')).toMatchObject({ key: 'my name', value: 'Dana Whitfield' });
  });

  it('splits "my X is Y" statements', () => {
    expect(one('My bike is a green Brompton.')).toMatchObject({ key: 'my bike', value: 'a green Brompton' });
  });

  it('finds several facts in one message', () => {
    const cs = ex.extract('Hi, my name is Dana and my bike is a green Brompton.', 'user');
    expect(cs.map((c) => [c.key, c.value])).toEqual([['my name', 'Dana'], ['my bike', 'a green Brompton']]);
  });

  it('marks an update of a date ("move it to Friday instead") with the new expression', () => {
    const c = one('Actually, can we move it to Friday instead?');
    expect(c.updates).toEqual({ kind: 'date', expr: 'Friday' });
  });

  it('flags "remember that ..." and falls back to key = value = the sentence', () => {
    const r = one('Remember that the shop closes early on bank holidays');
    expect(r.remember).toBe(true);
    const s = one('The weather was lovely');
    expect(s).toMatchObject({ key: 'The weather was lovely', value: 'The weather was lovely', pattern: 'sentence' });
  });

  it('splitSentences keeps times like 10.30 whole', () => {
    expect(splitSentences('Drop it off at 10.30 please. Thanks!')).toEqual(['Drop it off at 10.30 please.', 'Thanks!']);
  });
});

describe('value expressions', () => {
  it('finds weekdays as dates and lists every one in order', () => {
    expect(findValueExpr('book a service for Tuesday')).toMatchObject({ kind: 'date', text: 'Tuesday' });
    expect(findAll('Tuesday or Friday', 'date').map((e) => e.text)).toEqual(['Tuesday', 'Friday']);
    expect(findValueExpr('nothing concrete here')).toBeNull();
  });
});

describe('write gate', () => {
  it('with the default weights passes a stated fact and gates out a question or a greeting', () => {
    expect(defaultGate('My name is Dana')).toBeGreaterThan(WRITE_DEFAULTS.gateThreshold);
    expect(defaultGate('What time do you open?')).toBeLessThan(WRITE_DEFAULTS.gateThreshold);
    expect(defaultGate('hello')).toBeLessThan(WRITE_DEFAULTS.gateThreshold);
  });

  it('features are in [0, 1] and mark questions, first person and role', () => {
    const q = gateFeatures(one('What time do you open?'), 'user', 1);
    expect(q.question).toBe(1);
    const f = gateFeatures(one('My name is Dana'), 'assistant', 0.25);
    expect(f).toMatchObject({ statement: 1, question: 0, userRole: 0, firstPerson: 1, novelty: 0.25 });
    for (const v of Object.values(f)) {
      expect(v).toBeGreaterThanOrEqual(0);
      expect(v).toBeLessThanOrEqual(1);
    }
    expect(gateFeatures(one('My name is Dana'), 'user', 7).novelty).toBe(1); // clamped
  });

  it('is the logistic sigma(bias + sum w_f x_f): exact with explicit weights', () => {
    const w: GateWeights = { ...DEFAULT_GATE_WEIGHTS };
    for (const k of Object.keys(w) as Array<keyof GateWeights>) w[k] = 0;
    w.bias = -1;
    w.statement = 2;
    w.novelty = 0.5;
    const f = gateFeatures(one('My name is Dana'), 'user', 1); // statement 1, novelty 1
    expect(gateScore(f, w)).toBeCloseTo(1 / (1 + Math.exp(-1.5)), 15);
    expect(gateScore({ ...f, statement: 0, novelty: 0 }, w)).toBeCloseTo(1 / (1 + Math.E), 15);
  });
});
