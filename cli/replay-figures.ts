// The figures `tidemark replay` reports: the shapes of its summary (recall@1 / recall@k, value
// accuracy, per probe kind, per tier and per baseline) and the pure helpers that compute them.

import type { DeprecatedReplayFields } from '../src/deprecated-fields.js';
import type { EvictReason, LogbookKind, ReadResult, RecallItem, Role } from '../src/types.js';
import { patternOf, type Probe } from './jsonl.js';

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

export interface ReplaySummary extends RecallFigures, DeprecatedReplayFields {
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
  /** Logbook entries other than turns: the values that left working memory (superseded or evicted). */
  demoted_items: number;
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

export const round = (x: number, d = 4): number => Math.round(x * 10 ** d) / 10 ** d;
const mean = (xs: readonly number[]): number => (xs.length === 0 ? 0 : xs.reduce((a, b) => a + b, 0) / xs.length);
const meanOrNull = (xs: readonly number[]): number | null => (xs.length === 0 ? null : round(mean(xs)));

export function figures(probes: readonly Probe[], retrieved: readonly string[][], values: ReadonlyArray<ValueResult | undefined>): RecallFigures {
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

export const READ_RESULTS = (): Record<ReadResult, number> => ({ slot: 0, logbook: 0, miss: 0 });
export const LOGBOOK_KINDS = (): Record<LogbookKind, number> => ({ turn: 0, superseded: 0, capacity: 0, decayed: 0, expired: 0 });
