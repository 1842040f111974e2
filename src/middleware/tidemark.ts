// createTidemark(): the middleware. One turn = read (embed the query, load the session, attend over
// its slots, search the archive on a miss) -> the bot's handler with ctx.memory -> the reply passed
// through untouched -> after the end, write (extract, gate, address, commit atomically). Memory
// failures never break the reply: the handler runs degraded and failed writes wait in an outbox.

import { createHmac, randomBytes, randomUUID } from 'node:crypto';
import { EventEmitter } from 'eventemitter3';
import { EmbeddingCache, embedCached } from '../embed/cache.js';
import type { Embedder } from '../embed/embedder.js';
import { HashingEmbedder } from '../embed/hashing.js';
import {
  ConfigError,
  EmbedderError,
  ErrorCodes,
  InputError,
  StoreError,
  TidemarkError,
  describeValue,
  isTidemarkError,
} from '../errors.js';
import { attend, nextQuery, queryTerms, textStats, type AttentionResult } from '../memory/attention.js';
import { bm25Scores, docStats } from '../memory/bm25.js';
import { decayed } from '../memory/decay.js';
import { RuleExtractor, type Extractor } from '../memory/extract.js';
import { resolveMemoryParams, type MemoryParams, type MemoryParamsInput } from '../memory/params.js';
import { PROMPT_DEFAULTS, renderPrompt, type PromptOptions } from '../memory/prompt.js';
import { SlotTable } from '../memory/slots.js';
import { archiveItemOf, planWrite, type Eviction, type KeyedCandidate, type WritePlan } from '../memory/write.js';
import { MemoryStore, scopeOf } from '../store/memory.js';
import type { CommitRequest, EraseReport, SessionSnapshot, SlotOp, Store } from '../store/store.js';
import type { ArchiveHit, ArchiveItem, MemoryContext, ReadTrace, RecallItem, SessionRef, SlotRecord, StoredEvent, TurnInput } from '../types.js';
import { RetentionTracker, retentionSnapshot, type RetentionSnapshot } from '../metrics/retention.js';
import type { TidemarkEvents } from './events.js';
import { isAsyncIterable, isReadableStream, passIterable, passReadable, type Reply, type ReplyEnd } from './stream.js';
import { checkId, validateTurn, type Turn } from './validate.js';

export interface OutboxOptions {
  /** Pending writes held at most; past it new writes are refused with an `outbox` overflow event. @default 10000 */
  max?: number;
  /** First retry delay in ms; doubles per failed attempt up to `maxRetryMs`. @default 250 */
  retryMs?: number;
  /** @default 10000 */
  maxRetryMs?: number;
  /** Sessions drained at once after an outage (each session's writes stay in order). @default 16 */
  concurrency?: number;
}

export interface TidemarkOptions extends MemoryParamsInput {
  /** Where sessions live. @default new MemoryStore() */
  store?: Store;
  /** @default new HashingEmbedder({ dim: 384 }) */
  embedder?: Embedder;
  /** @default new RuleExtractor() */
  extractor?: Extractor;
  /** Tenant of turns that name none. @default 'default' */
  tenant?: string;
  /** Prompt block settings. */
  prompt?: Partial<PromptOptions>;
  /** Largest turn text in UTF-8 bytes. @default 32768 */
  maxTextBytes?: number;
  /** Cut oversized text instead of rejecting it. @default false */
  truncate?: boolean;
  /** Also extract candidates from the assistant's replies. @default false */
  writeReplies?: boolean;
  /** What an aborted reply writes: the user turn, nothing, or the user turn and the partial reply. @default 'user' */
  onAbort?: 'user' | 'none' | 'all';
  /** A read that takes longer (store, or waiting for the session's previous write) runs degraded. @default 1000 */
  readTimeoutMs?: number;
  /** Reload-and-redo attempts after a version conflict (with randomised backoff). @default 16 */
  commitRetries?: number;
  outbox?: OutboxOptions;
  /** Embeddings cached (LRU entries). @default 10000 */
  embedCacheSize?: number;
  /**
   * Move archive items a read used (an archive hit with at least `reinforceMinWeight`) back into a
   * slot at the next write, and out of the archive. @default true
   */
  promote?: boolean;
  /** In wrap(), slots recalled with at least this attention weight count as used and are reinforced. @default 0.1 */
  reinforceMinWeight?: number;
  /**
   * How much of the value's embedding goes into a slot's stored vector: normalize(key + mix * value).
   * 0 stores the topic alone; 0.5 lets a read match a value's meaning ("degreaser") while a
   * same-topic write still addresses the slot (cosine 0.89 > the 0.8 overwrite threshold). @default 0.5
   */
  valueMix?: number;
  /** Key for hashing session ids in events and metrics; random per process when unset. */
  secret?: string;
}

export const TIDEMARK_DEFAULTS: {
  tenant: string;
  maxTextBytes: number;
  truncate: boolean;
  writeReplies: boolean;
  onAbort: 'user' | 'none' | 'all';
  readTimeoutMs: number;
  commitRetries: number;
  outbox: Required<OutboxOptions>;
  embedCacheSize: number;
  reinforceMinWeight: number;
  valueMix: number;
  promote: boolean;
} = {
  tenant: 'default',
  maxTextBytes: 32 * 1024,
  truncate: false,
  writeReplies: false,
  onAbort: 'user',
  readTimeoutMs: 1000,
  commitRetries: 16,
  outbox: { max: 10_000, retryMs: 250, maxRetryMs: 10_000, concurrency: 16 },
  embedCacheSize: 10_000,
  reinforceMinWeight: 0.1,
  valueMix: 0.5,
  promote: true,
};

/** What a wrapped handler receives besides its input. */
export interface WrapContext {
  memory: MemoryContext;
  signal?: AbortSignal;
}

/** The input of a wrapped handler: a turn plus anything the bot passes along. */
export type WrapInput = TurnInput & Record<string, unknown>;

export interface WriteOptions {
  /** Revision ids of slots the turn's read used; they are reinforced. */
  reinforce?: readonly string[];
  /** Ids of archive items the turn's read returned and used; they move back into slots. */
  promote?: readonly string[];
}

/** What one write did. */
export interface WriteReport {
  allocated: number;
  overwritten: number;
  reinforced: number;
  gatedOut: number;
  evicted: number;
  /** False when the store was unreachable and the write is waiting in the outbox. */
  committed: boolean;
  version: number;
  /** Turn ids assigned, in input order. */
  turns: string[];
}

/** A slot as `inspect()` shows it. */
export interface SlotView {
  index: number;
  id: string;
  key: string;
  value: string;
  provenance: string[];
  /** Strength decayed to now. */
  strength: number;
  halfLife: number;
  pinned: boolean;
  reads: number;
  /** Age in clock units. */
  age: number;
  createdMs: number;
  updatedMs: number;
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
  archive: Array<Omit<ArchiveItem, 'key'>>;
  events: StoredEvent[];
}

