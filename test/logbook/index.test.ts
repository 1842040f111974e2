// The logbook's index: its BM25 is the one checked against two independent implementations in
// test/memory/bm25.test.ts (bm25Scores, Robertson & Zaragoza 2009), kept incrementally through adds
// and removals; each turn takes a share of its neighbours' scores; a person's name in the query lifts
// that person's own turns instead of matching greetings; resolved dates match; a turn that stated
// a superseded value points at the current one.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { LOGBOOK_SEARCH_DEFAULTS, LogbookIndex, bm25Idf, gallop, type LogbookSearchParams } from '../../src/logbook/index.js';
import { analyseQuery } from '../../src/logbook/query.js';
import { bm25Scores, docStats } from '../../src/memory/bm25.js';
import { analyze } from '../../src/memory/text.js';
import { pushTopK } from '../../src/memory/vector.js';
import type { LogbookEntry } from '../../src/types.js';

const AT = Date.parse('2025-06-11T18:00:00Z');
let n = 0;
function turn(session: string, seq: number, value: string, over: Partial<LogbookEntry> = {}): LogbookEntry {
  return {
    id: `e${++n}`, kind: 'turn', tenant: 't', session, value, keyText: '', provenance: [`${session}-${seq}`], role: 'user',
    atMs: AT + seq * 60_000, createdMs: AT + seq * 60_000, clock: seq, seq, ...over,
  };
}

/** Plain BM25 only: no neighbours, speakers, dates, replies or questions. */
const PLAIN: LogbookSearchParams = { ...LOGBOOK_SEARCH_DEFAULTS, neighbourWeight: 0, speakerBoost: 0, nameWeight: 1, temporalBoost: 0, replyWeight: 1, questionWeight: 1, limit: 1000 };
const q = (text: string) => analyseQuery(text, AT + 86_400_000);
const ranked = (idx: LogbookIndex, text: string, p: LogbookSearchParams = LOGBOOK_SEARCH_DEFAULTS) =>
  idx.search(q(text), p).hits.sort((a, b) => b.score - a.score || b.entry.seq - a.entry.seq);

const TEXTS = [
  'We adopted a puppy two weeks ago, she is a beagle mix.',
  'The pottery class on Thursday was brilliant, I made a wonky bowl.',
  'My sister Ana just started nursing school in Fellbrook.',
  'I painted the garden fence green over the weekend.',
  'Biscuit chewed through the garden hose again!',
  'Thinking of taking a pottery course at the community centre.',
  'The beagle next door barks at every painted fence.',
];

