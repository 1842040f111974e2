// createTidemark(): the middleware, composed of its rooms — the read path (read.ts), the write path
// (write.ts), the outbox (outbox.ts) and admin operations (admin.ts) over shared services (core.ts).
// One turn = read -> the bot's handler with ctx.memory -> the reply passed through untouched -> after
// the end, write. Memory failures never break the reply: the handler runs degraded and failed writes
// wait in the outbox.

import { EventEmitter } from 'eventemitter3';
import type { Embedder } from '../embed/embedder.js';
import { HashingEmbedder } from '../embed/hashing.js';
import { ConfigError, ErrorCodes, InputError, StoreError, describeValue } from '../errors.js';
import { RuleExtractor, type Extractor } from '../memory/extract.js';
import { resolveMemoryParams, type MemoryParams } from '../memory/params.js';
import { analyze } from '../memory/text.js';
import { RetentionTracker, retentionSnapshot, type RetentionSnapshot } from '../metrics/retention.js';
import { InProcessStore } from '../store/in-process.js';
import type { EraseReport, Store, SweepReport } from '../store/store.js';
import type { MemoryContext, RecallItem, TurnInput } from '../types.js';
import { Admin, type SessionView } from './admin.js';
import { Core, refOf } from './core.js';
import type { TidemarkEvents } from './events.js';
import { resolveOptions, type TidemarkOptions } from './options.js';
import { Outbox } from './outbox.js';
import { Sweeper } from './sweep.js';
import { ReadPath } from './read.js';
import { isAsyncIterable, isReadableStream, passIterable, passReadable, type Reply, type ReplyEnd } from './stream.js';
import type { Turn } from './validate.js';
import { WritePath, type WriteReport } from './write.js';
import { Corrections, type CorrectionReport, type EditInput, type FactTarget } from './correct.js';
import { withoutText } from './report.js';
import { hashKeyOf } from '../deprecated-fields.js';

export { TIDEMARK_DEFAULTS, type LogbookOptions, type OutboxOptions, type TidemarkOptions } from './options.js';
export type { SessionView, SlotView } from './admin.js';
export type { WriteReport } from './write.js';
export type { WriteDetail, StoredValue, OverwrittenValue, DroppedItem } from './report.js';
export type { FactTarget, EditInput, CorrectionReport } from './correct.js';

/** What a wrapped handler receives besides its input. */
export interface WrapContext {
  memory: MemoryContext;
  signal?: AbortSignal;
}

/** The input of a wrapped handler: a turn plus anything the bot passes along. */
export type WrapInput = TurnInput & Record<string, unknown>;

/** Per-turn options of a wrapped handler's call. */
export interface WrapCallOptions {
  /** Aborts the reply (the client went away). */
  signal?: AbortSignal;
  /**
   * A question about the past ("what was my old address?"): replaced values rank by their own score
   * instead of below the value that replaced them. Also read from `input.history`. @default false
   */
  history?: boolean;
}

export interface WriteOptions {
  /** Revision ids of slots the turn used; they are reinforced. */
  reinforce?: readonly string[];
  /** Ids of logbook values (evicted earlier) the turn used; they move back into slots. */
  promote?: readonly string[];
  /** Put the values in `WriteReport.detail` too; without it the detail holds ids and keys only. @default false */
  text?: boolean;
}

/** Terms of a reply, once, for the "used" test of every recalled item. */
const replyTerms = (reply: string): Set<string> => new Set(analyze(reply));

export class Tidemark extends EventEmitter<TidemarkEvents> {
  readonly store: Store;
  readonly embedder: Embedder;
  readonly extractor: Extractor;
  readonly params: MemoryParams;
  readonly tenant: string;
  /** Slot lifetimes followed from this instance's events (Kaplan–Meier in `retention()`). */
  readonly retentionTracker = new RetentionTracker();
  private readonly core: Core;
  private readonly reads: ReadPath;
  private readonly writes: WritePath;
  private readonly outbox: Outbox;
  private readonly admin: Admin;
  private readonly corrections: Corrections;
  private readonly sweeper: Sweeper;
  private closed = false;
  /** Times the store was found empty after an outage (a `storeReset` event each; a counter for metrics). */
  storeResets = 0;

