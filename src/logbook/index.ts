// Why this file is over ~400 lines: LogbookIndex is one class whose postings (term -> documents),
// turn-neighbour links, speaker and supersession maps and document slots are private arrays kept in
// step by add, remove and compact, and read by search in the same pass. Moving search or compaction
// to another module would mean exposing those arrays (and their invariants) to it. What stands apart
// already does: the search's settings and result types (types.ts), the posting list and its lookup
// (postings.ts), the query analysis (query.ts) and the BM25 weights (memory/bm25.ts).
// The logbook's search index for one scope (a session, or a user across sessions): an inverted index
// for Okapi BM25 (Robertson & Zaragoza 2009) kept incrementally as entries arrive, each turn linked to
// the turns before and after it in its session, the speakers who said them, the dates they mention,
// and optionally a vector index (exact scan, HNSW past a size). Pure: no I/O; both stores keep one
// per scope. A search walks the postings of the query's rarer terms and looks up the common ones
// (see search), not every entry.

import type { VectorIndex } from '../vectors/vector-index.js';
import { createVectorIndex, type VectorIndexOptions } from '../vectors/index.js';
import { bm25Idf, bm25Term } from '../memory/bm25.js';
import { dateTerms } from '../memory/dates.js';
import { analyze, tokenize } from '../memory/text.js';
import { pushTopK } from '../memory/vector.js';
import type { LogbookEntry } from '../types.js';
import { gallop, type Posting } from './postings.js';
import { LOGBOOK_SEARCH_DEFAULTS, type LogbookQuery, type LogbookSearchParams, type LogbookSearchResult, type LogbookHit } from './types.js';

export { searchParamsOf, LOGBOOK_SEARCH_DEFAULTS } from './types.js';
export type { LogbookSearchParams, LogbookQuery, LogbookHit, LogbookSearchResult } from './types.js';