interface OutboxEntry {
  key: string;
  /** Same id on every retry, so a commit applied before its reply was lost is not applied twice. */
  commitId: string;
  ref: SessionRef;
  turns: Turn[];
  reinforce: string[];
  attempts: number;
}

/** Microseconds since an origin from performance.now(). */
const usSince = (t0: number): number => (performance.now() - t0) * 1000;

export class Tidemark extends EventEmitter<TidemarkEvents> {
  readonly store: Store;
  readonly embedder: Embedder;
  readonly extractor: Extractor;
  readonly params: MemoryParams;
  readonly tenant: string;
  private readonly o: typeof TIDEMARK_DEFAULTS & { prompt: PromptOptions };
  private readonly cache: EmbeddingCache;
  private readonly secret: string;
  private readonly hashes = new Map<string, string>();
  /** Tail of each session's write chain: writes of one session apply in order. */
  private readonly queues = new Map<string, Promise<void>>();
  private readonly outbox: OutboxEntry[] = [];
  /** The snapshot each session's last read loaded, for its write to plan on (bounded, used once). */
  private readonly lastRead = new Map<string, SessionSnapshot>();
  /** Archive items recently returned by reads, per session, so a write can promote them (bounded). */
  private readonly recentArchive = new Map<string, Map<string, ArchiveItem>>();
  private drainTimer: NodeJS.Timeout | undefined;
  private drainDelay: number;
  private draining: Promise<void> | undefined;
  private closed = false;
  /** Slot lifetimes followed from this instance's events (Kaplan–Meier in `retention()`). */
  readonly retentionTracker = new RetentionTracker();

  constructor(options: TidemarkOptions = {}) {
    super();
    this.params = resolveMemoryParams(options);
    const o = {
      ...TIDEMARK_DEFAULTS,
      ...pick(options, ['tenant', 'maxTextBytes', 'truncate', 'writeReplies', 'onAbort', 'readTimeoutMs', 'commitRetries', 'embedCacheSize', 'reinforceMinWeight', 'valueMix', 'promote']),
      outbox: { ...TIDEMARK_DEFAULTS.outbox, ...options.outbox },
      prompt: { ...PROMPT_DEFAULTS, ...options.prompt },
    };
    checkId('tenant', o.tenant);
    intOpt('maxTextBytes', o.maxTextBytes, 1, 16 * 1024 * 1024);
    intOpt('readTimeoutMs', o.readTimeoutMs, 1, 600_000);
    intOpt('commitRetries', o.commitRetries, 0, 1000);
    intOpt('outbox.max', o.outbox.max, 0, 10_000_000);
    intOpt('outbox.retryMs', o.outbox.retryMs, 1, 3_600_000);
    intOpt('outbox.maxRetryMs', o.outbox.maxRetryMs, o.outbox.retryMs, 3_600_000);
    intOpt('outbox.concurrency', o.outbox.concurrency, 1, 1024);
    intOpt('embedCacheSize', o.embedCacheSize, 0, 10_000_000);
    intOpt('prompt.tokenBudget', o.prompt.tokenBudget, 0, 1_000_000);
    if (typeof o.valueMix !== 'number' || !(o.valueMix >= 0 && o.valueMix <= 1)) {
      throw new ConfigError(`option valueMix must be a number in [0, 1], got ${describeValue(o.valueMix)}`, { details: { option: 'valueMix' } });
    }
    if (typeof o.reinforceMinWeight !== 'number' || !(o.reinforceMinWeight >= 0 && o.reinforceMinWeight <= 1)) {
      throw new ConfigError(`option reinforceMinWeight must be a number in [0, 1], got ${describeValue(o.reinforceMinWeight)}`, { details: { option: 'reinforceMinWeight' } });
    }
    if (!['user', 'none', 'all'].includes(o.onAbort)) {
      throw new ConfigError(`option onAbort must be 'user', 'none' or 'all', got ${describeValue(o.onAbort)}`, { details: { option: 'onAbort' } });
    }
    this.o = o;
    this.tenant = o.tenant;
    this.store = options.store ?? new MemoryStore();
    this.embedder = options.embedder ?? new HashingEmbedder({ dim: 384 });
    if (!Number.isInteger(this.embedder.dim) || this.embedder.dim < 1) {
      throw new ConfigError(`embedder ${this.embedder.id} has dim ${describeValue(this.embedder.dim)}; an embedder must know its dimension (call warmup() first)`);
    }
    this.extractor = options.extractor ?? new RuleExtractor();
    this.cache = new EmbeddingCache(o.embedCacheSize);
    this.secret = options.secret ?? randomBytes(16).toString('hex');
    this.drainDelay = o.outbox.retryMs;
    this.retentionTracker.attach(this);
  }

  /**
   * How long slots survive in working memory: Kaplan–Meier estimates over the lifetimes seen by this
   * instance (in clock units and in seconds; live slots censored), and the half-life distribution.
   */
  retention(nowMs = Date.now()): RetentionSnapshot {
    return retentionSnapshot(this.retentionTracker, nowMs);
  }

  /**
   * Revision ids of the slots a read counts as used, for `write(..., { reinforce })`: on a hit, the
   * slot items that carried at least `reinforceMinWeight` of the attention. A miss reinforces nothing
   * (its items matched weakly), nor does a tail item that scraped in. wrap() does this itself.
   */
  usedBy(memory: MemoryContext): string[] {
    if (memory.trace.result !== 'hit') return [];
    return memory.items.filter((i) => i.source === 'slot' && i.weight >= this.o.reinforceMinWeight).map((i) => i.id);
  }

  /**
   * Ids of archive items a read counts as used, for `write(..., { promote })`: on an archive hit, the
   * current (not superseded) archive items with at least `reinforceMinWeight`. wrap() does this itself.
   */
  promotedBy(memory: MemoryContext): string[] {
    if (!this.o.promote || memory.trace.result !== 'archive_hit') return [];
    return memory.items.filter((i) => i.source === 'archive' && i.reason !== 'superseded' && i.weight >= this.o.reinforceMinWeight).map((i) => i.id);
  }

  /** Writes waiting for the store. */
  get outboxDepth(): number {
    return this.outbox.length;
  }

  /** Keyed hash of a session id as it appears in events and metrics (12 hex chars). */
  hashSession(tenant: string, session: string): string {
    const k = `${tenant}\u0000${session}`;
    let h = this.hashes.get(k);
    if (h === undefined) {
      h = createHmac('sha256', this.secret).update(k).digest('hex').slice(0, 12);
      if (this.hashes.size >= 10_000) this.hashes.clear();
      this.hashes.set(k, h);
    }
    return h;
  }

  // ---------------------------------------------------------------- read

  /** Recalls what is relevant to `input.text` for its session. Store failures give `degraded: true`. */
  async read(input: Pick<TurnInput, 'session' | 'text' | 'user' | 'tenant' | 'at'> & { history?: boolean }): Promise<MemoryContext> {
    const turn = this.validate({ ...input, role: 'user' });
    return this.readTurn(turn, input.history === true);
  }

