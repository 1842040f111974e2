// `tidemark replay`: feeds a transcript turn by turn through tidemark the way wrap() does (read before
// each user turn, write the turn and its reply with what the reply used reinforced), asks the probes,
// and reports recall and value accuracy beside baselines that see the same turns. runReplay() is the
// core for tests and benches; the figures are computed in replay-figures.ts, the command in replay-cli.ts.

import type { Embedder } from '../src/embed/embedder.js';
import { HashingEmbedder } from '../src/embed/hashing.js';
import { ConfigError, describeValue, isTidemarkError } from '../src/errors.js';
import { itemLine } from '../src/memory/prompt.js';
import { TIDEMARK_DEFAULTS, createTidemark, type TidemarkOptions } from '../src/middleware/tidemark.js';
import type { EvictReason, Role } from '../src/types.js';
import { TurnBaseline, baselineName, parseBaseline, type BaselineSpec } from './baselines.js';
import { ReplayFormatError, type FormatIssue, type Probe, type TranscriptTurn } from './jsonl.js';
import { LOGBOOK_KINDS, READ_RESULTS, figures, checkValues, percentile, probeKind, recallOf, retrievedTurns, round, type BaselineSummary, type ProbeResult, type ReplaySummary, type ValueResult } from './replay-figures.js';

export interface ReplayOptions {
  turns: readonly TranscriptTurn[];
  probes?: readonly Probe[];
  /** Source turns kept per probe (the recall cut). Also raises read.k to at least k. @default read.k of the config, else 5 */
  k?: number;
  /** createTidemark options (capacity, read, write, logbook, ...). `store` and `embedder` may be objects. */
  config?: TidemarkOptions;
  /** Baselines to run beside tidemark, e.g. `['bm25', 'flat', 'window:20']`. @default [] */
  baselines?: ReadonlyArray<string | BaselineSpec>;
  /** Stop at the first probe whose `after` names a turn not in the transcript. @default false */
  strict?: boolean;
  /** Issues found while parsing, carried into the result. */
  issues?: readonly FormatIssue[];
  /** Called every few turns with (turns done, total). */
  onProgress?: (done: number, total: number) => void;
}

/** Figures of one probe kind. */

export interface ReplayResult {
  summary: ReplaySummary;
  baselines: Record<string, BaselineSummary>;
  probes: ProbeResult[];
  issues: FormatIssue[];
}

