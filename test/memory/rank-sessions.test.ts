// Turn ids belong to a session ("t3" is generated in every session), so in a user's scope, where the
// logbook holds the turns of all the user's sessions, a source turn is its session and its id: another
// session's turn t3 above a slot from this session's t3 says nothing about that slot.

import { describe, expect, it } from 'vitest';
import { LOGBOOK_SEARCH_DEFAULTS, type LogbookHit, type LogbookSearchResult } from '../../src/logbook/index.js';
import { rankTiers, type RankParams, type SlotCandidate } from '../../src/memory/rank.js';
import type { LogbookEntry } from '../../src/types.js';

const P: RankParams = {
  k: 8, session: 'today', provenanceWeight: 0, othersWeight: 1, recencyBoost: 0, recencyHalfLife: 20, slotPrior: 0, denseWeight: 0, rrfK: 60,
  hitCoverage: 0.3, hitMargin: 1.3, hitCosine: 0.5, history: false, minShare: 0, search: LOGBOOK_SEARCH_DEFAULTS,
};
const turn = (id: string, session: string, value: string, provenance: string): LogbookEntry => ({
  id, kind: 'turn', tenant: 't', session, user: 'u', value, keyText: '', provenance: [provenance], role: 'user', atMs: 1, createdMs: 1, clock: 1, seq: 1,
});
const hit = (e: LogbookEntry, score: number): LogbookHit => ({
  entry: e, score, lexical: score, context: 0, coverage: 0, cosine: Number.NaN, lexicalRank: 0, denseRank: 0, speakerMatch: false,
});
const result = (hits: LogbookHit[]): LogbookSearchResult => ({
  hits, size: 10, avgLength: 5, idf: new Map(), df: new Map([['lesson', 2]]), weight: new Map([['lesson', 1]]), maxScore: 10, speakers: [], successors: new Map(),
});
// A language tutor's booking: this session's slot, written from this session's turn t3.
const slot: SlotCandidate = { slot: 0, id: 'r1', keyText: 'my lesson', value: 'Thursday at 5', provenance: ['t3'], strength: 1, cosine: 0, weight: 0 };

describe('one place per source turn, across a user\'s sessions', () => {
  it('keeps a slot below another session\'s turn of the same id', () => {
    const elsewhere = turn('E1', 'last-week', 'my lesson lesson lesson moved again', 't3');
    const r = rankTiers([slot], result([hit(elsewhere, 9)]), P);
    expect(r.items.map((x) => x.id)).toEqual(['E1', 'r1']);
  });

  it('still drops a slot below its own source turn in this session', () => {
    const own = turn('E2', 'today', 'my lesson lesson lesson is on Thursday at 5', 't3');
    const r = rankTiers([slot], result([hit(own, 9)]), P);
    expect(r.items.map((x) => x.id)).toEqual(['E2']);
  });
});
