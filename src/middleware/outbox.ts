// The outbox: writes that could not reach the store wait here, bounded, in order per session, and
// are retried with exponential backoff; after an outage several sessions drain at once. A write is
// never dropped without a word: a refusal (outbox full) throws and emits, a failure emits.

import { randomUUID } from 'node:crypto';
import { ErrorCodes, StoreError } from '../errors.js';
import type { LogbookEntry, SessionRef } from '../types.js';
import { Core, keyOf } from './core.js';
import type { Turn } from './validate.js';
import type { WritePath, WriteReport } from './write.js';

interface OutboxEntry {
  key: string;
  /** Same id on every retry, so a commit applied before its reply was lost is not applied twice. */
  commitId: string;
  ref: SessionRef;
  turns: Turn[];
  reinforce: string[];
  attempts: number;
}

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
   * unreachable (or when an earlier write of the session is already parked, to keep the order).
   */
  enqueue(ref: SessionRef, turns: Turn[], reinforce: string[], promote: string[] = []): Promise<WriteReport> {
    const key = keyOf(ref);
    const commitId = randomUUID();
    // Promoted ids resolve to the logbook values the read saw; conflict re-plans reuse them, a write
    // that goes to the outbox commits without promoting (promotion is an optimisation, not a fact).
    const items: LogbookEntry[] = this.core.recalledEntries(ref, promote);
    return this.core.chain(key, () => this.commitOrQueue(ref, turns, reinforce, commitId, items));
  }

  private async commitOrQueue(ref: SessionRef, turns: Turn[], reinforce: string[], commitId: string, promote: LogbookEntry[]): Promise<WriteReport> {
    const key = keyOf(ref);
    if (this.entries.some((e) => e.key === key)) return this.park(ref, turns, reinforce, 0, commitId);
    try {
      return await this.writes.commit(ref, turns, reinforce, commitId, promote);
    } catch (err) {
      if (err instanceof StoreError && err.code === ErrorCodes.STORE_UNAVAILABLE) {
        this.core.emitError('write', err, ref);
        this.core.events.emit('degraded', { ...this.core.base(ref), stage: 'write', code: err.code });
        return this.park(ref, turns, reinforce, 1, commitId);
      }
      this.core.emitError('write', err, ref);
      throw err;
    }
  }

  private park(ref: SessionRef, turns: Turn[], reinforce: string[], attempts: number, commitId: string): WriteReport {
    const report: WriteReport = {
      allocated: 0, overwritten: 0, reinforced: 0, gatedOut: 0, evicted: 0, logbook: 0, dropped: { age: 0, count: 0 },
      committed: false, version: -1, turns: turns.map((t) => t.turn ?? ''),
    };
    const sessionHash = this.core.hashSession(ref.tenant, ref.session);
    if (this.entries.length >= this.core.o.outbox.max) {
      const error = new StoreError(ErrorCodes.STORE_OUTBOX_FULL, `outbox is full (${this.core.o.outbox.max} pending writes) while store ${this.core.store.name} is unreachable; this write was refused — raise outbox.max or restore the store`);
      this.core.events.emit('outbox', { depth: this.entries.length, change: 'overflow', sessionHash });
      this.core.emitError('outbox', error, ref);
      throw error;
    }
    this.entries.push({ key: keyOf(ref), commitId, ref, turns, reinforce, attempts });
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

  /** Stops the retry timer (on close). */
  stop(): void {
    this.closed = true;
    if (this.drainTimer) clearTimeout(this.drainTimer);
    this.drainTimer = undefined;
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
    if (this.drainTimer) {
      clearTimeout(this.drainTimer);
      this.drainTimer = undefined;
    }
    return this.drain();
  }

  /**
   * Commits parked entries: in order within a session, several sessions at a time (up to
   * `outbox.concurrency`), so a backlog after an outage drains in seconds rather than one round trip
   * at a time. Stops at the first store failure and backs off.
   */
  private drain(): Promise<void> {
    if (this.draining) return this.draining;
    this.draining = (async () => {
      let failed = false;
      const busy = new Set<string>();
      const worker = async (): Promise<void> => {
        while (!failed) {
          // The first entry of a session that is not in flight is that session's oldest.
          const entry = this.entries.find((e) => !busy.has(e.key));
          if (!entry) return;
          busy.add(entry.key);
          try {
            await this.writes.commit(entry.ref, entry.turns, entry.reinforce, entry.commitId);
          } catch (err) {
            if (err instanceof StoreError && err.code === ErrorCodes.STORE_UNAVAILABLE) {
              entry.attempts++;
              failed = true;
              busy.delete(entry.key);
              return;
            }
            // Not a connectivity problem: retrying cannot help. Report it; never drop silently.
            this.core.emitError('outbox', err, entry.ref);
          }
          const at = this.entries.indexOf(entry);
          if (at >= 0) this.entries.splice(at, 1);
          busy.delete(entry.key);
          this.core.events.emit('outbox', { depth: this.entries.length, change: 'drained', sessionHash: this.core.hashSession(entry.ref.tenant, entry.ref.session) });
        }
      };
      try {
        await Promise.all(Array.from({ length: this.core.o.outbox.concurrency }, worker));
        this.drainDelay = failed ? Math.min(this.core.o.outbox.maxRetryMs, this.drainDelay * 2) : this.core.o.outbox.retryMs;
      } finally {
        this.draining = undefined;
        this.schedule();
      }
    })();
    return this.draining;
  }
}
