// The outbox: writes that could not reach the store wait here, bounded, in order per session, and
// are retried with exponential backoff; after an outage several sessions drain at once. A write is
// never dropped without a word: a refusal (outbox full) throws and emits; a conflict or an outage
// leaves it queued to be planned again on the next pass; only an erase after it was accepted, its
// age (`outbox.maxAgeMs`) or a store refusal that no retry can fix remove it, each with an event.

import { randomUUID } from 'node:crypto';
import { ErrorCodes, StoreError } from '../errors.js';
import type { ErasureFence } from '../store/store.js';
import type { LogbookEntry, SessionRef } from '../types.js';
import { Core, keyOf, payload } from './core.js';
import type { Turn } from './validate.js';
import type { WritePath, WriteReport } from './write.js';

interface OutboxEntry {
  key: string;
  /** Same id on every retry, so a commit applied before its reply was lost is not applied twice. */
  commitId: string;
  ref: SessionRef;
  turns: Turn[];
  reinforce: string[];
  /** The erasure fence the turn was accepted under: a drain after an erase is refused by the store. */
  fence: ErasureFence | undefined;
  /** When the write was accepted (this process's clock), for `outbox.maxAgeMs`. */
  acceptedMs: number;
}

/** Whether an error leaves a write worth retrying later (the store was away, or another writer kept winning). */
const retryable = (err: unknown): boolean =>
  err instanceof StoreError && (err.code === ErrorCodes.STORE_UNAVAILABLE || err.code === ErrorCodes.STORE_CONFLICT);

export class Outbox {
  private readonly entries: OutboxEntry[] = [];
  private drainTimer: NodeJS.Timeout | undefined;
  private drainDelay: number;
  private draining: Promise<void> | undefined;
  closed = false;

  constructor(private readonly core: Core, private readonly writes: WritePath) {
    this.drainDelay = core.o.outbox.retryMs;
  }

  /** Writes waiting for the store. */
  get depth(): number {
    return this.entries.length;
  }

  /**
   * Queues a write on its session's chain: committed now, or parked here when the store is
   * unreachable or another writer kept winning (or when an earlier write of the session is already
   * parked, to keep the order). `fence` is the erasure fence the turn was accepted under.
   */
  enqueue(ref: SessionRef, turns: Turn[], reinforce: string[], promote: string[], fence: ErasureFence | undefined, acceptedMs: number): Promise<WriteReport> {
    const key = keyOf(ref);
    const commitId = randomUUID();
    // Promoted ids resolve to the logbook values the read saw, only while no erase came since that
    // read; conflict re-plans reuse them, a write that goes to the outbox commits without promoting
    // (promotion is an optimisation, not a fact).
    const items: LogbookEntry[] = promote.length > 0 && this.core.recalledUnder(ref, fence) ? this.core.recalledEntries(ref, promote) : [];
    const entry: OutboxEntry = { key, commitId, ref, turns, reinforce, fence, acceptedMs };
    return this.core.chain(key, () => this.commitOrQueue(entry, items));
  }

  private async commitOrQueue(entry: OutboxEntry, promote: LogbookEntry[]): Promise<WriteReport> {
    const { ref } = entry;
    if (this.entries.some((e) => e.key === entry.key)) return this.park(entry);
    try {
      return await this.writes.commit(ref, entry.turns, entry.reinforce, entry.commitId, promote, entry.fence);
    } catch (err) {
      this.core.emitError('write', err, ref);
      if (retryable(err)) {
        this.core.events.emit('degraded', payload(this.core.base(ref), { stage: 'write', code: (err as StoreError).code }));
        return this.park(entry);
      }
      throw err;
    }
  }

  private park(entry: OutboxEntry): WriteReport {
    const { ref, turns } = entry;
    const sessionHash = this.core.hashSession(ref.tenant, ref.session);
    if (this.closed) {
      // A commit still running when close() stopped waiting failed afterwards: no retry will come, so
      // the write is given up here and says so, rather than waiting in a stopped outbox.
      const error = new StoreError(ErrorCodes.CLOSED, `close() stopped the outbox before this write was stored (store ${this.core.store.name}); it was not stored`);
      this.core.events.emit('outbox', { depth: this.entries.length, change: 'abandoned', sessionHash });
      this.core.emitError('outbox', error, ref);
      throw error;
    }
    if (this.entries.length >= this.core.o.outbox.max) {
      const error = new StoreError(ErrorCodes.STORE_OUTBOX_FULL, `outbox is full (${this.core.o.outbox.max} pending writes) while store ${this.core.store.name} is unreachable; this write was refused — raise outbox.max or restore the store`);
      this.core.events.emit('outbox', { depth: this.entries.length, change: 'overflow', sessionHash });
      this.core.emitError('outbox', error, ref);
      throw error;
    }
    const report: WriteReport = {
      allocated: 0, overwritten: 0, reinforced: 0, gatedOut: 0, evicted: 0, logbook: 0, dropped: { age: 0, count: 0 },
      committed: false, version: -1, turns: turns.map((t) => t.turn ?? ''),
    };
    this.entries.push(entry);
    this.core.events.emit('outbox', { depth: this.entries.length, change: 'queued', sessionHash });
    this.schedule();
    return report;
  }

