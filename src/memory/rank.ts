// One ranking over both tiers. Slots (working memory: the current value, the pinned fact, the thing
// used often) and logbook entries (every turn, and what left working memory) are scored by the same
// BM25 statistics, so they compare on one scale; a slot adds a prior for its strength. When a dense
// list is used, lexical and dense ranks are merged by reciprocal rank fusion (Cormack, Clarke &
// Buettcher 2009) rather than by adding raw scores. Then precedence: a superseded value never stands
// above its successor (the successor is lifted to just above it), and an ambiguous update stands just
// above each value it may have replaced (newest first, both kept).

import type { LogbookEntry } from '../types.js';
import type { LogbookHit, LogbookSearchParams, LogbookSearchResult } from '../logbook/index.js';
import { bm25Idf, bm25Term } from './bm25.js';
import { analyze, normalizeText, stem } from './text.js';

/** A slot as the ranking sees it. */
export interface SlotCandidate {
  slot: number;
  id: string;
  keyText: string;
  value: string;
  provenance: string[];
  owner?: string;
  /** Whom the fact is about when not its owner (see SlotRecord.subject). */
  subject?: string;
  /** Strength decayed to now, in (0, 1]. */
  strength: number;
  /** Cosine of the query to the slot's key. */
  cosine: number;
  /** When the value was last written (epoch ms): what its relative dates are relative to. */
  updatedMs?: number;
  /** Clock units since the value was last written (0 = this turn). */
  age?: number;
  /** Attention weight of the slot over working memory. */
  weight: number;
  /** Revision ids of values this slot may have replaced (an ambiguous update). */
  maybeReplaces?: readonly string[];
}

/** One ranked item. */
export interface RankedItem {
  source: 'slot' | 'logbook';
  slot?: SlotCandidate;
  entry?: LogbookEntry;
  id: string;
  /** Final score in its list (lexical score with boosts; RRF score when a dense list is fused). */
  score: number;
  /** Own BM25 (boosts excluded). */
  lexical: number;
  /** Own BM25 over the query's maximum. */
  coverage: number;
  cosine: number;
  /** Share of the score from neighbouring turns. */
  context: number;
  lexicalRank: number;
  denseRank: number;
  speakerMatch: boolean;
  /** Why it stands where it does: by score, lifted above a value it replaced, or placed as an ambiguous update. */
  placed: 'score' | 'successor' | 'ambiguous';
  /** Set on a value known to be replaced: the revision id of its successor. */
  supersededBy?: string;
}

export interface RankParams {
  /** Items returned at most. */
  k: number;
  /** The session read: its turns are the provenance of the slots. */
  session: string;
  /** A slot also scores this share of the best lexical score among the turns it came from. */
  provenanceWeight: number;
  /** A slot about someone else (a `subject`) scores × othersWeight unless the query names them. */
  othersWeight: number;
  /** A slot written `age` clock units ago scores × (1 + recencyBoost × 2^(−age / recencyHalfLife)). */
  recencyBoost: number;
  recencyHalfLife: number;
  /** A slot's lexical score × (1 + slotPrior × strength). */
  slotPrior: number;
  /** Weight of the dense list in the fusion; 0 ranks by the lexical list alone. */
  denseWeight: number;
  /** The constant k of reciprocal rank fusion (60 in Cormack et al. 2009). */
  rrfK: number;
  /** The top item is a hit when its coverage reaches this and its score is hitMargin × the next one's... */
  hitCoverage: number;
  hitMargin: number;
  /** ...or, with a dense list, when its cosine reaches this. */
  hitCosine: number;
  /** Return superseded values by their own score (history questions). */
  history: boolean;
  /** Items scoring below this share of the best are left out. */
  minShare: number;
  /** The query's text: an earlier turn saying exactly the same (the same question asked again) adds nothing. */
  query?: string;
  /** Scoring of slot texts: the logbook's BM25 and speaker settings. */
  search: LogbookSearchParams;
}

export interface RankResult {
  items: RankedItem[];
  /** Whether the top item is relevant by the calibrated thresholds. */
  hit: boolean;
}

