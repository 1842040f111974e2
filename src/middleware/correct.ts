// A user corrects memory: `forget` one fact, or `edit` it to a new value. Either way the old value
// leaves every tier it lives in — the slot, its earlier revisions kept in the logbook (superseded
// values, followed by their successor links), and the logbook turns it was said in (deleted whole:
// a turn that said it still says it). An edit writes the new value as a fresh revision whose
// provenance names the edit instead of a turn. Each runs on the session's write chain.

import { withDeprecatedEvictFields } from '../deprecated-fields.js';
import { embedCached } from '../embed/cache.js';
import { ErrorCodes, InputError, describeValue } from '../errors.js';
import { InProcessStore, scopeOf } from '../store/in-process.js';
import type { SessionSnapshot } from '../store/store.js';
import type { LogbookEntry, SessionRef, SlotRecord, StoredEvent } from '../types.js';
import type { Admin } from './admin.js';
import { Core, keyOf, payload } from './core.js';
import { checkId } from './validate.js';
import { mixVectors, newRevisionId, turnEntryId } from './write.js';

/** Which fact: a slot by index, or an item by the id a read returned (a slot revision or a logbook entry). */
export type FactTarget = { session: string; tenant?: string; user?: string } & ({ slot: number; item?: never } | { item: string; slot?: never });

/** An edit: the fact, its corrected value, and who made it (recorded in the new revision's provenance). */
export type EditInput = FactTarget & {
  /** The corrected value. */
  value: string;
  /** Who made the correction, an id (1–128 of `A–Z a–z 0–9 . _ : @ -`). @default 'user' */
  by?: string;
};

/** What a `forget` or an `edit` removed. Ids only, never text. */
export interface CorrectionReport {
  /** Slot revision ids removed from working memory (the one forgotten or replaced by the edit). */
  slots: string[];
  /** Ids of logbook entries deleted: earlier revisions of the value and the turns that said it. */
  logbook: string[];
  /** The edit's new revision id (edit only). */
  id?: string;
  /** The new revision's provenance: `edit:<by>:<epoch ms>` (edit only). */
  provenance?: string[];
}

/** The most logbook entries of a scope one correction looks through to follow a value's history. */
const HISTORY_LIMIT = 100_000;

export class Corrections {
  constructor(private readonly core: Core, private readonly admin: Admin) {}

  /** Removes one fact from every tier. */
  async forget(target: FactTarget): Promise<CorrectionReport> {
    const { ref, pick } = this.target(target);
    await this.settle(ref);
    const snap = await this.core.storeCall(() => this.core.store.load(ref), 'load');
    if (!snap || !this.find(snap, pick)) {
      // Not a live slot: a logbook entry (a turn, or a value that left working memory).
      const entry = await this.findEntry(ref, pick);
      if (!entry) throw this.notFound(pick);
      const logbook = await this.purge(ref, [entry.id], [], entry);
      this.core.clearMemos();
      return { slots: [], logbook };
    }
    let removed: SlotRecord | null = null;
    await this.admin.mutateSession(ref, (s) => {
      const found = this.find(s, pick);
      if (!found) throw this.notFound(pick);
      removed = found.record;
      return { ops: [{ index: found.index, slot: null }], events: [this.event('evict', found.index, found.record.id, s, 'erased')] };
    });
    const rec = removed as unknown as SlotRecord;
    const logbook = await this.purge(ref, [rec.id, ...(rec.previous ? [rec.previous] : [])], rec.provenance, null);
    this.core.clearMemos();
    this.announce(ref, rec, snap);
    return { slots: [rec.id], logbook };
  }

  /** Replaces one fact's value: the old value leaves every tier; the new revision records the edit. */
  async edit(input: EditInput): Promise<CorrectionReport> {
    const { ref, pick } = this.target(input);
    if (typeof input.value !== 'string' || input.value.trim() === '') {
      throw new InputError(ErrorCodes.INPUT_TEXT, `edit: value must be a non-empty string, got ${describeValue(input.value)}`, { details: { field: 'value' } });
    }
    const value = input.value.trim().slice(0, this.core.o.maxTextBytes);
    const by = checkId('by', input.by ?? 'user');
    await this.settle(ref);
    const id = newRevisionId();
    const atMs = Date.now();
    const provenance = [`edit:${by}:${atMs}`];
    let old: SlotRecord | null = null;
    await this.admin.mutateSession(ref, async (snap) => {
      const found = this.find(snap, pick);
      if (!found) throw this.notFound(pick);
      old = found.record;
      const [key, val] = await embedCached(this.core.embedder, this.core.cache, [found.record.keyText, value]);
      const mix = this.core.o.valueMix;
      const next: SlotRecord = {
        ...found.record, id, value, provenance, updatedMs: atMs, stamp: snap.clock,
        key: mix > 0 && value !== found.record.keyText ? mixVectors(key!, val!, mix) : Float32Array.from(key!),
      };
      delete next.previous;
      delete next.maybeReplaces;
      return { ops: [{ index: found.index, slot: next }], events: [this.event('overwrite', found.index, id, snap)] };
    });
    const rec = old as unknown as SlotRecord;
    const logbook = await this.purge(ref, [rec.id, ...(rec.previous ? [rec.previous] : [])], rec.provenance, null);
    this.core.clearMemos();
    return { slots: [rec.id], logbook, id, provenance };
  }