  constructor(options: TidemarkOptions = {}) {
    super();
    this.params = resolveMemoryParams(options);
    const o = resolveOptions(options);
    this.tenant = o.tenant;
    this.store = options.store ?? new InProcessStore();
    this.embedder = options.embedder ?? new HashingEmbedder({ dim: 384 });
    if (!Number.isInteger(this.embedder.dim) || this.embedder.dim < 1) {
      throw new ConfigError(`embedder ${this.embedder.id} has dim ${describeValue(this.embedder.dim)}; an embedder must know its dimension (call warmup() first)`);
    }
    this.extractor = options.extractor ?? new RuleExtractor();
    this.core = new Core(this.store, this.embedder, this.extractor, this.params, o, this, hashKeyOf(options));
    this.reads = new ReadPath(this.core);
    this.writes = new WritePath(this.core);
    this.outbox = new Outbox(this.core, this.writes);
    this.admin = new Admin(this.core, this.outbox);
    this.corrections = new Corrections(this.core, this.admin);
    this.sweeper = new Sweeper(this.core);
    this.retentionTracker.attach(this);
    this.store.watchResets?.(({ atMs }) => {
      this.storeResets++;
      this.core.clearMemos();
      this.emit('storeReset', { store: this.store.name, resets: this.storeResets, atMs });
    });
  }

  /**
   * How long slots survive in working memory: Kaplan–Meier estimates over the lifetimes seen by this
   * instance (in clock units and in seconds; live slots censored), and the half-life distribution.
   */
  retention(nowMs = Date.now()): RetentionSnapshot {
    return retentionSnapshot(this.retentionTracker, nowMs);
  }

  /**
   * Runs the retention sweep now (it also runs every `retention.sweepMs`): deletes from the store the
   * slots past `write.maxAgeMs` and the logbook entries past `logbook.maxAgeMs`, as of `nowMs`.
   */
  sweep(nowMs = Date.now()): Promise<SweepReport> {
    if (this.closed) return Promise.reject(new StoreError(ErrorCodes.CLOSED, 'sweep after close(): this tidemark instance is closed; create a new one'));
    return this.sweeper.run(nowMs);
  }

  /** Writes waiting for the store. */
  get outboxDepth(): number {
    return this.outbox.depth;
  }

  /** Keyed hash of a session id as it appears in events and metrics (12 hex chars). */
  hashSession(tenant: string, session: string): string {
    return this.core.hashSession(tenant, session);
  }

  /** Keyed hash of a tenant id as it appears in events (the `tenant` field; 12 hex chars). */
  hashTenant(tenant: string): string {
    return this.core.hashTenant(tenant);
  }

  /**
   * Revision ids of the slots a turn used, for `write(..., { reinforce })`. With the reply's text: the
   * recalled slots whose value the reply repeats (at least `useOverlap` of its words). Without it: the
   * top item, when it is a slot and the read was a hit. A miss reinforces nothing. wrap() does this itself.
   */
  usedBy(memory: MemoryContext, reply?: string): string[] {
    return this.used(memory, reply, (i) => i.source === 'slot', 'slot');
  }

  /**
   * Ids of logbook values (evicted from working memory earlier) a turn used, for
   * `write(..., { promote })`: the same test as `usedBy`. Turns and superseded values are never promoted.
   */
  promotedBy(memory: MemoryContext, reply?: string): string[] {
    if (!this.core.o.promote) return [];
    return this.used(memory, reply, (i) => i.source === 'logbook' && i.kind !== 'turn' && i.kind !== 'superseded', 'logbook');
  }

  private used(memory: MemoryContext, reply: string | undefined, want: (i: RecallItem) => boolean, result: 'slot' | 'logbook'): string[] {
    if (memory.degraded || memory.items.length === 0) return [];
    if (reply === undefined || reply.trim().length === 0) {
      const top = memory.items[0]!;
      return memory.trace.result === result && want(top) ? [top.id] : [];
    }
    const words = replyTerms(reply);
    const need = this.core.o.useOverlap;
    return memory.items
      .filter((i) => {
        if (!want(i)) return false;
        const terms = [...new Set(analyze(i.value))];
        if (terms.length === 0) return false;
        let hit = 0;
        for (const t of terms) if (words.has(t)) hit++;
        return hit / terms.length >= need;
      })
      .map((i) => i.id);
  }

  // ---------------------------------------------------------------- turns

  /** Recalls what is relevant to `input.text` for its session. Store failures give `degraded: true`. */
  async read(input: Pick<TurnInput, 'session' | 'text' | 'user' | 'tenant' | 'at'> & { history?: boolean }): Promise<MemoryContext> {
    this.refuseClosed('read');
    // Validated as write() validates a turn (a non-object gets the same error), with the user's role.
    const turn = this.core.validate(input, 'user');
    return this.reads.read(turn, input.history === true);
  }

