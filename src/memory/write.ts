// The write path of working memory: plans one turn's changes to a session's slots as a list of slot
// operations, without touching the table (the plan's shapes are in plan.ts). Content addressing (Graves et al. 2014, "Neural Turing
// Machines"): the candidate's key is compared with every slot key by cosine; when the best match
// passes the overwrite threshold *and* the two share the fact's words, the slot is overwritten
// erase-then-add style (its key moves toward the new key, its value is replaced and the old value goes
// to the logbook as superseded, linked to its successor). Otherwise usage-based allocation (Graves et
// al. 2016, "Hybrid computing using a neural network with dynamic external memory"): a free slot,
// else the non-pinned slot with the lowest retention.
//
// Fidelity before coverage: a wrong overwrite tells the bot something false with confidence, so an
// overwrite needs evidence that the new statement is about the same fact; one clause of a turn never
// overwrites another clause of the same turn; an update that could be about several facts replaces
// none of them and is kept beside them, newest first (`maybeReplaces`).

import type { DemotionReason, EvictReason, LogbookEntry, SlotRecord } from '../types.js';
import { decayed, reinforce } from './decay.js';
import { gateFeatures, gateScore } from './gate.js';
import { analyze, normalizeText } from './text.js';
import { findAll, type ValueExpr, type ValueKind } from './values.js';
import { dot, dotSparse, sparseOf, type SparseVector } from './vector.js';
import { demotedEntry, type KeyedCandidate, type WritePlan, type WritePlanInput } from './plan.js';

export type { KeyedCandidate, WritePlanInput, CandidateOutcome, Eviction, WritePlan } from './plan.js';
export { demotedEntry } from './plan.js';

/**
 * How far back (clock units: turns of both sides) an update without a topic may reach for the fact it
 * changes: a correction refers to what was said in the last few exchanges (common practice in dialogue
 * state tracking). A correction that shares no word with the fact reaches back only to the previous one.
 */
export const CORRECTION_WINDOW = 12;
export const BARE_CORRECTION_WINDOW = 3;
/**
 * A slot cites at most this many source turns, newest first: a fact restated over thousands of turns
 * must not grow without bound (every turn stays in the logbook; the slot keeps the recent ones).
 */
export const MAX_PROVENANCE = 16;
const cite = (turn: string, older: readonly string[]): string[] => [turn, ...older.filter((t) => t !== turn)].slice(0, MAX_PROVENANCE);


/** Words that say nothing about which fact a statement is about. */
const GENERIC = new Set(
  analyze(
    'thing things stuff like likes prefer preference want wants need needs get got go going one actually instead please now new time ' +
      'really kind sort much lot way make made put change changed move moved switch sorry wait mean meant correct correction rather',
  ),
);
const topicWords = (text: string): Set<string> => new Set(analyze(text).filter((w) => !GENERIC.has(w)));
function shares(a: Set<string>, b: Set<string>): boolean {
  for (const w of a) if (b.has(w)) return true;
  return false;
}

/** Owners conflict only when both are known and differ. */
const ownersMatch = (a: string | undefined, b: string | undefined): boolean => a === undefined || b === undefined || a.toLowerCase() === b.toLowerCase();

/** "Saturday not Sunday", "not Sunday but Saturday", "instead of Sunday": the value being corrected. */
const CONTRAST = /\b(?:not|rather than|instead of)\s+(?:the\s+|a\s+|an\s+|on\s+|at\s+|in\s+)?([\p{L}\p{N}](?:[\p{L}\p{N}'’:.-]*[\p{L}\p{N}])?(?:\s+[\p{L}\p{N}](?:[\p{L}\p{N}'’:.-]*[\p{L}\p{N}])?){0,2}?)(?=\s*(?:[,.!?;]|$|\bbut\b|\band\b|\bplease\b))/iu;

/** The shape of a date expression, so a weekday update is not aimed at a calendar date and back. */
function dateShape(expr: string): 'weekday' | 'calendar' | 'other' {
  if (/\b(?:mon|tue|wed|thu|fri|sat|sun)[a-z]*\b/i.test(expr)) return 'weekday';
  if (/\b(?:jan|feb|mar|apr|may|jun|jul|aug|sep|oct|nov|dec)[a-z]*\b|\d/i.test(expr)) return 'calendar';
  return 'other';
}

