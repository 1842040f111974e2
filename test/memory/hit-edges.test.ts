// The calibrated hit of a read, tested just below, at and just above each of its thresholds: the top
// item's share of the best possible lexical score (hitCoverage), its lead over the next item
// (hitMargin) and, with a dense list, its cosine (hitCosine). "At" is the exact double the ranking
// compares, read back from a first ranking.

import { describe, expect, it } from 'vitest';
import { LOGBOOK_SEARCH_DEFAULTS, LogbookIndex, type LogbookSearchResult } from '../../src/logbook/index.js';
import { analyseQuery } from '../../src/logbook/query.js';
import { rankTiers, type RankParams, type SlotCandidate } from '../../src/memory/rank.js';
import type { LogbookEntry } from '../../src/types.js';

const P: RankParams = {
  k: 8, session: 's', provenanceWeight: 0, othersWeight: 1, recencyBoost: 0, recencyHalfLife: 20, slotPrior: 0, denseWeight: 0, rrfK: 60,
  hitCoverage: 0.3, hitMargin: 1.3, hitCosine: 0.5, history: false, minShare: 0, search: LOGBOOK_SEARCH_DEFAULTS,
};
const slot = (id: string, keyText: string, value: string, over: Partial<SlotCandidate> = {}): SlotCandidate => ({
  slot: 0, id, keyText, value, provenance: [`p-${id}`], strength: 1, cosine: 0, weight: 0, age: 0, ...over,
});
const turn = (seq: number, value: string): LogbookEntry => ({
  id: `T${seq}`, kind: 'turn', tenant: 't', session: 's', value, keyText: '', provenance: [`t${seq}`], role: 'user', atMs: seq, createdMs: seq, clock: seq, seq,
});
function search(entries: LogbookEntry[], query: string): LogbookSearchResult {
  const idx = new LogbookIndex();
  for (const e of entries) idx.add(e);
  return idx.search(analyseQuery(query, 0), LOGBOOK_SEARCH_DEFAULTS);
}
function step(x: number, by: 1n | -1n): number {
  const b = new Float64Array([x]);
  const u = new BigInt64Array(b.buffer);
  u[0] = u[0]! + (x >= 0 ? by : -by);
  return b[0]!;
}
const up = (x: number): number => step(x, 1n);
const down = (x: number): number => step(x, -1n);

describe('hit: coverage of the top item', () => {
  // One item: no margin to pass, only coverage decides.
  const lb = search([turn(1, 'The workshop closes at six.')], 'When does my bike workshop close?');
  const slots = [slot('a', 'my bike', 'a green Corvane Tourer')];
  const rank = (hitCoverage: number) => rankTiers(slots, lb, { ...P, hitCoverage, hitMargin: 1 });
  const probe = rank(2);
  const top = probe.items[0]!;
  it('the probe has one item with partial coverage', () => {
    expect(probe.items.length).toBeGreaterThan(0);
    expect(top.coverage).toBeGreaterThan(0);
    expect(top.coverage).toBeLessThan(1);
    expect(probe.hit).toBe(false);
  });
  it('a hit at the threshold and just under it; a miss just above it', () => {
    expect(rank(top.coverage).hit).toBe(true);
    expect(rank(down(top.coverage)).hit).toBe(true);
    expect(rank(up(top.coverage)).hit).toBe(false);
  });
});

describe('hit: lead over the next item', () => {
  // Two turns with the same words score exactly the same: a lead of exactly 1.
  const lb = search([turn(1, 'The saddle bag is blue.'), turn(2, 'The saddle bag is blue.')], 'What colour is the saddle bag?');
  const rank = (hitMargin: number) => rankTiers([], lb, { ...P, hitCoverage: 0, hitMargin });
  it('the probe has two items with equal scores', () => {
    const [a, b] = rank(1).items;
    expect(a!.score).toBeGreaterThan(0);
    expect(a!.score).toBe(b!.score);
  });
  it('a hit at a margin of exactly 1 and below it; a miss one step above', () => {
    expect(rank(1).hit).toBe(true);
    expect(rank(down(1)).hit).toBe(true);
    expect(rank(up(1)).hit).toBe(false);
  });
  it('a clear lead passes a margin the tie does not', () => {
    const lead = search([turn(1, 'My saddle is a Fenmarrow leather saddle.'), turn(2, 'The saddle bag is blue.')], 'Which Fenmarrow saddle do I have?');
    const [a, b] = rankTiers([], lead, { ...P, hitCoverage: 0 }).items;
    const m = a!.score / b!.score;
    expect(m).toBeGreaterThan(1.01);
    expect(rankTiers([], lead, { ...P, hitCoverage: 0, hitMargin: 1.01 }).hit).toBe(true);
    expect(rankTiers([], lead, { ...P, hitCoverage: 0, hitMargin: m * 1.01 }).hit).toBe(false);
  });
});

describe('hit: cosine of the top item with a dense list', () => {
  const lb = search([], 'anything at all');
  const slots = [slot('a', 'my bike', 'a green Corvane Tourer', { cosine: 0.62 })];
  const rank = (hitCosine: number) => rankTiers(slots, lb, { ...P, denseWeight: 1, hitCoverage: 2, hitCosine });
  it('a hit at the cosine and just under it; a miss just above it', () => {
    expect(rank(2).items[0]!.cosine).toBe(0.62);
    expect(rank(0.62).hit).toBe(true);
    expect(rank(down(0.62)).hit).toBe(true);
    expect(rank(up(0.62)).hit).toBe(false);
  });
});

describe('slot terms are counted per revision id and text', () => {
  it('an id seen again with other text is scored on its own words', () => {
    const lb = search([turn(1, 'See you soon.')], 'What is my phone number?');
    const first = rankTiers([slot('same', 'my phone number', '07700 900123')], lb, P);
    expect(first.items.map((x) => x.id)).toEqual(['same']);
    const second = rankTiers([slot('same', 'my name', 'Dana')], lb, P);
    expect(second.items).toEqual([]);
  });
});
