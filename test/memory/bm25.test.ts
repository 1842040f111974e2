// Okapi BM25 over slot text: exact values by hand on a three-document corpus, then the same scores
// from two independent BM25 packages of the npm registry on a larger corpus.

import * as okapi from 'okapibm25';
import winkBm25 from 'wink-bm25-text-search';
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { BM25_DEFAULTS, bm25Scores, bm25ScoresFrom, docStats, postingsOf } from '../../src/memory/bm25.js';
import { contentWords } from '../../src/memory/text.js';

const score = (query: string[], docs: Array<string[] | null>, p = BM25_DEFAULTS): number[] => {
  const out = new Float64Array(docs.length);
  bm25Scores(query, docs.map((d) => (d ? docStats(d) : null)), out, p);
  return [...out];
};

describe('bm25Scores by hand', () => {
  // N = 3 documents, total length 10, average length 10/3; k1 = 1.2, b = 0.75.
  const docs = [
    ['corvane', 'green', 'bike'],
    ['service', 'tuesday', 'bike', 'bike'],
    ['chain', 'wax', 'allergy'],
  ];
  const idfBike = Math.log(1 + (3 - 2 + 0.5) / (2 + 0.5)); // df 2: ln 1.6
  const idfTuesday = Math.log(1 + (3 - 1 + 0.5) / (1 + 0.5)); // df 1: ln (8/3)

  it('matches the Robertson–Zaragoza formula with the non-negative (Lucene) IDF', () => {
    const s = score(['bike', 'tuesday'], docs);
    // d0: tf 1, |d| 3: K = 1.2 * (0.25 + 0.75 * 3 / (10/3)) = 1.11
    expect(s[0]).toBeCloseTo((idfBike * 2.2) / (1 + 1.11), 12);
    // d1: |d| 4: K = 1.2 * (0.25 + 0.75 * 4 / (10/3)) = 1.38; bike tf 2, tuesday tf 1
    expect(s[1]).toBeCloseTo((idfBike * 2 * 2.2) / (2 + 1.38) + (idfTuesday * 2.2) / (1 + 1.38), 12);
    expect(s[2]).toBe(0);
    expect(idfBike).toBeCloseTo(Math.log(1.6), 15);
    expect(idfTuesday).toBeCloseTo(Math.log(8 / 3), 15);
  });

  it('counts a repeated query term once and ignores terms no document has', () => {
    expect(score(['bike', 'bike', 'tuesday', 'saddle'], docs)).toEqual(score(['bike', 'tuesday'], docs));
  });

  it('treats null documents (free slots) as absent: they score 0 and do not change N or the average length', () => {
    const withGaps = score(['bike', 'tuesday'], [docs[0]!, null, docs[1]!, null, docs[2]!]);
    const dense = score(['bike', 'tuesday'], docs);
    expect(withGaps).toEqual([dense[0], 0, dense[1], 0, dense[2]]);
  });

  it('gives all zeros for an empty query or an empty corpus', () => {
    expect(score([], docs)).toEqual([0, 0, 0]);
    expect(score(['bike'], [null, null])).toEqual([0, 0]);
  });

  it('honours k1 and b: b = 0 removes length normalisation', () => {
    const s = score(['bike'], docs, { k1: 2, b: 0 });
    expect(s[0]).toBeCloseTo((idfBike * 1 * 3) / (1 + 2), 12);
    expect(s[1]).toBeCloseTo((idfBike * 2 * 3) / (2 + 2), 12);
  });
});

// A small invented corpus (bike workshop), tokenised once with tidemark's own tokenizer so all three
// implementations see the same tokens. Terms are chosen so that none is a substring of another token:
// okapibm25 counts term frequency with a substring regex and document frequency with includes().
const corpus = [
  'my name is Dana Whitfield',
  'my bike is a green Corvane with a basket and a Corvane bag',
  'book a service for Tuesday morning',
  'I am allergic to chain wax, so please use dry lube',
  'the rear brake squeaks when it rains and the front brake rubs',
  'my daughter rides a red Corvane to school',
  'service the gears and the brake cables',
].map((t) => contentWords(t));
const queries = [
  ['corvane'],
  ['brake', 'service'],
  ['tuesday', 'service', 'corvane'],
  ['wax', 'lube', 'allergic'],
  ['dana', 'whitfield', 'school', 'gears'],
];