  /**
   * Keeps one or more turns (in order, one session per call) in the logbook and writes what they
   * say into working memory. Resolves once committed, or once queued in the outbox when the store is
   * unreachable (`committed: false`).
   */
  async write(turns: TurnInput | TurnInput[], options: WriteOptions = {}): Promise<WriteReport> {
    this.refuseClosed('write');
    const acceptedMs = Date.now();
    const list = (Array.isArray(turns) ? turns : [turns]).map((t) => this.core.validate(t));
    if (list.length === 0) throw new InputError(ErrorCodes.INPUT_FIELD, 'write needs at least one turn');
    const first = list[0]!;
    for (const t of list) {
      if (t.session !== first.session || t.tenant !== first.tenant) {
        throw new InputError(ErrorCodes.INPUT_FIELD, 'all turns of one write call must belong to one session; call write once per session', { details: { field: 'session' } });
      }
    }
    const ref = refOf(first);
    // The erasure fence the turns are accepted under: an erase from here on (any process) wins. A
    // store without fences has only the order of calls: the turns join their session's queue before
    // write() yields, so an erase called after it waits for them.
    const fence = this.store.fence ? await this.core.fenceNow(ref, acceptedMs) : undefined;
    const report = await this.outbox.enqueue(ref, list, [...(options.reinforce ?? [])], [...(options.promote ?? [])], fence, acceptedMs);
    if (report.detail && options.text !== true) report.detail = withoutText(report.detail);
    return report;
  }

  private refuseClosed(op: string): void {
    if (this.closed) throw new StoreError(ErrorCodes.CLOSED, `${op} after close(): this tidemark instance is closed; create a new one`);
  }

  /**
   * Wraps a message handler. The handler receives `ctx.memory`; its reply (a string, an async
   * iterable of strings, or a ReadableStream) is returned chunk for chunk as it arrives, and the
   * memory write runs after the reply ends. Bad input rejects with an InputError before the handler
   * runs; any memory failure leaves the reply intact.
   */
  wrap<I extends WrapInput, R extends Reply>(handler: (input: I, ctx: WrapContext) => R | Promise<R>): (input: I, options?: WrapCallOptions) => Promise<R> {
    return async (input: I, options: WrapCallOptions = {}): Promise<R> => {
      this.refuseClosed('wrap');
      const acceptedMs = Date.now();
      const turn = this.core.validate(input);
      const signal = options.signal ?? (input.signal instanceof AbortSignal ? input.signal : undefined);
      let memory: MemoryContext;
      try {
        memory = await this.reads.read(turn, options.history === true || input.history === true);
      } catch (err) {
        memory = this.reads.degraded(turn, err, 0);
      }
      const ref = refOf(turn);
      const after = (text: string, end: ReplyEnd): void => {
        const turns: Turn[] = [turn];
        const reply: Turn | null = text.trim().length > 0 ? Object.assign(refOf(turn), { role: 'assistant' as const, text: text.slice(0, this.core.o.maxTextBytes), atMs: Date.now() }) : null;
        if (end === 'done' && reply) turns.push(reply);
        if (end === 'aborted') {
          if (this.core.o.onAbort === 'none') return;
          if (this.core.o.onAbort === 'all' && reply) turns.push(reply);
        }
        // What the turn used is judged by what the reply says, once it is known.
        const said = end === 'done' ? text : undefined;
        // Fenced as of the read: an erase while the reply streamed wins over this write. A degraded
        // read could not ask the store, so the fence is this process's clock at acceptance.
        const fence = this.core.fenceOf(memory) ?? (this.store.fence ? { acceptedMs } : undefined);
        this.outbox.enqueue(ref, turns, this.usedBy(memory, said), this.promotedBy(memory, said), fence, acceptedMs).catch(() => {
          // Reported through the error event (a conflict or an outage keeps it queued, an erase
          // refuses it by design); a reply is never failed by its memory write.
        });
      };
      let reply: R;
      try {
        reply = await handler(input, signal ? { memory, signal } : { memory });
      } catch (err) {
        after('', 'error');
        throw err;
      }
      if (typeof reply === 'string') {
        after(reply, signal?.aborted ? 'aborted' : 'done');
        return reply;
      }
      if (isReadableStream(reply)) return passReadable(reply as ReadableStream<string | Uint8Array>, signal, after) as R;
      if (isAsyncIterable(reply)) return passIterable(reply as AsyncIterable<string>, signal, after) as unknown as R;
      after('', 'done');
      return reply;
    };
  }

