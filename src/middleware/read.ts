// The read path: one retrieval for a turn. Embed the query (cached), load the session's slots, attend
// over them, search the session's (or user's) logbook, and rank both tiers in one list (see
// src/memory/rank.ts). The whole read runs within `readTimeoutMs`; past it, or on a store failure, the
// handler gets empty memory and `degraded: true`.

import { withDeprecatedReadFields } from '../deprecated-fields.js';
import { embedCached } from '../embed/cache.js';
import { ErrorCodes, StoreError, isTidemarkError } from '../errors.js';
import { attend, nextQuery, queryTermsOf, type AttentionResult } from '../memory/attention.js';
import { resolveDates } from '../memory/dates.js';
import { decayed } from '../memory/decay.js';
import { renderPrompt } from '../memory/prompt.js';
import { rankTiers, type RankedItem, type SlotCandidate } from '../memory/rank.js';
import { LogbookIndex, searchParamsOf, type LogbookSearchParams, type LogbookSearchResult } from '../logbook/index.js';
import { analyseQuery } from '../logbook/query.js';
import { scopeOf } from '../store/in-process.js';
import type { ErasureFence, SessionSnapshot } from '../store/store.js';
import type { MemoryContext, ReadTrace, RecallItem, SessionRef } from '../types.js';
import { Core, errMessage, keyOf, payload, refOf, sleep, usSince } from './core.js';
import type { Turn } from './validate.js';

/** An empty logbook, searched when a read leaves the logbook out. */
const NO_LOGBOOK = new LogbookIndex();

export class ReadPath {
  private readonly search: LogbookSearchParams;

  constructor(private readonly core: Core) {
    this.search = searchParamsOf(core.params.read);
  }