/** A polite request ("could you order 4 bags?", "can I book a service for Tuesday?") states what is wanted. */
const REQUEST = /^\W*(?:(?:hi|hey|hello|ok|okay|yes|no|sure|great|sorry|actually|then|and|so|well|also)\b[\s,!.]*)*(?:(?:can|could|would|will|may)\s+(?:you|we|i)\b|please\b|i(?:'d| would) like\b|let'?s\b)/i;

/**
 * A turn whose every sentence asks for information ("How did it go?", "When is my booking?"). A
 * request ("Can you book a table for 3?") states what the speaker wants, so it is not one.
 */
function isQuestionOnly(text: string): boolean {
  const parts = text.split(/(?<=[.!?])\s+/).filter((x) => x.trim().length > 0);
  return parts.length > 0 && parts.every((x) => /\?\s*$/.test(x) && !REQUEST.test(x));
}

/**
 * A term held by more than this many live entries of a scope is looked up, not walked (see search).
 * Fixed, not a share of the scope, so what is walked stops growing with the history. On the checks
 * of test/recall, test/outside and test/fidelity, 64, 128 and 512 rank identically; 32 begins to
 * cost recall on the bot scenario.
 */
const FREQUENT = 128;
/**
 * A walk of one posting list stops after this many postings, newest first, so a search's cost is
 * bounded whatever the history's length. Only words held by more than this many entries are cut.
 */
const WALK_BUDGET = 1024;

/** Offsets in an entry's four slots of LogbookIndex.meta (0 is its length). */
const PREV = 1;
const NEXT = 2;
const FLAGS = 3;

export { bm25Idf, bm25Term, gallop };

/** The speaker names a query can use: the whole label and each of its words ("Ana Ruiz" -> "ana", "ruiz"). */
export function speakerTokens(speaker: string): string[] {
  const whole = speaker.trim().toLowerCase();
  const words = tokenize(speaker);
  return whole.length > 0 ? [...new Set([whole, ...words])] : [];
}

export interface LogbookIndexOptions {
  /** Keep a vector index over entries that carry a vector. @default true */
  vectors?: boolean;
  /** Options of the vector index (exact scan, HNSW past a size). */
  vectorIndex?: VectorIndexOptions;
}

/** The index of one scope (see module comment). */
export class LogbookIndex {
  private readonly o: Required<Pick<LogbookIndexOptions, 'vectors'>> & LogbookIndexOptions;
  // Documents, by dense number; a removed one keeps its number (alive = 0) until compaction.
  private entries: (LogbookEntry | null)[] = [];
  private docTerms: Int32Array[] = [];
  private docTfs: Uint16Array[] = [];
  private speakerOf: string[] = [];
  /** Bit 0: mentions a date; bit 1: a bot's reply (assistant, no speaker); bit 2: a question only. */
  /**
   * Per entry, packed so one cache line serves four: [length in terms (-1 once removed), previous
   * turn of its session, next turn (-1 when none), flags (1 mentions a date, 2 a bot's reply, 4 a
   * question only)]. A search touches these for every posting and candidate.
   */
  private meta: Int32Array = new Int32Array(4 * 64);
  private readonly byId = new Map<string, number>();
  // Terms: id -> postings; df counts live documents only.
  private readonly termIds = new Map<string, number>();
  /** The term of each id, so a term no live document holds leaves the dictionary (erasure). */
  private termOf: string[] = [];
  private postings: Posting[] = [];
  private df: number[] = [];
  private live = 0;
  private totalLen = 0;
  // Turns of each session in seq order, for neighbour links: session -> sorted [seq, doc] pairs.
  private readonly order = new Map<string, { seqs: number[]; docs: number[] }>();
  /** Name token -> speaker label -> live entries said by that speaker (so removals can forget names). */
  private readonly speakers = new Map<string, Map<string, number>>();
  /** session -> turn id -> ids of the superseded values that turn stated (their newest source). */
  private readonly staleTurns = new Map<string, Map<string, Set<string>>>();
  private vectorIndex: VectorIndex | null = null;
  // Scratch arrays of a search, reused (searches of one index never overlap: they are synchronous).
  private scratch = new Float64Array(64);
  /** First document number that may be live (see `oldest`). */
  private head = 0;
  private touched: number[] = [];
  /** `mark[d] === epoch` when entry d is already a candidate of the current search. */
  private mark = new Uint32Array(64);
  private epoch = 0;

  constructor(options: LogbookIndexOptions = {}) {
    this.o = { vectors: true, ...options };
  }

  /** Live entries. */
  get size(): number {
    return this.live;
  }

  has(id: string): boolean {
    return this.byId.has(id);
  }

  get(id: string): LogbookEntry | undefined {
    const d = this.byId.get(id);
    return d === undefined ? undefined : this.entries[d]!;
  }

  /** Live entries, oldest first. */
  *all(): IterableIterator<LogbookEntry> {
    for (const e of this.entries) if (e) yield e;
  }

  /** The oldest live entry (by arrival), or undefined when empty. Amortised O(1). */
  oldest(): LogbookEntry | undefined {
    while (this.head < this.entries.length && this.entries[this.head] === null) this.head++;
    return this.entries[this.head] ?? undefined;
  }

  /** Adds an entry (replacing one with the same id). */
  add(entry: LogbookEntry): void {
    if (this.byId.has(entry.id)) this.remove(entry.id);
    const d = this.entries.length;
    const terms = analyze(entry.keyText ? `${entry.keyText} ${entry.value}` : entry.value);
    if (entry.dates && entry.dates.length > 0) terms.push(...dateTerms(entry.dates));
    const counts = new Map<number, number>();
    for (const t of terms) {
      const id = this.termId(t);
      counts.set(id, (counts.get(id) ?? 0) + 1);
    }
    const ids = new Int32Array(counts.size);
    const tfs = new Uint16Array(counts.size);
    let n = 0;
    for (const [id, tf] of counts) {
      ids[n] = id;
      tfs[n] = Math.min(tf, 65_535);
      n++;
      this.post(id, d, tfs[n - 1]!);
      this.df[id] = (this.df[id] ?? 0) + 1;
    }
    this.entries.push(entry);
    this.docTerms.push(ids);
    this.docTfs.push(tfs);
    const speaker = (entry.speaker ?? entry.owner ?? '').toLowerCase();
    this.speakerOf.push(speaker);
    if (4 * d + 4 > this.meta.length) {
      const grown = new Int32Array(this.meta.length * 2);
      grown.set(this.meta);
      this.meta = grown;
    }
    this.meta[4 * d] = terms.length;
    this.meta[4 * d + PREV] = -1;
    this.meta[4 * d + NEXT] = -1;
    this.meta[4 * d + FLAGS] = (entry.dates && entry.dates.length > 0 ? 1 : 0) | (entry.role === 'assistant' && !entry.speaker ? 2 : 0) | (entry.kind === 'turn' && isQuestionOnly(entry.value) ? 4 : 0);
    this.byId.set(entry.id, d);
    this.live++;
    this.totalLen += terms.length;
    if (speaker) {
      for (const t of speakerTokens(speaker)) {
        let s = this.speakers.get(t);
        if (!s) this.speakers.set(t, (s = new Map()));
        s.set(speaker, (s.get(speaker) ?? 0) + 1);
      }
    }
    if (entry.kind === 'turn') this.link(d, entry);
    if (entry.kind === 'superseded' && entry.provenance.length > 0) {
      let bySession = this.staleTurns.get(entry.session);
      if (!bySession) this.staleTurns.set(entry.session, (bySession = new Map()));
      let set = bySession.get(entry.provenance[0]!);
      if (!set) bySession.set(entry.provenance[0]!, (set = new Set()));
      set.add(entry.id);
    }
    if (entry.key && this.o.vectors) {
      this.vectorIndex ??= createVectorIndex(entry.key.length, this.o.vectorIndex);
      // Vectors of another dimension (an embedder switch) stay out of the dense list until migrated.
      if (this.vectorIndex.dim === entry.key.length) this.vectorIndex.add(entry.id, entry.key);
    }
  }

  /** Removes an entry by id; false when absent. */
  remove(id: string): boolean {
    const d = this.byId.get(id);
    if (d === undefined) return false;
    const e = this.entries[d]!;
    const ids = this.docTerms[d]!;
    for (let i = 0; i < ids.length; i++) {
      const t = ids[i]!;
      // A word no live entry holds any more leaves the dictionary: an erased turn's words do not stay
      // in memory as terms (its id is not reused; a later mention gets a fresh one).
      if (--this.df[t]! === 0 && this.termIds.get(this.termOf[t]!) === t) {
        this.termIds.delete(this.termOf[t]!);
        this.termOf[t] = '';
      }
    }
    this.live--;
    this.totalLen -= this.meta[4 * d]!;
    this.byId.delete(id);
    this.entries[d] = null;
    this.meta[4 * d] = -1;
    if (e.kind === 'turn') this.unlink(d, e);
    if (e.kind === 'superseded' && e.provenance.length > 0) {
      const bySession = this.staleTurns.get(e.session);
      const set = bySession?.get(e.provenance[0]!);
      set?.delete(e.id);
      if (set && set.size === 0) {
        bySession!.delete(e.provenance[0]!);
        if (bySession!.size === 0) this.staleTurns.delete(e.session);
      }
    }
    const speaker = this.speakerOf[d]!;
    if (speaker) {
      for (const t of speakerTokens(speaker)) {
        const s = this.speakers.get(t);
        const c = (s?.get(speaker) ?? 0) - 1;
        if (c > 0) s!.set(speaker, c);
        else {
          s?.delete(speaker);
          if (s && s.size === 0) this.speakers.delete(t);
        }
      }
    }
    this.vectorIndex?.remove(id);
    // Postings keep the dead number until compaction; searches skip it.
    if (this.entries.length > 256 && this.live < this.entries.length / 2) this.compact();
    return true;
  }

  /** Drops every entry. */
  clear(): void {
    this.entries = [];
    this.head = 0;
    this.docTerms = [];
    this.docTfs = [];
    this.speakerOf = [];
    this.meta = new Int32Array(4 * 64);
    this.byId.clear();
    this.termIds.clear();
    this.termOf = [];
    this.postings = [];
    this.df = [];
    this.live = 0;
    this.totalLen = 0;
    this.order.clear();
    this.speakers.clear();
    this.staleTurns.clear();
    this.vectorIndex?.clear();
    this.vectorIndex = null;
  }

  /** Speakers of this scope named by the query tokens (lower-cased labels). */
  namedSpeakers(tokens: readonly string[]): string[] {
    const out = new Set<string>();
    for (const t of tokens) for (const s of this.speakers.get(t)?.keys() ?? []) out.add(s);
    return [...out];
  }

  /**
   * Ranks entries for a query: BM25 over the inverted index, each turn then taking a share of its
   * neighbours' scores, boosted when said by a person the query names or, for a "when" question, when
   * it mentions a date; plus a dense list by cosine when asked. Returns the best `limit` lexical
   * entries and the best `denseK` dense ones (merged, one hit per entry).
   */
  search(q: LogbookQuery, p: LogbookSearchParams = LOGBOOK_SEARCH_DEFAULTS): LogbookSearchResult {
    const n = this.live;
    const avg = n > 0 ? this.totalLen / n : 0;
    const named = this.namedSpeakers(q.tokens);
    const nameTerms = new Set<string>();
    for (const t of q.tokens) if (this.speakers.has(t)) for (const a of analyze(t)) nameTerms.add(a);
    const weight = new Map<string, number>();
    for (const t of q.terms) weight.set(t, nameTerms.has(t) ? p.nameWeight : 1);
    for (const t of q.dateTerms) weight.set(t, p.dateWeight);
    const idf = new Map<string, number>();
    const dfs = new Map<string, number>();
    let maxScore = 0;
    for (const [t, w] of weight) {
      const id = this.termIds.get(t);
      const df = id === undefined ? 0 : this.df[id]!;
      const v = bm25Idf(n, df);
      idf.set(t, v);
      dfs.set(t, df);
      maxScore += w * v;
    }
    const result: LogbookSearchResult = { hits: [], size: n, avgLength: avg, idf, df: dfs, weight, maxScore, speakers: named, successors: new Map() };
    if (n === 0) return result;

    // 1. Own BM25 of the entries holding a query term. Terms with short posting lists (up to
    // FREQUENT entries) are walked in full; a term held by more is only looked up, by binary search in
    // its sorted postings, for the entries the rarer terms found and their neighbours (the idea of
    // MaxScore, Turtle & Flood 1995: an entry holding only the commonest words of a query seldom
    // ranks). When every term is common, the rarest is walked and the rest looked up. A walk takes
    // at most WALK_BUDGET postings, the newest. So a search costs a few short lists and lookups,
    // bounded whatever the history's length; the scores of the entries found are exact, and what is
    // left out is an entry holding only common words the found ones lack.
    if (this.scratch.length < this.entries.length) this.scratch = new Float64Array(Math.max(this.entries.length, this.scratch.length * 2));
    const own = this.scratch;
    const meta = this.meta;
    const touched = this.touched;
    touched.length = 0;
    const frequent = FREQUENT;
    const lists: Array<{ post: Posting; w: number; v: number }> = [];
    for (const [t, w] of weight) {
      const v = idf.get(t)!;
      if (v === 0 || w === 0) continue;
      lists.push({ post: this.postings[this.termIds.get(t)!]!, w, v });
    }
    // A walk goes newest first and stops after WALK_BUDGET postings: a common word's oldest
    // entries are reached only through the rarer words they hold (or as neighbours).
    const walk = (x: { post: Posting; w: number; v: number }): void => {
      const post = x.post;
      const stop = Math.max(0, post.n - WALK_BUDGET);
      for (let i = post.n - 1; i >= stop; i--) {
        const d = post.docs[i]!;
        const len = meta[4 * d]!;
        if (len < 0) continue; // removed
        if (own[d] === 0) touched.push(d);
        own[d] += x.w * bm25Term(x.v, post.tfs[i]!, len, avg, p.k1, p.b);
      }
    };
    const common = lists.filter((x) => x.post.n > frequent).sort((x, y) => x.post.n - y.post.n);
    for (const x of lists) if (x.post.n <= frequent) walk(x);
    // Every word common: the rarest is walked, the others looked up for what it found.
    if (touched.length === 0 && common.length > 0) walk(common.shift()!);
    if (common.length > 0 && touched.length > 0) {
      const look = Int32Array.from(this.distinct(touched, p.neighbourWeight > 0)).sort();
      for (const x of common) {
        // A lookup gallops through the postings (both lists ascending); when the entries to look up
        // are nearly as many as the postings of a list within the walk budget, walking it is as
        // cheap and as exact.
        if (x.post.n <= WALK_BUDGET && 4 * look.length >= x.post.n) {
          walk(x);
          continue;
        }
        const docs = x.post.docs;
        let j = 0;
        for (let k = 0; k < look.length && j < x.post.n; k++) {
          const d = look[k]!;
          j = gallop(docs, j, x.post.n, d);
          if (j >= x.post.n || docs[j] !== d) continue;
          if (own[d] === 0) touched.push(d);
          own[d] += x.w * bm25Term(x.v, x.post.tfs[j]!, meta[4 * d]!, avg, p.k1, p.b);
        }
      }
    }

    // 2. Context from neighbours, then boosts; candidates are the touched entries and their neighbours.
    const cand = this.distinct(touched, p.neighbourWeight > 0);
    const namedSet = new Set(named);
    const topD: number[] = [];
    const topS: number[] = [];
    const ctxOf = (d: number): number => {
      const a = meta[4 * d + PREV]!;
      const b = meta[4 * d + NEXT]!;
      return p.neighbourWeight > 0 ? p.neighbourWeight * ((a >= 0 ? own[a]! : 0) + (b >= 0 ? own[b]! : 0)) : 0;
    };
    for (const d of cand) {
      let s = own[d]! + ctxOf(d);
      if (s <= 0) continue;
      if (namedSet.size > 0 && namedSet.has(this.speakerOf[d]!)) s *= 1 + p.speakerBoost;
      const flags = meta[4 * d + FLAGS]!;
      if (q.temporal && (flags & 1) !== 0) s *= 1 + p.temporalBoost;
      if ((flags & 2) !== 0) s *= p.replyWeight;
      if ((flags & 4) !== 0) s *= p.questionWeight;
      pushTopK(topD, topS, d, s, p.limit, true);
    }
    // Best first; ties go to the later entry (the newer statement).
    const hits = new Map<number, LogbookHit>();
    topD.forEach((d, r) => {
      hits.set(d, {
        entry: this.entries[d]!, score: topS[r]!, lexical: own[d]!, context: ctxOf(d),
        coverage: maxScore > 0 ? own[d]! / maxScore : 0, cosine: NaN, lexicalRank: r + 1, denseRank: 0,
        speakerMatch: namedSet.has(this.speakerOf[d]!),
      });
    });

    // 3. The dense list, when asked and there are vectors.
    if (q.vector && (q.denseK ?? 0) > 0 && this.vectorIndex && this.vectorIndex.dim === q.vector.length && this.vectorIndex.size > 0) {
      this.vectorIndex.search(q.vector, q.denseK!).forEach((m, r) => {
        const d = this.byId.get(m.id);
        if (d === undefined) return;
        const h = hits.get(d);
        if (h) {
          h.cosine = m.cosine;
          h.denseRank = r + 1;
        } else {
          hits.set(d, {
            entry: this.entries[d]!, score: 0, lexical: own[d]!, context: 0, coverage: maxScore > 0 ? own[d]! / maxScore : 0,
            cosine: m.cosine, lexicalRank: 0, denseRank: r + 1, speakerMatch: namedSet.has(this.speakerOf[d]!),
          });
        }
      });
    }
    // 4. Supersession: a superseded value, or a turn that stated one the query matched, points at the
    // current value, so the read can keep it below.
    for (const h of hits.values()) {
      const e = h.entry;
      if (e.kind === 'superseded' && e.successor) h.supersededBy = this.finalSuccessor(e.successor, result.successors);
      else if (e.kind === 'turn') {
        const stale = this.staleTurns.get(e.session)?.get(e.provenance[0]!);
        if (!stale) continue;
        for (const sid of stale) {
          const sd = this.byId.get(sid);
          const se = sd === undefined ? undefined : this.entries[sd];
          // Only when the query is about the replaced value (it shares a term with it): a turn that
          // stated several facts stays where it ranks for questions about the others.
          if (!se || !se.successor || own[sd!]! <= 0) continue;
          h.supersededBy = this.finalSuccessor(se.successor, result.successors);
          break;
        }
      }
    }
    for (const d of touched) own[d] = 0;
    result.hits = [...hits.values()];
    return result;
  }

  /** The distinct entries of `docs`, with their neighbours when asked, in first-seen order. */
  private distinct(docs: readonly number[], neighbours: boolean): number[] {
    if (this.mark.length < this.entries.length) this.mark = new Uint32Array(Math.max(this.entries.length, this.mark.length * 2));
    const mark = this.mark;
    this.epoch = (this.epoch + 1) >>> 0;
    if (this.epoch === 0) {
      mark.fill(0);
      this.epoch = 1;
    }
    const epoch = this.epoch;
    const out: number[] = [];
    const add = (d: number): void => {
      if (d >= 0 && mark[d] !== epoch) {
        mark[d] = epoch;
        out.push(d);
      }
    };
    for (const d of docs) add(d);
    if (neighbours) {
      for (const d of docs) {
        add(this.meta[4 * d + PREV]!);
        add(this.meta[4 * d + NEXT]!);
      }
    }
    return out;
  }

  /** Follows a successor chain through superseded entries to the current value's revision id. */
  private finalSuccessor(id: string, found: Map<string, LogbookEntry>): string {
    let cur = id;
    for (let hop = 0; hop < 64; hop++) {
      const e = this.get(cur);
      if (!e) return cur; // not in the logbook: a live slot (or gone)
      if (e.kind !== 'superseded' || !e.successor) {
        found.set(cur, e);
        return cur;
      }
      cur = e.successor;
    }
    return cur;
  }

  // ---------------------------------------------------------------- internals

  private termId(t: string): number {
    let id = this.termIds.get(t);
    if (id === undefined) {
      id = this.postings.length;
      this.termIds.set(t, id);
      this.termOf.push(t);
      this.postings.push({ docs: new Int32Array(4), tfs: new Uint16Array(4), n: 0 });
      this.df.push(0);
    }
    return id;
  }

  private post(id: number, d: number, tf: number): void {
    const p = this.postings[id]!;
    if (p.n === p.docs.length) {
      const docs = new Int32Array(p.docs.length * 2);
      docs.set(p.docs);
      const tfs = new Uint16Array(p.tfs.length * 2);
      tfs.set(p.tfs);
      p.docs = docs;
      p.tfs = tfs;
    }
    p.docs[p.n] = d;
    p.tfs[p.n] = tf;
    p.n++;
  }

  /** Links a turn between the turns before and after it in its session (by seq). */
  private link(d: number, e: LogbookEntry): void {
    let o = this.order.get(e.session);
    if (!o) this.order.set(e.session, (o = { seqs: [], docs: [] }));
    // Turns arrive in order almost always: a binary search keeps the rare late one correct.
    let lo = 0;
    let hi = o.seqs.length;
    if (hi > 0 && o.seqs[hi - 1]! <= e.seq) lo = hi;
    else {
      while (lo < hi) {
        const mid = (lo + hi) >> 1;
        if (o.seqs[mid]! <= e.seq) lo = mid + 1;
        else hi = mid;
      }
    }
    o.seqs.splice(lo, 0, e.seq);
    o.docs.splice(lo, 0, d);
    const before = lo > 0 ? o.docs[lo - 1]! : -1;
    const after = lo + 1 < o.docs.length ? o.docs[lo + 1]! : -1;
    const m = this.meta;
    m[4 * d + PREV] = before;
    m[4 * d + NEXT] = after;
    if (before >= 0) m[4 * before + NEXT] = d;
    if (after >= 0) m[4 * after + PREV] = d;
  }

  private unlink(d: number, e: LogbookEntry): void {
    const o = this.order.get(e.session);
    if (!o) return;
    const at = o.docs.indexOf(d);
    if (at < 0) return;
    o.seqs.splice(at, 1);
    o.docs.splice(at, 1);
    const m = this.meta;
    const before = m[4 * d + PREV]!;
    const after = m[4 * d + NEXT]!;
    if (before >= 0) m[4 * before + NEXT] = after;
    if (after >= 0) m[4 * after + PREV] = before;
    m[4 * d + PREV] = -1;
    m[4 * d + NEXT] = -1;
    if (o.docs.length === 0) this.order.delete(e.session);
  }

  /** Rebuilds the numbering without removed entries (amortised: runs when half are dead). */
  private compact(): void {
    const keep = [...this.all()];
    this.clear();
    for (const e of keep) this.add(e);
  }
}
