// Synthetic tidemark events: a plausible turn (read, gate, write, commit, sometimes evict) of one
// session, emitted on any emitter typed with TidemarkEvents. The metrics, collector, retention and
// dashboard tests are driven by the real middleware; this stream is left for the deprecated-entry test,
// which checks the old names over a known, fixed stream.

import type { EventEmitter } from 'eventemitter3';
import type { TidemarkEvents } from '../../src/middleware/events.js';
import type { ReadResult } from '../../src/types.js';

export interface SyntheticTurn {
  sessionHash: string;
  atMs?: number;
  result?: ReadResult;
  clock?: number;
  slot?: number;
  slotsInUse?: number;
  capacity?: number;
  passed?: boolean;
  outcome?: 'allocated' | 'overwritten' | 'reinforced';
  evict?: 'capacity' | 'decayed' | 'expired' | 'erased';
  readUs?: number;
  commitUs?: number;
}

export function emitTurn(bus: Pick<EventEmitter<TidemarkEvents>, 'emit'>, t: SyntheticTurn): void {
  const atMs = t.atMs ?? Date.now();
  const base = { sessionHash: t.sessionHash, tenant: 'default', atMs };
  const capacity = t.capacity ?? 8;
  const slotsInUse = t.slotsInUse ?? 3;
  bus.emit('read', {
    ...base, result: t.result ?? 'slot', items: 2, slotItems: 2, logbookItems: 0, scanned: slotsInUse,
    slotsInUse, capacity, logbookSize: 10, topWeight: 0.7, entropy: 0.6, topCosine: 0.8, topCoverage: 0.6, durationUs: t.readUs ?? 400, searchUs: 40, embedUs: 50,
  });
  bus.emit('gate', { ...base, score: t.passed === false ? 0.2 : 0.8, threshold: 0.5, passed: t.passed !== false, features: { novelty: 0.5 } });
  if (t.passed !== false) {
    bus.emit('write', {
      ...base, outcome: t.outcome ?? 'allocated', slot: t.slot ?? 0, id: `r${atMs}`, clock: t.clock ?? 1, gate: 0.8,
      strength: 0.8, halfLife: 12, slotsInUse, capacity,
    });
  }
  if (t.evict) {
    bus.emit('evict', {
      ...base, slot: t.slot ?? 0, id: 'old', reason: t.evict, logged: t.evict !== 'erased', lifetime: 6, lifetimeMs: 6_000,
      halfLife: 10, strength: 0.05,
    });
  }
  bus.emit('commit', {
    ...base, ops: 1, demoted: t.evict && t.evict !== 'erased' ? 1 : 0, logbook: 2, retries: 0, durationUs: t.commitUs ?? 900, planUs: 100,
    embedUs: 60, slotsInUse, capacity, version: 1,
  });
}
