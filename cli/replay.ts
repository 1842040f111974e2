// `tidemark replay`: feeds a transcript turn by turn through tidemark the way wrap() does (read before
// each user turn, write the turn and its reply with what the reply used reinforced), asks the probes,
// and reports recall and value accuracy beside baselines that see the same turns. runReplay() is the pure-ish core for tests and benches;
// replayCli() reads the files and prints a table or one JSON object.

import type { Embedder } from '../src/embed/embedder.js';
import { HashingEmbedder } from '../src/embed/hashing.js';
import { ConfigError, describeValue, isTidemarkError } from '../src/errors.js';
import { itemLine } from '../src/memory/prompt.js';
import { TIDEMARK_DEFAULTS, createTidemark, type TidemarkOptions } from '../src/middleware/tidemark.js';
import type { EvictReason, LogbookKind, ReadResult, RecallItem, Role } from '../src/types.js';
import { TurnBaseline, baselineName, parseBaseline, type BaselineSpec } from './baselines.js';
import { parseProbes, parseTranscript, patternOf, readText, ReplayFormatError, type FormatIssue, type Probe, type TranscriptTurn } from './jsonl.js';
import { progressBar } from './progress.js';

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
export interface KindFigures {
  probes: number;
  recall_at_1: number;
  recall_at_k: number;
  /** Probes of the kind that check values (`expectText`), and their accuracy. */
  value_probes?: number;
  value_at_1?: number;
  value_at_k?: number;
}

/** Recall figures of one system (tidemark or a baseline). */
export interface RecallFigures {
  /** Mean recall over the probes that list `expect` turns. */
  recall_at_k: number;
  recall_at_1: number;
  /**
   * Over the probes with `expectText`: the share whose expected value is among the top k items with
   * no rejected (stale or wrong) value above it, and the share whose top item holds it.
   */
  value_at_k: number | null;
  value_at_1: number | null;
  /** Per probe kind (`kind`, else `category`, else the id prefix before ':'). */
  by_kind: Record<string, KindFigures>;
}

export interface BaselineSummary extends RecallFigures {
  read_us: { p50: number; p99: number };
  /** Turns held at the end, over all sessions. */
  items_kept: number;
}

/** What each tier holds at the end and what happened to it. */
export interface TierSummary {
  working: {
    /** Slots in use at the end, over all sessions. */
    slots_in_use: number;
    capacity: number;
    writes: { allocated: number; overwritten: number; reinforced: number; gated_out: number; ambiguous: number };
    evictions: Record<EvictReason, number>;
  };
  logbook: {
    /** Entries at the end, over all scopes, by kind. */
    entries: Record<LogbookKind, number>;
    /** Turns kept and values demoted over the replay. */
    turns_kept: number;
    demoted: number;
    /** The retention policy in force and what it deleted. */
    retention: { max_age_ms: number; max_entries: number; dropped_age: number; dropped_count: number };
    /** Roles whose turns are kept. */
    roles: Role[];
  };
}

export interface ReplaySummary extends RecallFigures {
  turns: number;
  sessions: number;
  probes: number;
  k: number;
  capacity: number;
  /** Reads before user turns, by result. */
  reads: Record<ReadResult, number>;
  /** Probe reads, by result. */
  probe_reads: Record<ReadResult, number>;
  /**
   * Of the probe reads called a hit, the share whose top item comes from an expected turn (probes with
   * `expect` only): how far "hit" can be trusted. Null with no such hit.
   */
  hit_precision: number | null;
  /** Of the probe reads whose top item comes from an expected turn, the share called a hit. */
  hit_recall: number | null;
  writes: { allocated: number; overwritten: number; reinforced: number; gated_out: number };
  evictions: Record<EvictReason, number>;
  /** Slots in use at the end, over all sessions. */
  slots_in_use: number;
  /** Logbook entries at the end, over all scopes. */
  logbook_entries: number;
  /** @deprecated since 0.2: logbook entries other than turns (the values that left working memory). */
  archive_items: number;
  tiers: TierSummary;
  /** Read latency (µs, embedding included) over turn and probe reads. */
  read_us: { p50: number; p99: number };
  /** Turns replayed per second of tidemark time (reads + writes; baselines excluded), wall clock. */
  turns_per_s: number;
  /** The same per second of this process's CPU time: steadier than wall clock on a shared machine. */
  turns_per_cpu_s: number;
  /** Lines skipped (format issues, or turns tidemark refused). */
  skipped: number;
}

/** How a probe's values fared. */
export interface ValueResult {
  /** The expected value is in the top k items with no rejected value above it. */
  ok: boolean;
  /** The top item holds the expected value (and no rejected one). */
  at_1: boolean;
  /** 1-based rank of the first item holding the expected value (null when none). */
  rank: number | null;
  /** 1-based rank of the first item holding a rejected value (null when none). */
  rejected_rank: number | null;
}

