// The write path: after a turn (its reply done), keep every turn of the kept roles in the logbook,
// extract working-memory candidates, gate and address them (src/memory/write.ts), and commit slots
// and logbook entries in one atomic commit against the version read. A version conflict reloads
// and plans again with randomised backoff.

import { randomUUID } from 'node:crypto';
import { DEPRECATED_DEMOTE_EVENT, withDeprecatedCommitFields, withDeprecatedEvictFields } from '../deprecated-fields.js';
import { embedCached } from '../embed/cache.js';
import { ErrorCodes, StoreError } from '../errors.js';
import { resolveDates } from '../memory/dates.js';
import { decayed } from '../memory/decay.js';
import type { Candidate } from '../memory/extract.js';
import { SlotTable, emptyTable } from '../memory/slots.js';
import { textDigest } from '../memory/text.js';
import { demotedEntry, planWrite, type Eviction, type KeyedCandidate, type WritePlan } from '../memory/write.js';
import { survivalIncrements, type SlotBirth } from '../metrics/survival.js';
import { scopeOf } from '../store/in-process.js';
import type { CommitRequest, ErasureFence, SlotOp } from '../store/store.js';
import type { LogbookEntry, MentionedDate, SessionRef, SlotRecord } from '../types.js';
import { Core, payload, sleep, usSince } from './core.js';
import type { DemoteEvent } from './events.js';
import { retentionOf } from './options.js';
import { writeDetail, type WriteDetail } from './report.js';
import type { Turn } from './validate.js';

/** What one write did. */
export interface WriteReport {
  allocated: number;
  overwritten: number;
  reinforced: number;
  gatedOut: number;
  evicted: number;
  /** Logbook entries added: the turns kept plus the values that left working memory. */
  logbook: number;
  /** Logbook entries the retention policy deleted in this commit, by reason. */
  dropped: { age: number; count: number };
  /** False when the store was unreachable and the write is waiting in the outbox. */
  committed: boolean;
  version: number;
  /** Turn ids assigned, in input order. */
  turns: string[];
  /** What was stored, overwritten and dropped, by id and key (present once committed; see report.ts). */
  detail?: WriteDetail;
}

/** The id of a turn's logbook entry: stable for a session's turn id, so a resent commit replaces it. */
export const turnEntryId = (session: string, turn: string): string => `T${textDigest(`${session}\u0000${turn}`)}`;

/** normalize(a + mix * b) as a new vector. */
export function mixVectors(a: Float32Array, b: Float32Array, mix: number): Float32Array {
  const out = new Float32Array(a.length);
  let s = 0;
  for (let j = 0; j < a.length; j++) {
    out[j] = a[j]! + mix * b[j]!;
    s += out[j]! * out[j]!;
  }
  const inv = s > 0 ? 1 / Math.sqrt(s) : 0;
  for (let j = 0; j < a.length; j++) out[j] = out[j]! * inv;
  return out;
}

/** A fresh revision id: 16 random hex chars (collisions are not a practical concern at 64 bits). */
export function newRevisionId(): string {
  return randomUUID().replace(/-/g, '').slice(0, 16);
}

interface Prepared {
  turn: Turn;
  candidates: Candidate[];
  /** Kept in the logbook. */
  keep: boolean;
  dates: MentionedDate[];
  vector?: Float32Array;
}

export class WritePath {
  constructor(private readonly core: Core) {}

