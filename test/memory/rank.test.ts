// One ranking over both tiers: slots scored with the logbook's BM25 statistics, reciprocal rank fusion
// of lexical and dense lists (Cormack, Clarke & Buettcher 2009: 1 / (k + rank)), precedence (a
// superseded value or a turn that stated it never above its successor; an ambiguous update just above
// what it may replace), one place per source turn, and the calibrated hit.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { LOGBOOK_SEARCH_DEFAULTS, LogbookIndex, type LogbookSearchResult } from '../../src/logbook/index.js';
import { analyseQuery } from '../../src/logbook/query.js';
import { rankTiers, scoreSlots, type RankParams, type SlotCandidate } from '../../src/memory/rank.js';
import type { LogbookEntry } from '../../src/types.js';

const P: RankParams = {
  k: 8, session: 's', provenanceWeight: 0, othersWeight: 1, recencyBoost: 0, recencyHalfLife: 20, slotPrior: 0, denseWeight: 0, rrfK: 60,
  hitCoverage: 0.3, hitMargin: 1.3, hitCosine: 0.5, history: false, minShare: 0, search: LOGBOOK_SEARCH_DEFAULTS,
};
const slot = (id: string, keyText: string, value: string, over: Partial<SlotCandidate> = {}): SlotCandidate => ({
  slot: 0, id, keyText, value, provenance: [`p-${id}`], strength: 1, cosine: 0, weight: 0, age: 0, ...over,
});
let n = 0;
const turn = (seq: number, value: string, over: Partial<LogbookEntry> = {}): LogbookEntry => ({
  id: `T${++n}`, kind: 'turn', tenant: 't', session: 's', value, keyText: '', provenance: [`t${seq}`], role: 'user', atMs: seq, createdMs: seq, clock: seq, seq, ...over,
});
function search(entries: LogbookEntry[], query: string): LogbookSearchResult {
  const idx = new LogbookIndex();
  for (const e of entries) idx.add(e);
  return idx.search(analyseQuery(query, 0), LOGBOOK_SEARCH_DEFAULTS);
}

describe('scoreSlots', () => {
  it('scores a slot on the union of both tiers: a topic word no turn said is the rarest, not worthless', () => {
    const lb = search([turn(1, 'My mobile is 07700 900123.'), turn(2, 'See you soon.')], 'What is my phone number?');
    expect(lb.df.get('phone')).toBe(0); // no turn says "phone"
    expect(lb.idf.get('phone')).toBe(0);
    const { scores, maxScore } = scoreSlots([slot('a', 'my phone number (mobile)', '07700 900123'), slot('b', 'my name', 'Dana')], lb, LOGBOOK_SEARCH_DEFAULTS);
    expect(scores[0]!.lexical).toBeGreaterThan(0);
    expect(scores[1]!.lexical).toBe(0);
    // N = 2 turns + 2 slots; "phone" and "number" are each in one document of the four.
    const idf = Math.log(1 + 3.5 / 1.5);
    expect(maxScore).toBeCloseTo(2 * idf, 12);
  });
});