// Analysed terms of a slot's text and their counts, per revision id (bounded), so a read does not
// re-count every slot's words. The text is kept beside them and checked: an id seen again with other
// text (another store, a test) is counted afresh. Erasure drops them all (`forgetSlotTerms`).
interface SlotTerms {
  keyText: string;
  value: string;
  len: number;
  tf: Map<string, number>;
}
const slotTerms = new Map<string, SlotTerms>();
function termsOf(c: SlotCandidate): SlotTerms {
  let t = slotTerms.get(c.id);
  // Compared field by field: joining them first would build a string per slot per read.
  if (!t || t.keyText !== c.keyText || t.value !== c.value) {
    const terms = analyze(c.keyText && c.keyText !== c.value ? `${c.keyText} ${c.value}` : c.value);
    const tf = new Map<string, number>();
    for (const w of terms) tf.set(w, (tf.get(w) ?? 0) + 1);
    t = { keyText: c.keyText, value: c.value, len: terms.length, tf };
    if (slotTerms.size >= 20_000) slotTerms.clear();
    slotTerms.set(c.id, t);
  }
  return t;
}

/**
 * Drops the cached word counts of slot texts: all of them, or those of some revision ids. Called on
 * erasure (here and when another process's erase is seen), so nothing derived from an erased value
 * outlives it in this process.
 */
export function forgetSlotTerms(ids?: Iterable<string>): void {
  if (!ids) slotTerms.clear();
  else for (const id of ids) slotTerms.delete(id);
}

/** Whether the word counts of a slot revision are cached (for tests of erasure). */
export function slotTermsCached(id: string): boolean {
  return slotTerms.has(id);
}

// A turn's text normalised, per entry (an entry's text never changes), held only as long as the entry.
const normalized = new WeakMap<LogbookEntry, string>();
function normalizedValue(e: LogbookEntry): string {
  let v = normalized.get(e);
  if (v === undefined) normalized.set(e, (v = normalizeText(e.value)));
  return v;
}

/**
 * BM25 of slot texts with the logbook's statistics (its N, average length and IDF), so a slot and a
 * turn that share the query's words score alike. With an empty logbook the slots are their own corpus.
 */
export function scoreSlots(slots: readonly SlotCandidate[], lb: LogbookSearchResult, p: LogbookSearchParams): { scores: Array<{ lexical: number; score: number; speakerMatch: boolean }>; maxScore: number } {
  const terms = slots.map(termsOf);
  // IDF over the union of both tiers: a slot's topic words ("phone number") need not have been said
  // in any turn ("my mobile is ..."), and a word unseen in the logbook is the rarest there is.
  const n = lb.size + slots.length;
  const idf = new Map<string, number>();
  let maxScore = 0;
  for (const [t, w] of lb.weight) {
    let df = lb.df.get(t) ?? 0;
    for (const ts of terms) if (ts.tf.has(t)) df++;
    const v = bm25Idf(n, df);
    idf.set(t, v);
    maxScore += w * v;
  }
  const avg = lb.size > 0 ? lb.avgLength : terms.reduce((a, ts) => a + ts.len, 0) / Math.max(1, slots.length);
  const named = new Set(lb.speakers);
  const scores = slots.map((c, i) => {
    const ts = terms[i]!;
    let lexical = 0;
    for (const [t, w] of lb.weight) {
      const f = ts.tf.get(t);
      const v = idf.get(t) ?? 0;
      if (f && v > 0) lexical += w * bm25Term(v, f, ts.len, avg, p.k1, p.b);
    }
    const speakerMatch = c.owner !== undefined && named.has(c.owner.toLowerCase());
    const score = speakerMatch ? lexical * (1 + p.speakerBoost) : lexical;
    return { lexical, score, speakerMatch };
  });
  return { scores, maxScore };
}