  /** Extract, embed, plan and commit with reload-and-redo on version conflicts. */
  async commit(ref: SessionRef, turns: Turn[], reinforce: string[], commitId: string = randomUUID(), promote: readonly LogbookEntry[] = [], fence?: ErasureFence): Promise<WriteReport> {
    const core = this.core;
    const prepared: Prepared[] = [];
    let previous: string | undefined = core.saidBefore(ref)[0];
    for (const t of turns) {
      const replies = core.o.writeReplies;
      const extract = t.role === 'user' || (t.role === 'assistant' && (replies === true || (replies === 'named' && t.speaker !== undefined)));
      const keep = core.o.logbook.roles.includes(t.role);
      const candidates = extract ? await core.extractor.extract(t.text, t.role, previous !== undefined ? { previous } : {}) : [];
      previous = t.text;
      prepared.push({ turn: t, candidates, keep, dates: keep ? resolveDates(t.text, t.atMs).map(({ text, day, grain }) => ({ text, day, grain })) : [] });
    }
    const all = prepared.flatMap((x) => x.candidates);
    const e0 = performance.now();
    // Keys address slots; values are mixed into the stored vector so reads see them too.
    const mix = core.o.valueMix;
    const vecs = all.length > 0 ? await embedCached(core.embedder, core.cache, mix > 0 ? all.flatMap((c) => [c.key, c.value]) : all.map((c) => c.key)) : [];
    const keys = mix > 0 ? all.map((_, n) => vecs[2 * n]!) : vecs;
    const stored = mix > 0 ? all.map((c, n) => (c.value === c.key ? vecs[2 * n]! : mixVectors(vecs[2 * n]!, vecs[2 * n + 1]!, mix))) : keys;
    if (core.dense) {
      const kept = prepared.filter((x) => x.keep);
      const tv = kept.length > 0 ? await embedCached(core.embedder, core.cache, kept.map((x) => x.turn.text)) : [];
      kept.forEach((x, n) => (x.vector = tv[n]!));
    }
    const embedUs = usSince(e0);
    let planUs = 0;
    for (let attempt = 0; attempt <= core.o.commitRetries; attempt++) {
      // First attempt: plan on the snapshot this turn's read just loaded, saving a round trip; the
      // commit's version check makes a stale one harmless (a conflict reloads and plans again).
      const cached = attempt === 0 ? core.takeSnapshot(ref) : undefined;
      const snap = cached ?? (await core.storeCall(() => core.store.load(ref), 'load'));
      if (!cached) core.noteQuarantine(ref, snap);
      if (snap && snap.table.dim !== core.embedder.dim) throw core.dimError(ref, snap.table.dim);
      const p0 = performance.now();
      let table = snap?.table ?? emptyTable(core.params.capacity, core.embedder.dim);
      const resize = table.capacity !== core.params.capacity ? resizeTable(table, core.params.capacity, snap?.clock ?? 0) : null;
      if (resize) table = resize.table;
      // Assign turn ids and advance the clock.
      let turnCount = snap?.turns ?? 0;
      let clock = snap?.clock ?? 0;
      const ids: string[] = [];
      const keyed: KeyedCandidate[] = [];
      const entries: LogbookEntry[] = [];
      let k = 0;
      for (const x of prepared) {
        const { turn } = x;
        turnCount++;
        clock = core.params.decayUnit === 'seconds' ? Math.max(clock, turn.atMs / 1000) : clock + 1;
        const id = turn.turn ?? `t${turnCount}`;
        ids.push(id);
        for (const c of x.candidates) {
          keyed.push({ candidate: c, key: keys[k]!, stored: stored[k]!, turn: id, role: turn.role, ...(turn.speaker ? { owner: turn.speaker } : {}) });
          k++;
        }
        if (x.keep) {
          // Optional fields last: fields written after a spread take a slow path in V8 (test/bench/turn-path-literals.test.ts).
          entries.push({
            id: turnEntryId(ref.session, id), kind: 'turn', tenant: ref.tenant, session: ref.session,
            value: turn.text, keyText: '', provenance: [id], role: turn.role,
            atMs: turn.atMs, createdMs: turn.atMs, clock, seq: turnCount, ...(ref.user ? { user: ref.user } : {}),
            ...(turn.speaker ? { speaker: turn.speaker } : {}), ...(x.dates.length > 0 ? { dates: x.dates } : {}),
            ...(x.vector ? { key: x.vector } : {}),
          });
        }
      }
      const last = turns[turns.length - 1]!;
      const plan = planWrite({
        table, now: clock, nowMs: last.atMs, params: core.params.write, tenant: ref.tenant, session: ref.session,
        candidates: keyed, reinforce, promote, newId: newRevisionId, context: core.saidBefore(ref),
        ...(ref.user ? { user: ref.user } : {}),
      });
      if (resize && resize.evictions.length > 0) {
        // Report the resize's evictions like any other: in the plan (events, metrics, WriteReport) and the event stream.
        plan.evictions.unshift(...resize.evictions);
        plan.events.unshift(...resize.evictions.map((e) => ({ type: 'evict' as const, slot: e.slot, id: e.record.id, clock, atMs: last.atMs, reason: e.reason })));
      }
      const ops = resize ? mergeOps(resize.ops, plan.ops) : plan.ops;
      // A slot past write.maxAgeMs is retention, not forgetting: deleted, not demoted to the logbook.
      for (const e of plan.evictions) if (e.reason === 'expired') e.logged = false;
      const kept = plan.demoted.filter((x) => x.kind !== 'expired');
      const demoted = resize ? [...resize.demote(ref, clock, last.atMs), ...kept] : kept;
      const survival = survivalIncrements({
        unit: core.params.decayUnit === 'seconds' ? 'seconds' : 'turns', prevClock: snap?.clock ?? 0, clock,
        before: births(snap?.table), after: births(table, plan.ops), ended: plan.evictions.map((e) => ({ created: e.record.created, createdMs: e.record.createdMs, reason: e.reason })),
      });
      const req: CommitRequest = {
        expectedVersion: snap?.version ?? 0, clock, turns: turnCount, capacity: table.capacity, dim: table.dim, ops,
        logbook: [...entries, ...demoted], retention: { policy: retentionOf(core.o), nowMs: last.atMs }, events: plan.events, commitId,
        ...(fence ? { fence } : {}), ...(Object.keys(survival).length > 0 ? { counters: survival } : {}),
      };
      planUs += usSince(p0);
      const c0 = performance.now();
      const res = await core.storeCall(() => core.store.commit(ref, req), 'commit');
      if (!res.ok && 'erased' in res) {
        throw new StoreError(ErrorCodes.STORE_ERASED, `session #${core.hashSession(ref.tenant, ref.session)} or its user was erased after this write was accepted; it was not stored`);
      }
      if (!res.ok) {
        // Another writer won. Back off a random, growing moment (capped) so contending writers of one
        // session stop colliding in lockstep (randomised exponential backoff, common practice).
        await sleep(Math.random() * Math.min(50, 2 ** attempt));
        continue;
      }
      const dropped = res.dropped ?? { age: 0, count: 0 };
      core.rememberSaid(ref, turns.map((t) => t.text));
      this.emitWrite(ref, plan, table.capacity, clock, entries.length, demoted.length, dropped);
      if (plan.promoted.length > 0) {
        // Out of the logbook now that it is back in a slot; a failure leaves a duplicate that reads
        // de-duplicate by id, so it is reported but not fatal.
        const promotedIds = plan.promoted.map((x) => x.id);
        core.store.deleteLogbook(scopeOf(ref), promotedIds).catch((err) => core.emitError('store', err, ref));
        core.forgetRecalled(ref);
      }
      const report: WriteReport = {
        allocated: 0, overwritten: 0, reinforced: plan.reinforced.length, gatedOut: 0, evicted: plan.evictions.length,
        logbook: entries.length + demoted.length, dropped, committed: true, version: res.version, turns: ids,
      };
      for (const o of plan.outcomes) {
        if (o.outcome === 'allocated') report.allocated++;
        else if (o.outcome === 'overwritten') report.overwritten++;
        else if (o.outcome === 'reinforced') report.reinforced++;
        else report.gatedOut++;
      }
      report.detail = writeDetail(plan, keyed, true);
      if (core.events.listenerCount('commit') > 0) {
        core.events.emit('commit', withDeprecatedCommitFields(payload(core.base(ref), {
          ops: ops.length, demoted: demoted.length, logbook: entries.length + demoted.length, retries: attempt,
          durationUs: usSince(c0), planUs, embedUs, slotsInUse: plan.slotsInUse, capacity: table.capacity, version: res.version,
        })));
      }
      return report;
    }
    throw new StoreError(ErrorCodes.STORE_CONFLICT, `session kept changing under ${core.o.commitRetries + 1} commit attempts; another writer is very busy on it — retry later or raise commitRetries`);
  }