  private async readTurn(turn: Turn, history: boolean): Promise<MemoryContext> {
    const t0 = performance.now();
    const ref = refOf(turn);
    const p = this.params.read;
    const e0 = performance.now();
    const [q] = await embedCached(this.embedder, this.cache, [turn.text]);
    const embedUs = usSince(e0);
    let snap: SessionSnapshot | null;
    try {
      snap = await this.loadForRead(ref, t0);
    } catch (err) {
      return this.degradedRead(turn, 'read', err, usSince(t0));
    }
    if (snap) this.rememberSnapshot(ref, snap);
    const table = snap?.table;
    if (table && table.dim !== this.embedder.dim) throw this.dimError(ref, table.dim);
    const now = this.clockFor(snap, turn.atMs);
    const terms = queryTerms(turn.text);
    let items: RecallItem[] = [];
    let att: AttentionResult | undefined;
    let hops = 0;
    if (table && table.count() > 0) {
      att = attend(table, now, q!, terms, p);
      hops = 1;
      for (let h = 1; h < p.hops && att.selected.length > 0; h++) {
        const values = await embedCached(this.embedder, this.cache, att.selected.map((i) => table.value[i]!));
        const byIdx = new Map(att.selected.map((i, n) => [i, values[n]!]));
        const q2 = nextQuery(q!, att, (i) => byIdx.get(i)!);
        const next = attend(table, now, q2, terms, p);
        // Merge hops: average the weights of each slot over the hops it was selected in.
        const merged = new Set([...att.selected, ...next.selected]);
        for (const i of merged) next.weight[i] = (att.weight[i]! + next.weight[i]!) / 2;
        next.selected = [...merged].sort((a, b) => next.weight[b]! - next.weight[a]!).slice(0, p.k);
        next.hit = att.hit || next.hit;
        att = next;
        hops++;
      }
      items = att.selected.map((i) => slotItem(table, i, att!));
    }
    let archiveSearched = false;
    let archiveCount = 0;
    const slotHit = att?.hit === true;
    if (p.archive === 'always' || (p.archive === 'miss' && !slotHit)) {
      if (p.archiveK > 0 && (snap !== null || turn.user)) {
        archiveSearched = true;
        try {
          const archived = await this.searchArchive(ref, q!, terms, table, now, history || p.history);
          archiveCount = archived.filter((x) => x.source === 'archive').length;
          items = mergeItems(items, archived, p.k + p.archiveK);
          if (archiveCount > 0) reweight(items, p.temperature);
        } catch (err) {
          // The slots are still good; report the archive failure and carry on without it.
          this.emitError('read', err, ref);
        }
      }
    }
    const result = slotHit ? 'hit' : archiveCount > 0 ? 'archive_hit' : 'miss';
    const trace: ReadTrace = {
      result,
      scanned: table ? table.count() : 0,
      topCosine: att ? att.topCosine : -1,
      topWeight: att ? att.topWeight : 0,
      entropy: att ? att.entropy : 0,
      hops,
      archiveSearched,
      archiveHits: archiveCount,
      items: items.map(({ source, slot, id, cosine, lexical, strength, weight, score, provenance }) => ({ source, ...(slot !== undefined ? { slot } : {}), id, cosine, lexical, strength, weight, score, provenance })),
      durationUs: usSince(t0),
    };
    const ctx: MemoryContext = { items, prompt: renderPrompt(items, this.o.prompt), trace, degraded: false };
    if (this.listenerCount('read') > 0) {
      this.emit('read', {
        ...this.base(ref),
        result,
        items: items.length,
        slotItems: items.length - archiveCount,
        archiveItems: archiveCount,
        scanned: trace.scanned,
        slotsInUse: trace.scanned,
        capacity: table?.capacity ?? this.params.capacity,
        topWeight: trace.topWeight,
        entropy: trace.entropy,
        topCosine: trace.topCosine,
        durationUs: trace.durationUs,
        embedUs,
      });
    }
    return ctx;
  }

  /** Waits (within the read timeout) for the session's pending write, then loads it. */
  private async loadForRead(ref: SessionRef, t0: number): Promise<SessionSnapshot | null> {
    const budget = this.o.readTimeoutMs;
    const pending = this.queues.get(keyOf(ref));
    let timer: NodeJS.Timeout | undefined;
    const timeout = new Promise<never>((_, reject) => {
      timer = setTimeout(
        () => reject(new StoreError(ErrorCodes.STORE_UNAVAILABLE, `store ${this.store.name} did not answer a read within ${budget} ms (readTimeoutMs)`)),
        Math.max(1, budget - (performance.now() - t0)),
      );
    });
    try {
      // Wait for the session's previous write for at most half the budget; past that, read the last
      // committed state rather than nothing (the pending write is still serialised behind us).
      if (pending) await Promise.race([pending, sleep(budget / 2)]);
      return await Promise.race([this.store.load(ref), timeout]);
    } catch (err) {
      throw isTidemarkError(err) ? err : new StoreError(ErrorCodes.STORE_UNAVAILABLE, `store ${this.store.name} failed a read: ${errMessage(err)}`, { cause: err });
    } finally {
      clearTimeout(timer);
    }
  }