export interface ProbeResult {
  id: string;
  session: string;
  kind: string | null;
  retrieved: string[];
  recall: number;
  /** The read's result and the tier of its top item. */
  result: ReadResult;
  value?: ValueResult;
  /** Per baseline: its retrieved turns and recall (and value check, over the turns' text). */
  baselines?: Record<string, { retrieved: string[]; recall: number; value?: ValueResult }>;
}

export interface ReplayResult {
  summary: ReplaySummary;
  baselines: Record<string, BaselineSummary>;
  probes: ProbeResult[];
  issues: FormatIssue[];
}

/** Nearest-rank percentile of sorted values (0 for none). */
export function percentile(sorted: readonly number[], q: number): number {
  if (sorted.length === 0) return 0;
  const rank = Math.max(1, Math.ceil(q * sorted.length));
  return sorted[Math.min(sorted.length, rank) - 1]!;
}

/**
 * Distinct source turns of items in rank order, cut at k. An item with several sources spends
 * several places, so a merged slot cannot win by carrying more provenance.
 */
export function retrievedTurns(items: ReadonlyArray<Pick<RecallItem, 'provenance'>>, k: number): string[] {
  const out: string[] = [];
  const seen = new Set<string>();
  for (const it of items) {
    for (const t of it.provenance) {
      if (out.length >= k) return out;
      if (seen.has(t)) continue;
      seen.add(t);
      out.push(t);
    }
  }
  return out;
}

/** |expected ∩ retrieved| / |expected|. */
export function recallOf(expected: readonly string[], retrieved: readonly string[]): number {
  if (expected.length === 0) return 0;
  const got = new Set(retrieved);
  let n = 0;
  for (const e of expected) if (got.has(e)) n++;
  return n / expected.length;
}

/** Whether `text` holds any of the strings (case-insensitive) or `/patterns/`. */
export function holdsAny(text: string, needles: readonly string[]): boolean {
  const lower = text.toLowerCase();
  return needles.some((n) => {
    const re = patternOf(n);
    return re ? re.test(text) : lower.includes(n.toLowerCase());
  });
}

/**
 * Checks recalled texts (best first) against a probe's expected and rejected values. An item that
 * holds a rejected value counts as rejected even when it also holds an expected string (so
 * "female tutor" is not taken for "male tutor").
 */
export function checkValues(texts: readonly string[], expectText: readonly string[], rejectText: readonly string[], k: number): ValueResult {
  let rank: number | null = null;
  let rejected: number | null = null;
  for (let i = 0; i < texts.length; i++) {
    const bad = rejectText.length > 0 && holdsAny(texts[i]!, rejectText);
    if (bad && rejected === null) rejected = i + 1;
    if (!bad && rank === null && holdsAny(texts[i]!, expectText)) rank = i + 1;
  }
  const ok = rank !== null && rank <= k && (rejected === null || rejected > rank);
  return { ok, at_1: rank === 1, rank, rejected_rank: rejected };
}

/** The kind of a probe: its `kind` (or `category`) field, else its id's prefix before ':' (none without one). */
export const probeKind = (p: Pick<Probe, 'id' | 'kind'>): string | null => {
  if (p.kind !== undefined) return p.kind;
  const i = p.id.indexOf(':');
  return i > 0 ? p.id.slice(0, i) : null;
};

const round = (x: number, d = 4): number => Math.round(x * 10 ** d) / 10 ** d;
const mean = (xs: readonly number[]): number => (xs.length === 0 ? 0 : xs.reduce((a, b) => a + b, 0) / xs.length);
const meanOrNull = (xs: readonly number[]): number | null => (xs.length === 0 ? null : round(mean(xs)));

