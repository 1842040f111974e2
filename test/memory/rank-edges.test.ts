// The ranking over both tiers with a search result built by hand, so every score is known: slot BM25
// on the logbook's statistics (Robertson & Zaragoza 2009, written out here), the slot's boosts
// (provenance, speaker, strength prior, recency, someone else's fact), reciprocal rank fusion
// (Cormack, Clarke & Buettcher 2009: 1 / (k + rank)), the repeat-question rule, successors, one place
// per source turn, the share floor, ties, and the hit at its thresholds.

import { describe, expect, it } from 'vitest';
import { LOGBOOK_SEARCH_DEFAULTS, type LogbookHit, type LogbookSearchResult } from '../../src/logbook/index.js';
import { forgetSlotTerms, rankTiers, scoreSlots, slotTermsCached, type RankParams, type SlotCandidate } from '../../src/memory/rank.js';
import { stem } from '../../src/memory/text.js';
import type { LogbookEntry } from '../../src/types.js';

/** Okapi BM25 term score, written out (not the code under test). */
const bm = (idf: number, tf: number, len: number, avg: number, k1 = 1.2, b = 0.75): number => (idf * tf * (k1 + 1)) / (tf + k1 * (1 - b + (b * len) / avg));
/** The non-negative IDF, ln(1 + (N - n + 0.5) / (n + 0.5)). */
const idfOf = (n: number, df: number): number => Math.log(1 + (n - df + 0.5) / (df + 0.5));

const P: RankParams = {
  k: 8, session: 's', provenanceWeight: 0, othersWeight: 1, recencyBoost: 0, recencyHalfLife: 20, slotPrior: 0, denseWeight: 0, rrfK: 60,
  hitCoverage: 0.3, hitMargin: 1.3, hitCosine: 0.5, history: false, minShare: 0, search: LOGBOOK_SEARCH_DEFAULTS,
};
let ids = 0;
const slot = (id: string, keyText: string, value: string, over: Partial<SlotCandidate> = {}): SlotCandidate => ({
  slot: 0, id, keyText, value, provenance: [`p-${id}`], strength: 1, cosine: 0, weight: 0, ...over,
});
const entry = (seq: number, value: string, over: Partial<LogbookEntry> = {}): LogbookEntry => ({
  id: `E${++ids}`, kind: 'turn', tenant: 't', session: 's', value, keyText: '', provenance: [`t${seq}`], role: 'user', atMs: seq, createdMs: seq, clock: seq, seq, ...over,
});
const hit = (e: LogbookEntry, score: number, over: Partial<LogbookHit> = {}): LogbookHit => ({
  entry: e, score, lexical: score, context: 0, coverage: 0, cosine: Number.NaN, lexicalRank: 0, denseRank: 0, speakerMatch: false, ...over,
});
/** A search result with the given hits and query-term weights; statistics default to an empty logbook. */
const result = (over: Partial<LogbookSearchResult> = {}): LogbookSearchResult => ({
  hits: [], size: 0, avgLength: 0, idf: new Map(), df: new Map(), weight: new Map(), maxScore: 0, speakers: [], successors: new Map(), ...over,
});