  private async searchArchive(ref: SessionRef, q: Float32Array, terms: string[], table: SlotTable | undefined, now: number, history: boolean): Promise<RecallItem[]> {
    const p = this.params.read;
    // Fetch more than needed so the lexical re-rank and the superseded filter have room.
    const hits = await this.store.searchArchive(scopeOf(ref), q, p.archiveK * 4);
    if (hits.length === 0) return [];
    const stats = hits.map((h) => archiveDocStats(h.item));
    const raw = new Float64Array(hits.length);
    bm25Scores(terms, stats, raw);
    let maxLex = 0;
    for (const v of raw) if (v > maxLex) maxLex = v;
    const live = new Map<string, number>();
    if (table) for (let i = 0; i < table.capacity; i++) if (table.isUsed(i)) live.set(table.ids[i]!, i);
    const kept: Array<{ hit: ArchiveHit; lex: number; lexRaw: number; z: number }> = [];
    hits.forEach((hit, n) => {
      if (hit.cosine < p.archiveMinCosine && raw[n]! < p.minLexical) return;
      const lex = maxLex > 0 ? raw[n]! / maxLex : 0;
      // A superseded value scores as if its cosine were half a unit lower, unless history is asked for.
      const penalty = !history && hit.item.reason === 'superseded' ? p.beta * 0.5 : 0;
      const z = p.beta * hit.cosine + p.gamma * lex + p.delta * Math.log(Math.max(hit.item.strength, 1e-9)) - penalty;
      kept.push({ hit, lex, lexRaw: raw[n]!, z });
    });
    if (kept.length === 0) return [];
    const max = Math.max(...kept.map((k) => k.z));
    const exps = kept.map((k) => Math.exp((k.z - max) / p.temperature));
    const sum = exps.reduce((a, b) => a + b, 0);
    const out: RecallItem[] = [];
    const successors: RecallItem[] = [];
    kept
      .map((k, n) => ({ ...k, w: exps[n]! / sum }))
      .sort((a, b) => b.w - a.w)
      .forEach((k) => {
        const it = k.hit.item;
        this.rememberArchiveHit(ref, it);
        const item: RecallItem = {
          source: 'archive', id: it.id, key: it.keyText, value: it.value, provenance: it.provenance.slice(),
          weight: k.w, score: k.z, cosine: k.hit.cosine, lexical: k.lex, strength: it.strength, reason: it.reason,
          ...(it.successor ? { successor: it.successor } : {}),
        };
        // A superseded value never outranks its successor: when the successor is live, return it first.
        if (!history && it.reason === 'superseded' && it.successor && table) {
          const idx = live.get(it.successor);
          if (idx !== undefined && !successors.some((s) => s.id === it.successor)) {
            const s = decayed(table.strength[idx]!, table.stamp[idx]!, table.halfLife[idx]!, now);
            successors.push({
              source: 'slot', slot: idx, id: table.ids[idx]!, key: table.keyText[idx]!, value: table.value[idx]!,
              provenance: table.provenance[idx]!.slice(), weight: k.w, score: k.z, cosine: k.hit.cosine, lexical: k.lex,
              strength: table.isPinned(idx) ? table.strength[idx]! : s,
            });
          }
        }
        out.push(item);
      });
    if (history) return out.slice(0, p.archiveK);
    // Successors first, then current (evicted) items, then superseded ones.
    const current = out.filter((i) => i.reason !== 'superseded');
    const superseded = out.filter((i) => i.reason === 'superseded');
    return [...successors, ...current, ...superseded].slice(0, p.archiveK + successors.length);
  }

  private degradedRead(turn: Turn, stage: 'read', err: unknown, durationUs: number): MemoryContext {
    const ref = refOf(turn);
    const error = this.emitError(stage, err, ref);
    this.emit('degraded', { ...this.base(ref), stage, code: error.code });
    return {
      items: [],
      prompt: '',
      degraded: true,
      trace: { result: 'miss', scanned: 0, topCosine: -1, topWeight: 0, entropy: 0, hops: 0, archiveSearched: false, archiveHits: 0, items: [], durationUs },
    };
  }

  // ---------------------------------------------------------------- write

  /**
   * Extracts, gates and writes one or more turns, in order per session. Resolves once committed,
   * or once queued in the outbox when the store is unreachable (`committed: false`).
   */
  async write(turns: TurnInput | TurnInput[], options: WriteOptions = {}): Promise<WriteReport> {
    const list = (Array.isArray(turns) ? turns : [turns]).map((t) => this.validate(t));
    if (list.length === 0) throw new InputError(ErrorCodes.INPUT_FIELD, 'write needs at least one turn');
    const first = list[0]!;
    for (const t of list) {
      if (t.session !== first.session || t.tenant !== first.tenant) {
        throw new InputError(ErrorCodes.INPUT_FIELD, 'all turns of one write call must belong to one session; call write once per session', { details: { field: 'session' } });
      }
    }
    return this.enqueue(refOf(first), list, [...(options.reinforce ?? [])], [...(options.promote ?? [])]);
  }

  private enqueue(ref: SessionRef, turns: Turn[], reinforce: string[], promote: string[] = []): Promise<WriteReport> {
    const key = keyOf(ref);
    const commitId = randomUUID();
    // Resolve promoted ids to the archive items the read saw; conflict re-plans reuse them, a write
    // that goes to the outbox commits without promoting (promotion is an optimisation, not a fact).
    const recent = this.recentArchive.get(key);
    const items = promote.map((id) => recent?.get(id)).filter((x): x is ArchiveItem => x !== undefined);
    return this.chain(key, () => this.commitOrQueue(ref, turns, reinforce, commitId, items));
  }

  /** Runs `fn` after the session's previous write settles; writes of one session apply in order. */
  private chain<T>(key: string, fn: () => Promise<T>): Promise<T> {
    const job = (this.queues.get(key) ?? Promise.resolve()).then(fn);
    const tail = job.then(
      () => undefined,
      () => undefined,
    );
    this.queues.set(key, tail);
    void tail.then(() => {
      if (this.queues.get(key) === tail) this.queues.delete(key);
    });
    return job;
  }

  private async commitOrQueue(ref: SessionRef, turns: Turn[], reinforce: string[], commitId: string, promote: ArchiveItem[] = []): Promise<WriteReport> {
    const key = keyOf(ref);
    // Keep a session's writes in order: once one waits in the outbox, later ones queue behind it.
    if (this.outbox.some((e) => e.key === key)) return this.toOutbox(ref, turns, reinforce, 0, commitId);
    try {
      return await this.commitTurns(ref, turns, reinforce, commitId, promote);
    } catch (err) {
      if (err instanceof StoreError && err.code === ErrorCodes.STORE_UNAVAILABLE) {
        this.emitError('write', err, ref);
        this.emit('degraded', { ...this.base(ref), stage: 'write', code: err.code });
        return this.toOutbox(ref, turns, reinforce, 1, commitId);
      }
      this.emitError('write', err, ref);
      throw err;
    }
  }

  private toOutbox(ref: SessionRef, turns: Turn[], reinforce: string[], attempts: number, commitId: string): WriteReport {
    const report: WriteReport = { allocated: 0, overwritten: 0, reinforced: 0, gatedOut: 0, evicted: 0, committed: false, version: -1, turns: turns.map((t) => t.turn ?? '') };
    if (this.outbox.length >= this.o.outbox.max) {
      const error = new StoreError(ErrorCodes.STORE_OUTBOX_FULL, `outbox is full (${this.o.outbox.max} pending writes) while store ${this.store.name} is unreachable; this write was refused — raise outbox.max or restore the store`);
      this.emit('outbox', { depth: this.outbox.length, change: 'overflow', sessionHash: this.hashSession(ref.tenant, ref.session) });
      this.emitError('outbox', error, ref);
      throw error;
    }
    this.outbox.push({ key: keyOf(ref), commitId, ref, turns, reinforce, attempts });
    this.emit('outbox', { depth: this.outbox.length, change: 'queued', sessionHash: this.hashSession(ref.tenant, ref.session) });
    this.scheduleDrain();
    return report;
  }

  private scheduleDrain(): void {
    if (this.drainTimer || this.closed || this.outbox.length === 0) return;
    this.drainTimer = setTimeout(() => {
      this.drainTimer = undefined;
      void this.drain();
    }, this.drainDelay);
    this.drainTimer.unref?.();
  }