function figures(probes: readonly Probe[], retrieved: readonly string[][], values: ReadonlyArray<ValueResult | undefined>): RecallFigures {
  const withExpect = probes.map((p, i) => i).filter((i) => probes[i]!.expect.length > 0);
  const withValue = probes.map((p, i) => i).filter((i) => values[i] !== undefined);
  const atK = (i: number): number => recallOf(probes[i]!.expect, retrieved[i]!);
  const at1 = (i: number): number => recallOf(probes[i]!.expect, retrieved[i]!.slice(0, 1));
  const by: RecallFigures['by_kind'] = {};
  const groups = new Map<string, number[]>();
  probes.forEach((p, i) => {
    const kind = probeKind(p);
    if (kind === null) return;
    let g = groups.get(kind);
    if (!g) groups.set(kind, (g = []));
    g.push(i);
  });
  for (const [kind, idx] of [...groups].sort((a, b) => a[0].localeCompare(b[0]))) {
    const rec = idx.filter((i) => probes[i]!.expect.length > 0);
    const val = idx.filter((i) => values[i] !== undefined);
    const f: KindFigures = { probes: idx.length, recall_at_1: round(mean(rec.map(at1))), recall_at_k: round(mean(rec.map(atK))) };
    if (val.length > 0) {
      f.value_probes = val.length;
      f.value_at_1 = round(mean(val.map((i) => Number(values[i]!.at_1 && (values[i]!.rejected_rank ?? Infinity) > 1))));
      f.value_at_k = round(mean(val.map((i) => Number(values[i]!.ok))));
    }
    by[kind] = f;
  }
  return {
    recall_at_k: round(mean(withExpect.map(atK))),
    recall_at_1: round(mean(withExpect.map(at1))),
    value_at_k: meanOrNull(withValue.map((i) => Number(values[i]!.ok))),
    value_at_1: meanOrNull(withValue.map((i) => Number(values[i]!.at_1 && (values[i]!.rejected_rank ?? Infinity) > 1))),
    by_kind: by,
  };
}

const READ_RESULTS = (): Record<ReadResult, number> => ({ slot: 0, logbook: 0, miss: 0 });
const LOGBOOK_KINDS = (): Record<LogbookKind, number> => ({ turn: 0, superseded: 0, capacity: 0, decayed: 0, expired: 0 });

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
      archive_items: logbookEntries - entries.turn,
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

// ------------------------------------------------------------------ CLI

export interface ReplayCliOptions {
  probes?: string;
  k?: number | string;
  config?: string;
  json?: boolean;
  /** Repeatable: `bm25`, `flat` or `window:N`. */
  baseline?: string[] | string;
  strict?: boolean;
}

export interface CliIo {
  stdout: (text: string) => void;
  stderr: NodeJS.WriteStream | { write: (s: string) => unknown; isTTY?: boolean };
}

export const defaultIo = (): CliIo => ({ stdout: (s) => process.stdout.write(s), stderr: process.stderr });

/** Reads a JSON config file of createTidemark options. */
export async function loadConfig(path: string | undefined): Promise<TidemarkOptions> {
  if (!path) return {};
  const text = await readText(path, 'config');
  let v: unknown;
  try {
    v = JSON.parse(text);
  } catch (err) {
    throw new ConfigError(`config file ${path} is not valid JSON: ${(err as Error).message}`, { details: { option: 'config' } });
  }
  if (typeof v !== 'object' || v === null || Array.isArray(v)) {
    throw new ConfigError(`config file ${path} must hold a JSON object of createTidemark options, got ${describeValue(v)}`, { details: { option: 'config' } });
  }
  return v as TidemarkOptions;
}

/** Parses the transcript and probe files named on the command line. */
export async function loadReplayFiles(transcriptPath: string, probesPath: string | undefined, strict: boolean): Promise<{ turns: TranscriptTurn[]; probes: Probe[]; issues: FormatIssue[] }> {
  const t = parseTranscript(await readText(transcriptPath, 'transcript'), { strict, file: transcriptPath });
  const p = probesPath ? parseProbes(await readText(probesPath, 'probes'), { strict, file: probesPath }) : { items: [], issues: [] };
  return { turns: t.items, probes: p.items, issues: [...t.issues, ...p.issues] };
}

export function parseK(v: number | string | undefined): number | undefined {
  if (v === undefined) return undefined;
  const n = typeof v === 'number' ? v : Number(v);
  if (!Number.isInteger(n) || n < 1 || n > 1000) throw new ConfigError(`--k must be an integer in [1, 1000], got ${describeValue(v)}`, { details: { option: 'k', value: v } });
  return n;
}

const fmt = (x: number, d = 3): string => x.toFixed(d);
const int = (x: number): string => Math.round(x).toLocaleString('en-US');
const readsLine = (r: Record<ReadResult, number>): string => `${int(r.slot)} hit in slots, ${int(r.logbook)} in the logbook, ${int(r.miss)} miss`;