describe('bm25Scores against independent implementations', () => {
  it('has a corpus where no query term is a substring of another token (precondition of the okapibm25 check)', () => {
    const tokens = new Set(corpus.flat());
    for (const q of queries) for (const term of q) for (const t of tokens) if (t !== term) expect(t.includes(term), `${term} in ${t}`).toBe(false);
  });

  // Outside check: okapibm25 1.4.1 (npm), src BM25.ts — IDF ln((N - n + 0.5) / (n + 0.5) + 1), k1 1.2,
  // b 0.75, the same variant as ours, so scores must agree to floating-point precision.
  it('agrees with okapibm25 score for score', () => {
    const BM25 = okapi.default as unknown as (docs: string[], keywords: string[], c?: { k1?: number; b?: number }) => number[];
    const docs = corpus.map((d) => d.join(' '));
    for (const q of queries) {
      const theirs = BM25(docs, q, { k1: 1.2, b: 0.75 });
      const ours = score(q, corpus);
      for (let i = 0; i < corpus.length; i++) expect(ours[i]).toBeCloseTo(theirs[i]!, 12);
    }
    // And with other parameters (okapibm25 treats 0 as "unset", so both stay non-zero here).
    const theirs = BM25(docs, ['brake', 'service'], { k1: 2, b: 0.5 });
    const ours = score(['brake', 'service'], corpus, { k1: 2, b: 0.5 });
    for (let i = 0; i < corpus.length; i++) expect(ours[i]).toBeCloseTo(theirs[i]!, 12);
  });

  // Outside check: wink-bm25-text-search 3.1.2 (npm), src/wink-bm25-text-search.js — BM25F with one
  // field of weight 1 is plain BM25; its IDF ln((N - n + 0.5) / (n + 0.5) + k) with k = 1 is ours. It
  // rounds each term's contribution to `fp` decimals (fp = 9 here) and sums repeated query tokens, so
  // queries use distinct terms and scores agree to about 1e-8.
  it('agrees with wink-bm25-text-search score for score and in ranking', () => {
    const engine = winkBm25();
    engine.defineConfig({ fldWeights: { body: 1 }, bm25Params: { k1: 1.2, b: 0.75, k: 1 } });
    engine.definePrepTasks([(s: string) => s.split(' ')]);
    corpus.forEach((d, i) => engine.addDoc({ body: d.join(' ') }, String(i)));
    engine.consolidate(9);
    for (const q of queries) {
      const theirs = engine.search(q.join(' '), corpus.length);
      const ours = score(q, corpus);
      expect(theirs.length).toBe(ours.filter((s) => s > 0).length);
      for (const [id, s] of theirs) expect(ours[Number(id)]).toBeCloseTo(s, 7);
      const ourRank = ours.map((s, i) => [i, s] as const).filter(([, s]) => s > 0).sort((a, b) => b[1] - a[1]).map(([i]) => String(i));
      expect(theirs.map(([id]) => id)).toEqual(ourRank);
    }
  });
});

describe('bm25ScoresFrom (postings built once per set of documents)', () => {
  it('equals bm25Scores bit for bit on random documents and queries (fast-check, seed 21)', () => {
    const words = fc.constantFrom('bike', 'chain', 'fern', 'pot', 'friday', 'lesson', 'saddle', 'green');
    console.log('fast-check seed 21');
    fc.assert(
      fc.property(fc.array(fc.option(fc.array(words, { minLength: 1, maxLength: 8 }), { nil: null }), { maxLength: 12 }), fc.array(words, { maxLength: 5 }), (docs, query) => {
        const stats = docs.map((d) => (d ? docStats(d) : null));
        const want = new Float64Array(docs.length);
        const got = new Float64Array(docs.length);
        bm25Scores(query, stats, want);
        bm25ScoresFrom(query, postingsOf(stats), got);
        expect([...got]).toEqual([...want]);
      }),
      { seed: 21, numRuns: 500 },
    );
  });
});
