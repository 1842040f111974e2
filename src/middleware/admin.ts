// Operations on a session besides turns: pin a slot, erase a session or a user, inspect what is
// stored, re-embed after an embedder change. Each runs on the session's write chain, so it never
// interleaves with a turn's write.

import { withDeprecatedEvictFields } from '../deprecated-fields.js';
import { embedCached } from '../embed/cache.js';
import { ErrorCodes, InputError, StoreError, describeValue } from '../errors.js';
import { decayed } from '../memory/decay.js';
import { scopeOf } from '../store/in-process.js';
import type { EraseReport, SessionSnapshot, SlotOp } from '../store/store.js';
import type { LogbookEntry, SessionRef, SlotRecord, StoredEvent } from '../types.js';
import { Core, keyOf, payload, sleep } from './core.js';
import type { Outbox } from './outbox.js';
import { checkId } from './validate.js';
import { mixVectors } from './write.js';

/** A slot as `inspect()` shows it. */
export interface SlotView {
  index: number;
  id: string;
  key: string;
  value: string;
  provenance: string[];
  /** Whose fact it is, when turns name speakers. */
  owner?: string;
  /** Strength decayed to now. */
  strength: number;
  halfLife: number;
  pinned: boolean;
  reads: number;
  /** Age in clock units. */
  age: number;
  createdMs: number;
  updatedMs: number;
  /** An ambiguous update: the values it may replace. */
  maybeReplaces?: string[];
}

export interface SessionView {
  tenant: string;
  session: string;
  sessionHash: string;
  version: number;
  clock: number;
  turns: number;
  capacity: number;
  dim: number;
  slots: SlotView[];
  /** Logbook entries of the session's scope, newest first (vectors left out). */
  logbook: Array<Omit<LogbookEntry, 'key'>>;
  events: StoredEvent[];
}

export class Admin {
  constructor(private readonly core: Core, private readonly outbox: Outbox) {}

  /** Pins (or unpins) a slot: pinned slots never decay out and are never evicted. */
  async pin(session: string, slot: number, pinned: boolean, tenant: string): Promise<void> {
    const ref = { tenant: checkId('tenant', tenant), session: checkId('session', session) };
    if (!Number.isInteger(slot) || slot < 0) {
      throw new InputError(ErrorCodes.INPUT_FIELD, `slot must be a slot index >= 0, got ${describeValue(slot)}`, { details: { field: 'slot' } });
    }
    await this.mutate(ref, (snap) => {
      const rec = snap.table.get(slot);
      if (!rec) throw new InputError(ErrorCodes.INPUT_FIELD, `slot ${slot} of this session is empty`, { details: { field: 'slot' } });
      return {
        ops: [{ index: slot, slot: { ...rec, pinned } }],
        events: [{ type: pinned ? 'pin' : 'unpin', slot, id: rec.id, clock: snap.clock, atMs: Date.now() }],
      };
    });
  }

  /**
   * Erases a session, or a user with all their sessions: slots, logbook entries, events, pending
   * outbox writes and cached embeddings. Nothing erased can come back through a read.
   */
  async erase(target: { session: string } | { user: string }, tenant: string): Promise<EraseReport> {
    const core = this.core;
    checkId('tenant', tenant);
    const t: { tenant: string; user: string } | { tenant: string; session: string } =
      'user' in target ? { tenant, user: checkId('user', target.user) } : { tenant, session: checkId('session', target.session) };
    // Wait for writes in flight so none lands after the erase.
    if ('session' in t) await core.queues.get(keyOf({ tenant, session: t.session }));
    else await Promise.all(core.queues.values());
    this.outbox.discard(tenant, 'user' in t ? { user: t.user } : { session: t.session });
    // Cached vectors are keyed by digests, but they derive from the erased text: drop them all, and
    // the logbook values remembered for promotion.
    core.clearMemos();
    if ('session' in t) await this.announceErased({ tenant, session: t.session });
    return core.storeCall(() => core.store.erase(t), 'erase');
  }

  /** A session's slots (strengths decayed to now), logbook entries and recent events. */
  async inspect(session: string, tenant: string, options: { user?: string; logbookLimit?: number; eventLimit?: number } = {}): Promise<SessionView> {
    const core = this.core;
    const ref: SessionRef = { tenant: checkId('tenant', tenant), session: checkId('session', session), ...(options.user ? { user: checkId('user', options.user) } : {}) };
    const snap = await core.storeCall(() => core.store.load(ref), 'load');
    const now = core.clockFor(snap, Date.now());
    const slots: SlotView[] = [];
    if (snap) {
      const t = snap.table;
      for (let i = 0; i < t.capacity; i++) {
        if (!t.isUsed(i)) continue;
        slots.push({
          index: i, id: t.ids[i]!, key: t.keyText[i]!, value: t.value[i]!, provenance: t.provenance[i]!.slice(),
          ...(t.owner[i] ? { owner: t.owner[i]! } : {}),
          strength: t.isPinned(i) ? t.strength[i]! : decayed(t.strength[i]!, t.stamp[i]!, t.halfLife[i]!, now),
          halfLife: t.halfLife[i]!, pinned: t.isPinned(i), reads: t.reads[i]!, age: now - t.created[i]!,
          createdMs: t.createdMs[i]!, updatedMs: t.updatedMs[i]!, ...(t.maybeReplaces[i] ? { maybeReplaces: t.maybeReplaces[i]!.slice() } : {}),
        });
      }
    }
    const limit = options.logbookLimit ?? 100;
    const logbook = (await core.storeCall(() => core.store.listLogbook(scopeOf(ref), { limit }), 'logbook')).map(({ key: _key, ...rest }) => rest);
    const events = await core.storeCall(() => core.store.readEvents(ref, options.eventLimit ?? 100), 'events');
    return {
      tenant: ref.tenant, session: ref.session, sessionHash: core.hashSession(ref.tenant, ref.session),
      version: snap?.version ?? 0, clock: snap?.clock ?? 0, turns: snap?.turns ?? 0,
      capacity: snap?.table.capacity ?? core.params.capacity, dim: snap?.table.dim ?? core.embedder.dim, slots, logbook, events,
    };
  }