/** Replays turns through a fresh tidemark instance and asks the probes. */
export async function runReplay(opts: ReplayOptions): Promise<ReplayResult> {
  const config: TidemarkOptions = { ...(opts.config ?? {}) };
  const configK = config.read?.k;
  const k = opts.k ?? configK ?? 5;
  if (!Number.isInteger(k) || k < 1 || k > 1000) {
    throw new ConfigError(`option k must be an integer in [1, 1000], got ${describeValue(k)}`, { details: { option: 'k', value: k } });
  }
  // The read must return at least k items for a cut at k to mean anything.
  if ((configK ?? 0) < k) config.read = { ...config.read, k };
  const embedder: Embedder = config.embedder ?? new HashingEmbedder({ dim: 384 });
  config.embedder = embedder;
  const tm = createTidemark(config);
  const issues: FormatIssue[] = [...(opts.issues ?? [])];
  const roles: Role[] = config.logbook?.roles ?? TIDEMARK_DEFAULTS.logbook.roles;
  const specs = (opts.baselines ?? []).map((b) => (typeof b === 'string' ? parseBaseline(b) : b));
  const baselines = specs.map((s) => new TurnBaseline(s, { embedder, beta: tm.params.read.beta, gamma: tm.params.read.gamma, roles }));
  const names = new Set<string>();
  for (const b of baselines) {
    if (names.has(b.name)) throw new ConfigError(`baseline ${b.name} is given twice`, { details: { option: 'baseline' } });
    names.add(b.name);
  }

  // Probes asked right after a turn, keyed by session + turn id; the rest at the end.
  const turnKeys = new Set(opts.turns.map((t) => `${t.session}\u0000${t.turn}`));
  const turnText = new Map(opts.turns.map((t) => [`${t.session}\u0000${t.turn}`, t]));
  const afterTurn = new Map<string, Probe[]>();
  const atEnd: Probe[] = [];
  for (const p of opts.probes ?? []) {
    if (p.after === undefined) {
      atEnd.push(p);
      continue;
    }
    const key = `${p.session}\u0000${p.after}`;
    if (!turnKeys.has(key)) {
      const issue = { file: 'probes', line: p.line, message: `field "after" names turn ${describeValue(p.after)}, which is not in this session's transcript; probe skipped` };
      if (opts.strict) throw new ReplayFormatError(issue);
      issues.push(issue);
      continue;
    }
    let list = afterTurn.get(key);
    if (!list) afterTurn.set(key, (list = []));
    list.push(p);
  }

  const reads = READ_RESULTS();
  const probeReads = READ_RESULTS();
  const writes = { allocated: 0, overwritten: 0, reinforced: 0, gated_out: 0 };
  let ambiguous = 0;
  const evictions: Record<EvictReason, number> = { capacity: 0, decayed: 0, expired: 0, erased: 0 };
  const logbook = { turns: 0, demoted: 0, droppedAge: 0, droppedCount: 0 };
  tm.on('evict', (e) => {
    evictions[e.reason]++;
  });
  tm.on('write', (e) => {
    if (e.ambiguous) ambiguous++;
  });
  tm.on('logbook', (e) => {
    logbook.turns += e.turns;
    logbook.demoted += e.demoted;
    logbook.droppedAge += e.droppedAge;
    logbook.droppedCount += e.droppedCount;
  });
  const readUs: number[] = [];
  const baseUs = baselines.map(() => [] as number[]);
  const asked: Probe[] = [];
  const results: ProbeResult[] = [];
  const values: Array<ValueResult | undefined> = [];
  const baseRetrieved = baselines.map(() => [] as string[][]);
  const baseValues = baselines.map(() => [] as Array<ValueResult | undefined>);
  const sessions = new Set<string>();
  let hits = 0;
  let hitsRight = 0;
  let topRight = 0;
  let topRightHit = 0;
  let tmMs = 0;
  let cpuUs = 0;
  let replayed = 0;
  let skipped = issues.length;

  const ask = async (p: Probe): Promise<void> => {
    const ctx = await tm.read({ session: p.session, text: p.query });
    probeReads[ctx.trace.result]++;
    readUs.push(ctx.trace.durationUs);
    const retrieved = retrievedTurns(ctx.items, k);
    const r: ProbeResult = { id: p.id, session: p.session, kind: probeKind(p), retrieved, recall: round(recallOf(p.expect, retrieved)), result: ctx.trace.result };
    if (p.expect.length > 0) {
      const topOk = ctx.items[0]?.provenance.some((t) => p.expect.includes(t)) === true;
      if (ctx.trace.result !== 'miss') {
        hits++;
        if (topOk) hitsRight++;
      }
      if (topOk) {
        topRight++;
        if (ctx.trace.result !== 'miss') topRightHit++;
      }
    }
    let v: ValueResult | undefined;
    if (p.expectText) v = r.value = checkValues(ctx.items.map(itemLine), p.expectText, p.rejectText ?? [], k);
    if (baselines.length > 0) {
      r.baselines = {};
      const qv = (await embedder.embed([p.query]))[0]!;
      for (let b = 0; b < baselines.length; b++) {
        const q = await baselines[b]!.query(p.session, p.query, k, qv);
        baseUs[b]!.push(q.us);
        baseRetrieved[b]!.push(q.retrieved);
        const entry: { retrieved: string[]; recall: number; value?: ValueResult } = { retrieved: q.retrieved, recall: round(recallOf(p.expect, q.retrieved)) };
        if (p.expectText) {
          const texts = q.retrieved.map((id) => turnText.get(`${p.session}\u0000${id}`)?.text ?? '');
          entry.value = checkValues(texts, p.expectText, p.rejectText ?? [], k);
        }
        baseValues[b]!.push(entry.value);
        r.baselines[baselines[b]!.name] = entry;
      }
    }
    asked.push(p);
    values.push(v);
    results.push(r);
  };

  try {
    /** Reads (for a user turn) and writes one batch; false when tidemark refused its input. */
    const replayBatch = async (batch: TranscriptTurn[]): Promise<boolean> => {
      const t = batch[0]!;
      const t0 = performance.now();
      const c0 = process.cpuUsage();
      try {
        let used: string[] = [];
        let promote: string[] = [];
        if (t.role === 'user') {
          const ctx = await tm.read({ session: t.session, text: t.text, ...(t.at ? { at: t.at } : {}) });
          reads[ctx.trace.result]++;
          readUs.push(ctx.trace.durationUs);
          // Like wrap(): what the turn used is judged by the reply that follows it.
          const reply = batch[1]?.role === 'assistant' ? batch[1].text : undefined;
          used = tm.usedBy(ctx, reply);
          promote = tm.promotedBy(ctx, reply);
        }
        const report = await tm.write(
          batch.map((b) => ({ session: b.session, turn: b.turn, role: b.role, text: b.text, ...(b.at ? { at: b.at } : {}), ...(b.speaker ? { speaker: b.speaker } : {}) })),
          { reinforce: used, promote },
        );
        writes.allocated += report.allocated;
        writes.overwritten += report.overwritten;
        writes.reinforced += report.reinforced;
        writes.gated_out += report.gatedOut;
        return true;
      } catch (err) {
        // A turn tidemark refuses (too long, bad id) is reported like a malformed line.
        if (!isTidemarkError(err) || !(err as { code: string }).code.startsWith('TIDEMARK_E_INPUT')) throw err;
        if (batch.length === 1) {
          const issue = { file: 'transcript', line: t.line, message: (err as Error).message };
          if (opts.strict) throw new ReplayFormatError(issue);
          issues.push(issue);
          skipped++;
        }
        return false;
      } finally {
        tmMs += performance.now() - t0;
        const c = process.cpuUsage(c0);
        cpuUs += c.user + c.system;
      }
    };
    const afterWrite = async (t: TranscriptTurn): Promise<void> => {
      sessions.add(t.session);
      replayed++;
      if (baselines.length > 0) {
        const needVec = roles.includes(t.role) && baselines.some((b) => b.spec.kind !== 'bm25');
        const v = needVec ? (await embedder.embed([t.text]))[0]! : undefined;
        for (const b of baselines) await b.add(t, v);
      }
      const due = dueAfter(t);
      if (due) for (const p of due) await ask(p);
    };
    const dueAfter = (t: TranscriptTurn): Probe[] | undefined => afterTurn.get(`${t.session}\u0000${t.turn}`);

    const total = opts.turns.length;
    const list = opts.turns;
    for (let n = 0; n < list.length; n++) {
      const t = list[n]!;
      // Like wrap(): a user turn and the reply that follows it are written together, after the read.
      // They are split when a probe is due between them, or when tidemark refuses one of them.
      const next = list[n + 1];
      const pair = t.role === 'user' && next !== undefined && next.role === 'assistant' && next.session === t.session && !dueAfter(t) ? next : undefined;
      if (pair) {
        n++;
        if (await replayBatch([t, pair])) {
          await afterWrite(t);
          await afterWrite(pair);
        } else {
          if (await replayBatch([t])) await afterWrite(t);
          if (await replayBatch([pair])) await afterWrite(pair);
        }
      } else if (await replayBatch([t])) await afterWrite(t);
      if (opts.onProgress && n % 200 < 2) opts.onProgress(n + 1, total);
    }
    for (const p of atEnd) await ask(p);
    opts.onProgress?.(total, total);

    let slotsInUse = 0;
    const entries = LOGBOOK_KINDS();
    const scopes = new Set<string>();
    for (const s of sessions) {
      const view = await tm.inspect(s, tm.tenant, { logbookLimit: 0, eventLimit: 0 });
      slotsInUse += view.slots.length;
      // A replay's sessions have no user, so each is its own logbook scope.
      if (!scopes.has(s)) {
        scopes.add(s);
        for (const e of await tm.store.listLogbook({ tenant: tm.tenant, session: s }, { limit: Number.MAX_SAFE_INTEGER })) entries[e.kind]++;
      }
    }
    readUs.sort((a, b) => a - b);
    const tmFig = figures(asked, results.map((r) => r.retrieved), values);
    const logbookEntries = Object.values(entries).reduce((a, b) => a + b, 0);
    const summary: ReplaySummary = {
      turns: replayed,
      sessions: sessions.size,
      probes: asked.length,
      k,
      capacity: tm.params.capacity,
      ...tmFig,
      reads,
      probe_reads: probeReads,
      hit_precision: hits > 0 ? round(hitsRight / hits) : null,
      hit_recall: topRight > 0 ? round(topRightHit / topRight) : null,
      writes,
      evictions,
      slots_in_use: slotsInUse,
      logbook_entries: logbookEntries,
      demoted_items: logbookEntries - entries.turn,
      tiers: {
        working: { slots_in_use: slotsInUse, capacity: tm.params.capacity, writes: { ...writes, ambiguous }, evictions: { ...evictions } },
        logbook: {
          entries,
          turns_kept: logbook.turns,
          demoted: logbook.demoted,
          retention: {
            max_age_ms: config.logbook?.maxAgeMs ?? TIDEMARK_DEFAULTS.logbook.maxAgeMs,
            max_entries: config.logbook?.maxEntries ?? TIDEMARK_DEFAULTS.logbook.maxEntries,
            dropped_age: logbook.droppedAge,
            dropped_count: logbook.droppedCount,
          },
          roles: [...roles],
        },
      },
      read_us: { p50: round(percentile(readUs, 0.5), 1), p99: round(percentile(readUs, 0.99), 1) },
      turns_per_s: Math.round(replayed / Math.max(1e-9, tmMs / 1000)),
      turns_per_cpu_s: Math.round(replayed / Math.max(1e-9, cpuUs / 1e6)),
      skipped,
    };
    const baseOut: Record<string, BaselineSummary> = {};
    baselines.forEach((b, i) => {
      const us = baseUs[i]!.sort((x, y) => x - y);
      baseOut[b.name] = {
        ...figures(asked, baseRetrieved[i]!, baseValues[i]!),
        read_us: { p50: round(percentile(us, 0.5), 1), p99: round(percentile(us, 0.99), 1) },
        items_kept: b.itemsKept(),
      };
    });
    return { summary, baselines: baseOut, probes: results, issues };
  } finally {
    await tm.close();
  }
}

export * from './replay-figures.js';
export { baselineName };
