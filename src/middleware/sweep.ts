// The retention sweep: on a timer, what `write.maxAgeMs` and `logbook.maxAgeMs` no longer allow is
// deleted from every tier of the store (slots, logbook entries and their vectors, session and user
// scopes) and from this process's memos, without waiting for the session's next turn. Each pass is
// reported in a `sweep` event. Several processes may sweep one store at once (the stores' sweeps are
// idempotent); a pass that finds nothing to do costs the store a look at its age indexes only.

import type { SweepReport } from '../store/store.js';
import type { Core } from './core.js';

/** Passes run back to back in one tick at most, each of `budget` sessions, before waiting for the next tick. */
const PASSES_PER_TICK = 16;

export class Sweeper {
  private timer: NodeJS.Timeout | undefined;
  private running: Promise<SweepReport> | undefined;

  constructor(private readonly core: Core) {
    const every = core.o.retention.sweepMs;
    if (every > 0 && core.store.sweep) {
      this.timer = setInterval(() => {
        if (!this.running) void this.run().catch(() => undefined);
      }, every);
      this.timer.unref();
    }
  }

  /**
   * One sweep now, as of `nowMs`: passes until the store has been covered (or 16 passes). Resolves to
   * what was deleted; a store without `sweep` deletes nothing. A failure is reported (`error` event,
   * stage `store`) and rejects.
   */
  run(nowMs = Date.now()): Promise<SweepReport> {
    if (this.running) return this.running;
    const job = this.pass(nowMs).finally(() => {
      this.running = undefined;
    });
    this.running = job;
    return job;
  }

  private async pass(nowMs: number): Promise<SweepReport> {
    const core = this.core;
    const total: SweepReport = { sessions: 0, slots: 0, logbookEntries: 0, done: true };
    const store = core.store;
    if (!store.sweep) return total;
    const slotAge = core.params.write.maxAgeMs;
    const logAge = core.o.logbook.maxAgeMs;
    const slotCutoffMs = slotAge > 0 ? nowMs - slotAge : 0;
    const logbookCutoffMs = logAge > 0 ? nowMs - logAge : 0;
    const tenant = core.o.tenant;
    try {
      for (let i = 0; i < PASSES_PER_TICK; i++) {
        const r = await core.storeCall(() => store.sweep!({ tenant, slotCutoffMs, logbookCutoffMs, budget: core.o.retention.sweepBudget }), 'sweep');
        total.sessions += r.sessions;
        total.slots += r.slots;
        total.logbookEntries += r.logbookEntries;
        total.done = r.done;
        if (r.done) break;
      }
    } catch (err) {
      throw core.emitError('store', err);
    }
    // Values this process remembers for promotion must not bring an expired entry back.
    if (logbookCutoffMs > 0) core.forgetRecalledBefore(logbookCutoffMs);
    if (total.slots > 0 || total.logbookEntries > 0) {
      core.events.emit('sweep', { tenant: core.hashTenant(tenant), atMs: Date.now(), reason: 'expired', sessions: total.sessions, slots: total.slots, logbookEntries: total.logbookEntries });
    }
    return total;
  }

  stop(): void {
    if (this.timer) clearInterval(this.timer);
    this.timer = undefined;
  }
}