  /**
   * Re-embeds a session's slot keys with the current embedder, e.g. after switching models; the
   * values, strengths and provenance are kept. Logbook vectors keep their old dimension and stay out
   * of the dense list until they age out (the lexical index is unaffected).
   */
  async migrate(session: string, tenant: string): Promise<{ slots: number }> {
    const core = this.core;
    const ref = { tenant: checkId('tenant', tenant), session: checkId('session', session) };
    let n = 0;
    await this.mutate(ref, async (snap) => {
      const recs: Array<[number, SlotRecord]> = [];
      for (let i = 0; i < snap.table.capacity; i++) {
        const r = snap.table.get(i);
        if (r) recs.push([i, r]);
      }
      // The same stored vector a fresh write makes: normalize(key + valueMix * value).
      const mix = core.o.valueMix;
      const vecs = recs.length ? await embedCached(core.embedder, core.cache, recs.flatMap(([, r]) => [r.keyText, r.value])) : [];
      n = recs.length;
      const ops: SlotOp[] = [];
      for (let i = 0; i < snap.table.capacity; i++) ops.push({ index: i, slot: null });
      recs.forEach(([i, r], m) => {
        const k = vecs[2 * m]!;
        const key = mix > 0 && r.value !== r.keyText ? mixVectors(k, vecs[2 * m + 1]!, mix) : Float32Array.from(k);
        ops[i] = { index: i, slot: { ...r, key } };
      });
      return { ops, events: [], dim: core.embedder.dim };
    }, true);
    return { slots: n };
  }

  /** Emits `evict` (reason `erased`, not kept in the logbook) for each slot of a session about to be erased. */
  private async announceErased(ref: SessionRef): Promise<void> {
    const core = this.core;
    if (core.events.listenerCount('evict') === 0) return;
    let snap: SessionSnapshot | null = null;
    try {
      snap = await core.store.load(ref);
    } catch {
      return; // The erase itself reports store failures.
    }
    if (!snap) return;
    const base = core.base(ref);
    const t = snap.table;
    for (let i = 0; i < t.capacity; i++) {
      if (!t.isUsed(i)) continue;
      core.events.emit('evict', withDeprecatedEvictFields(payload(base, {
        slot: i, id: t.ids[i]!, reason: 'erased', logged: false, lifetime: snap.clock - t.created[i]!,
        lifetimeMs: base.atMs - t.createdMs[i]!, halfLife: t.halfLife[i]!, strength: t.strength[i]!,
      })));
    }
  }

  /** `mutate` for the other rooms (corrections): the same load, change, commit and conflict retries. */
  mutateSession(ref: SessionRef, change: Parameters<Admin['mutate']>[1]): Promise<void> {
    return this.mutate(ref, change);
  }

  /** Load, change and commit a session with conflict retries (admin operations). */
  private async mutate(
    ref: SessionRef,
    change: (snap: SessionSnapshot) => { ops: SlotOp[]; events: StoredEvent[]; dim?: number } | Promise<{ ops: SlotOp[]; events: StoredEvent[]; dim?: number }>,
    allowDimChange = false,
  ): Promise<void> {
    const core = this.core;
    return core.chain(keyOf(ref), async () => {
      for (let attempt = 0; attempt <= core.o.commitRetries; attempt++) {
        const snap = await core.storeCall(() => core.store.load(ref), 'load');
        if (!snap) throw new InputError(ErrorCodes.INPUT_ID, 'no such session in this tenant', { details: { field: 'session' } });
        if (!allowDimChange && snap.table.dim !== core.embedder.dim) throw core.dimError(ref, snap.table.dim);
        const c = await change(snap);
        const res = await core.storeCall(
          () => core.store.commit(ref, {
            expectedVersion: snap.version, clock: snap.clock, turns: snap.turns, capacity: snap.table.capacity,
            dim: c.dim ?? snap.table.dim, ops: c.ops, logbook: [], events: c.events,
          }),
          'commit',
        );
        if (res.ok) return;
        if ('erased' in res) throw new StoreError(ErrorCodes.STORE_ERASED, 'the session was erased meanwhile');
        await sleep(Math.random() * Math.min(50, 2 ** attempt));
      }
      throw new StoreError(ErrorCodes.STORE_CONFLICT, `session kept changing under ${core.o.commitRetries + 1} attempts`);
    });
  }
}
