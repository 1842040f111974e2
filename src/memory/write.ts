// The write path: plans one turn's changes to a session's slots as a list of slot operations,
// without touching the table. Content addressing (Graves et al. 2014, "Neural Turing Machines"):
// w_i = softmax_i(beta * cos(k, K_i)); when the best match passes the overwrite threshold the slot is
// overwritten erase-then-add style (its key moves toward the new key, its value is replaced and the
// old value is archived as superseded, linked to its successor). Otherwise usage-based allocation
// (Graves et al. 2016, "Hybrid computing using a neural network with dynamic external memory"): a
// free slot, else the non-pinned slot with the lowest retention.

import type { SlotOp } from '../store/store.js';
import type { ArchiveItem, ArchiveReason, EvictReason, Role, SlotRecord, StoredEvent, WriteOutcome } from '../types.js';
import { decayed, reinforce } from './decay.js';
import type { Candidate } from './extract.js';
import { gateFeatures, gateScore, type GateFeatures } from './gate.js';
import type { WriteParams } from './params.js';
import type { SlotTable } from './slots.js';
import { findAll } from './values.js';
import { dot } from './vector.js';

/** A candidate with its embedded key and where it came from. */
export interface KeyedCandidate {
  candidate: Candidate;
  /** Unit key vector of `candidate.key`, used for addressing. */
  key: Float32Array;
  /**
   * Unit vector stored as the slot's key; defaults to `key`. The middleware passes
   * normalize(key + mix * value) so reads see the value's words while addressing still works on
   * the topic: a same-topic candidate has cosine 1/sqrt(1 + mix^2) with it (0.89 at mix 0.5).
   */
  stored?: Float32Array;
  turn: string;
  role: Role;
}

export interface WritePlanInput {
  table: SlotTable;
  /** Session clock now. */
  now: number;
  nowMs: number;
  params: WriteParams;
  tenant: string;
  session: string;
  user?: string;
  candidates: KeyedCandidate[];
  /** Revision ids of slots the turn's read used; they are reinforced. */
  reinforce: readonly string[];
  /** Archive items the turn's read used: they are promoted back into working memory. */
  promote?: readonly ArchiveItem[];
  /** Makes a fresh revision id. */
  newId: () => string;
}

export interface CandidateOutcome {
  index: number;
  outcome: WriteOutcome;
  slot: number;
  gate: number;
  features: GateFeatures;
  /** Best key cosine against the slots at the time of the write (-1 when memory was empty). */
  cosine: number;
  /** For overwrites: the superseded revision id. */
  supersededId?: string;
  id?: string;
}

export interface Eviction {
  slot: number;
  record: SlotRecord;
  reason: EvictReason;
  archived: boolean;
  strength: number;
}

export interface WritePlan {
  ops: SlotOp[];
  archive: ArchiveItem[];
  events: StoredEvent[];
  outcomes: CandidateOutcome[];
  evictions: Eviction[];
  reinforced: Array<{ slot: number; id: string; strength: number; halfLife: number }>;
  /** Archive items moved back into slots (the caller deletes them from the archive after the commit). */
  promoted: Array<{ slot: number; id: string }>;
  /** Used slots after the plan is applied. */
  slotsInUse: number;
}

/** How far back (clock units) a bare correction may reach for the slot it corrects. */
const CORRECTION_WINDOW = 8;

const normalizeText = (s: string): string => s.toLowerCase().replace(/[^\p{L}\p{N}]+/gu, ' ').trim();

/** A slot record as the archive item it becomes when it leaves working memory. */
export function archiveItemOf(
  rec: SlotRecord,
  where: { tenant: string; session: string; user?: string },
  reason: ArchiveReason,
  strength: number,
  clock: number,
  archivedMs: number,
  successor?: string,
): ArchiveItem {
  return {
    id: rec.id,
    tenant: where.tenant,
    session: where.session,
    ...(where.user ? { user: where.user } : {}),
    key: rec.key,
    keyText: rec.keyText,
    value: rec.value,
    provenance: rec.provenance.slice(),
    reason,
    strength,
    halfLife: rec.halfLife,
    clock,
    createdMs: rec.createdMs,
    archivedMs,
    ...(successor ? { successor } : {}),
  };
}

