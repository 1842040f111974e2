// The shapes of a write plan (what planWrite in write.ts takes and returns) and the logbook entry a
// slot value becomes when it leaves working memory. Plain data and one pure function.

import type { SlotOp } from '../store/store.js';
import type { DemotionReason, EvictReason, LogbookEntry, Role, SlotRecord, StoredEvent, WriteOutcome } from '../types.js';
import type { Candidate } from './extract.js';
import type { GateFeatures } from './gate.js';
import type { WriteParams } from './params.js';
import type { SlotTable } from './slots.js';

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
  /** Whose fact it is (the turn's speaker); undefined matches any owner. */
  owner?: string;
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
  /** Revision ids of slots the turn used; they are reinforced. */
  reinforce: readonly string[];
  /** Logbook entries (values evicted earlier) the turn used: they are promoted back into working memory. */
  promote?: readonly LogbookEntry[];
  /** Makes a fresh revision id. */
  newId: () => string;
  /**
   * Texts of the turns just before this one, newest first, when the caller knows them: an update
   * that could be about several facts is tied to the one this context talks about ("How is the exam
   * prep going?" — "They moved it, it's in November instead").
   */
  context?: readonly string[];
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
  /** For an ambiguous update allocated beside the values it may replace: their revision ids. */
  maybeReplaces?: string[];
  id?: string;
}

export interface Eviction {
  slot: number;
  record: SlotRecord;
  reason: EvictReason;
  logged: boolean;
  strength: number;
}

export interface WritePlan {
  ops: SlotOp[];
  /** Values leaving working memory (superseded or evicted), as logbook entries. */
  demoted: LogbookEntry[];
  events: StoredEvent[];
  outcomes: CandidateOutcome[];
  evictions: Eviction[];
  reinforced: Array<{ slot: number; id: string; strength: number; halfLife: number }>;
  /** Logbook entries moved back into slots (the caller deletes them from the logbook after the commit). */
  promoted: Array<{ slot: number; id: string }>;
  /** Used slots after the plan is applied. */
  slotsInUse: number;
}

/** A slot value as the logbook entry it becomes when it leaves working memory. */
export function demotedEntry(
  rec: SlotRecord,
  where: { tenant: string; session: string; user?: string },
  reason: DemotionReason,
  strength: number,
  clock: number,
  atMs: number,
  successor?: string,
): LogbookEntry {
  return {
    id: rec.id,
    kind: reason,
    tenant: where.tenant,
    session: where.session,
    value: rec.value,
    keyText: rec.keyText,
    provenance: rec.provenance.slice(),
    atMs,
    createdMs: rec.createdMs,
    clock,
    seq: 0,
    key: rec.key,
    strength,
    halfLife: rec.halfLife,
    // Optional fields last: fields written after a spread take a slow path in V8 (test/bench/turn-path-literals.test.ts).
    ...(where.user ? { user: where.user } : {}),
    ...(rec.owner ? { owner: rec.owner } : {}),
    ...(successor ? { successor } : {}),
  };
}