  // ---------------------------------------------------------------- admin

  /**
   * Forgets one fact: a slot (`slot` index, or `item` = the id a read returned) or a logbook entry
   * (`item`). The value leaves every tier: the slot, its earlier revisions in the logbook, and the
   * logbook turns that said it (whole turns). Resolves to the ids removed.
   */
  forget(target: FactTarget): Promise<CorrectionReport> {
    return this.corrections.forget(target);
  }

  /**
   * Corrects one fact's value (`{ session, slot | item, value, by? }`). The old value leaves every
   * tier as with forget(); the new revision's provenance is `edit:<by>:<epoch ms>`, not a turn.
   */
  edit(input: EditInput): Promise<CorrectionReport> {
    return this.corrections.edit(input);
  }

  /** Pins (or unpins) a slot: pinned slots never decay out and are never evicted. */
  pin(session: string, slot: number, pinned = true, tenant = this.tenant): Promise<void> {
    return this.admin.pin(session, slot, pinned, tenant);
  }

  /**
   * Erases a session, or a user with all their sessions: slots, logbook entries, events, pending
   * outbox writes and cached embeddings. Nothing erased can come back through a read.
   */
  erase(target: { session: string } | { user: string }, tenant = this.tenant): Promise<EraseReport> {
    return this.admin.erase(target, tenant);
  }

  /** A session's slots (strengths decayed to now), logbook entries and recent events. */
  inspect(session: string, tenant = this.tenant, options: { user?: string; logbookLimit?: number; eventLimit?: number } = {}): Promise<SessionView> {
    return this.admin.inspect(session, tenant, options);
  }

  /** Re-embeds a session's slot keys with the current embedder (after switching models). */
  migrate(session: string, tenant = this.tenant): Promise<{ slots: number }> {
    return this.admin.migrate(session, tenant);
  }

  /**
   * Waits for in-flight writes, then tries to drain the outbox until empty or `timeoutMs` passes;
   * settles by the deadline whatever is pending (its own timer keeps the process alive until then).
   */
  async flush(options: { timeoutMs?: number } = {}): Promise<{ outboxDepth: number }> {
    const timeoutMs = options.timeoutMs ?? 10_000;
    const deadline = Date.now() + timeoutMs;
    let expired = false;
    let timer: NodeJS.Timeout | undefined;
    const out = new Promise<void>((resolve) => {
      timer = setTimeout(() => {
        expired = true;
        resolve();
      }, Math.max(0, timeoutMs));
    });
    const wait = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms).unref?.());
    const work = (async (): Promise<void> => {
      while (!expired && this.core.queues.size > 0 && Date.now() < deadline) await Promise.race([Promise.all(this.core.queues.values()), wait(50), out]);
      while (!expired && this.outbox.depth > 0 && Date.now() < deadline) {
        await Promise.race([this.outbox.drainNow(), out]);
        if (!expired && this.outbox.depth > 0) await Promise.race([wait(Math.min(200, Math.max(1, deadline - Date.now()))), out]);
      }
    })();
    try {
      await Promise.race([work, out]);
    } finally {
      clearTimeout(timer);
    }
    return { outboxDepth: this.outbox.depth };
  }

  /**
   * Flushes what it can (up to `timeoutMs`), stops timers and closes the store. Writes still queued
   * then are not stored: their count is returned (`abandoned`) and announced in a `closed` event and
   * one `outbox` `abandoned` event each. Reads and writes after close are refused (`TIDEMARK_E_CLOSED`).
   */
  async close(options: { timeoutMs?: number } = {}): Promise<{ abandoned: number }> {
    if (this.closed) return { abandoned: 0 };
    await this.flush({ timeoutMs: options.timeoutMs ?? 2000 });
    this.closed = true;
    this.sweeper.stop();
    const abandoned = this.outbox.stop();
    this.emit('closed', { abandoned });
    if (abandoned > 0) this.core.emitError('outbox', new StoreError(ErrorCodes.STORE_UNAVAILABLE, `close(): ${abandoned} queued writes were not stored (store ${this.store.name} unreachable until the deadline)`));
    await this.store.close();
    await this.embedder.close?.();
    this.removeAllListeners();
    return { abandoned };
  }
}

/** Creates a tidemark instance (see TidemarkOptions). */
export function createTidemark(options: TidemarkOptions = {}): Tidemark {
  return new Tidemark(options);
}