  /**
   * Commits outbox entries: in order within a session, several sessions at a time (up to
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
          const entry = this.outbox.find((e) => !busy.has(e.key));
          if (!entry) return;
          busy.add(entry.key);
          try {
            await this.commitTurns(entry.ref, entry.turns, entry.reinforce, entry.commitId);
          } catch (err) {
            if (err instanceof StoreError && err.code === ErrorCodes.STORE_UNAVAILABLE) {
              entry.attempts++;
              failed = true;
              busy.delete(entry.key);
              return;
            }
            // Not a connectivity problem: retrying cannot help. Report it; never drop silently.
            this.emitError('outbox', err, entry.ref);
          }
          const at = this.outbox.indexOf(entry);
          if (at >= 0) this.outbox.splice(at, 1);
          busy.delete(entry.key);
          this.emit('outbox', { depth: this.outbox.length, change: 'drained', sessionHash: this.hashSession(entry.ref.tenant, entry.ref.session) });
        }
      };
      try {
        await Promise.all(Array.from({ length: this.o.outbox.concurrency }, worker));
        this.drainDelay = failed ? Math.min(this.o.outbox.maxRetryMs, this.drainDelay * 2) : this.o.outbox.retryMs;
      } finally {
        this.draining = undefined;
        this.scheduleDrain();
      }
    })();
    return this.draining;
  }

  /** Extract, embed, plan and commit with reload-and-redo on version conflicts. */
  private async commitTurns(ref: SessionRef, turns: Turn[], reinforce: string[], commitId: string = randomUUID(), promote: readonly ArchiveItem[] = []): Promise<WriteReport> {
    const extracted: Array<{ turn: Turn; candidates: KeyedCandidate['candidate'][] }> = [];
    for (const t of turns) {
      const skip = t.role !== 'user' && !(t.role === 'assistant' && this.o.writeReplies);
      extracted.push({ turn: t, candidates: skip ? [] : await this.extractor.extract(t.text, t.role) });
    }
    const all = extracted.flatMap((e) => e.candidates);
    const e0 = performance.now();
    // Keys address slots; values are mixed into the stored vector so reads see them too.
    const mix = this.o.valueMix;
    const vecs = all.length > 0 ? await embedCached(this.embedder, this.cache, mix > 0 ? all.flatMap((c) => [c.key, c.value]) : all.map((c) => c.key)) : [];
    const keys = mix > 0 ? all.map((_, n) => vecs[2 * n]!) : vecs;
    const stored = mix > 0 ? all.map((c, n) => (c.value === c.key ? vecs[2 * n]! : mixVectors(vecs[2 * n]!, vecs[2 * n + 1]!, mix))) : keys;
    const embedUs = usSince(e0);
    let planUs = 0;
    for (let attempt = 0; attempt <= this.o.commitRetries; attempt++) {
      // First attempt: plan on the snapshot this turn's read just loaded, saving a round trip; the
      // commit's version check makes a stale one harmless (a conflict reloads and plans again).
      const cached = attempt === 0 ? this.takeSnapshot(ref) : undefined;
      const snap = cached ?? (await this.storeCall(() => this.store.load(ref), 'load'));
      if (snap && snap.table.dim !== this.embedder.dim) throw this.dimError(ref, snap.table.dim);
      const p0 = performance.now();
      let table = snap?.table ?? new SlotTable(this.params.capacity, this.embedder.dim);
      const resize = table.capacity !== this.params.capacity ? resizeTable(table, this.params.capacity, snap?.clock ?? 0) : null;
      if (resize) table = resize.table;
      // Assign turn ids and advance the clock.
      let turnCount = snap?.turns ?? 0;
      let clock = snap?.clock ?? 0;
      const ids: string[] = [];
      const keyed: KeyedCandidate[] = [];
      let k = 0;
      for (const { turn, candidates } of extracted) {
        turnCount++;
        clock = this.params.decayUnit === 'seconds' ? Math.max(clock, turn.atMs / 1000) : clock + 1;
        const id = turn.turn ?? `t${turnCount}`;
        ids.push(id);
        for (const c of candidates) {
          keyed.push({ candidate: c, key: keys[k]!, stored: stored[k]!, turn: id, role: turn.role });
          k++;
        }
      }
      const last = turns[turns.length - 1]!;
      const plan = planWrite({
        table,
        now: clock,
        nowMs: last.atMs,
        params: this.params.write,
        tenant: ref.tenant,
        session: ref.session,
        ...(ref.user ? { user: ref.user } : {}),
        candidates: keyed,
        reinforce,
        promote,
        newId: newRevisionId,
      });
      if (resize && resize.evictions.length > 0) {
        // Report the resize's evictions like any other: in the plan (events, metrics, WriteReport) and the event stream.
        plan.evictions.unshift(...resize.evictions);
        plan.events.unshift(...resize.evictions.map((e) => ({ type: 'evict' as const, slot: e.slot, id: e.record.id, clock, atMs: last.atMs, reason: e.reason })));
      }
      const ops = resize ? mergeOps(resize.ops, plan.ops) : plan.ops;
      const archive = resize ? [...resize.archive(ref, clock), ...plan.archive] : plan.archive;
      const req: CommitRequest = {
        expectedVersion: snap?.version ?? 0,
        clock,
        turns: turnCount,
        capacity: table.capacity,
        dim: table.dim,
        ops,
        archive,
        events: plan.events,
        commitId,
      };
      planUs += usSince(p0);
      const c0 = performance.now();
      const res = await this.storeCall(() => this.store.commit(ref, req), 'commit');
      if (!res.ok) {
        // Another writer won. Back off a random, growing moment (capped) so contending writers of one
        // session stop colliding in lockstep (randomised exponential backoff, common practice).
        await sleep(Math.random() * Math.min(50, 2 ** attempt));
        continue;
      }
      this.emitWrite(ref, plan, table.capacity, clock);
      if (plan.promoted.length > 0) {
        // Out of the archive now that it is back in a slot; a failure leaves a duplicate that reads
        // de-duplicate by id, so it is reported but not fatal.
        const ids = plan.promoted.map((x) => x.id);
        this.store.deleteArchive(scopeOf(ref), ids).catch((err) => this.emitError('store', err, ref));
        this.recentArchive.get(keyOf(ref))?.clear();
      }
      const report: WriteReport = {
        allocated: 0, overwritten: 0, reinforced: plan.reinforced.length, gatedOut: 0, evicted: plan.evictions.length,
        committed: true, version: res.version, turns: ids,
      };
      for (const o of plan.outcomes) {
        if (o.outcome === 'allocated') report.allocated++;
        else if (o.outcome === 'overwritten') report.overwritten++;
        else if (o.outcome === 'reinforced') report.reinforced++;
        else report.gatedOut++;
      }
      if (this.listenerCount('commit') > 0) {
        this.emit('commit', {
          ...this.base(ref), ops: ops.length, archived: archive.length, retries: attempt, durationUs: usSince(c0),
          planUs, embedUs, slotsInUse: plan.slotsInUse, capacity: table.capacity, version: res.version,
        });
      }
      return report;
    }
    throw new StoreError(ErrorCodes.STORE_CONFLICT, `session kept changing under ${this.o.commitRetries + 1} commit attempts; another writer is very busy on it — retry later or raise commitRetries`);
  }