describe('LogbookIndex BM25', () => {
  it('scores each entry as bm25Scores does on the same analysed texts (which two npm BM25s confirm)', () => {
    const idx = new LogbookIndex();
    TEXTS.forEach((t, i) => idx.add(turn('s', i + 1, t)));
    for (const query of ['pottery class', 'beagle puppy', 'painted fence garden', 'Ana nursing school Fellbrook', 'nothing matches zzz']) {
      const want = new Float64Array(TEXTS.length);
      bm25Scores([...new Set(analyze(query))], TEXTS.map((t) => docStats(analyze(t))), want);
      const r = idx.search(q(query), PLAIN);
      const got = new Map(r.hits.map((h) => [h.entry.seq, h.lexical]));
      TEXTS.forEach((_, i) => expect(got.get(i + 1) ?? 0, `${query} / doc ${i + 1}`).toBeCloseTo(want[i]!, 12));
      // Coverage is the entry's score over the sum of the query terms' IDF.
      const max = [...r.idf.values()].reduce((a, b) => a + b, 0);
      for (const h of r.hits) expect(h.coverage).toBeCloseTo(h.lexical / max, 12);
    }
    expect(bm25Idf(7, 2)).toBeCloseTo(Math.log(1 + 5.5 / 2.5), 15);
  });

  it('after removals scores exactly as an index built from the survivors (fast-check)', () => {
    fc.assert(
      fc.property(fc.array(fc.boolean(), { minLength: TEXTS.length, maxLength: TEXTS.length }), fc.constantFrom('pottery', 'beagle fence', 'garden'), (drop, query) => {
        const full = new LogbookIndex();
        const ids = TEXTS.map((t, i) => {
          const e = turn('s', i + 1, t);
          full.add(e);
          return e;
        });
        const fresh = new LogbookIndex();
        ids.forEach((e, i) => (drop[i] ? full.remove(e.id) : fresh.add(e)));
        expect(full.size).toBe(fresh.size);
        const a = full.search(q(query), PLAIN).hits.map((h) => [h.entry.id, h.lexical]).sort();
        const b = fresh.search(q(query), PLAIN).hits.map((h) => [h.entry.id, h.lexical]).sort();
        expect(a.length).toBe(b.length);
        a.forEach((x, i) => {
          expect(x[0]).toBe(b[i]![0]);
          expect(x[1] as number).toBeCloseTo(b[i]![1] as number, 12);
        });
      }),
      { seed: 11, numRuns: 60 },
    );
  });

  it('a word most entries hold is looked up for the rarer words\' finds, with exact scores (MaxScore)', () => {
    // 2,000 entries; "weather" is in 1,500 of them, far past the share that is walked in full.
    const idx = new LogbookIndex();
    const texts: string[] = [];
    for (let i = 0; i < 2000; i++) {
      const t = i % 100 === 7 ? 'The tandem needs new brake cables before the weather turns.'
        : i % 100 === 53 ? 'Collected the tandem frame from the paint shop.'
        : i % 4 === 3 ? `Order number ${i} left the depot.` : `Quiet day, the weather was mild, ticket ${i}.`;
      texts.push(t);
      idx.add(turn('s', i + 1, t));
    }
    const want = new Float64Array(texts.length);
    const stats = texts.map((t) => docStats(analyze(t)));
    const noCtx = PLAIN;
    bm25Scores([...new Set(analyze('tandem weather'))], stats, want);
    const hits = idx.search(q('tandem weather'), noCtx).hits;
    // Every entry holding the rare word is found, scored as plain BM25 over the whole logbook.
    const found = new Map(hits.map((h) => [h.entry.seq - 1, h.lexical]));
    texts.forEach((t, i) => {
      if (/tandem/.test(t)) expect(found.get(i), `entry ${i}`).toBeCloseTo(want[i]!, 12);
    });
    // Entries with only the common word (and, here, no neighbours counted) are not walked: the hits
    // are the 40 holding the rare word, and those with both words carry the common word's share.
    expect(hits.length).toBe(40);
    expect(hits.every((h) => /tandem/.test(h.entry.value))).toBe(true);
    const both = hits.find((h) => /weather/.test(h.entry.value))!;
    const tandemOnly = new Float64Array(texts.length);
    bm25Scores([...new Set(analyze('tandem'))], stats, tandemOnly);
    expect(tandemOnly[both.entry.seq - 1]).toBeLessThan(both.lexical);
    // With neighbours on, an entry beside a find is scored too, also exactly.
    const ctx = idx.search(q('tandem weather'), { ...PLAIN, neighbourWeight: 0.3, limit: 5000 }).hits;
    const beside = ctx.find((h) => h.entry.seq - 1 === 8)!;
    expect(beside.lexical).toBeCloseTo(want[8]!, 12);
    // A query of common words only walks the rarest, newest first, up to the walk budget (1,024):
    // the newest 1,024 of the 1,500 entries holding "weather", each scored exactly.
    bm25Scores([...new Set(analyze('weather'))], stats, want);
    const all = idx.search(q('weather'), { ...noCtx, limit: 5000 }).hits;
    const holding = texts.map((t, i) => (/weather/.test(t) ? i : -1)).filter((i) => i >= 0);
    expect(holding.length).toBe(1500);
    expect(new Set(all.map((h) => h.entry.seq - 1))).toEqual(new Set(holding.slice(-1024)));
    for (const h of all) expect(h.lexical).toBeCloseTo(want[h.entry.seq - 1]!, 12);
    // A rare word still finds its oldest entries, and the common word is looked up for them.
    const oldest = idx.search(q('tandem weather'), { ...noCtx, limit: 5000 }).hits.find((h) => h.entry.seq - 1 === 7)!;
    bm25Scores([...new Set(analyze('tandem weather'))], stats, want);
    expect(oldest.lexical).toBeCloseTo(want[7]!, 12);
  });

  it('stems both sides: "painting" finds "painted"', () => {
    const idx = new LogbookIndex();
    idx.add(turn('s', 1, 'I painted the fence.'));
    idx.add(turn('s', 2, 'The weather was awful.'));
    expect(ranked(idx, 'When was Maren painting?')[0]!.entry.seq).toBe(1);
  });

  it('compacts once half the entries are gone and still finds the rest', () => {
    const idx = new LogbookIndex();
    const es = Array.from({ length: 600 }, (_, i) => turn('s', i + 1, `note ${i} about ${i % 2 ? 'kayaks' : 'canoes'}`));
    for (const e of es) idx.add(e);
    for (const e of es.slice(0, 400)) idx.remove(e.id);
    expect(idx.size).toBe(200);
    expect(idx.oldest()!.seq).toBe(401);
    const hits = idx.search(q('kayaks'), { ...PLAIN, limit: 1000 }).hits;
    expect(hits).toHaveLength(100);
    expect(hits.every((h) => h.entry.seq > 400 && h.entry.seq % 2 === 0)).toBe(true);
  });
});