/** Merges slots and logbook hits into one ranking (see module comment). */
export function rankTiers(slots: readonly SlotCandidate[], lb: LogbookSearchResult, p: RankParams): RankResult {
  const scored = scoreSlots(slots, lb, p.search);
  const slotScores = scored.scores;
  const maxScore = Math.max(scored.maxScore, lb.maxScore) || 1;
  // A slot is supported by the turns it came from: what they say about the query counts for it too
  // (the slot's own text is a short topic and value; its source turns name the things around it).
  const turnLex = new Map<string, number>();
  for (const h of lb.hits) if (h.entry.kind === 'turn' && h.entry.session === p.session) turnLex.set(h.entry.provenance[0]!, h.lexical);
  const queryTerms = new Set(lb.weight.keys());
  const items: RankedItem[] = [];
  const liveIds = new Map(slots.map((s) => [s.id, s]));
  slots.forEach((c, i) => {
    const s = slotScores[i]!;
    let support = 0;
    for (const t of c.provenance) support = Math.max(support, turnLex.get(t) ?? 0);
    const own = s.score + p.provenanceWeight * support * (s.speakerMatch ? 1 + p.search.speakerBoost : 1);
    const fresh = p.recencyBoost > 0 && c.age !== undefined ? p.recencyBoost * Math.pow(2, -c.age / p.recencyHalfLife) : 0;
    const others = c.subject !== undefined && !queryTerms.has(stem(c.subject)) ? p.othersWeight : 1;
    items.push({
      source: 'slot', slot: c, id: c.id, score: own * (1 + p.slotPrior * c.strength) * (1 + fresh) * others, lexical: s.lexical,
      coverage: s.lexical / maxScore, cosine: c.cosine, context: 0, lexicalRank: 0, denseRank: 0,
      speakerMatch: s.speakerMatch, placed: 'score',
    });
  });
  const seen = new Set(items.map((x) => x.id));
  const same = p.query !== undefined ? normalizeText(p.query) : null;
  // The question asked again is not its own answer. Normalising drops only punctuation and spacing,
  // so a text over twice the query's length would have to be mostly punctuation to equal it: those
  // skip the regex.
  const isRepeat = (e: LogbookEntry): boolean => same !== null && e.value.length <= 2 * p.query!.length + 8 && normalizedValue(e) === same;
  for (const h of lb.hits) {
    if (seen.has(h.entry.id)) continue; // a promoted value still in the logbook: the slot stands for it
    if (h.entry.kind === 'turn' && isRepeat(h.entry)) continue;
    seen.add(h.entry.id);
    items.push(fromHit(h, maxScore));
  }
  // Successors the search resolved that did not match by themselves: candidates for lifting only.
  for (const [id, e] of lb.successors) {
    if (seen.has(id)) continue;
    seen.add(id);
    items.push({ source: 'logbook', entry: e, id, score: 0, lexical: 0, coverage: 0, cosine: NaN, context: 0, lexicalRank: 0, denseRank: 0, speakerMatch: false, placed: 'score' });
  }

  // Lexical order; items with no lexical evidence drop out unless the dense list holds them.
  const lexical = items.filter((x) => x.score > 0).sort(byScore);
  lexical.forEach((x, r) => (x.lexicalRank = r + 1));
  let ranked: RankedItem[];
  if (p.denseWeight > 0) {
    const dense = items.filter((x) => Number.isFinite(x.cosine) && (x.source === 'slot' || x.denseRank > 0)).sort((a, b) => b.cosine - a.cosine);
    dense.forEach((x, r) => (x.denseRank = r + 1));
    for (const x of items) {
      x.score = (x.lexicalRank > 0 ? 1 / (p.rrfK + x.lexicalRank) : 0) + (x.denseRank > 0 ? p.denseWeight / (p.rrfK + x.denseRank) : 0);
    }
    ranked = items.filter((x) => x.score > 0).sort(byScore);
  } else {
    ranked = lexical;
  }

  if (!p.history) ranked = applyPrecedence(ranked, items, liveIds, p.session);
  // A slot or demoted value whose every source turn an item above already carries (the turn it came
  // from, or a successor that kept its provenance) would spend a place saying nothing new. Turns stay:
  // their own words and dates are what a value check and a prompt need.
  // Turn ids are a session's own ("t3" in every session), so a source turn is its session and its id:
  // in a user's scope another session's turn t3 is another turn.
  const covered = new Map<string, Set<string>>();
  const distinct: RankedItem[] = [];
  for (const x of ranked) {
    const session = x.slot ? p.session : x.entry!.session;
    const prov = x.slot ? x.slot.provenance : x.entry!.provenance;
    let seen = covered.get(session);
    if (!seen) covered.set(session, (seen = new Set()));
    const fresh = prov.some((t) => !seen.has(t));
    if (x.entry?.kind !== 'turn' && !fresh && !p.history) continue;
    for (const t of prov) seen.add(t);
    distinct.push(x);
  }
  // Items far below the best (a neighbour's faint share, a stray word) are noise in a prompt.
  const floor = distinct.length > 0 && p.minShare > 0 ? p.minShare * Math.max(...distinct.slice(0, 3).map((x) => x.score)) : 0;
  const out = distinct.filter((x, i) => i === 0 || x.score >= floor || x.placed !== 'score').slice(0, p.k);
  const top = out[0];
  const next = out[1];
  const clear = top !== undefined && (next === undefined || top.score >= p.hitMargin * next.score);
  const hit = top !== undefined && ((top.coverage >= p.hitCoverage && clear) || (p.denseWeight > 0 && top.cosine >= p.hitCosine));
  return { items: out, hit };
}