  private target(t: FactTarget): { ref: SessionRef; pick: { slot: number } | { item: string } } {
    if (typeof t !== 'object' || t === null) {
      throw new InputError(ErrorCodes.INPUT_FIELD, `expected { session, slot } or { session, item }, got ${describeValue(t)}`, { details: { field: 'target' } });
    }
    const ref: SessionRef = {
      tenant: checkId('tenant', t.tenant ?? this.core.o.tenant), session: checkId('session', t.session), ...(t.user !== undefined ? { user: checkId('user', t.user) } : {}),
    };
    const hasSlot = t.slot !== undefined;
    const hasItem = t.item !== undefined;
    if (hasSlot === hasItem) {
      throw new InputError(ErrorCodes.INPUT_FIELD, 'give exactly one of slot (an index) or item (an id a read returned)', { details: { field: hasSlot ? 'item' : 'slot' } });
    }
    if (hasSlot && (!Number.isInteger(t.slot) || t.slot! < 0)) {
      throw new InputError(ErrorCodes.INPUT_FIELD, `slot must be a slot index >= 0, got ${describeValue(t.slot)}`, { details: { field: 'slot' } });
    }
    if (hasItem && (typeof t.item !== 'string' || t.item === '')) {
      throw new InputError(ErrorCodes.INPUT_FIELD, `item must be an id a read returned, got ${describeValue(t.item)}`, { details: { field: 'item' } });
    }
    return { ref, pick: hasSlot ? { slot: t.slot! } : { item: t.item! } };
  }

  /** Waits for the session's writes in flight, so none lands the value again after the correction. */
  private async settle(ref: SessionRef): Promise<void> {
    await this.core.queues.get(keyOf(ref));
  }

  private find(snap: SessionSnapshot, pick: { slot: number } | { item: string }): { index: number; record: SlotRecord } | null {
    const t = snap.table;
    if ('slot' in pick) {
      const record = pick.slot < t.capacity ? t.get(pick.slot) : null;
      return record ? { index: pick.slot, record } : null;
    }
    for (let i = 0; i < t.capacity; i++) if (t.isUsed(i) && t.ids[i] === pick.item) return { index: i, record: t.get(i)! };
    return null;
  }

  private async findEntry(ref: SessionRef, pick: { slot: number } | { item: string }): Promise<LogbookEntry | null> {
    if (!('item' in pick)) return null;
    const all = await this.core.storeCall(() => this.core.store.listLogbook(scopeOf(ref), { limit: HISTORY_LIMIT }), 'logbook');
    return all.find((e) => e.id === pick.item) ?? null;
  }

  /**
   * Deletes from the logbook every earlier revision of the value (superseded entries whose successor
   * chain leads to one of `ids`, and those ids themselves when they are entries) and the turns that
   * said any of them. Returns the deleted ids.
   */
  private async purge(ref: SessionRef, ids: string[], provenance: readonly string[], entry: LogbookEntry | null): Promise<string[]> {
    const core = this.core;
    const scope = scopeOf(ref);
    const all = await core.storeCall(() => core.store.listLogbook(scope, { limit: HISTORY_LIMIT }), 'logbook');
    const chain = new Set(ids);
    const doomed = new Map<string, LogbookEntry>();
    if (entry) doomed.set(entry.id, entry);
    // Follow successor links backwards until no new revision joins the chain.
    for (let grew = true; grew; ) {
      grew = false;
      for (const e of all) {
        if (e.kind === 'turn' || doomed.has(e.id)) continue;
        if (chain.has(e.id) || (e.successor !== undefined && chain.has(e.successor))) {
          doomed.set(e.id, e);
          chain.add(e.id);
          grew = true;
        }
      }
    }
    const turnIds = new Set<string>();
    for (const t of provenance) turnIds.add(turnEntryId(ref.session, t));
    for (const e of doomed.values()) if (e.kind !== 'turn') for (const t of e.provenance) turnIds.add(turnEntryId(e.session, t));
    for (const e of all) if (e.kind === 'turn' && turnIds.has(e.id)) doomed.set(e.id, e);
    const out = [...doomed.keys()];
    if (out.length > 0) await core.storeCall(() => core.store.deleteLogbook(scope, out), 'logbook');
    // Like erase(): the in-process store's snapshot file must lose the value now, not at its next interval.
    if (core.store instanceof InProcessStore) core.store.save();
    return out;
  }

  /** Emits `evict` (reason `erased`, not kept in the logbook) for the forgotten slot. */
  private announce(ref: SessionRef, rec: SlotRecord, snap: SessionSnapshot): void {
    const core = this.core;
    if (core.events.listenerCount('evict') === 0) return;
    const base = core.base(ref);
    let slot = -1;
    for (let i = 0; i < snap.table.capacity; i++) if (snap.table.ids[i] === rec.id) slot = i;
    core.events.emit('evict', withDeprecatedEvictFields(payload(base, {
      slot, id: rec.id, reason: 'erased', logged: false, lifetime: snap.clock - rec.created,
      lifetimeMs: base.atMs - rec.createdMs, halfLife: rec.halfLife, strength: rec.strength,
    })));
  }

  private event(type: StoredEvent['type'], slot: number, id: string, snap: SessionSnapshot, reason?: 'erased'): StoredEvent {
    return { type, slot, id, clock: snap.clock, atMs: Date.now(), ...(reason ? { reason } : {}) };
  }

  private notFound(pick: { slot: number } | { item: string }): InputError {
    return 'slot' in pick
      ? new InputError(ErrorCodes.INPUT_FIELD, `slot ${pick.slot} of this session is empty`, { details: { field: 'slot' } })
      : new InputError(ErrorCodes.INPUT_FIELD, 'no slot or logbook entry of this session has that item id', { details: { field: 'item' } });
  }
}