  private emitWrite(ref: SessionRef, plan: WritePlan, capacity: number, clock: number): void {
    const wantEvict = this.listenerCount('evict') > 0;
    const wantArchive = this.listenerCount('archive') > 0;
    const wantWrite = this.listenerCount('write') > 0;
    const wantGate = this.listenerCount('gate') > 0;
    const wantOverwrite = this.listenerCount('overwrite') > 0;
    if (!wantEvict && !wantArchive && !wantWrite && !wantGate && !wantOverwrite) return;
    const base = this.base(ref);
    for (const ev of plan.evictions) {
      if (wantEvict) {
        this.emit('evict', {
          ...base, slot: ev.slot, id: ev.record.id, reason: ev.reason, archived: ev.archived,
          lifetime: clock - ev.record.created, lifetimeMs: base.atMs - ev.record.createdMs, halfLife: ev.record.halfLife, strength: ev.strength,
        });
      }
      if (ev.archived && wantArchive) this.emit('archive', { ...base, reason: ev.reason as 'capacity', id: ev.record.id });
    }
    if (wantWrite) {
      for (const r of plan.reinforced) {
        this.emit('write', { ...base, outcome: 'reinforced', slot: r.slot, id: r.id, clock, gate: 1, strength: r.strength, halfLife: r.halfLife, slotsInUse: plan.slotsInUse, capacity });
      }
    }
    for (const o of plan.outcomes) {
      if (wantGate) {
        this.emit('gate', { ...base, score: o.gate, threshold: this.params.write.gateThreshold, passed: o.outcome !== 'gated_out', features: { ...o.features } });
      }
      if (o.outcome === 'gated_out') continue;
      if (wantWrite) {
        let op: SlotRecord | null | undefined;
        for (const x of plan.ops) if (x.index === o.slot) op = x.slot;
        this.emit('write', {
          ...base, outcome: o.outcome, slot: o.slot, id: o.id ?? '', clock, gate: o.gate,
          strength: op?.strength ?? o.gate, halfLife: op?.halfLife ?? this.params.write.halfLife, slotsInUse: plan.slotsInUse, capacity,
        });
      }
      if (o.outcome === 'overwritten' && o.supersededId) {
        if (wantOverwrite) this.emit('overwrite', { ...base, slot: o.slot, id: o.id ?? '', supersededId: o.supersededId, cosine: o.cosine });
        if (wantArchive) this.emit('archive', { ...base, reason: 'superseded', id: o.supersededId });
      }
    }
  }

  // ---------------------------------------------------------------- wrap