describe('scoreSlots', () => {
  it('with an empty logbook the slots are their own corpus: N, df and the average length are theirs', () => {
    const lb = result({ weight: new Map([['fern', 2], ['pot', 1]]) });
    const slots = [
      slot('a', 'my fern', 'in a blue pot'), // fern blue pot: length 3
      slot('b', 'the pot', 'the pot'), // key = value: the text once, "pot": length 1
      slot('c', '', 'moss'), // no key: "moss", length 1
    ];
    const search = { ...LOGBOOK_SEARCH_DEFAULTS, k1: 2, b: 0.5 };
    const { scores, maxScore } = scoreSlots(slots, lb, search);
    const avg = 5 / 3;
    const fern = idfOf(3, 1);
    const pot = idfOf(3, 2);
    expect(maxScore).toBeCloseTo(2 * fern + pot, 12);
    expect(scores[0]!.lexical).toBeCloseTo(2 * bm(fern, 1, 3, avg, 2, 0.5) + bm(pot, 1, 3, avg, 2, 0.5), 12);
    expect(scores[1]!.lexical).toBeCloseTo(bm(pot, 1, 1, avg, 2, 0.5), 12);
    expect(scores[2]!.lexical).toBe(0);
    expect(scores.map((s) => s.score)).toEqual(scores.map((s) => s.lexical));
    expect(scores.every((s) => !s.speakerMatch)).toBe(true);
  });

  it('with a logbook, counts its N, df and average length, and boosts a slot whose owner the query names', () => {
    const lb = result({ size: 4, avgLength: 6, df: new Map([['fern', 2]]), weight: new Map([['fern', 1], ['unsaid', 1]]), speakers: ['ines'] });
    const slots = [slot('a', 'my fern', 'repotted', { owner: 'Ines' }), slot('b', 'her fern', 'watered', { owner: 'Bo' }), slot('c', 'a fern', 'sold')];
    const { scores, maxScore } = scoreSlots(slots, lb, LOGBOOK_SEARCH_DEFAULTS);
    const n = 7;
    const fern = idfOf(n, 5);
    expect(maxScore).toBeCloseTo(fern, 12); // a term no document holds has IDF 0
    const own = bm(fern, 1, 2, 6);
    expect(scores[0]!.lexical).toBeCloseTo(own, 12);
    expect(scores[0]!.speakerMatch).toBe(true);
    expect(scores[0]!.score).toBeCloseTo(own * (1 + LOGBOOK_SEARCH_DEFAULTS.speakerBoost), 12);
    expect(scores[1]!.speakerMatch).toBe(false);
    expect(scores[1]!.score).toBeCloseTo(own, 12);
    expect(scores[2]!.speakerMatch).toBe(false);
  });

  it('with no slots and no logbook scores nothing', () => {
    expect(scoreSlots([], result({ weight: new Map([['fern', 1]]) }), LOGBOOK_SEARCH_DEFAULTS)).toEqual({ scores: [], maxScore: 0 });
  });

  it('counts a slot id again when its text changed, and forgets counts on erasure', () => {
    const lb = result({ weight: new Map([['fern', 1]]) });
    const before = scoreSlots([slot('r1', 'my plant', 'a fern'), slot('x', 'my pot', 'blue')], lb, LOGBOOK_SEARCH_DEFAULTS).scores[0]!.lexical;
    expect(before).toBeGreaterThan(0);
    expect(slotTermsCached('r1')).toBe(true);
    expect(scoreSlots([slot('r1', 'my plant', 'a cactus'), slot('x', 'my pot', 'blue')], lb, LOGBOOK_SEARCH_DEFAULTS).scores[0]!.lexical).toBe(0);
    forgetSlotTerms(['r1']);
    expect(slotTermsCached('r1')).toBe(false);
    expect(slotTermsCached('x')).toBe(true);
    forgetSlotTerms([]);
    expect(slotTermsCached('x')).toBe(true);
    forgetSlotTerms();
    expect(slotTermsCached('x')).toBe(false);
  });
});