/** Plans the changes of one turn. Pure: reads `table`, returns operations. */
export function planWrite(input: WritePlanInput): WritePlan {
  const { table, now, nowMs, params: p } = input;
  const cap = table.capacity;
  const dim = table.dim;
  const pending = new Map<number, SlotRecord | null>();
  const plan: WritePlan = { ops: [], archive: [], events: [], outcomes: [], evictions: [], reinforced: [], promoted: [], slotsInUse: 0 };

  const used = (i: number): boolean => (pending.has(i) ? pending.get(i) !== null : table.isUsed(i));
  const record = (i: number): SlotRecord | null => (pending.has(i) ? pending.get(i)! : table.get(i));
  const pinned = (i: number): boolean => (pending.has(i) ? pending.get(i)?.pinned === true : table.isPinned(i));
  // Field reads without materialising a record (table.get copies the key vector).
  const idAt = (i: number): string => pending.get(i)?.id ?? table.ids[i]!;
  const valueAt = (i: number): string => pending.get(i)?.value ?? table.value[i]!;
  const recencyAt = (i: number): number => {
    const r = pending.get(i);
    return r ? r.updatedMs + r.stamp * 1e-6 : table.updatedMs[i]! + table.stamp[i]! * 1e-6;
  };
  const strengthNow = (i: number): number => {
    const r = pending.get(i);
    if (r) return r.pinned ? r.strength : decayed(r.strength, r.stamp, r.halfLife, now);
    return table.isPinned(i) ? table.strength[i]! : decayed(table.strength[i]!, table.stamp[i]!, table.halfLife[i]!, now);
  };
  const cosAt = (i: number, k: Float32Array): number => {
    const r = pending.get(i);
    return r ? dot(k, r.key, 0, dim) : dot(k, table.keys, i * dim, dim);
  };
  const set = (i: number, rec: SlotRecord | null): void => {
    pending.set(i, rec);
  };
  const where = { tenant: input.tenant, session: input.session, ...(input.user ? { user: input.user } : {}) };
  const toArchive = (rec: SlotRecord, reason: ArchiveReason, strength: number, successor?: string): ArchiveItem =>
    archiveItemOf(rec, where, reason, strength, now, nowMs, successor);
  const evict = (i: number, reason: EvictReason): void => {
    const rec = record(i)!;
    const s = strengthNow(i);
    plan.archive.push(toArchive(rec, reason as ArchiveReason, s));
    plan.evictions.push({ slot: i, record: rec, reason, archived: true, strength: s });
    plan.events.push({ type: 'evict', slot: i, id: rec.id, clock: now, atMs: nowMs, reason });
    set(i, null);
  };

  // 1. Forget: slots decayed below the floor, or past their maximum age, leave working memory.
  for (let i = 0; i < cap; i++) {
    if (!table.isUsed(i) || table.isPinned(i)) continue;
    if (p.maxAgeMs > 0 && nowMs - table.createdMs[i]! > p.maxAgeMs) evict(i, 'expired');
    else if (strengthNow(i) < p.strengthFloor) evict(i, 'decayed');
  }

  // 2. Reinforce what the turn's read used (spacing effect: stronger, longer half-life).
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

  // 2b. Promote archive items the read used back into working memory, reinforced as a use.
  for (const item of input.promote ?? []) {
    let live = false;
    for (let i = 0; i < cap && !live; i++) live = used(i) && idAt(i) === item.id;
    if (live || item.key.length !== dim) continue;
    const slot = allocate();
    if (slot < 0) break;
    const r = reinforce(item.strength, item.halfLife, { gain: p.reinforceGain, growth: p.halfLifeGrowth, maxHalfLife: p.maxHalfLife });
    set(slot, {
      id: item.id, key: item.key, keyText: item.keyText, value: item.value, provenance: item.provenance.slice(),
      strength: Math.max(r.strength, p.strengthFloor * 2), halfLife: r.halfLife, stamp: now, created: now,
      createdMs: item.createdMs, updatedMs: nowMs, reads: 1, pinned: false,
    });
    plan.promoted.push({ slot, id: item.id });
    plan.events.push({ type: 'allocate', slot, id: item.id, clock: now, atMs: nowMs });
  }

  // 3. Write each candidate: gate, address, overwrite or allocate.
  input.candidates.forEach((kc, index) => {
    const c = kc.candidate;
    let best = -1;
    let bestCos = -1;
    for (let i = 0; i < cap; i++) {
      if (!used(i)) continue;
      const d = cosAt(i, kc.key);
      if (d > bestCos) {
        bestCos = d;
        best = i;
      }
    }
    // An update names a new value but not its topic: aim it at the newest slot holding a value of
    // the same kind, unless the key itself already addresses a slot.
    let target = bestCos >= p.overwriteThreshold ? best : -1;
    let value = c.value;
    let provenanceTail: string[] = [];
    if (c.updates?.kind === 'latest' && target < 0) {
      // A correction without a recognisable value ("no, the patio speaker instead") replaces the
      // slot its topic half-matches, else the one written most recently, if that was within the last
      // few turns (a correction refers to what was just said; common practice in dialogue state tracking).
      if (bestCos >= p.overwriteThreshold / 2) target = best;
      else {
        let newest = -1;
        let newestAt = -Infinity;
        for (let i = 0; i < cap; i++) {
          if (!used(i) || pinned(i)) continue;
          const at = recencyAt(i);
          if (at > newestAt) {
            newestAt = at;
            newest = i;
          }
        }
        const stampOf = (i: number): number => pending.get(i)?.stamp ?? table.stamp[i]!;
        if (newest >= 0 && now - stampOf(newest) <= CORRECTION_WINDOW) target = newest;
      }
      if (target >= 0) provenanceTail = record(target)!.provenance;
    }
    if (c.updates && c.updates.kind !== 'latest' && target < 0) {
      let newest = -1;
      let newestMs = -Infinity;
      for (let i = 0; i < cap; i++) {
        if (!used(i)) continue;
        if (findAll(valueAt(i), c.updates.kind).length === 0) continue;
        const at = recencyAt(i);
        if (at > newestMs) {
          newestMs = at;
          newest = i;
        }
      }
      if (newest >= 0) target = newest;
    }
    if (c.updates && c.updates.kind !== 'latest' && target >= 0) {
      // Swap the old expression for the new one so the value reads as the current fact.
      const old = record(target)!;
      const exprs = findAll(old.value, c.updates.kind);
      const last = exprs[exprs.length - 1];
      if (last) {
        value = old.value.slice(0, last.index) + c.updates.expr + old.value.slice(last.index + last.text.length);
        provenanceTail = old.provenance;
      }
    }
    const features = gateFeatures(c, kc.role, 1 - Math.max(0, bestCos));
    const gate = gateScore(features, p.gateWeights);
    const base = { index, gate, features, cosine: bestCos };
    if (gate < p.gateThreshold && !c.pin) {
      plan.outcomes.push({ ...base, outcome: 'gated_out', slot: -1 });
      return;
    }
    if (target >= 0) {
      const old = record(target)!;
      if (normalizeText(old.value) === normalizeText(value)) {
        // The same fact again: strengthen it and note the new source.
        const r = reinforce(strengthNow(target), old.halfLife, { gain: p.reinforceGain, growth: p.halfLifeGrowth, maxHalfLife: p.maxHalfLife });
        const provenance = [kc.turn, ...old.provenance.filter((t) => t !== kc.turn)];
        set(target, { ...old, strength: Math.max(r.strength, gate), halfLife: r.halfLife, stamp: now, updatedMs: nowMs, provenance, pinned: old.pinned || c.pin === true });
        plan.outcomes.push({ ...base, outcome: 'reinforced', slot: target, id: old.id });
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
      const provenance = [kc.turn, ...provenanceTail.filter((t) => t !== kc.turn)];
      plan.archive.push(toArchive(old, 'superseded', strengthNow(target), id));
      const rec: SlotRecord = {
        id,
        key,
        keyText: c.updates ? old.keyText : c.key,
        value,
        provenance,
        strength: Math.max(gate, strengthNow(target)),
        halfLife: old.halfLife,
        stamp: now,
        created: old.created,
        createdMs: old.createdMs,
        updatedMs: nowMs,
        reads: old.reads,
        pinned: old.pinned || c.pin === true,
        previous: old.id,
      };
      set(target, rec);
      plan.outcomes.push({ ...base, outcome: 'overwritten', slot: target, id, supersededId: old.id });
      plan.events.push({ type: 'overwrite', slot: target, id, clock: now, atMs: nowMs });
      return;
    }
    const slot = allocate();
    if (slot < 0) {
      // Every slot is pinned: nothing may be displaced.
      plan.outcomes.push({ ...base, outcome: 'gated_out', slot: -1 });
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
    });
    plan.outcomes.push({ ...base, outcome: 'allocated', slot, id });
    plan.events.push({ type: 'allocate', slot, id, clock: now, atMs: nowMs });
  });

  for (const [index, slot] of pending) plan.ops.push({ index, slot });
  plan.ops.sort((a, b) => a.index - b.index);
  for (let i = 0; i < cap; i++) if (used(i)) plan.slotsInUse++;
  return plan;
}