  private schedule(): void {
    if (this.drainTimer || this.closed || this.entries.length === 0) return;
    this.drainTimer = setTimeout(() => {
      this.drainTimer = undefined;
      void this.drain();
    }, this.drainDelay);
    this.drainTimer.unref?.();
  }

  /** Stops the retry timer (on close) and gives up what is still queued; resolves to how many. */
  stop(): number {
    this.closed = true;
    clearTimeout(this.drainTimer);
    this.drainTimer = undefined;
    const left = this.entries.splice(0);
    for (const e of left) {
      this.core.events.emit('outbox', { depth: this.entries.length, change: 'abandoned', sessionHash: this.core.hashSession(e.ref.tenant, e.ref.session) });
    }
    return left.length;
  }

  /** Drops parked writes of a session or user (erasure). */
  discard(tenant: string, match: { session: string } | { user: string }): void {
    for (let i = this.entries.length - 1; i >= 0; i--) {
      const e = this.entries[i]!;
      if (e.ref.tenant !== tenant) continue;
      if ('user' in match ? e.ref.user === match.user : e.ref.session === match.session) this.entries.splice(i, 1);
    }
  }

  /** Drains now (cancelling a scheduled retry); resolves when this pass ends. */
  drainNow(): Promise<void> {
    clearTimeout(this.drainTimer);
    this.drainTimer = undefined;
    return this.drain();
  }

  private remove(entry: OutboxEntry, change: 'drained' | 'erased' | 'expired' | 'failed'): void {
    const at = this.entries.indexOf(entry);
    if (at >= 0) this.entries.splice(at, 1);
    this.core.events.emit('outbox', { depth: this.entries.length, change, sessionHash: this.core.hashSession(entry.ref.tenant, entry.ref.session) });
  }

  /**
   * Commits parked entries: in order within a session, several sessions at a time (up to
   * `outbox.concurrency`), so a backlog after an outage drains in seconds rather than one round trip
   * at a time. A store failure stops the pass and backs off; a conflict keeps the entry (planned
   * again, on the state then current, next pass) and moves on to other sessions.
   */
  private drain(): Promise<void> {
    if (this.draining) return this.draining;
    this.draining = (async () => {
      let failed = false;
      const busy = new Set<string>();
      /** Sessions whose oldest entry conflicted this pass: their later entries wait behind it. */
      const held = new Set<string>();
      const worker = async (): Promise<void> => {
        while (!failed) {
          // The first entry of a session that is not in flight is that session's oldest.
          const entry = this.entries.find((e) => !busy.has(e.key) && !held.has(e.key));
          if (!entry) return;
          if (Date.now() - entry.acceptedMs > this.core.o.outbox.maxAgeMs) {
            const error = new StoreError(ErrorCodes.STORE_OUTBOX_EXPIRED, `a write waited ${Date.now() - entry.acceptedMs} ms in the outbox, past outbox.maxAgeMs (${this.core.o.outbox.maxAgeMs}); it was given up`);
            this.core.emitError('outbox', error, entry.ref);
            this.remove(entry, 'expired');
            continue;
          }
          busy.add(entry.key);
          try {
            await this.writes.commit(entry.ref, entry.turns, entry.reinforce, entry.commitId, [], entry.fence);
            this.remove(entry, 'drained');
          } catch (err) {
            if (err instanceof StoreError && err.code === ErrorCodes.STORE_UNAVAILABLE) {
              failed = true;
            } else if (err instanceof StoreError && err.code === ErrorCodes.STORE_CONFLICT) {
              // Another writer kept winning: keep it (in order) for the next pass, planned again then.
              held.add(entry.key);
              this.core.events.emit('outbox', { depth: this.entries.length, change: 'retry', sessionHash: this.core.hashSession(entry.ref.tenant, entry.ref.session) });
            } else if (err instanceof StoreError && err.code === ErrorCodes.STORE_ERASED) {
              // Accepted before an erase of its session or user: not stored, by design.
              this.remove(entry, 'erased');
            } else {
              // Not a connectivity problem: retrying cannot help. Report it; never drop silently.
              this.core.emitError('outbox', err, entry.ref);
              this.remove(entry, 'failed');
            }
          } finally {
            busy.delete(entry.key);
          }
        }
      };
      try {
        await Promise.all(Array.from({ length: this.core.o.outbox.concurrency }, worker));
        this.drainDelay = failed || held.size > 0 ? Math.min(this.core.o.outbox.maxRetryMs, this.drainDelay * 2) : this.core.o.outbox.retryMs;
      } finally {
        this.draining = undefined;
        this.schedule();
      }
    })();
    return this.draining;
  }
}
