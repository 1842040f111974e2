// An ambiguous update is lifted over the turn that stated the value it may replace, and over nothing
// else: not over a demoted value from that turn, nor over another turn of the session.

import { describe, expect, it } from 'vitest';
import { LOGBOOK_SEARCH_DEFAULTS, type LogbookHit, type LogbookSearchResult } from '../../src/logbook/index.js';
import { rankTiers, type RankParams, type SlotCandidate } from '../../src/memory/rank.js';
import type { LogbookEntry } from '../../src/types.js';

const P: RankParams = {
  k: 8, session: 's', provenanceWeight: 0, othersWeight: 1, recencyBoost: 0, recencyHalfLife: 20, slotPrior: 0, denseWeight: 0, rrfK: 60,
  hitCoverage: 0.3, hitMargin: 1.3, hitCosine: 0.5, history: false, minShare: 0, search: LOGBOOK_SEARCH_DEFAULTS,
};
const slot = (id: string, keyText: string, value: string, over: Partial<SlotCandidate> = {}): SlotCandidate => ({
  slot: 0, id, keyText, value, provenance: [`p-${id}`], strength: 1, cosine: 0, weight: 0, ...over,
});
const entry = (id: string, seq: number, value: string, over: Partial<LogbookEntry> = {}): LogbookEntry => ({
  id, kind: 'turn', tenant: 't', session: 's', value, keyText: '', provenance: [`t${seq}`], role: 'user', atMs: seq, createdMs: seq, clock: seq, seq, ...over,
});
const hit = (e: LogbookEntry, score: number): LogbookHit => ({
  entry: e, score, lexical: score, context: 0, coverage: 0, cosine: Number.NaN, lexicalRank: 0, denseRank: 0, speakerMatch: false,
});
const result = (hits: LogbookHit[]): LogbookSearchResult => ({
  hits, size: 0, avgLength: 0, idf: new Map(), df: new Map(), weight: new Map([['exam', 1]]), maxScore: 0, speakers: [], successors: new Map(),
});

describe('rankTiers: what an ambiguous update stands above', () => {
  it('the turn that stated the older value, not a demoted value of that turn or another turn of the session', () => {
    const dem = entry('dem', 3, 'on the 14th', { kind: 'capacity', keyText: 'my exam' });
    const other = entry('fees', 4, 'the exam fees are due');
    const said = entry('said', 3, 'My exam is on the 14th');
    const exam = slot('exam', 'my exam', 'on the 14th', { provenance: ['t3'] });
    const mv = slot('mv', 'they moved it', 'to November', { provenance: ['t9'], maybeReplaces: ['exam'] });
    const r = rankTiers([exam, mv], result([hit(dem, 9), hit(other, 7), hit(said, 5)]), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([['dem', 'score'], ['fees', 'score'], ['mv', 'ambiguous'], ['said', 'score']]);
  });
});

describe('rankTiers: an ambiguous update lifted again as a successor', () => {
  // F was replaced by A, A by the live slot B, and B may replace the turn G. Pass one lifts A over F
  // and places B over G ("ambiguous"); pass two lifts B over A. B keeps the reason it was first placed
  // for: only an item standing by its score becomes a "successor".
  it('keeps "ambiguous" when a later pass lifts it over the value it replaced', () => {
    const f = entry('F', 1, 'exam in June', { kind: 'superseded', keyText: 'my exam' });
    const a = entry('A', 2, 'exam in July', { kind: 'superseded', keyText: 'my exam' });
    const g = entry('G', 3, 'the exam room is B4');
    const b = slot('B', 'they moved it', 'to November', { maybeReplaces: ['G'] });
    const r = rankTiers([b], result([{ ...hit(f, 9), supersededBy: 'A' }, hit(g, 5), { ...hit(a, 2), supersededBy: 'B' }]), P);
    expect(r.items.map((x) => [x.id, x.placed])).toEqual([['B', 'ambiguous'], ['A', 'successor'], ['F', 'score'], ['G', 'score']]);
  });
});

describe('rankTiers: word counts cached per revision id', () => {
  // A revision id seen again with another key or value (another store, a test) is counted afresh.
  it('counts the words of a slot again when its key or its value is not the one counted', () => {
    const ids = (slots: SlotCandidate[]) => rankTiers(slots, result([]), P).items.map((x) => x.id);
    expect(ids([slot('rev-1', 'my exam', 'on the 14th')])).toEqual(['rev-1']);
    expect(ids([slot('rev-1', 'my bike', 'on the 14th')])).toEqual([]);
    expect(ids([slot('rev-1', 'my bike', 'an exam bike')])).toEqual(['rev-1']);
    expect(ids([slot('rev-1', 'my bike', 'a red Corvane')])).toEqual([]);
  });
});