describe('rankTiers: a slot\'s score', () => {
  // One slot "my fern: repotted"; the query weighs "fern" 1; empty logbook statistics, one slot:
  // N = 1, df = 1, avg = len = 2.
  const lex = bm(idfOf(1, 1), 1, 2, 2);
  const fern = (over: Partial<SlotCandidate> = {}): SlotCandidate => slot('f', 'my fern', 'repotted', { provenance: ['t1', 't0', 'p-f'], ...over });

  it('adds the best support of its source turns in this session, times provenanceWeight', () => {
    const t1 = entry(1, 'the fern went in the big pot', { provenance: ['t1'] });
    const t0 = entry(0, 'my fern needs repotting', { provenance: ['t0'] });
    const other = entry(2, 'fern fern fern', { provenance: ['t1'], session: 'other' });
    const demoted = entry(3, 'fern', { provenance: ['t0'], kind: 'capacity' });
    const lb = result({ hits: [hit(t1, 2, { lexical: 0.7 }), hit(t0, 2, { lexical: 0.9 }), hit(other, 9, { lexical: 5 }), hit(demoted, 9, { lexical: 4 })], weight: new Map([['fern', 1]]) });
    const r = rankTiers([fern()], lb, { ...P, provenanceWeight: 0.5, k: 10 });
    const x = r.items.find((i) => i.id === 'f')!;
    expect(x.score).toBeCloseTo(lex + 0.5 * 0.9, 12);
    expect(x.lexical).toBeCloseTo(lex, 12);
    expect(x.source).toBe('slot');
    expect(x.slot!.id).toBe('f');
  });

  it('multiplies a named owner\'s support by the speaker boost too', () => {
    const t0 = entry(0, 'Ines: my fern needs repotting', { provenance: ['t0'] });
    const lb = result({ hits: [hit(t0, 1, { lexical: 0.8 })], weight: new Map([['fern', 1]]), speakers: ['ines'] });
    const r = rankTiers([fern({ owner: 'Ines' })], lb, { ...P, provenanceWeight: 0.5, search: { ...LOGBOOK_SEARCH_DEFAULTS, speakerBoost: 2 } });
    expect(r.items.find((i) => i.id === 'f')!.score).toBeCloseTo(lex * 3 + 0.5 * 0.8 * 3, 12);
    expect(r.items.find((i) => i.id === 'f')!.speakerMatch).toBe(true);
  });

  it('is × (1 + slotPrior × strength) × (1 + recencyBoost × 2^(−age / halfLife)) × othersWeight', () => {
    const lb = result({ weight: new Map([['fern', 1]]) });
    const score = (over: Partial<SlotCandidate>, p: Partial<RankParams>): number => rankTiers([fern(over)], lb, { ...P, ...p }).items[0]!.score;
    expect(score({ strength: 0.4 }, { slotPrior: 0.5 })).toBeCloseTo(lex * 1.2, 12);
    expect(score({ age: 10 }, { recencyBoost: 3, recencyHalfLife: 5 })).toBeCloseTo(lex * (1 + 3 * 0.25), 12);
    expect(score({ age: 0 }, { recencyBoost: 3 })).toBeCloseTo(lex * 4, 12);
    expect(score({}, { recencyBoost: 3 })).toBeCloseTo(lex, 12); // no age known: no boost
    expect(score({ subject: 'brother' }, { othersWeight: 0.25 })).toBeCloseTo(lex * 0.25, 12);
  });

  it('drops othersWeight when the query names the person the fact is about (by stem)', () => {
    const lb = result({ weight: new Map([['fern', 1], ['brother', 1]]) });
    const r = rankTiers([slot('f', 'my fern', 'repotted', { subject: 'brothers' })], lb, { ...P, othersWeight: 0.25 });
    const alone = bm(idfOf(1, 1), 1, 2, 2);
    expect(r.items[0]!.score).toBeCloseTo(alone, 12);
  });

  it('has coverage = own BM25 over the larger of the two maxima (1 when both are 0)', () => {
    const lb = result({ weight: new Map([['fern', 1]]), maxScore: 10 });
    expect(rankTiers([fern()], lb, P).items[0]!.coverage).toBeCloseTo(lex / 10, 12);
    const small = result({ weight: new Map([['fern', 1]]), maxScore: 0.001 });
    expect(rankTiers([fern()], small, P).items[0]!.coverage).toBeCloseTo(lex / idfOf(1, 1), 12);
    // No query terms: nothing scores, and a turn's coverage is its lexical score over 1.
    const t = entry(1, 'hello');
    const none = rankTiers([], result({ hits: [hit(t, 0.5, { lexical: 0.25 })] }), P);
    expect(none.items[0]!.coverage).toBe(0.25);
  });
});