describe('gallop', () => {
  it('finds the first position at or past from holding a value >= d, as a linear scan does (fast-check)', () => {
    fc.assert(
      fc.property(fc.uniqueArray(fc.integer({ min: 0, max: 500 }), { maxLength: 120 }), fc.nat(130), fc.integer({ min: -5, max: 505 }), (xs, from, d) => {
        const docs = Int32Array.from(xs.sort((a, b) => a - b));
        const n = docs.length;
        const start = Math.min(from, n);
        let want = start;
        while (want < n && docs[want]! < d) want++;
        expect(gallop(docs, start, n, d)).toBe(want);
      }),
    );
  });
});

describe('pushTopK with laterWins (the search keeps its best k with it)', () => {
  it('keeps what a full sort then a cut keeps, in the same order, ties to the later entry, in any offer order (fast-check)', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 0, max: 6 }), { maxLength: 200 }), fc.integer({ min: 0, max: 30 }), fc.boolean(), (scores, k, reverse) => {
        const idx: number[] = [];
        const score: number[] = [];
        const order = scores.map((_, d) => d);
        if (reverse) order.reverse();
        for (const d of order) pushTopK(idx, score, d, scores[d]!, k, true);
        const want = scores.map((s, d) => ({ d, s })).sort((x, y) => y.s - x.s || y.d - x.d).slice(0, k);
        expect(idx).toEqual(want.map((x) => x.d));
        expect(score).toEqual(want.map((x) => x.s));
      }),
    );
  });
});