/** The readable table: tidemark beside the baselines, then tidemark's counters. */
export function formatReplayTable(r: ReplayResult): string {
  const s = r.summary;
  const kinds = Object.keys(s.by_kind);
  const hasValues = s.value_at_k !== null;
  const head = [
    '', `recall@${s.k}`, 'recall@1', ...(hasValues ? [`value@${s.k}`, 'value@1'] : []),
    ...kinds.flatMap((k) => [`${k}@1`, `${k}@${s.k}`]), 'read p50 µs', 'read p99 µs', 'items kept',
  ];
  const opt = (x: number | null): string => (x === null ? '-' : fmt(x));
  const row = (name: string, f: RecallFigures, us: { p50: number; p99: number }, kept: number): string[] => [
    name,
    fmt(f.recall_at_k),
    fmt(f.recall_at_1),
    ...(hasValues ? [opt(f.value_at_k), opt(f.value_at_1)] : []),
    ...kinds.flatMap((k) => [fmt(f.by_kind[k]?.recall_at_1 ?? 0), fmt(f.by_kind[k]?.recall_at_k ?? 0)]),
    us.p50.toFixed(1),
    us.p99.toFixed(1),
    int(kept),
  ];
  const rows = [head, row('tidemark', s, s.read_us, s.slots_in_use + s.logbook_entries), ...Object.entries(r.baselines).map(([n, b]) => row(n, b, b.read_us, b.items_kept))];
  const widths = head.map((_, c) => Math.max(...rows.map((x) => x[c]!.length)));
  const lines = rows.map((x) => x.map((cell, c) => (c === 0 ? cell.padEnd(widths[c]!) : cell.padStart(widths[c]!))).join('  '));
  const t = s.tiers;
  const e = t.logbook.entries;
  const ret = t.logbook.retention;
  const out = [
    `replay: ${int(s.turns)} turns, ${s.sessions} sessions, ${s.probes} probes, k = ${s.k}, capacity ${s.capacity}${s.skipped ? `, ${s.skipped} lines skipped` : ''}`,
    '',
    ...lines,
    '',
    `reads      of turns: ${readsLine(s.reads)}; of probes: ${readsLine(s.probe_reads)} (hit precision ${opt(s.hit_precision)}, hit recall ${opt(s.hit_recall)})`,
    `working    ${int(t.working.slots_in_use)} slots in use (${fmt(t.working.slots_in_use / Math.max(1, s.sessions), 1)} per session of ${s.capacity}); ` +
      `allocated ${int(s.writes.allocated)}, overwritten ${int(s.writes.overwritten)}, ambiguous kept beside ${int(t.working.writes.ambiguous)}, reinforced ${int(s.writes.reinforced)}, gated out ${int(s.writes.gated_out)}`,
    `evictions  capacity ${int(s.evictions.capacity)}, decayed ${int(s.evictions.decayed)}, expired ${int(s.evictions.expired)}`,
    `logbook    ${int(s.logbook_entries)} entries: ${int(e.turn)} turns (${t.logbook.roles.join(' + ')}), ${int(e.superseded)} superseded, ` +
      `${int(e.capacity + e.decayed + e.expired)} evicted values; retention ${ret.max_age_ms > 0 ? `max age ${int(ret.max_age_ms / 86_400_000)} d` : 'no max age'}, ` +
      `${ret.max_entries > 0 ? `max ${int(ret.max_entries)} per scope` : 'no count cap'} (deleted: ${int(ret.dropped_age)} by age, ${int(ret.dropped_count)} by count)`,
    `speed      ${int(s.turns_per_s)} turns/s (${int(s.turns_per_cpu_s)} per CPU second)`,
  ];
  for (const i of r.issues.slice(0, 20)) out.push(`skipped    ${i.file} line ${i.line}: ${i.message}`);
  if (r.issues.length > 20) out.push(`skipped    ... and ${r.issues.length - 20} more`);
  return out.join('\n') + '\n';
}

/** `tidemark replay TRANSCRIPT [--probes FILE] [--k N] [--config FILE] [--json] [--baseline SPEC]... [--strict]`. Returns the exit code. */
export async function replayCli(transcriptPath: string, cli: ReplayCliOptions, io: CliIo = defaultIo()): Promise<number> {
  try {
    const strict = cli.strict === true;
    const k = parseK(cli.k);
    const config = await loadConfig(cli.config);
    const files = await loadReplayFiles(transcriptPath, cli.probes, strict);
    const bar = cli.json ? null : progressBar(files.turns.length, 'replay', io.stderr as NodeJS.WriteStream);
    const result = await runReplay({
      turns: files.turns,
      probes: files.probes,
      ...(k !== undefined ? { k } : {}),
      config,
      baselines: cli.baseline === undefined ? [] : Array.isArray(cli.baseline) ? cli.baseline : [cli.baseline],
      strict,
      issues: files.issues,
      ...(bar ? { onProgress: (d: number) => bar.tick(d) } : {}),
    });
    bar?.done();
    if (cli.json) io.stdout(JSON.stringify(result) + '\n');
    else io.stdout(formatReplayTable(result));
    for (const i of result.issues) if (cli.json) io.stderr.write(`${i.file} line ${i.line}: ${i.message}\n`);
    return 0;
  } catch (err) {
    io.stderr.write(`tidemark replay: ${isTidemarkError(err) ? `${(err as { code: string }).code}: ` : ''}${(err as Error).message}\n`);
    return isTidemarkError(err) ? 2 : 1;
  }
}

export { baselineName };