  private emitWrite(ref: SessionRef, plan: WritePlan, capacity: number, clock: number, turnsKept: number, demoted: number, dropped: { age: number; count: number }): void {
    const ev = this.core.events;
    const wantEvict = ev.listenerCount('evict') > 0;
    const wantDemote = ev.listenerCount('demote') > 0 || ev.listenerCount(DEPRECATED_DEMOTE_EVENT) > 0;
    const demote = (e: DemoteEvent): void => {
      ev.emit('demote', e);
      ev.emit(DEPRECATED_DEMOTE_EVENT, e);
    };
    const wantWrite = ev.listenerCount('write') > 0;
    const wantGate = ev.listenerCount('gate') > 0;
    const wantOverwrite = ev.listenerCount('overwrite') > 0;
    const wantLogbook = ev.listenerCount('logbook') > 0;
    if (!wantEvict && !wantDemote && !wantWrite && !wantGate && !wantOverwrite && !wantLogbook) return;
    const base = this.core.base(ref);
    if (wantLogbook) ev.emit('logbook', payload(base, { turns: turnsKept, demoted, droppedAge: dropped.age, droppedCount: dropped.count }));
    for (const e of plan.evictions) {
      if (wantEvict) {
        ev.emit('evict', withDeprecatedEvictFields(payload(base, {
          slot: e.slot, id: e.record.id, reason: e.reason, logged: e.logged,
          lifetime: clock - e.record.created, lifetimeMs: base.atMs - e.record.createdMs, halfLife: e.record.halfLife, strength: e.strength,
        })));
      }
      if (e.logged && wantDemote) demote(payload(base, { reason: e.reason as 'capacity', id: e.record.id }));
    }
    if (wantWrite) {
      for (const r of plan.reinforced) {
        ev.emit('write', payload(base, { outcome: 'reinforced', slot: r.slot, id: r.id, clock, gate: 1, strength: r.strength, halfLife: r.halfLife, slotsInUse: plan.slotsInUse, capacity }));
      }
    }
    for (const o of plan.outcomes) {
      if (wantGate) {
        ev.emit('gate', payload(base, { score: o.gate, threshold: this.core.params.write.gateThreshold, passed: o.outcome !== 'gated_out', features: { ...o.features } }));
      }
      if (o.outcome === 'gated_out') continue;
      if (wantWrite) {
        let op: SlotRecord | null | undefined;
        for (const x of plan.ops) if (x.index === o.slot) op = x.slot;
        ev.emit('write', payload(base, {
          outcome: o.outcome, slot: o.slot, id: o.id ?? '', clock, gate: o.gate,
          strength: op?.strength ?? o.gate, halfLife: op?.halfLife ?? this.core.params.write.halfLife, slotsInUse: plan.slotsInUse, capacity,
          ...(o.maybeReplaces ? { ambiguous: true } : {}),
        }));
      }
      if (o.outcome === 'overwritten' && o.supersededId) {
        if (wantOverwrite) ev.emit('overwrite', payload(base, { slot: o.slot, id: o.id ?? '', supersededId: o.supersededId, cosine: o.cosine }));
        if (wantDemote) demote(payload(base, { reason: 'superseded', id: o.supersededId }));
      }
    }
  }
}