describe('rankTiers', () => {
  it('ranks slots and turns on one lexical scale; the slot prior and recency lift working memory', () => {
    const lb = search([turn(1, 'I might get a kayak one day.'), turn(2, 'The kayak club meets on Fridays.')], 'kayak club');
    const s = [slot('k', 'my kayak', 'a red Tidewell kayak')];
    const flat = rankTiers(s, lb, P);
    expect(flat.items[0]!.entry?.seq).toBe(2);
    const lifted = rankTiers(s, lb, { ...P, slotPrior: 0, recencyBoost: 9 });
    expect(lifted.items[0]!.id).toBe('k');
    const old = rankTiers([{ ...s[0]!, age: 200 }], lb, { ...P, recencyBoost: 9 });
    expect(old.items[0]!.entry?.seq).toBe(2); // 2^-10 of a boost is nothing
  });

  it('a superseded value, and the turn that said it, never stand above the current value', () => {
    const said = turn(1, 'Can I book a service for Tuesday?');
    const sup: LogbookEntry = { ...turn(0, 'book a service for Tuesday'), id: 'old', kind: 'superseded', keyText: 'my booking (service)', provenance: ['t1'], successor: 'new', seq: 0 };
    const lb = search([said, turn(2, 'Actually, make it Friday.'), sup], 'Is my service still on Tuesday?');
    const current = slot('new', 'my booking (service)', 'book a service for Friday', { provenance: ['t2', 't1'] });
    const r = rankTiers([current], lb, P);
    const ids = r.items.map((x) => x.id);
    expect(ids[0]).toBe('new');
    expect(r.items[0]!.placed).toBe('successor'); // it scored below them and was lifted
    expect(ids).not.toContain('old'); // its one source turn is already carried by the successor
    expect(ids.indexOf(said.id)).toBeGreaterThan(0);
    // Asking for history: everything by its own score, no lifting, nothing left out.
    const h = rankTiers([current], lb, { ...P, history: true });
    expect(h.items[0]!.id).not.toBe('new');
    expect(h.items.map((x) => x.id)).toContain('old');
  });

  it('an ambiguous update stands just above each value it may replace, and above the turns that said them', () => {
    const exam = slot('exam', 'my exam', 'on the 14th of October', { provenance: ['t3'] });
    const wedding = slot('wed', "my friend's wedding", 'on the 18th of October', { provenance: ['t5'] });
    const moved = slot('mv', 'they moved it', "They moved it, it's in November instead.", { provenance: ['t9'], maybeReplaces: ['wed', 'exam'] });
    const lb = search([turn(3, 'My exam is on the 14th of October.'), turn(5, "My friend's wedding is on the 18th of October."), turn(9, "They moved it, it's in November instead.")], 'When is my exam?');
    const r = rankTiers([exam, wedding, moved], lb, P);
    const ids = r.items.map((x) => x.id);
    expect(ids.indexOf('mv')).toBeLessThan(ids.indexOf('exam'));
    const examTurn = r.items.find((x) => x.entry?.seq === 3);
    expect(examTurn).toBeDefined(); // the turn that stated the exam date is recalled too
    expect(ids.indexOf('mv')).toBeLessThan(r.items.indexOf(examTurn!));
    expect(r.items.find((x) => x.id === 'mv')!.placed).toBe('ambiguous');
  });

  it('fuses a dense list by reciprocal rank: 1 / (60 + lexical rank) + w / (60 + dense rank)', () => {
    const lb = search([turn(1, 'the pottery wheel'), turn(2, 'the pottery kiln')], 'pottery');
    const s = [slot('a', 'my hobby', 'throwing clay', { cosine: 0.9 }), slot('b', 'my pet', 'a cat', { cosine: 0.1 })];
    const r = rankTiers(s, lb, { ...P, denseWeight: 1 });
    const a = r.items.find((x) => x.id === 'a')!;
    expect(a.lexicalRank).toBe(0);
    expect(a.denseRank).toBe(1);
    expect(a.score).toBeCloseTo(1 / 61, 12);
    const t2 = r.items.find((x) => x.entry?.seq === 2)!;
    expect(t2.score).toBeCloseTo(1 / (60 + t2.lexicalRank), 12);
  });

  it('leaves out an earlier asking of the same question, and a slot whose source turn ranks above it', () => {
    const lb = search([turn(1, 'When is my booking?'), turn(2, 'My booking is on Friday the 9th.')], 'When is my booking?');
    const r = rankTiers([slot('b', 'my booking', 'Friday the 9th', { provenance: ['t2'] })], lb, { ...P, query: 'When is my booking?' });
    expect(r.items.map((x) => x.entry?.seq ?? x.id)).not.toContain(1);
  });

  it('calls a hit only for a top item that covers the query and stands clear of the next (fast-check)', () => {
    fc.assert(
      fc.property(fc.array(fc.constantFrom('kayak', 'paddle', 'river', 'club', 'hello there', 'Friday'), { minLength: 1, maxLength: 6 }), fc.constantFrom('kayak club', 'river paddle', 'nothing at all'), (texts, q) => {
        const lb = search(texts.map((t, i) => turn(i + 1, t)), q);
        const r = rankTiers([], lb, P);
        const top = r.items[0];
        const next = r.items[1];
        expect(r.hit).toBe(top !== undefined && top.coverage >= P.hitCoverage && (next === undefined || top.score >= P.hitMargin * next.score));
        expect(r.items.length).toBeLessThanOrEqual(P.k);
        // One place per source turn.
        const prov = r.items.flatMap((x) => x.entry!.provenance);
        expect(new Set(prov).size).toBe(prov.length);
      }),
      { seed: 7, numRuns: 80 },
    );
  });
});