describe('LogbookIndex context, speakers and dates', () => {
  const chat = () => {
    const idx = new LogbookIndex();
    const said = [
      ['Kofi', 'Hey Maren! How was your week?'],
      ['Maren', 'Good! We adopted a puppy two weeks ago.'],
      ['Kofi', 'Aww! What breed is she?'],
      ['Maren', 'A beagle mix, and a total menace.'],
      ['Kofi', 'I finally finished my pottery course.'],
      ['Maren', 'Hi Kofi, pottery sounds fun.'],
    ];
    said.forEach(([speaker, text], i) => idx.add(turn('c', i + 1, text!, { speaker: speaker!, role: i % 2 ? 'user' : 'assistant' })));
    return idx;
  };

  it('an answer with none of the query words is found through the question before it', () => {
    const idx = chat();
    const plain = ranked(idx, 'What breed did Maren adopt?', { ...LOGBOOK_SEARCH_DEFAULTS, neighbourWeight: 0 });
    expect(plain.map((h) => h.entry.seq)).not.toContain(4);
    const hits = ranked(idx, 'What breed did Maren adopt?');
    const answer = hits.find((h) => h.entry.seq === 4)!;
    expect(answer.lexical).toBe(0);
    expect(answer.context).toBeGreaterThan(0);
    expect(hits.slice(0, 3).map((h) => h.entry.seq)).toContain(4);
  });

  it("a person's name lifts that person's own turns, not the greetings that name them", () => {
    const idx = chat();
    const r = idx.search(q('What did Kofi finish?'), LOGBOOK_SEARCH_DEFAULTS);
    expect(r.speakers).toEqual(['kofi']);
    const hits = r.hits.sort((a, b) => b.score - a.score);
    expect(hits[0]!.entry.seq).toBe(5);
    expect(hits[0]!.speakerMatch).toBe(true);
    // As a plain term the name would rank the greeting "Hi Kofi, ..." above the answer.
    const asTerm = ranked(idx, 'What did Kofi finish?', { ...LOGBOOK_SEARCH_DEFAULTS, nameWeight: 1, speakerBoost: 0, neighbourWeight: 0 });
    expect(asTerm[0]!.entry.seq).toBe(6);
  });

  it('a date in the query finds the turn whose relative date resolves to it; "when" lifts dated turns', () => {
    const idx = new LogbookIndex();
    idx.add(turn('d', 1, 'I ran my first 10k yesterday!', { dates: [{ text: 'yesterday', day: '2025-06-10', grain: 'day' }] }));
    idx.add(turn('d', 2, 'Running a 10k is on my list too.'));
    expect(ranked(idx, 'What did she do on 10 June 2025?')[0]!.entry.seq).toBe(1);
    const when = idx.search(q('When did she run the 10k?'), LOGBOOK_SEARCH_DEFAULTS).hits;
    const noBoost = idx.search(q('When did she run the 10k?'), { ...LOGBOOK_SEARCH_DEFAULTS, temporalBoost: 0 }).hits;
    const s = (hs: typeof when, seq: number) => hs.find((h) => h.entry.seq === seq)!.score;
    expect(s(when, 1) / s(noBoost, 1)).toBeCloseTo(1 + LOGBOOK_SEARCH_DEFAULTS.temporalBoost, 12);
    expect(s(when, 2)).toBeCloseTo(s(noBoost, 2), 12);
  });

  it("a bot's own reply scores × replyWeight; a question × questionWeight", () => {
    const idx = new LogbookIndex();
    idx.add(turn('b', 1, 'Your kayak repair is booked for Friday.', { role: 'assistant' }));
    idx.add(turn('b', 2, 'Is my kayak repair booked?', { role: 'user' }));
    idx.add(turn('b', 3, 'My kayak repair please, the hull is cracked.', { role: 'user' }));
    const p = { ...LOGBOOK_SEARCH_DEFAULTS, neighbourWeight: 0 };
    const hits = idx.search(q('kayak repair'), p).hits;
    const by = (seq: number) => hits.find((h) => h.entry.seq === seq)!;
    expect(by(1).score).toBeCloseTo(by(1).lexical * p.replyWeight, 12);
    expect(by(2).score).toBeCloseTo(by(2).lexical * p.questionWeight, 12);
    expect(by(3).score).toBeCloseTo(by(3).lexical, 12);
  });
});

describe('LogbookIndex supersession', () => {
  it('a superseded value and the turn that stated it point at the current value, through a chain', () => {
    const idx = new LogbookIndex();
    idx.add(turn('s', 1, 'Can I book a service for Tuesday?'));
    idx.add(turn('s', 2, 'Actually, make it Friday.'));
    const sup = (id: string, prov: string, value: string, successor: string): LogbookEntry => ({
      id, kind: 'superseded', tenant: 't', session: 's', value, keyText: 'my booking (service)', provenance: [prov],
      atMs: AT, createdMs: AT, clock: 2, seq: 0, strength: 0.9, halfLife: 200, successor,
    });
    idx.add(sup('r1', 's-1', 'book a service for Tuesday', 'r2'));
    // r2 was itself replaced later and then evicted as r3's predecessor: the chain ends at r3.
    idx.add(sup('r2', 's-2', 'book a service for Friday', 'r3'));
    const r = idx.search(q('service booking Tuesday'), LOGBOOK_SEARCH_DEFAULTS);
    const by = (id: string) => r.hits.find((h) => h.entry.id === id);
    expect(by('r1')!.supersededBy).toBe('r3');
    const stale = r.hits.find((h) => h.entry.kind === 'turn' && h.entry.seq === 1)!;
    expect(stale.supersededBy).toBe('r3');
    // A question about something else in that turn does not tie it to the booking.
    idx.add(turn('s', 3, 'Tuesday is also my pottery night.'));
    const other = idx.search(q('pottery night'), LOGBOOK_SEARCH_DEFAULTS).hits.find((h) => h.entry.seq === 3)!;
    expect(other.supersededBy).toBeUndefined();
  });
});