/**
 * `expr` without its first word when the text before it already ends with that word: "dinner at 6"
 * corrected by "at 7pm" reads "dinner at 7pm", not "dinner at at 7pm".
 */
function withoutRepeatedWord(before: string, expr: string): string {
  const first = /^([a-z]+)\s+/i.exec(expr);
  return first && new RegExp(`\\b${first[1]}\\s*$`, 'i').test(before) ? expr.slice(first[0].length) : expr;
}

const MONTH_ONLY = /^(?:jan|feb|mar|apr|may|jun|jul|aug|sep|oct|nov|dec)[a-z]*$/i;

/** The expressions no other one contains (the rules also report the parts of a longer one). */
function outermost(exprs: readonly ValueExpr[]): ValueExpr[] {
  const end = (e: ValueExpr): number => e.index + e.text.length;
  return exprs.filter((e) => !exprs.some((o) => o !== e && o.text.length > e.text.length && o.index <= e.index && end(o) >= end(e)));
}

/** Plans the changes of one turn. Pure: reads `table`, returns operations. */
export function planWrite(input: WritePlanInput): WritePlan {
  const { table, now, nowMs, params: p } = input;
  const cap = table.capacity;
  const dim = table.dim;
  const pending = new Map<number, SlotRecord | null>();
  /** Slots written by this plan, and the turn that wrote them: a turn never overwrites itself. */
  const writtenBy = new Map<number, string>();
  const plan: WritePlan = { ops: [], demoted: [], events: [], outcomes: [], evictions: [], reinforced: [], promoted: [], slotsInUse: 0 };

  const used = (i: number): boolean => (pending.has(i) ? pending.get(i) !== null : table.isUsed(i));
  const record = (i: number): SlotRecord | null => (pending.has(i) ? pending.get(i)! : table.get(i));
  const pinned = (i: number): boolean => (pending.has(i) ? pending.get(i)?.pinned === true : table.isPinned(i));
  // Field reads without materialising a record (table.get copies the key vector).
  const idAt = (i: number): string => pending.get(i)?.id ?? table.ids[i]!;
  const valueAt = (i: number): string => pending.get(i)?.value ?? table.value[i]!;
  const keyTextAt = (i: number): string => pending.get(i)?.keyText ?? table.keyText[i]!;
  const ownerAt = (i: number): string | undefined => (pending.has(i) ? pending.get(i)?.owner : table.owner[i]);
  const subjectAt = (i: number): string | undefined => (pending.has(i) ? pending.get(i)?.subject : table.subject[i]);
  const replyAt = (i: number): boolean => (pending.has(i) ? pending.get(i)?.reply === true : table.reply[i] === 1);
  const stampAt = (i: number): number => pending.get(i)?.stamp ?? table.stamp[i]!;
  /**
   * How recently slot i was written: the session clock first, wall-clock ms to break ties. (A sum such
   * as ms + clock * 1e-6 loses the clock below float64 precision at epoch-ms magnitudes.)
   */
  const newer = (i: number, j: number): number => {
    const ri = pending.get(i);
    const rj = pending.get(j);
    const si = ri ? ri.stamp : table.stamp[i]!;
    const sj = rj ? rj.stamp : table.stamp[j]!;
    if (si !== sj) return si - sj;
    return (ri ? ri.updatedMs : table.updatedMs[i]!) - (rj ? rj.updatedMs : table.updatedMs[j]!);
  };
  // Strength of each unchanged slot at `now`, computed once per plan (NaN: not yet).
  const decayedNow = new Float64Array(cap).fill(NaN);
  const strengthNow = (i: number): number => {
    const r = pending.get(i);
    if (r) return r.pinned ? r.strength : decayed(r.strength, r.stamp, r.halfLife, now);
    let s = decayedNow[i]!;
    if (Number.isNaN(s)) decayedNow[i] = s = table.isPinned(i) ? table.strength[i]! : decayed(table.strength[i]!, table.stamp[i]!, table.halfLife[i]!, now);
    return s;
  };
  // A hashing embedder's key has a few dozen non-zero entries: scored sparse, bit for bit the dense cosine.
  const cosAt = (i: number, k: Float32Array, ks: SparseVector | null): number => {
    const r = pending.get(i);
    if (ks) return r ? dotSparse(ks, r.key, 0) : dotSparse(ks, table.keys, i * dim);
    return r ? dot(k, r.key, 0, dim) : dot(k, table.keys, i * dim, dim);
  };
  const set = (i: number, rec: SlotRecord | null): void => {
    pending.set(i, rec);
  };
  const where = { tenant: input.tenant, session: input.session, ...(input.user ? { user: input.user } : {}) };
  const toLogbook = (rec: SlotRecord, reason: DemotionReason, strength: number, successor?: string): LogbookEntry =>
    demotedEntry(rec, where, reason, strength, now, nowMs, successor);
  const evict = (i: number, reason: EvictReason): void => {
    const rec = record(i)!;
    const s = strengthNow(i);
    plan.demoted.push(toLogbook(rec, reason as DemotionReason, s));
    plan.evictions.push({ slot: i, record: rec, reason, logged: true, strength: s });
    plan.events.push({ type: 'evict', slot: i, id: rec.id, clock: now, atMs: nowMs, reason });
    set(i, null);
  };

  // 1. Forget: slots decayed below the floor, or past their maximum age, leave working memory.
  for (let i = 0; i < cap; i++) {
    if (!table.isUsed(i) || table.isPinned(i)) continue;
    if (p.maxAgeMs > 0 && nowMs - table.createdMs[i]! > p.maxAgeMs) evict(i, 'expired');
    else if (strengthNow(i) < p.strengthFloor) evict(i, 'decayed');
  }

  // 2. Reinforce what the turn used (spacing effect: stronger, longer half-life).
  if (input.reinforce.length > 0) {
    const wanted = new Set(input.reinforce);
    for (let i = 0; i < cap; i++) {
      if (!used(i) || !wanted.has(idAt(i))) continue;
      const rec = record(i)!;
      const r = reinforce(strengthNow(i), rec.halfLife, { gain: p.reinforceGain, growth: p.halfLifeGrowth, maxHalfLife: p.maxHalfLife });
      set(i, { ...rec, strength: r.strength, halfLife: r.halfLife, stamp: now, reads: rec.reads + 1 });
      plan.reinforced.push({ slot: i, id: rec.id, strength: r.strength, halfLife: r.halfLife });
      plan.events.push({ type: 'reinforce', slot: i, id: rec.id, clock: now, atMs: nowMs });
    }
  }

  // Allocation: a free slot, else evict the weakest non-pinned slot; -1 when every slot is pinned.
  const allocate = (): number => {
    for (let i = 0; i < cap; i++) if (!used(i)) return i;
    let weakest = -1;
    let weakestS = Infinity;
    for (let i = 0; i < cap; i++) {
      if (pinned(i)) continue;
      const s = strengthNow(i);
      if (s < weakestS) {
        weakestS = s;
        weakest = i;
      }
    }
    if (weakest >= 0) evict(weakest, 'capacity');
    return weakest;
  };

  // 2b. Promote logbook values the turn used back into working memory, reinforced as a use.
  for (const item of input.promote ?? []) {
    let live = false;
    for (let i = 0; i < cap && !live; i++) live = used(i) && idAt(i) === item.id;
    if (live || !item.key || item.key.length !== dim || item.kind === 'turn' || item.kind === 'superseded') continue;
    const slot = allocate();
    if (slot < 0) break;
    const r = reinforce(item.strength ?? p.strengthFloor * 2, item.halfLife ?? p.halfLife, { gain: p.reinforceGain, growth: p.halfLifeGrowth, maxHalfLife: p.maxHalfLife });
    set(slot, {
      id: item.id, key: item.key, keyText: item.keyText, value: item.value, provenance: item.provenance.slice(),
      strength: Math.max(r.strength, p.strengthFloor * 2), halfLife: r.halfLife, stamp: now, created: now,
      createdMs: item.createdMs, updatedMs: nowMs, reads: 1, pinned: false, ...(item.owner ? { owner: item.owner } : {}),
    });
    plan.promoted.push({ slot, id: item.id });
    plan.events.push({ type: 'allocate', slot, id: item.id, clock: now, atMs: nowMs });
  }

  /** A candidate from a bot's own reply (an assistant turn naming no speaker). */
  const fromReply = (kc: KeyedCandidate): boolean => kc.role !== 'user' && kc.owner === undefined;
  /**
   * Slots a candidate may change: same owner, not written by the same turn, and never a user's fact
   * changed by the bot's reply (a reply restates or proposes; a model's wording must not replace what
   * the user said).
   */
  const open = (i: number, kc: KeyedCandidate): boolean =>
    used(i) && ownersMatch(ownerAt(i), kc.owner) && subjectAt(i) === kc.candidate.subject && writtenBy.get(i) !== kc.turn && (!fromReply(kc) || replyAt(i));

  // 3. Write each candidate: gate, address, overwrite or allocate.
  input.candidates.forEach((kc, index) => {
    const c = kc.candidate;
    let best = -1;
    let bestCos = -1;
    const ks = sparseOf(kc.key);
    for (let i = 0; i < cap; i++) {
      if (!open(i, kc)) continue;
      const d = cosAt(i, kc.key, ks);
      if (d > bestCos) {
        bestCos = d;
        best = i;
      }
    }
    const cTopic = topicWords(c.key);
    const sameFact = (i: number): boolean => normalizeText(keyTextAt(i)) === normalizeText(c.key) || shares(cTopic, topicWords(keyTextAt(i)));
    // Overwrite by key: close in meaning *and* sharing the fact's words. Facts that add up ("I like
    // X") replace one another only when the sentence says so.
    let target = best >= 0 && bestCos >= p.overwriteThreshold && sameFact(best) && (!c.accumulate || c.updates !== undefined || c.revises === true || normalizeText(valueAt(best)) === normalizeText(c.value)) ? best : -1;
    let value = c.value;
    let provenanceTail: string[] = [];
    let maybe: number[] = [];
    const swapIn = (i: number, kind: ValueKind, expr: string): boolean => {
      const old = record(i)!;
      const exprs = findAll(old.value, kind);
      // The rules find a date and its parts ("the 14th of October", "the 14th", "October"): a bare month
      // ("make it November") swaps the month alone; anything else swaps the whole expression, so
      // "the 20th of October" replaces "the 14th of October" rather than the "October" inside it.
      const pool = kind === 'date' && MONTH_ONLY.test(expr.trim()) ? exprs : outermost(exprs);
      const last = pool[pool.length - 1];
      if (!last) return false;
      value = old.value.slice(0, last.index) + expr + old.value.slice(last.index + last.text.length);
      provenanceTail = old.provenance;
      return true;
    };

    if (c.updates && c.updates.kind !== 'latest' && target >= 0) {
      // An update of a fact named by its topic: swap the new value into the old one when it holds an
      // expression of that kind ("have my lessons on Tuesdays" -> "... on Wednesday"). When it holds
      // none (a new day for a slot that says only the time), the update may not cover all of the old
      // fact: keep both, newest first.
      if (!swapIn(target, c.updates.kind, c.updates.expr)) {
        maybe = [target];
        target = -1;
      }
    }
    const named = maybe.length > 0;
    if (c.updates && target < 0 && !named) {
      // "Saturday, not Sunday": the slot holding the value being corrected is the one.
      const contrast = CONTRAST.exec(c.text);
      if (contrast) {
        const y = new RegExp(`\\b${contrast[1]!.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}\\b`, 'i');
        let newest = -1;
        for (let i = 0; i < cap; i++) if (open(i, kc) && y.test(valueAt(i)) && (newest < 0 || newer(i, newest) > 0)) newest = i;
        if (newest >= 0) {
          target = newest;
          const old = record(newest)!;
          // The corrected word is swapped for the new value when the update has one ("3 hours, not 2":
          // the number for the number); a correction without one ("it's the blue one, not the red")
          // replaces the fact with its own sentence.
          if (c.updates.kind !== 'latest') {
            const lead = /^\d+(?:[.,]\d+)?/.exec(c.updates.expr);
            const swap = /^\d/.test(contrast[1]!) && lead ? lead[0] : c.updates.expr;
            value = old.value.replace(y, (_m, at: number) => withoutRepeatedWord(old.value.slice(0, at), swap));
          }
          provenanceTail = old.provenance;
        }
      }
    }
    if (c.updates?.kind === 'latest' && target < 0 && !named) {
      // A correction without a recognisable value ("no, the patio speaker instead") replaces the fact
      // it shares words with among the last few turns' (its topic half-matching, or the newest such
      // slot); one that shares no word with anything corrects nothing for certain, so it is kept
      // beside the newest fact of the last exchange (newest first) rather than replacing it.
      // Evidence comes from the correction's own turn; the other side's turns say nothing about it.
      const cWords = topicWords(`${c.text} ${c.context ?? ''}`);
      const related = (i: number): boolean => shares(cWords, topicWords(`${keyTextAt(i)} ${valueAt(i)}`));
      if (best >= 0 && bestCos >= p.overwriteThreshold / 2 && related(best)) target = best;
      else {
        let newest = -1;
        let newestRelated = -1;
        for (let i = 0; i < cap; i++) {
          if (!open(i, kc) || pinned(i) || now - stampAt(i) > CORRECTION_WINDOW) continue;
          if (newest < 0 || newer(i, newest) > 0) newest = i;
          if (related(i) && (newestRelated < 0 || newer(i, newestRelated) > 0)) newestRelated = i;
        }
        if (newestRelated >= 0) target = newestRelated;
        else if (newest >= 0 && now - stampAt(newest) <= BARE_CORRECTION_WINDOW) maybe = [newest];
      }
      if (target >= 0) provenanceTail = record(target)!.provenance;
    }
    if (c.updates && c.updates.kind !== 'latest' && target < 0 && !named) {
      // An update that names a new value but not its topic ("make it Friday instead"): the fact it
      // changes holds a value of the same kind (and shape). One such fact, or one within the correction
      // window: that one. Several: it could be any of them, so none is replaced (kept beside them).
      const kind = c.updates.kind;
      const shape = kind === 'date' ? dateShape(c.updates.expr) : 'other';
      const holders: number[] = [];
      for (let i = 0; i < cap; i++) {
        if (!open(i, kc)) continue;
        const exprs = findAll(valueAt(i), kind);
        if (exprs.length === 0) continue;
        if (kind === 'date' && shape !== 'other' && !exprs.some((e) => dateShape(e.text) === shape)) continue;
        holders.push(i);
      }
      holders.sort((a, b) => newer(b, a));
      const recent = holders.filter((i) => now - stampAt(i) <= CORRECTION_WINDOW);
      const pool = recent.length > 0 ? recent : holders;
      // Its own words, the sentence before it, then the turns before may say which fact "it" is: that
      // decides first ("How is the exam prep going?" — "They moved it"); else the one fact of the last
      // exchanges holding such a value.
      const spoken = topicWords([c.key, c.context ?? '', ...(input.context ?? [])].join(' '));
      const talkedOf = spoken.size > 0 ? holders.filter((i) => shares(spoken, topicWords(keyTextAt(i)))) : [];
      if (talkedOf.length === 1) target = talkedOf[0]!;
      else if (pool.length === 1) target = pool[0]!;
      else if (pool.length > 0) maybe = (talkedOf.length > 1 ? talkedOf : pool).slice(0, 4);
      if (target >= 0) swapIn(target, kind, c.updates.expr);
    }

    const features = gateFeatures(c, kc.role, 1 - Math.max(0, bestCos));
    const gate = gateScore(features, p.gateWeights);
    // Spread last: in V8 (Node 20) fields after a leading spread are added on a slow path (~1.5 µs each).
    const base = { index, gate, features, cosine: bestCos };
    if (gate < p.gateThreshold && !c.pin) {
      plan.outcomes.push({ outcome: 'gated_out', slot: -1, ...base });
      return;
    }
    if (target >= 0) {
      const old = record(target)!;
      if (normalizeText(old.value) === normalizeText(value)) {
        // The same fact again: strengthen it and note the new source.
        const r = reinforce(strengthNow(target), old.halfLife, { gain: p.reinforceGain, growth: p.halfLifeGrowth, maxHalfLife: p.maxHalfLife });
        const provenance = cite(kc.turn, old.provenance);
        set(target, { ...old, strength: Math.max(r.strength, gate), halfLife: r.halfLife, stamp: now, updatedMs: nowMs, provenance, pinned: old.pinned || c.pin === true });
        writtenBy.set(target, kc.turn);
        plan.outcomes.push({ outcome: 'reinforced', slot: target, id: old.id, ...base });
        plan.events.push({ type: 'reinforce', slot: target, id: old.id, clock: now, atMs: nowMs });
        return;
      }
      const id = input.newId();
      const blend = c.updates ? 0 : p.keyBlend;
      const incoming = kc.stored ?? kc.key;
      const key = new Float32Array(dim);
      let s = 0;
      for (let j = 0; j < dim; j++) {
        key[j] = (1 - blend) * old.key[j]! + blend * incoming[j]!;
        s += key[j]! * key[j]!;
      }
      const inv = s > 0 ? 1 / Math.sqrt(s) : 0;
      for (let j = 0; j < dim; j++) key[j] = key[j]! * inv;
      const provenance = cite(kc.turn, provenanceTail);
      plan.demoted.push(toLogbook(old, 'superseded', strengthNow(target), id));
      const rec: SlotRecord = {
        id,
        key,
        // An update keeps the fact's topic, unless that topic was only the old sentence itself (a
        // sentence-keyed fact): then the old wording would keep the replaced value in sight.
        keyText: c.updates && normalizeText(old.keyText) !== normalizeText(old.value) ? old.keyText : c.key,
        value,
        provenance,
        // The fact's retention carries over: an update is as established as what it replaces.
        strength: Math.max(gate, strengthNow(target)),
        halfLife: old.halfLife,
        stamp: now,
        created: old.created,
        createdMs: old.createdMs,
        updatedMs: nowMs,
        reads: old.reads,
        pinned: old.pinned || c.pin === true,
        previous: old.id,
        ...(old.subject ? { subject: old.subject } : {}),
        ...(old.owner ?? kc.owner ? { owner: (old.owner ?? kc.owner)! } : {}),
      };
      set(target, rec);
      writtenBy.set(target, kc.turn);
      plan.outcomes.push({ outcome: 'overwritten', slot: target, id, supersededId: old.id, ...base });
      plan.events.push({ type: 'overwrite', slot: target, id, clock: now, atMs: nowMs });
      return;
    }
    const maybeIds = maybe.map(idAt);
    const slot = allocate();
    if (slot < 0) {
      // Every slot is pinned: nothing may be displaced.
      plan.outcomes.push({ outcome: 'gated_out', slot: -1, ...base });
      return;
    }
    const id = input.newId();
    set(slot, {
      id,
      key: Float32Array.from(kc.stored ?? kc.key),
      keyText: c.key,
      value,
      provenance: [kc.turn],
      strength: Math.min(1, Math.max(gate, 1e-6)),
      halfLife: p.halfLife,
      stamp: now,
      created: now,
      createdMs: nowMs,
      updatedMs: nowMs,
      reads: 0,
      pinned: c.pin === true,
      ...(kc.owner ? { owner: kc.owner } : {}),
      ...(fromReply(kc) ? { reply: true } : {}),
      ...(c.subject ? { subject: c.subject } : {}),
      ...(maybeIds.length > 0 ? { maybeReplaces: maybeIds } : {}),
    });
    writtenBy.set(slot, kc.turn);
    plan.outcomes.push({ outcome: 'allocated', slot, id, ...(maybeIds.length > 0 ? { maybeReplaces: maybeIds } : {}), ...base });
    plan.events.push({ type: 'allocate', slot, id, clock: now, atMs: nowMs });
  });

  for (const [index, slot] of pending) plan.ops.push({ index, slot });
  plan.ops.sort((a, b) => a.index - b.index);
  for (let i = 0; i < cap; i++) if (used(i)) plan.slotsInUse++;
  return plan;
}