const byScore = (a: RankedItem, b: RankedItem): number =>
  b.score - a.score || (a.source === b.source ? 0 : a.source === 'slot' ? -1 : 1) || (b.entry?.seq ?? 0) - (a.entry?.seq ?? 0);

function fromHit(h: LogbookHit, maxScore: number): RankedItem {
  return {
    source: 'logbook', entry: h.entry, id: h.entry.id, score: h.score, lexical: h.lexical, coverage: h.lexical / maxScore,
    cosine: h.cosine, context: h.context, lexicalRank: h.lexicalRank, denseRank: h.denseRank, speakerMatch: h.speakerMatch,
    placed: 'score', ...(h.supersededBy ? { supersededBy: h.supersededBy } : {}),
  };
}

/**
 * Moves each successor to just above what it replaced, and each ambiguous update to just above each
 * value it may have replaced. A successor not in the list is brought in from the candidates (a live
 * slot, or a logbook entry the search resolved). Bounded passes; the list never grows by more than
 * the items it lifts.
 */
function applyPrecedence(list: RankedItem[], all: readonly RankedItem[], live: ReadonlyMap<string, SlotCandidate>, session: string): RankedItem[] {
  const byId = new Map(all.map((x) => [x.id, x]));
  const out = list.slice();
  // An ambiguous update stands above what it may replace: the slots, and the turns that stated them.
  const olderOf = new Map<string, string[]>();
  for (const s of live.values()) {
    if (!s.maybeReplaces) continue;
    const olds = [...s.maybeReplaces];
    for (const id of s.maybeReplaces) {
      const lead = live.get(id)?.provenance[0];
      if (!lead) continue;
      for (const x of all) if (x.entry?.kind === 'turn' && x.entry.session === session && x.entry.provenance[0] === lead) olds.push(x.id);
    }
    olderOf.set(s.id, olds);
  }
  for (let pass = 0; pass < 4; pass++) {
    let moved = false;
    for (let i = 0; i < out.length; i++) {
      const x = out[i]!;
      const target = x.supersededBy;
      if (target && target !== x.id) {
        const succ = byId.get(target);
        if (succ && succ.supersededBy !== x.id) {
          const at = out.indexOf(succ);
          if (at < 0 || at > i) {
            if (at > i) out.splice(at, 1);
            out.splice(i, 0, succ);
            if (succ.placed === 'score') succ.placed = 'successor';
            moved = true;
            i++;
          }
        }
      }
    }
    // Ambiguous updates: newest first, just above each value they may replace.
    for (const [sid, olds] of olderOf) {
      const u = byId.get(sid);
      if (!u) continue;
      for (const old of olds) {
        const o = out.findIndex((y) => y.id === old);
        if (o < 0) continue;
        const at = out.indexOf(u);
        if (at >= 0 && at < o) continue;
        if (at >= 0) out.splice(at, 1);
        out.splice(o, 0, u);
        u.placed = 'ambiguous';
        moved = true;
      }
    }
    if (!moved) break;
  }
  // One place per id.
  const seen = new Set<string>();
  return out.filter((x) => (seen.has(x.id) ? false : (seen.add(x.id), true)));
}