  async read(turn: Turn, history: boolean): Promise<MemoryContext> {
    const core = this.core;
    const t0 = performance.now();
    const acceptedMs = Date.now();
    const ref = refOf(turn);
    const p = core.params.read;
    const e0 = performance.now();
    const [q] = await embedCached(core.embedder, core.cache, [turn.text]);
    const embedUs = usSince(e0);
    const analysed = analyseQuery(turn.text, turn.atMs);
    let snap: SessionSnapshot | null;
    let lb: LogbookSearchResult;
    let fence: ErasureFence | undefined;
    let searchUs = 0;
    try {
      // The load and the search run side by side (one round trip each on Redis), both inside one
      // deadline: a stalled store never holds the turn past readTimeoutMs.
      const loaded = await this.withinDeadline(t0, async () => {
        await this.pendingWrite(ref, t0);
        const search = async (): Promise<LogbookSearchResult> => {
          const s0 = performance.now();
          // With the logbook left out, the search still runs on an empty scope: its statistics score the slots.
          const r = p.tiers === 'slots'
            ? NO_LOGBOOK.search(analysed, this.search)
            : await core.store.searchLogbook(scopeOf(ref), core.dense ? { vector: q!, denseK: p.logbookLimit, ...analysed } : analysed, this.search);
          searchUs = usSince(s0);
          return r;
        };
        // The erasure fence the turn is accepted under: its write is refused if an erase comes after.
        const [s, r, f] = await Promise.all([core.store.load(ref), search(), core.store.fence?.(ref)]);
        return { s, r, f: f ? { seen: f, acceptedMs } : undefined };
      });
      snap = loaded.s;
      lb = loaded.r;
      fence = loaded.f;
    } catch (err) {
      return this.degraded(turn, err, usSince(t0));
    }
    core.noteQuarantine(ref, snap);
    if (snap) core.rememberSnapshot(ref, snap);
    const table = snap?.table;
    if (table && table.dim !== core.embedder.dim) throw core.dimError(ref, table.dim);
    const now = core.clockFor(snap, turn.atMs);

    // Working memory: attention over the slots (its weights and cosines feed the ranking and trace).
    let att: AttentionResult | undefined;
    let hops = 0;
    const slots: SlotCandidate[] = [];
    if (table && table.count() > 0 && p.tiers !== 'logbook') {
      const terms = queryTermsOf(analysed.tokens);
      att = attend(table, now, q!, terms, p);
      hops = 1;
      for (let h = 1; h < p.hops && att.selected.length > 0; h++) {
        const values = await embedCached(core.embedder, core.cache, att.selected.map((i) => table.value[i]!));
        const byIdx = new Map(att.selected.map((i, n) => [i, values[n]!]));
        const next = attend(table, now, nextQuery(q!, att, (i) => byIdx.get(i)!), terms, p);
        // Merge hops: each slot's cosine is its best over the hops.
        for (let i = 0; i < table.capacity; i++) next.cosine[i] = Math.max(next.cosine[i]!, att.cosine[i]!);
        att = next;
        hops++;
      }
      for (let i = 0; i < table.capacity; i++) {
        if (!table.isUsed(i)) continue;
        // Optional fields last: fields written after a spread take a slow path in V8 (test/bench/turn-path-literals.test.ts).
        slots.push({
          slot: i, id: table.ids[i]!, keyText: table.keyText[i]!, value: table.value[i]!, provenance: table.provenance[i]!,
          // The attention's strength is this one unless it was clamped at 1e-9.
          strength: att.strength[i]! > 1e-9 ? att.strength[i]! : table.isPinned(i) ? table.strength[i]! : decayed(table.strength[i]!, table.stamp[i]!, table.halfLife[i]!, now),
          cosine: att.cosine[i]!, weight: att.weight[i]!, updatedMs: table.updatedMs[i]!, age: Math.max(0, now - table.stamp[i]!),
          ...(table.owner[i] ? { owner: table.owner[i]! } : {}),
          ...(table.subject[i] ? { subject: table.subject[i]! } : {}),
          ...(table.maybeReplaces[i] ? { maybeReplaces: table.maybeReplaces[i]! } : {}),
        });
      }
    }

    const ranked = rankTiers(slots, lb, {
      k: p.k, session: ref.session, provenanceWeight: p.provenanceWeight, othersWeight: p.othersWeight, recencyBoost: p.recencyBoost, recencyHalfLife: p.recencyHalfLife, slotPrior: p.slotPrior, denseWeight: core.dense ? p.denseWeight : 0, rrfK: p.rrfK, hitCoverage: p.hitCoverage, hitMargin: p.hitMargin,
      hitCosine: p.hitCosine, history: history || p.history, minShare: p.minShare, query: turn.text, search: this.search,
    });
    const total = ranked.items.reduce((a, x) => a + Math.max(0, x.score), 0) || 1;
    const items = ranked.items.map((x) => this.itemOf(x, total));
    for (const x of ranked.items) if (x.entry) core.rememberRecalled(ref, x.entry);
    const top = ranked.items[0];
    const result = !ranked.hit || !top ? 'miss' : top.source === 'slot' ? 'slot' : 'logbook';
    const trace: ReadTrace = {
      result,
      scanned: slots.length,
      logbookSize: lb.size,
      topCosine: att ? att.topCosine : -1,
      topWeight: att ? att.topWeight : 0,
      entropy: att ? att.entropy : 0,
      hops,
      topCoverage: top ? top.coverage : 0,
      speakersNamed: lb.speakers.length,
      temporal: analysed.temporal,
      dense: core.dense,
      items: ranked.items.map((x, n) => ({
        source: x.source, kind: items[n]!.kind, id: x.id, cosine: x.cosine, lexical: x.lexical,
        coverage: x.coverage, strength: items[n]!.strength, weight: items[n]!.weight, score: x.score, placed: x.placed,
        provenance: items[n]!.provenance, context: x.context, lexicalRank: x.lexicalRank, denseRank: x.denseRank, speakerMatch: x.speakerMatch,
        ...(x.slot ? { slot: x.slot.slot } : {}),
      })),
      durationUs: usSince(t0),
      searchUs,
    };
    const ctx: MemoryContext = { items, prompt: renderPrompt(items, core.o.prompt), trace, degraded: false };
    if (fence) core.rememberFence(ref, ctx, fence);
    if (core.events.listenerCount('read') > 0) {
      const slotItems = items.filter((i) => i.source === 'slot').length;
      core.events.emit('read', withDeprecatedReadFields(payload(core.base(ref), {
        result, items: items.length, slotItems, logbookItems: items.length - slotItems,
        scanned: trace.scanned, slotsInUse: trace.scanned, capacity: table?.capacity ?? core.params.capacity, logbookSize: lb.size,
        topWeight: trace.topWeight, entropy: trace.entropy, topCosine: trace.topCosine, topCoverage: trace.topCoverage,
        durationUs: trace.durationUs, searchUs, embedUs,
      })));
    }
    return ctx;
  }

