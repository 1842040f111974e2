// BM25 at its edges: the IDF of an unseen term, documents of length zero, an output array that held
// old scores, and postings kept in step one document at a time (they must equal postings built
// afresh, so a read after a slot changes scores as a fresh read would).

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import {
  BM25_DEFAULTS, bm25Idf, bm25Scores, bm25ScoresFrom, bm25Term, docStats, postingsInsert, postingsOf, postingsRemove, type DocStats,
} from '../../src/memory/bm25.js';

describe('bm25Idf and bm25Term', () => {
  // Outside check: Robertson & Zaragoza (2009) with the +1 inside the log as Lucene's BM25Similarity
  // writes it: idf = ln(1 + (N - n + 0.5) / (n + 0.5)) (from memory).
  it('gives the non-negative IDF, 0 for a term no document holds', () => {
    expect(bm25Idf(10, 1)).toBeCloseTo(Math.log(1 + 9.5 / 1.5), 15);
    expect(bm25Idf(10, 10)).toBeCloseTo(Math.log(1 + 0.5 / 10.5), 15);
    expect(bm25Idf(10, 10)).toBeGreaterThan(0);
    expect(bm25Idf(10, 0)).toBe(0);
    expect(bm25Idf(0, 0)).toBe(0);
  });

  it('is idf * tf * (k1 + 1) / (tf + k1 * (1 - b + b * len / avg))', () => {
    expect(bm25Term(2, 3, 10, 5, 1.2, 0.75)).toBeCloseTo((2 * 3 * 2.2) / (3 + 1.2 * (0.25 + 0.75 * 2)), 15);
    expect(bm25Term(1, 1, 4, 4, 1.2, 0.75)).toBeCloseTo(2.2 / 2.2, 15);
    // An average length of 0 counts as 1, not as a division by zero.
    expect(bm25Term(1, 1, 2, 0, 1, 1)).toBeCloseTo(2 / 3, 15);
  });
});

describe('bm25Scores edge cases', () => {
  it('overwrites what the output array held, also when it returns early', () => {
    const out = new Float64Array([7, 7, 7]);
    bm25Scores(['fern'], [docStats(['fern']), null, docStats(['pot'])], out);
    expect(out[1]).toBe(0);
    expect(out[2]).toBe(0);
    expect(out[0]).toBeGreaterThan(0);
    const early = new Float64Array([7, 7]);
    bm25Scores([], [docStats(['fern']), null], early);
    expect([...early]).toEqual([0, 0]);
    const none = new Float64Array([7]);
    bm25Scores(['fern'], [null], none);
    expect([...none]).toEqual([0]);
    const from = new Float64Array([7, 7]);
    bm25ScoresFrom([], postingsOf([docStats(['fern']), null]), from);
    expect([...from]).toEqual([0, 0]);
  });

  it('scores documents of length zero with an average length of 1', () => {
    const out = new Float64Array(2);
    // Two empty documents: no term matches, every score 0 and nothing NaN.
    bm25Scores(['fern'], [docStats([]), docStats([])], out);
    expect([...out]).toEqual([0, 0]);
  });

  it('uses k1 1.2 and b 0.75 by default', () => {
    expect(BM25_DEFAULTS).toEqual({ k1: 1.2, b: 0.75 });
    const docs = [docStats(['fern', 'pot', 'pot']), docStats(['fern'])];
    const a = new Float64Array(2);
    const b = new Float64Array(2);
    bm25Scores(['pot'], docs, a);
    bm25ScoresFrom(['pot'], postingsOf(docs), b);
    // avg 2, doc 0: tf 2, len 3, df 1 of 2.
    const want = (Math.log(1 + 1.5 / 1.5) * 2 * 2.2) / (2 + 1.2 * (0.25 + (0.75 * 3) / 2));
    expect(a[0]).toBeCloseTo(want, 15);
    expect(b[0]).toBeCloseTo(want, 15);
  });
});

describe('postings kept in step', () => {
  it('removes a document from every list it was on, dropping lists that empty', () => {
    const d0 = docStats(['fern', 'pot']);
    const d1 = docStats(['fern', 'soil', 'soil']);
    const post = postingsOf([d0, d1]);
    expect([post.n, post.total]).toEqual([2, 5]);
    expect(post.byTerm.get('fern')).toEqual([0, 1]);
    postingsRemove(post, 1, d1);
    expect([post.n, post.total]).toEqual([1, 2]);
    expect(post.byTerm.get('fern')).toEqual([0]);
    expect(post.byTerm.has('soil')).toBe(false);
    expect(post.byTerm.get('pot')).toEqual([0]);
  });

  it('inserts a document into each list in ascending place, starting a list for a new term', () => {
    const docs: Array<DocStats | null> = [docStats(['fern']), null, docStats(['fern']), docStats(['fern'])];
    const post = postingsOf(docs);
    const d1 = docStats(['fern', 'moss']);
    docs[1] = d1;
    postingsInsert(post, 1, d1);
    expect(post.byTerm.get('fern')).toEqual([0, 1, 2, 3]);
    expect(post.byTerm.get('moss')).toEqual([1]);
    expect([post.n, post.total]).toEqual([4, 5]);
    const d4 = docStats(['fern']);
    docs.push(d4);
    postingsInsert(post, 4, d4);
    expect(post.byTerm.get('fern')).toEqual([0, 1, 2, 3, 4]);
  });

  it('after any sequence of changes, scores as postings built afresh (fast-check, seed 33)', () => {
    const words = fc.constantFrom('fern', 'pot', 'soil', 'moss', 'sill', 'lesson');
    const doc = fc.option(fc.array(words, { minLength: 1, maxLength: 5 }), { nil: null });
    console.log('fast-check seed 33');
    fc.assert(
      fc.property(fc.array(doc, { minLength: 1, maxLength: 8 }), fc.array(fc.tuple(fc.nat(), doc), { maxLength: 12 }), fc.array(words, { minLength: 1, maxLength: 3 }), (start, changes, query) => {
        const docs: Array<DocStats | null> = start.map((d) => (d ? docStats(d) : null));
        const post = postingsOf(docs);
        for (const [at, d] of changes) {
          const i = at % docs.length;
          const old = docs[i];
          if (old) postingsRemove(post, i, old);
          docs[i] = d ? docStats(d) : null;
          if (docs[i]) postingsInsert(post, i, docs[i]!);
        }
        const fresh = postingsOf(docs);
        expect([post.n, post.total]).toEqual([fresh.n, fresh.total]);
        expect(new Map([...post.byTerm].sort())).toEqual(new Map([...fresh.byTerm].sort()));
        const got = new Float64Array(docs.length);
        const want = new Float64Array(docs.length);
        bm25ScoresFrom(query, post, got);
        bm25Scores(query, docs, want);
        expect([...got]).toEqual([...want]);
      }),
      { seed: 33, numRuns: 300 },
    );
  });
});
