// What a write did, item by item, for `WriteReport.detail`: which values were stored (new slots and
// overwrites), which revisions they replaced, and what was dropped (candidates the gate turned away,
// slots evicted). Ids, slot indexes and keys only; values only when the caller asks for text.

import type { KeyedCandidate, WritePlan } from '../memory/write.js';
import type { EvictReason } from '../types.js';

export interface StoredValue {
  /** The new revision id (what reads return as the item id). */
  id: string;
  slot: number;
  /** The slot's topic, e.g. "my bike". */
  key: string;
  outcome: 'allocated' | 'overwritten';
  /** The turn it came from. */
  turn: string;
  /** The value; only with `write(..., { text: true })`. */
  value?: string;
}

export interface OverwrittenValue {
  /** The replaced revision id; it is in the logbook now, kind `superseded`. */
  id: string;
  /** The revision that replaced it. */
  by: string;
  slot: number;
  key: string;
}

export type DroppedItem =
  /** A candidate the write gate turned away (it is still in the logbook, inside its turn). */
  | { kind: 'gated_out'; key: string; turn: string; gate: number; value?: string }
  /** A slot evicted to make room or decayed out; kept in the logbook unless `logged` is false. */
  | { kind: 'evicted'; id: string; slot: number; key: string; reason: EvictReason; logged: boolean; value?: string };

export interface WriteDetail {
  stored: StoredValue[];
  overwritten: OverwrittenValue[];
  dropped: DroppedItem[];
}

/** The detail of one committed plan. `withText` adds values; without it no text but keys leaves. */
export function writeDetail(plan: WritePlan, keyed: readonly KeyedCandidate[], withText: boolean): WriteDetail {
  const out: WriteDetail = { stored: [], overwritten: [], dropped: [] };
  for (const o of plan.outcomes) {
    const c = keyed[o.index];
    if (!c) continue;
    const value = withText ? { value: c.candidate.value } : {};
    if (o.outcome === 'gated_out') {
      out.dropped.push({ kind: 'gated_out', key: c.candidate.key, turn: c.turn, gate: o.gate, ...value });
      continue;
    }
    if ((o.outcome !== 'allocated' && o.outcome !== 'overwritten') || o.id === undefined) continue;
    out.stored.push({ id: o.id, slot: o.slot, key: c.candidate.key, outcome: o.outcome, turn: c.turn, ...value });
    if (o.outcome === 'overwritten' && o.supersededId) out.overwritten.push({ id: o.supersededId, by: o.id, slot: o.slot, key: c.candidate.key });
  }
  for (const e of plan.evictions) {
    out.dropped.push({
      kind: 'evicted', id: e.record.id, slot: e.slot, key: e.record.keyText, reason: e.reason, logged: e.logged,
      ...(withText ? { value: e.record.value } : {}),
    });
  }
  return out;
}

/**
 * The detail without values (what a report carries unless text was asked for). A key that is the
 * whole statement (the extractor found no topic: key = value) is text too, so it is left empty.
 */
export function withoutText(d: WriteDetail): WriteDetail {
  const statements = new Set<string>();
  for (const x of [...d.stored, ...d.dropped]) if (x.value !== undefined && x.value === x.key) statements.add(x.key);
  const k = (key: string): string => (statements.has(key) ? '' : key);
  return {
    stored: d.stored.map(({ value: _v, ...rest }) => ({ ...rest, key: k(rest.key) })),
    overwritten: d.overwritten.map((x) => ({ ...x, key: k(x.key) })),
    dropped: d.dropped.map(({ value: _v, ...rest }) => ({ ...rest, key: k(rest.key) })) as DroppedItem[],
  };
}