  private itemOf(x: RankedItem, total: number): RecallItem {
    const weight = Math.max(0, x.score) / total;
    // Optional fields last: fields written after a spread take a slow path in V8 (test/bench/turn-path-literals.test.ts).
    if (x.slot) {
      const s = x.slot;
      // What the value's relative dates meant when it was said (only for the items returned).
      const dates = s.updatedMs !== undefined ? resolveDates(s.value, s.updatedMs).map(({ text, day, grain }) => ({ text, day, grain })) : [];
      return {
        source: 'slot', kind: 'slot', slot: s.slot, id: s.id, key: s.keyText, value: s.value, provenance: s.provenance.slice(),
        strength: s.strength, weight, score: x.score, cosine: x.cosine, lexical: x.lexical, coverage: x.coverage, placed: x.placed,
        ...(s.owner ? { speaker: s.owner } : {}), ...(dates.length > 0 ? { dates } : {}), ...(s.maybeReplaces ? { maybeReplaces: [...s.maybeReplaces] } : {}),
      };
    }
    const e = x.entry!;
    return {
      source: 'logbook', kind: e.kind, id: e.id, key: e.keyText, value: e.value, provenance: e.provenance.slice(),
      strength: e.strength ?? 0, weight, score: x.score, cosine: x.cosine, lexical: x.lexical, coverage: x.coverage, placed: x.placed,
      ...(e.speaker ?? e.owner ? { speaker: (e.speaker ?? e.owner)! } : {}), ...(e.role ? { role: e.role } : {}),
      ...(e.kind === 'turn' ? { atMs: e.atMs } : {}), ...(e.dates && e.dates.length > 0 ? { dates: e.dates.map((d) => ({ ...d })) } : {}),
      ...(e.successor ? { successor: e.successor } : {}), ...(e.kind !== 'turn' ? { reason: e.kind } : {}),
    };
  }

  /** Rejects with STORE_UNAVAILABLE when `fn` has not settled by the read deadline. */
  private async withinDeadline<T>(t0: number, fn: () => Promise<T>): Promise<T> {
    const budget = this.core.o.readTimeoutMs;
    let timer: NodeJS.Timeout | undefined;
    const timeout = new Promise<never>((_, reject) => {
      timer = setTimeout(
        () => reject(new StoreError(ErrorCodes.STORE_UNAVAILABLE, `store ${this.core.store.name} did not answer a read within ${budget} ms (readTimeoutMs)`)),
        Math.max(1, budget - (performance.now() - t0)),
      );
    });
    try {
      return await Promise.race([fn(), timeout]);
    } catch (err) {
      throw isTidemarkError(err) ? err : new StoreError(ErrorCodes.STORE_UNAVAILABLE, `store ${this.core.store.name} failed a read: ${errMessage(err)}`, { cause: err });
    } finally {
      clearTimeout(timer);
    }
  }

  /** Waits (for at most half the read budget) for the session's pending write. */
  private async pendingWrite(ref: SessionRef, t0: number): Promise<void> {
    const budget = this.core.o.readTimeoutMs;
    const pending = this.core.queues.get(keyOf(ref));
    // Past half the budget, read the last committed state rather than nothing (the pending write is
    // still serialised behind us).
    if (pending) await Promise.race([pending, sleep(Math.max(0, budget / 2 - (performance.now() - t0)))]);
  }

  /** Empty memory for a read that could not be made; the reply still runs. */
  degraded(turn: Turn, err: unknown, durationUs: number): MemoryContext {
    const ref = refOf(turn);
    const error = this.core.emitError('read', err, ref);
    this.core.events.emit('degraded', payload(this.core.base(ref), { stage: 'read', code: error.code }));
    return {
      items: [],
      prompt: '',
      degraded: true,
      trace: {
        result: 'miss', scanned: 0, logbookSize: 0, topCosine: -1, topWeight: 0, entropy: 0, hops: 0, topCoverage: 0, speakersNamed: 0,
        temporal: false, dense: false, items: [], durationUs, searchUs: 0,
      },
    };
  }
}