/** Birth times of the slots in `table`, with `ops` applied on top (for the survival counts). */
function births(table: SlotTable | undefined, ops: readonly SlotOp[] = []): SlotBirth[] {
  if (!table) return [];
  // Runs on every commit: an array of the op per index (usually a handful), no map of the whole table.
  const op: Array<SlotOp | undefined> = [];
  for (const o of ops) op[o.index] = o;
  const out: SlotBirth[] = [];
  for (let i = 0; i < Math.max(table.capacity, op.length); i++) {
    const o = op[i];
    if (o) {
      if (o.slot) out.push({ created: o.slot.created, createdMs: o.slot.createdMs });
    } else if (i < table.capacity && table.isUsed(i)) out.push({ created: table.created[i]!, createdMs: table.createdMs[i]! });
  }
  return out;
}

/**
 * Resizes a table to a new capacity. Survivors are chosen as eviction would choose them: pinned
 * slots first, then by strength decayed to `now`; a survivor keeps its index when it fits, else
 * moves to a free slot. The rest are evicted (capacity) into the logbook.
 */
export function resizeTable(table: SlotTable, capacity: number, now: number): { table: SlotTable; ops: SlotOp[]; evictions: Eviction[]; demote: (ref: SessionRef, clock: number, atMs: number) => LogbookEntry[] } {
  const live: Array<{ i: number; r: SlotRecord; s: number }> = [];
  for (let i = 0; i < table.capacity; i++) {
    const r = table.get(i);
    if (r) live.push({ i, r, s: r.pinned ? r.strength : decayed(r.strength, r.stamp, r.halfLife, now) });
  }
  live.sort((a, b) => Number(b.r.pinned) - Number(a.r.pinned) || b.s - a.s);
  const next = new SlotTable(capacity, table.dim);
  const moved: SlotRecord[] = [];
  for (const x of live.slice(0, capacity)) {
    if (x.i < capacity) next.set(x.i, x.r);
    else moved.push(x.r);
  }
  for (const r of moved) next.set(next.firstFree(), r);
  const evictions: Eviction[] = live.slice(capacity).map((x) => ({ slot: x.i, record: x.r, reason: 'capacity', logged: true, strength: x.s }));
  const ops: SlotOp[] = [];
  for (let i = 0; i < capacity; i++) ops.push({ index: i, slot: next.get(i) });
  return {
    table: next,
    ops,
    evictions,
    demote: (ref, clock, atMs) => evictions.map(({ record: r, strength }) => demotedEntry(r, ref, 'capacity', strength, clock, atMs)),
  };
}

/** Later ops win for the same index. */
function mergeOps(first: SlotOp[], second: SlotOp[]): SlotOp[] {
  const m = new Map<number, SlotOp>();
  for (const op of first) m.set(op.index, op);
  for (const op of second) m.set(op.index, op);
  return [...m.values()].sort((a, b) => a.index - b.index);
}