  /**
   * Wraps a message handler. The handler receives `ctx.memory`; its reply (a string, an async
   * iterable of strings, or a ReadableStream) is returned chunk for chunk as it arrives, and the
   * memory write runs after the reply ends. Bad input rejects with an InputError before the handler
   * runs; any memory failure leaves the reply intact.
   */
  wrap<I extends WrapInput, R extends Reply>(handler: (input: I, ctx: WrapContext) => R | Promise<R>): (input: I, options?: { signal?: AbortSignal }) => Promise<R> {
    return async (input: I, options: { signal?: AbortSignal } = {}): Promise<R> => {
      const turn = this.validate(input);
      const signal = options.signal ?? (input.signal instanceof AbortSignal ? input.signal : undefined);
      let memory: MemoryContext;
      try {
        memory = await this.readTurn(turn, false);
      } catch (err) {
        memory = this.degradedRead(turn, 'read', err, 0);
      }
      const used = this.usedBy(memory);
      const promote = this.promotedBy(memory);
      const ref = refOf(turn);
      const after = (text: string, end: ReplyEnd): void => {
        const turns = [turn];
        const reply: Turn | null = text.trim().length > 0 ? { ...refOf(turn), role: 'assistant', text: text.slice(0, this.o.maxTextBytes), atMs: Date.now() } : null;
        if (end === 'done' && reply) turns.push(reply);
        if (end === 'aborted') {
          if (this.o.onAbort === 'none') return;
          if (this.o.onAbort === 'all' && reply) turns.push(reply);
        }
        this.enqueue(ref, turns, used, promote).catch(() => {
          // Already reported through the error event; a reply is never failed by its memory write.
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

  /** Pins (or unpins) a slot: pinned slots never decay out and are never evicted. */
  async pin(session: string, slot: number, pinned = true, tenant = this.tenant): Promise<void> {
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
   * Erases a session, or a user with all their sessions: slots, archive items, events, pending
   * outbox writes and cached embeddings. Nothing erased can come back through a read.
   */
  async erase(target: { session: string } | { user: string }, tenant = this.tenant): Promise<EraseReport> {
    checkId('tenant', tenant);
    const t: { tenant: string; user: string } | { tenant: string; session: string } =
      'user' in target ? { tenant, user: checkId('user', target.user) } : { tenant, session: checkId('session', target.session) };
    // Wait for writes in flight so none lands after the erase.
    if ('session' in t) await this.queues.get(keyOf({ tenant, session: t.session }));
    else await Promise.all(this.queues.values());
    for (let i = this.outbox.length - 1; i >= 0; i--) {
      const e = this.outbox[i]!;
      if (e.ref.tenant !== tenant) continue;
      if ('user' in t ? e.ref.user === t.user : e.ref.session === t.session) this.outbox.splice(i, 1);
    }
    // Cached vectors are keyed by digests, but they derive from the erased text: drop them all, and
    // the archive items remembered for promotion.
    this.cache.clear();
    this.recentArchive.clear();
    this.lastRead.clear();
    if ('session' in t) await this.announceErased({ tenant, session: t.session });
    const report = await this.storeCall(() => this.store.erase(t), 'erase');
    return report;
  }

  private rememberSnapshot(ref: SessionRef, snap: SessionSnapshot): void {
    const key = keyOf(ref);
    this.lastRead.delete(key);
    if (this.lastRead.size >= 10_000) this.lastRead.delete(this.lastRead.keys().next().value as string);
    this.lastRead.set(key, snap);
  }

  /** The snapshot the session's last read loaded, once (undefined when none). */
  private takeSnapshot(ref: SessionRef): SessionSnapshot | undefined {
    const key = keyOf(ref);
    const snap = this.lastRead.get(key);
    if (snap) this.lastRead.delete(key);
    return snap;
  }

  private rememberArchiveHit(ref: SessionRef, item: ArchiveItem): void {
    if (!this.o.promote) return;
    const key = keyOf(ref);
    let m = this.recentArchive.get(key);
    if (!m) {
      if (this.recentArchive.size >= 1000) this.recentArchive.delete(this.recentArchive.keys().next().value as string);
      this.recentArchive.set(key, (m = new Map()));
    }
    m.set(item.id, item);
    if (m.size > 32) m.delete(m.keys().next().value as string);
  }

  /** Emits `evict` (reason `erased`, not archived) for each slot of a session about to be erased. */
  private async announceErased(ref: SessionRef): Promise<void> {
    if (this.listenerCount('evict') === 0) return;
    let snap: SessionSnapshot | null = null;
    try {
      snap = await this.store.load(ref);
    } catch {
      return; // The erase itself reports store failures.
    }
    if (!snap) return;
    const base = this.base(ref);
    const t = snap.table;
    for (let i = 0; i < t.capacity; i++) {
      if (!t.isUsed(i)) continue;
      this.emit('evict', {
        ...base, slot: i, id: t.ids[i]!, reason: 'erased', archived: false, lifetime: snap.clock - t.created[i]!,
        lifetimeMs: base.atMs - t.createdMs[i]!, halfLife: t.halfLife[i]!, strength: t.strength[i]!,
      });
    }
  }

  /** A session's slots (strengths decayed to now), archive items and recent events. */
  async inspect(session: string, tenant = this.tenant, options: { user?: string; archiveLimit?: number; eventLimit?: number } = {}): Promise<SessionView> {
    const ref: SessionRef = { tenant: checkId('tenant', tenant), session: checkId('session', session), ...(options.user ? { user: checkId('user', options.user) } : {}) };
    const snap = await this.storeCall(() => this.store.load(ref), 'load');
    const now = this.clockFor(snap, Date.now());
    const slots: SlotView[] = [];
    if (snap) {
      const t = snap.table;
      for (let i = 0; i < t.capacity; i++) {
        if (!t.isUsed(i)) continue;
        slots.push({
          index: i, id: t.ids[i]!, key: t.keyText[i]!, value: t.value[i]!, provenance: t.provenance[i]!.slice(),
          strength: t.isPinned(i) ? t.strength[i]! : decayed(t.strength[i]!, t.stamp[i]!, t.halfLife[i]!, now),
          halfLife: t.halfLife[i]!, pinned: t.isPinned(i), reads: t.reads[i]!, age: now - t.created[i]!,
          createdMs: t.createdMs[i]!, updatedMs: t.updatedMs[i]!,
        });
      }
    }
    const archive = (await this.storeCall(() => this.store.listArchive(scopeOf(ref), options.archiveLimit ?? 100), 'archive')).map(({ key: _key, ...rest }) => rest);
    const events = await this.storeCall(() => this.store.readEvents(ref, options.eventLimit ?? 100), 'events');
    return {
      tenant: ref.tenant, session: ref.session, sessionHash: this.hashSession(ref.tenant, ref.session),
      version: snap?.version ?? 0, clock: snap?.clock ?? 0, turns: snap?.turns ?? 0,
      capacity: snap?.table.capacity ?? this.params.capacity, dim: snap?.table.dim ?? this.embedder.dim, slots, archive, events,
    };
  }

  /**
   * Re-embeds a session's slot keys with the current embedder, e.g. after switching models; the
   * values, strengths and provenance are kept. Archive items keep their old vectors until evicted.
   */
  async migrate(session: string, tenant = this.tenant): Promise<{ slots: number }> {
    const ref = { tenant: checkId('tenant', tenant), session: checkId('session', session) };
    let n = 0;
    await this.mutate(ref, async (snap) => {
      const recs: Array<[number, SlotRecord]> = [];
      for (let i = 0; i < snap.table.capacity; i++) {
        const r = snap.table.get(i);
        if (r) recs.push([i, r]);
      }
      // The same stored vector a fresh write makes: normalize(key + valueMix * value).
      const mix = this.o.valueMix;
      const vecs = recs.length ? await embedCached(this.embedder, this.cache, recs.flatMap(([, r]) => [r.keyText, r.value])) : [];
      n = recs.length;
      const ops: SlotOp[] = [];
      for (let i = 0; i < snap.table.capacity; i++) ops.push({ index: i, slot: null });
      recs.forEach(([i, r], m) => {
        const k = vecs[2 * m]!;
        const key = mix > 0 && r.value !== r.keyText ? mixVectors(k, vecs[2 * m + 1]!, mix) : Float32Array.from(k);
        ops[i] = { index: i, slot: { ...r, key } };
      });
      return { ops, events: [], dim: this.embedder.dim };
    }, true);
    return { slots: n };
  }

  /** Waits for in-flight writes, then tries to drain the outbox until empty or `timeoutMs` passes. */
  async flush(options: { timeoutMs?: number } = {}): Promise<{ outboxDepth: number }> {
    const deadline = Date.now() + (options.timeoutMs ?? 10_000);
    while (this.queues.size > 0 && Date.now() < deadline) await Promise.race([Promise.all(this.queues.values()), sleep(50)]);
    while (this.outbox.length > 0 && Date.now() < deadline) {
      if (this.drainTimer) {
        clearTimeout(this.drainTimer);
        this.drainTimer = undefined;
      }
      await this.drain();
      if (this.outbox.length > 0) await sleep(Math.min(200, Math.max(1, deadline - Date.now())));
    }
    return { outboxDepth: this.outbox.length };
  }

  /** Flushes what it can, stops timers and closes the store. */
  async close(options: { timeoutMs?: number } = {}): Promise<void> {
    if (this.closed) return;
    await this.flush({ timeoutMs: options.timeoutMs ?? 2000 });
    this.closed = true;
    if (this.drainTimer) clearTimeout(this.drainTimer);
    this.drainTimer = undefined;
    await this.store.close();
    await this.embedder.close?.();
    this.removeAllListeners();
  }

  // ---------------------------------------------------------------- helpers

  private validate(input: unknown): Turn {
    return validateTurn(input, { tenant: this.tenant, maxTextBytes: this.o.maxTextBytes, truncate: this.o.truncate });
  }

  private clockFor(snap: SessionSnapshot | null, atMs: number): number {
    if (this.params.decayUnit === 'seconds') return Math.max(snap?.clock ?? 0, atMs / 1000);
    return snap?.clock ?? 0;
  }

  private dimError(ref: SessionRef, stored: number): EmbedderError {
    return new EmbedderError(
      ErrorCodes.EMBED_DIM,
      `session #${this.hashSession(ref.tenant, ref.session)} was stored with ${stored} dims, embedder ${this.embedder.id} gives ${this.embedder.dim}; use the same embedder or call migrate(session)`,
      { details: { stored, embedder: this.embedder.dim } },
    );
  }

  private async storeCall<T>(fn: () => Promise<T>, what: string): Promise<T> {
    try {
      return await fn();
    } catch (err) {
      if (isTidemarkError(err)) throw err;
      throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, `store ${this.store.name} failed (${what}): ${errMessage(err)}`, { cause: err });
    }
  }

  /** Load, change and commit a session with conflict retries (admin operations). */
  private async mutate(
    ref: SessionRef,
    change: (snap: SessionSnapshot) => { ops: SlotOp[]; events: StoredEvent[]; dim?: number } | Promise<{ ops: SlotOp[]; events: StoredEvent[]; dim?: number }>,
    allowDimChange = false,
  ): Promise<void> {
    return this.chain(keyOf(ref), async () => {
      for (let attempt = 0; attempt <= this.o.commitRetries; attempt++) {
        const snap = await this.storeCall(() => this.store.load(ref), 'load');
        if (!snap) throw new InputError(ErrorCodes.INPUT_ID, 'no such session in this tenant', { details: { field: 'session' } });
        if (!allowDimChange && snap.table.dim !== this.embedder.dim) throw this.dimError(ref, snap.table.dim);
        const c = await change(snap);
        const res = await this.storeCall(
          () => this.store.commit(ref, {
            expectedVersion: snap.version, clock: snap.clock, turns: snap.turns, capacity: snap.table.capacity,
            dim: c.dim ?? snap.table.dim, ops: c.ops, archive: [], events: c.events,
          }),
          'commit',
        );
        if (res.ok) return;
        await sleep(Math.random() * Math.min(50, 2 ** attempt));
      }
      throw new StoreError(ErrorCodes.STORE_CONFLICT, `session kept changing under ${this.o.commitRetries + 1} attempts`);
    });
  }

  private base(ref: SessionRef): { sessionHash: string; tenant: string; atMs: number } {
    return { sessionHash: this.hashSession(ref.tenant, ref.session), tenant: ref.tenant, atMs: Date.now() };
  }

  private emitError(stage: 'read' | 'write' | 'handler' | 'outbox' | 'store', err: unknown, ref?: SessionRef): TidemarkError {
    const error = isTidemarkError(err)
      ? (err as TidemarkError)
      : new StoreError(ErrorCodes.STORE_UNAVAILABLE, errMessage(err), { cause: err });
    if (this.listenerCount('error') > 0) {
      this.emit('error', { stage, error, ...(ref ? { sessionHash: this.hashSession(ref.tenant, ref.session) } : {}) });
    }
    return error;
  }
}

/** Creates a tidemark instance (see TidemarkOptions). */
export function createTidemark(options: TidemarkOptions = {}): Tidemark {
  return new Tidemark(options);
}

// ------------------------------------------------------------------ module helpers

function pick<T extends object, K extends keyof T>(o: T, keys: K[]): Partial<Pick<T, K>> {
  const out: Partial<Pick<T, K>> = {};
  for (const k of keys) if (o[k] !== undefined) out[k] = o[k];
  return out;
}

function intOpt(name: string, v: unknown, min: number, max: number): void {
  if (typeof v !== 'number' || !Number.isInteger(v) || v < min || v > max) {
    throw new ConfigError(`option ${name} must be an integer in [${min}, ${max}], got ${describeValue(v)}`, { details: { option: name, value: v } });
  }
}

const refOf = (t: Turn): SessionRef => ({ tenant: t.tenant, session: t.session, ...(t.user ? { user: t.user } : {}) });
const keyOf = (r: SessionRef): string => `${r.tenant}\u0000${r.session}`;
const errMessage = (err: unknown): string => (err instanceof Error ? err.message : String(err));
const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms).unref?.());

/** A fresh revision id: 16 random hex chars (collisions are not a practical concern at 64 bits). */
function newRevisionId(): string {
  return randomUUID().replace(/-/g, '').slice(0, 16);
}

function slotItem(table: SlotTable, i: number, a: AttentionResult): RecallItem {
  return {
    source: 'slot', slot: i, id: table.ids[i]!, key: table.keyText[i]!, value: table.value[i]!,
    provenance: table.provenance[i]!.slice(), weight: a.weight[i]!, score: a.score[i]!, cosine: a.cosine[i]!,
    lexical: a.lexical[i]!, strength: a.strength[i]!,
  };
}

/**
 * One softmax over the merged slot and archive items, so their weights compare on one scale, then
 * rank by weight — except that a superseded value never stands above its successor.
 */
function reweight(items: RecallItem[], tau: number): void {
  let max = -Infinity;
  for (const i of items) if (i.score > max) max = i.score;
  let sum = 0;
  const e = items.map((i) => Math.exp((i.score - max) / tau));
  for (const v of e) sum += v;
  items.forEach((i, n) => (i.weight = e[n]! / sum));
  items.sort((a, b) => b.weight - a.weight);
  for (let n = 0; n < items.length; n++) {
    const it = items[n]!;
    if (it.reason !== 'superseded' || !it.successor) continue;
    const s = items.findIndex((x) => x.id === it.successor);
    if (s > n) {
      // Move the superseded item to just after its successor.
      items.splice(n, 1);
      items.splice(s, 0, it);
      n--;
    }
  }
}

// BM25 statistics of archive items, computed once per item object (stores hand out the same objects
// between changes); held weakly, so an erased item takes its tokens with it.
const archiveStats = new WeakMap<ArchiveItem, ReturnType<typeof docStats>>();
function archiveDocStats(item: ArchiveItem): ReturnType<typeof docStats> {
  let st = archiveStats.get(item);
  if (!st) archiveStats.set(item, (st = textStats(item.keyText, item.value)));
  return st;
}

/** normalize(a + mix * b) as a new vector. */
function mixVectors(a: Float32Array, b: Float32Array, mix: number): Float32Array {
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

/** Slot items first (they won the softmax), then archive items not already present. */
function mergeItems(slots: RecallItem[], archived: RecallItem[], max: number): RecallItem[] {
  const seen = new Set(slots.map((i) => i.id));
  const out = slots.slice();
  for (const a of archived) {
    if (seen.has(a.id)) continue;
    seen.add(a.id);
    out.push(a);
  }
  return out.slice(0, max);
}

/**
 * Resizes a table to a new capacity. Survivors are chosen as eviction would choose them: pinned
 * slots first, then by strength decayed to `now`; a survivor keeps its index when it fits, else
 * moves to a free slot. The rest are evicted (capacity) and archived.
 */
function resizeTable(table: SlotTable, capacity: number, now: number): { table: SlotTable; ops: SlotOp[]; evictions: Eviction[]; archive: (ref: SessionRef, clock: number) => ArchiveItem[] } {
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
  const evictions: Eviction[] = live.slice(capacity).map((x) => ({ slot: x.i, record: x.r, reason: 'capacity', archived: true, strength: x.s }));
  const ops: SlotOp[] = [];
  for (let i = 0; i < capacity; i++) ops.push({ index: i, slot: next.get(i) });
  return {
    table: next,
    ops,
    evictions,
    archive: (ref, clock) => evictions.map(({ record: r, strength }) => archiveItemOf(r, ref, 'capacity', strength, clock, Date.now())),
  };
}

/** Later ops win for the same index. */
function mergeOps(first: SlotOp[], second: SlotOp[]): SlotOp[] {
  const m = new Map<number, SlotOp>();
  for (const op of first) m.set(op.index, op);
  for (const op of second) m.set(op.index, op);
  return [...m.values()].sort((a, b) => a.index - b.index);
}