describe('rankTiers: logbook items', () => {
  it('keeps a hit\'s scores, ranks and the successor it names', () => {
    const e = entry(4, 'book the service for Tuesday', { kind: 'superseded', successor: 'zz' });
    const lb = result({ hits: [hit(e, 2, { lexical: 1.5, context: 0.5, cosine: 0.3, speakerMatch: true, supersededBy: 'zz' })], maxScore: 3 });
    const r = rankTiers([], lb, { ...P, history: true });
    expect(r.items[0]).toMatchObject({ source: 'logbook', id: e.id, score: 2, lexical: 1.5, coverage: 0.5, context: 0.5, cosine: 0.3, speakerMatch: true, placed: 'score', supersededBy: 'zz' });
    const plain = rankTiers([], result({ hits: [hit(entry(5, 'x'), 1)] }), P);
    expect('supersededBy' in plain.items[0]!).toBe(false);
  });

  it('leaves out an earlier turn that is the same question, up to twice its length plus 8 characters', () => {
    const q = 'fern?';
    const same = entry(1, 'Fern' + '!'.repeat(14)); // 18 = 2 × 5 + 8 characters, normalises to "fern"
    const longer = entry(2, 'Fern' + '!'.repeat(15)); // 19: not looked at
    const demoted = entry(3, 'fern', { kind: 'capacity' });
    const other = entry(4, 'fern pot');
    const lb = result({ hits: [same, longer, demoted, other].map((e) => hit(e, 1)) });
    const got = rankTiers([], lb, { ...P, query: q }).items.map((x) => x.id);
    expect(got).not.toContain(same.id);
    expect(got).toEqual(expect.arrayContaining([longer.id, demoted.id, other.id]));
    expect(got).toHaveLength(3);
    expect(rankTiers([], lb, P).items).toHaveLength(4);
  });

  it('lets a live slot stand for the same id found in the logbook', () => {
    const e = entry(1, 'a green Corvane', { id: 'v1', kind: 'capacity' });
    const lb = result({ hits: [hit(e, 5)], weight: new Map([[stem('corvane'), 1]]) });
    const r = rankTiers([slot('v1', 'my bike', 'a green Corvane')], lb, P);
    expect(r.items.map((x) => x.source)).toEqual(['slot']);
  });

  it('brings in a resolved successor only to lift it above what it replaced; alone it has no score', () => {
    const succ = entry(9, 'service on Friday', { id: 'new', kind: 'capacity' });
    const old = entry(2, 'service on Tuesday', { id: 'old', kind: 'superseded', successor: 'new', provenance: ['t2'] });
    const lb = result({ hits: [hit(old, 1, { supersededBy: 'new' })], successors: new Map([['new', succ]]) });
    const r = rankTiers([], lb, P);
    expect(r.items.map((x) => x.id)).toEqual(['new', 'old']);
    expect(r.items[0]!.placed).toBe('successor');
    expect(r.items[0]!.score).toBe(0);
    // Without the superseded hit it names, the successor is not listed at all.
    expect(rankTiers([], result({ successors: new Map([['new', succ]]) }), P).items).toEqual([]);
    // With history it is not lifted either.
    expect(rankTiers([], lb, { ...P, history: true }).items.map((x) => x.id)).toEqual(['old']);
  });

  it('ignores a successor link to itself and a pair that name each other', () => {
    const a = entry(1, 'a', { id: 'a' });
    const b = entry(2, 'b', { id: 'b' });
    const self = rankTiers([], result({ hits: [hit(a, 2, { supersededBy: 'a' }), hit(b, 1)] }), P);
    expect(self.items.map((x) => [x.id, x.placed])).toEqual([['a', 'score'], ['b', 'score']]);
    const loop = rankTiers([], result({ hits: [hit(a, 2, { supersededBy: 'b' }), hit(b, 1, { supersededBy: 'a' })] }), P);
    expect(loop.items.map((x) => x.id)).toEqual(['a', 'b']);
  });

  it('leaves a successor already above what it replaced where it is, placed by score', () => {
    const nw = entry(2, 'Friday', { id: 'new', provenance: ['t2'] });
    const old = entry(1, 'Tuesday', { id: 'old', provenance: ['t1'], kind: 'superseded' });
    const r = rankTiers([], result({ hits: [hit(nw, 2), hit(old, 1, { supersededBy: 'new' })] }), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([['new', 'score'], ['old', 'score']]);
  });

  it('lifts a successor found further down to just above the replaced value, keeping one place each', () => {
    const mid = entry(3, 'mid', { id: 'mid', provenance: ['t3'] });
    const nw = entry(2, 'Friday', { id: 'new', provenance: ['t2'] });
    const old = entry(1, 'Tuesday', { id: 'old', provenance: ['t1'], kind: 'superseded' });
    const r = rankTiers([], result({ hits: [hit(old, 3, { supersededBy: 'new' }), hit(mid, 2), hit(nw, 1)] }), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([['new', 'successor'], ['old', 'score'], ['mid', 'score']]);
  });
});

describe('rankTiers: fusion with a dense list', () => {
  it('ranks slots and hits the dense search found by cosine; others only by their lexical rank', () => {
    const t1 = entry(1, 'fern', { provenance: ['t1'] });
    const t2 = entry(2, 'pot', { provenance: ['t2'] });
    const t3 = entry(3, 'soil', { provenance: ['t3'] });
    const lb = result({
      hits: [hit(t1, 3, { cosine: 0.9, denseRank: 1 }), hit(t2, 2, { cosine: 0.95, denseRank: 0 }), hit(t3, 1, { cosine: Number.NaN, denseRank: 0 })],
    });
    const s = slot('s', 'my moss', 'green', { cosine: 0.8, provenance: ['p'] });
    const r = rankTiers([s], lb, { ...P, denseWeight: 2, rrfK: 10 });
    const by = new Map(r.items.map((x) => [x.id, x]));
    // Dense order: t1 (0.9), s (0.8); t2 has no dense rank from the search, t3 no finite cosine.
    expect(by.get(t1.id)!.denseRank).toBe(1);
    expect(by.get('s')!.denseRank).toBe(2);
    expect(by.get(t2.id)!.denseRank).toBe(0);
    expect(by.get(t1.id)!.score).toBeCloseTo(1 / 11 + 2 / 11, 15);
    expect(by.get(t2.id)!.score).toBeCloseTo(1 / 12, 15);
    expect(by.get(t3.id)!.score).toBeCloseTo(1 / 13, 15);
    expect(by.get('s')!.score).toBeCloseTo(2 / 12, 15);
    expect(by.get('s')!.lexicalRank).toBe(0);
    expect(r.items.map((x) => x.id)).toEqual([t1.id, 's', t2.id, t3.id]);
  });

  it('calls a hit on the top item\'s cosine only when a dense list is fused', () => {
    const lb = result({ hits: [hit(entry(1, 'a'), 2, { cosine: 0.5, denseRank: 1 }), hit(entry(2, 'b'), 1, { cosine: 0.1, denseRank: 2 })] });
    expect(rankTiers([], lb, { ...P, denseWeight: 1, hitCosine: 0.5, hitCoverage: 100 }).hit).toBe(true);
    expect(rankTiers([], lb, { ...P, denseWeight: 1, hitCosine: 0.51, hitCoverage: 100 }).hit).toBe(false);
    expect(rankTiers([], lb, { ...P, denseWeight: 0, hitCosine: 0.5, hitCoverage: 100 }).hit).toBe(false);
  });
});

describe('rankTiers: order, places, floor and hit', () => {
  it('on equal scores puts a slot before a turn, and the newer turn first', () => {
    const lb = result({ hits: [hit(entry(1, 'old', { provenance: ['t1'] }), 1), hit(entry(7, 'new', { provenance: ['t7'] }), 1)] });
    const r = rankTiers([], lb, P);
    expect(r.items.map((x) => x.entry!.seq)).toEqual([7, 1]);
    // A slot scoring exactly as much as the turns: BM25 of "fern" over the one slot, as the hits' score.
    const lex = bm(idfOf(3, 1), 1, 2, 2);
    const lb2 = result({ size: 2, avgLength: 2, weight: new Map([['fern', 1]]), hits: [hit(entry(2, 'a', { provenance: ['t2'] }), lex), hit(entry(3, 'b', { provenance: ['t3'] }), lex)] });
    const r2 = rankTiers([slot('f', 'my fern', 'repotted')], lb2, P);
    expect(r2.items[0]!.score).toBe(r2.items[1]!.score);
    expect(r2.items.map((x) => x.source)).toEqual(['slot', 'logbook', 'logbook']);
    expect(r2.items[1]!.entry!.seq).toBe(3);
  });

  it('drops a slot or demoted value whose source turns all stand above it; a turn stays; history keeps all', () => {
    const t1 = entry(1, 'my fern is repotted', { provenance: ['t1'] });
    const dem = entry(0, 'repotted', { kind: 'capacity', provenance: ['t1'] });
    const t1b = entry(5, 'again', { provenance: ['t1'] });
    const lb = result({ hits: [hit(t1, 3), hit(dem, 2), hit(t1b, 1)] });
    expect(rankTiers([], lb, P).items.map((x) => x.id)).toEqual([t1.id, t1b.id]);
    expect(rankTiers([], lb, { ...P, history: true }).items.map((x) => x.id)).toEqual([t1.id, dem.id, t1b.id]);
    // A value with one source turn not yet carried stays.
    const dem2 = entry(0, 'repotted', { kind: 'capacity', provenance: ['t1', 't9'] });
    expect(rankTiers([], result({ hits: [hit(t1, 3), hit(dem2, 2)] }), P).items.map((x) => x.id)).toEqual([t1.id, dem2.id]);
  });

  it('leaves out items under minShare of the best of the top three, keeping the first and lifted ones', () => {
    const hs = [10, 8, 4, 2, 1.9].map((s, i) => hit(entry(i + 1, `x${i}`, { provenance: [`t${i + 1}`] }), s));
    const r = rankTiers([], result({ hits: hs }), { ...P, minShare: 0.2 });
    expect(r.items.map((x) => x.score)).toEqual([10, 8, 4, 2]);
    const k = rankTiers([], result({ hits: hs }), { ...P, minShare: 0.2, k: 2 });
    expect(k.items.map((x) => x.score)).toEqual([10, 8]);
    expect(rankTiers([], result({ hits: hs }), { ...P, minShare: 0 }).items).toHaveLength(5);
    // Every item below the floor but the first: the first always stays.
    const lone = rankTiers([], result({ hits: [hit(entry(1, 'a'), 0.001)] }), { ...P, minShare: 1 });
    expect(lone.items).toHaveLength(1);
    // A successor lifted above its replaced value stays though its own score is 0.
    const succ = entry(9, 'Friday', { id: 'new', kind: 'capacity', provenance: ['t9'] });
    const old = entry(2, 'Tuesday', { id: 'old', kind: 'superseded', provenance: ['t2'] });
    const top = entry(3, 'top', { provenance: ['t3'] });
    const lifted = rankTiers([], result({ hits: [hit(top, 10), hit(old, 5, { supersededBy: 'new' })], successors: new Map([['new', succ]]) }), { ...P, minShare: 0.1 });
    expect(lifted.items.map((x) => x.id)).toEqual([top.id, 'new', 'old']);
  });

  it('the floor uses the best of the first three places, not only the first', () => {
    // A lifted successor with score 0 on top: the floor comes from the items below it.
    const succ = entry(9, 'Friday', { id: 'new', kind: 'capacity', provenance: ['t9'] });
    const old = entry(2, 'Tuesday', { id: 'old', kind: 'superseded', provenance: ['t2'] });
    const rest = [3, 0.5].map((s, i) => hit(entry(i + 3, `y${i}`, { provenance: [`t${i + 3}`] }), s));
    const r = rankTiers([], result({ hits: [hit(old, 4, { supersededBy: 'new' }), ...rest], successors: new Map([['new', succ]]) }), { ...P, minShare: 0.2 });
    expect(r.items.map((x) => x.id)).toEqual(['new', 'old', rest[0]!.entry.id]);
  });

  it('calls a hit at coverage = hitCoverage and score = hitMargin × the next one\'s, not below either', () => {
    const two = (cov: number, s1: number, s2: number): boolean =>
      rankTiers([], result({ maxScore: 1, hits: [hit(entry(1, 'a', { provenance: ['t1'] }), s1, { lexical: cov }), hit(entry(2, 'b', { provenance: ['t2'] }), s2)] }), { ...P, hitCoverage: 0.5, hitMargin: 2 }).hit;
    expect(two(0.5, 2, 1)).toBe(true);
    expect(two(0.49, 2, 1)).toBe(false);
    expect(two(0.5, 1.99, 1)).toBe(false);
    // A lone top item needs only the coverage.
    expect(rankTiers([], result({ maxScore: 1, hits: [hit(entry(1, 'a'), 0.1, { lexical: 0.5 })] }), { ...P, hitCoverage: 0.5 }).hit).toBe(true);
    expect(rankTiers([], result(), P)).toEqual({ items: [], hit: false });
  });
});

describe('rankTiers: ambiguous updates', () => {
  const lb = (hits: LogbookHit[]): LogbookSearchResult => result({ hits, weight: new Map([['exam', 1]]) });

  it('stands just above each value it may replace and above the turn that stated it, placed "ambiguous"', () => {
    const said = entry(3, 'My exam is on the 14th', { provenance: ['t3'] });
    const elsewhere = entry(3, 'exam elsewhere', { provenance: ['t3'], session: 'other' });
    const exam = slot('exam', 'my exam', 'on the 14th', { provenance: ['t3'] });
    const moved = slot('mv', 'they moved it', 'to November', { provenance: ['t9'], maybeReplaces: ['exam', 'gone'] });
    const r = rankTiers([exam, moved], lb([hit(said, 5), hit(elsewhere, 4)]), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([['mv', 'ambiguous'], [said.id, 'score'], [elsewhere.id, 'score']]);
    // The turn of another session that shares the turn id is not one it is lifted over, nor does it
    // carry the slot's source turn (this session's t3 is another turn): the slot keeps its place.
    const only = rankTiers([moved, exam], lb([hit(elsewhere, 4)]), P);
    expect(only.items.map((x) => [x.id, x.placed])).toEqual([[elsewhere.id, 'score'], ['mv', 'ambiguous'], ['exam', 'score']]);
  });

  it('is not moved when it already stands above what it may replace', () => {
    const exam = slot('exam', 'my exam', 'on the 14th', { provenance: ['t3'] });
    const moved = slot('mv', 'my exam moved', 'exam to November', { provenance: ['t9'], maybeReplaces: ['exam'] });
    const r = rankTiers([exam, moved], lb([]), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([['mv', 'score'], ['exam', 'score']]);
  });

  it('with history the ranking is by score alone', () => {
    const said = entry(3, 'My exam is on the 14th', { provenance: ['t3'] });
    const exam = slot('exam', 'my exam', 'on the 14th', { provenance: ['t3'] });
    const moved = slot('mv', 'they moved it', 'to November', { provenance: ['t9'], maybeReplaces: ['exam'] });
    const r = rankTiers([exam, moved], lb([hit(said, 5)]), { ...P, history: true });
    expect(r.items.map((x) => x.id)).toEqual([said.id, 'exam']);
  });

  it('follows a chain of successors over more than one pass', () => {
    const a = entry(1, 'a', { id: 'a', provenance: ['t1'], kind: 'superseded' });
    const b = entry(2, 'b', { id: 'b', provenance: ['t2'], kind: 'superseded' });
    const c = entry(3, 'c', { id: 'c', provenance: ['t3'] });
    const r = rankTiers([], result({ hits: [hit(a, 3, { supersededBy: 'b' }), hit(b, 2, { supersededBy: 'c' }), hit(c, 1)] }), P);
    expect(r.items.map((x) => x.id)).toEqual(['c', 'b', 'a']);
  });
});

describe('rankTiers: precedence edge cases', () => {
  it('lifts a successor that is also a hit with its own score, once', () => {
    const old = entry(1, 'Tuesday', { id: 'old', kind: 'superseded', provenance: ['t1'] });
    const nw = entry(2, 'Friday', { id: 'new', kind: 'capacity', provenance: ['t2'] });
    const mid = entry(3, 'mid', { provenance: ['t3'] });
    const lb = result({ hits: [hit(old, 3, { supersededBy: 'new' }), hit(mid, 2), hit(nw, 1)], successors: new Map([['new', nw]]) });
    const r = rankTiers([], lb, P);
    expect(r.items.map((x) => [x.id, x.score, x.placed])).toEqual([['new', 1, 'successor'], ['old', 3, 'score'], [mid.id, 2, 'score']]);
  });

  it('brings a resolved successor in as a logbook item with no speaker match', () => {
    const succ = entry(9, 'service on Friday', { id: 'new', kind: 'capacity', provenance: ['t9'] });
    const old = entry(2, 'service on Tuesday', { id: 'old', kind: 'superseded', provenance: ['t2'] });
    const r = rankTiers([], result({ hits: [hit(old, 1, { supersededBy: 'new', speakerMatch: true })], successors: new Map([['new', succ]]) }), P);
    expect(r.items[0]).toMatchObject({ id: 'new', source: 'logbook', entry: succ, speakerMatch: false, lexical: 0, coverage: 0, lexicalRank: 0, denseRank: 0 });
  });

  it('with a dense list, leaves out a resolved successor nobody lifts, and hits with neither rank', () => {
    const succ = entry(9, 'Friday', { id: 'new', kind: 'capacity', provenance: ['t9'] });
    const t = entry(1, 'fern', { provenance: ['t1'] });
    const r = rankTiers([], result({ hits: [hit(t, 1)], successors: new Map([['new', succ]]) }), { ...P, denseWeight: 1 });
    expect(r.items.map((x) => x.id)).toEqual([t.id]);
  });

  it('ignores a successor id that names nothing it holds', () => {
    const old = entry(1, 'Tuesday', { id: 'old', kind: 'superseded', provenance: ['t1'] });
    const r = rankTiers([], result({ hits: [hit(old, 1, { supersededBy: 'ghost' })] }), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([['old', 'score']]);
  });

  it('leaves two values that name each other as successors in place, placed by score', () => {
    const a = entry(1, 'a', { id: 'a', provenance: ['t1'] });
    const b = entry(2, 'b', { id: 'b', provenance: ['t2'] });
    const loop = rankTiers([], result({ hits: [hit(a, 2, { supersededBy: 'b' }), hit(b, 1, { supersededBy: 'a' })] }), P);
    expect(loop.items.map((x) => [x.id, x.placed])).toEqual([['a', 'score'], ['b', 'score']]);
  });

  it('ends after its bounded passes on a longer successor cycle, each id once', () => {
    // a -> b -> c -> a: no pair names each other, so every pass moves something.
    const [a, b, c] = ['a', 'b', 'c'].map((id, i) => entry(i + 1, id, { id, provenance: [`t${i + 1}`] }));
    const r = rankTiers([], result({ hits: [hit(a!, 3, { supersededBy: 'b' }), hit(b!, 2, { supersededBy: 'c' }), hit(c!, 1, { supersededBy: 'a' })] }), P);
    expect(r.items.map((x) => x.id).sort()).toEqual(['a', 'b', 'c']);
    // The order four passes leave (one pass more or less would leave another).
    expect(r.items.map((x) => x.id)).toEqual(['b', 'a', 'c']);
  });

  it('ends after its bounded passes on two updates that may each replace the other', () => {
    const u1 = slot('u1', 'my lesson', 'moved to Monday', { provenance: ['t1'], maybeReplaces: ['u2'] });
    const u2 = slot('u2', 'my lesson', 'moved to Tuesday', { provenance: ['t2'], maybeReplaces: ['u1'] });
    const x = entry(5, 'lesson fees', { provenance: ['t5'] });
    const r = rankTiers([u1, u2], result({ hits: [hit(x, 0.01)], weight: new Map([['lesson', 1]]) }), { ...P, history: false });
    expect(r.items.map((i) => i.id).sort()).toEqual([x.id, 'u1', 'u2'].sort());
    expect(r.items.map((i) => i.id)).toEqual(['u2', 'u1', x.id]); // the order four passes leave
    expect(r.items.slice(0, 2).map((i) => i.placed)).toEqual(['ambiguous', 'ambiguous']);
  });

  it('does not move an ambiguous update none of whose older values is listed', () => {
    const u = slot('u', 'my lesson', 'moved', { provenance: ['t9'], maybeReplaces: ['gone'] });
    const t1 = entry(1, 'lesson one', { provenance: ['t1'] });
    const t2 = entry(2, 'lesson two', { provenance: ['t2'] });
    const r = rankTiers([u], result({ hits: [hit(t1, 100), hit(t2, 50)], weight: new Map([['lesson', 1]]) }), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([[t1.id, 'score'], [t2.id, 'score'], ['u', 'score']]);
  });

  it('brings in an unlisted ambiguous update above its older value, losing no other item', () => {
    const exam = slot('exam', 'my exam', 'on the 14th', { provenance: ['t3'] });
    const mv = slot('mv', 'they moved it', 'to November', { provenance: ['t9'], maybeReplaces: ['exam'] });
    const tail = entry(7, 'exam hall', { provenance: ['t7'] });
    const r = rankTiers([exam, mv], result({ hits: [hit(tail, 1e-6)], weight: new Map([['exam', 1]]) }), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([['mv', 'ambiguous'], ['exam', 'score'], [tail.id, 'score']]);
  });

  it('stands above the turn that stated the older value, not above a demoted value from the same turn', () => {
    const dem = entry(3, 'on the 14th', { kind: 'capacity', keyText: 'my exam', provenance: ['t3'] });
    const said = entry(3, 'My exam is on the 14th', { provenance: ['t3'] });
    const exam = slot('exam', 'my exam', 'on the 14th', { provenance: ['t3'] });
    const mv = slot('mv', 'they moved it', 'to November', { provenance: ['t9'], maybeReplaces: ['exam'] });
    const r = rankTiers([exam, mv], result({ hits: [hit(dem, 9), hit(said, 5)], weight: new Map([['exam', 1]]) }), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([[dem.id, 'score'], ['mv', 'ambiguous'], [said.id, 'score']]);
  });

  it('on equal scores keeps two slots in their order and puts the newer of two turns first either way round', () => {
    const twin = rankTiers([slot('s1', 'my fern', 'repotted'), slot('s2', 'my fern', 'repotted', { provenance: ['p-s2'] })], result({ weight: new Map([['fern', 1]]) }), P);
    expect(twin.items.map((x) => x.id)).toEqual(['s1', 's2']);
    const lb = result({ hits: [hit(entry(7, 'new', { provenance: ['t7'] }), 1), hit(entry(1, 'old', { provenance: ['t1'] }), 1)] });
    expect(rankTiers([], lb, P).items.map((x) => x.entry!.seq)).toEqual([7, 1]);
  });

  it('takes the floor from the first three places even when lifted successors hold them', () => {
    const chain = ['a', 'b', 'c'].map((id, i) => ({
      old: entry(i + 1, `old ${id}`, { id: `old-${id}`, kind: 'superseded' as const, provenance: [`t${id}`] }),
      succ: entry(10 + i, `new ${id}`, { id: `new-${id}`, kind: 'capacity' as const, provenance: [`t${id}`] }),
      score: 10 - i,
    }));
    const x = entry(20, 'x', { provenance: ['tx'] });
    const y = entry(21, 'y', { provenance: ['ty'] });
    const lb = result({
      hits: [...chain.map((c) => hit(c.old, c.score, { supersededBy: c.succ.id })), hit(x, 5), hit(y, 1)],
      successors: new Map(chain.map((c) => [c.succ.id, c.succ])),
    });
    const r = rankTiers([], lb, { ...P, minShare: 0.5 });
    // Each old value's one source turn is carried by its successor, so it gives way; the three
    // successors (score 0) hold the first places and the floor is 0.5 × 0: x and y both stay.
    expect(r.items.map((i) => i.id)).toEqual(['new-a', 'new-b', 'new-c', x.id, y.id]);
  });
});
