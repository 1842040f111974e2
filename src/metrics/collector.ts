// The dashboard's data: an in-process aggregator over tidemark events in fixed time buckets (5 s over the
// last 15 min by default) — read results, writes, evictions, latency percentiles, slot occupancy, the
// busiest sessions (by keyed hash only) and the retention curve. Bounded memory whatever the traffic.

import { createHistogram, type RecordableHistogram } from 'node:perf_hooks';
import { ConfigError } from '../errors.js';
import type { EvictReason, ReadResult, WriteOutcome } from '../types.js';
import type { StoreHealthState } from './health.js';
import { RetentionTracker, type RetentionSnapshot, type SurvivalStep } from './retention.js';
import { subscribe, type TidemarkEventSource } from './source.js';

export interface CollectorOptions {
  /** Width of one time bucket. @default 5000 */
  bucketMs?: number;
  /** How far back the series go; a multiple of `bucketMs`. @default 900000 (15 min) */
  windowMs?: number;
  /** Rows in the busiest-sessions table. @default 10 */
  topSessions?: number;
  /** Sessions tracked for occupancy and the busiest table; past this the least recent are forgotten. @default 10000 */
  maxSessions?: number;
  /** Retention tracker to feed and report; pass one to share it with `inspect()`. @default a new RetentionTracker */
  retention?: RetentionTracker;
}

export const COLLECTOR_DEFAULTS = {
  bucketMs: 5_000,
  windowMs: 900_000,
  topSessions: 10,
  maxSessions: 10_000,
} as const;

export type LatencyKind = 'read' | 'write' | 'turn';
/** A read's result as the dashboard counts it: `degraded` when the store could not be read. */
export type ReadKind = ReadResult | 'degraded';
export type OutboxChange = 'queued' | 'drained' | 'overflow';

/** Points a drawn curve keeps at most (the survival panel is a few hundred pixels wide). */
export const CURVE_POINTS = 120;

/** One process in the fleet view: its totals over the window and how it is doing now. */
export interface FleetInstance {
  instance: string;
  /** Seen within the last few publish periods. */
  live: boolean;
  lastSeenMs: number;
  reads: number;
  hits: number;
  degraded: number;
  writes: number;
  outboxDepth: number;
  storeUp: boolean | null;
  /** p95 of the turn latency over the window (ms), null without turns. */
  turnP95: number | null;
}

export interface Percentiles {
  count: number;
  /** Milliseconds; null with no samples. */
  p50: number | null;
  p95: number | null;
  p99: number | null;
}

export interface SessionActivity {
  /** Keyed hash of the session id (or the id itself when an admin view maps it back). */
  session: string;
  reads: number;
  hits: number;
  writes: number;
  slotsInUse: number;
  capacity: number;
  lastMs: number;
}

/** The JSON the dashboard draws: `GET /dashboard/data` and every `/dashboard/feed` event. */
export interface DashboardSnapshot {
  atMs: number;
  bucketMs: number;
  windowMs: number;
  /** Start time (ms) of each bucket, oldest first; every series below has one value per bucket. */
  t: number[];
  reads: Record<ReadKind, number[]>;
  writes: Record<WriteOutcome, number[]>;
  evictions: Record<EvictReason, number[]>;
  /** Outbox changes per bucket: a drain after an outage shows here, not as a spike of writes. */
  outbox: Record<OutboxChange, number[]>;
  /** Per-bucket latency percentiles in ms (null where a bucket has no sample). */
  latency: Record<LatencyKind, { p50: Array<number | null>; p95: Array<number | null>; p99: Array<number | null> }>;
  totals: {
    reads: Record<ReadKind, number>;
    writes: Record<WriteOutcome, number>;
    evictions: Record<EvictReason, number>;
    outbox: Record<OutboxChange, number>;
    /** (slot + logbook) / all reads, degraded included, over the window; null with no reads. */
    hitRatio: number | null;
    latency: Record<LatencyKind, Percentiles>;
  };
  /** Sessions by fill (slots in use / capacity) in ten bins 0–10 %, …, 90–100 %. */
  occupancy: { bins: Array<{ lo: number; hi: number; count: number }>; sessions: number; meanFill: number | null };
  /** Sessions this process served in the window (per process; the fleet's figure is `figures.sessions`). */
  activeSessions: number;
  busiest: SessionActivity[];
  /** The process that built this snapshot (the one the page is served from). */
  instance?: string;
  /** Store health as this process sees it; `up: false` is an outage. */
  store?: StoreHealthState & { downForMs: number | null };
  /** The store's truth figures (shared by the fleet), null when the store keeps none or is down. */
  figures?: { sessions: number; slots: number; logbookEntries: number; source: 'counters' | 'scan' } | null;
  /** Every process publishing to the same store, this one included; series above are their sum. */
  fleet?: FleetInstance[];
  retention: {
    /** Kaplan–Meier steps in session clock units (turns by default) and in seconds, at most CURVE_POINTS each (downsampled). */
    clock: { steps: SurvivalStep[]; median: number | null; n: number; events: number; censored: number };
    seconds: { steps: SurvivalStep[]; median: number | null; n: number; events: number; censored: number };
    alive: number;
    halfLife: RetentionSnapshot['halfLife'];
  };
}

const READ_RESULTS: readonly ReadKind[] = ['slot', 'logbook', 'miss', 'degraded'];
const OUTBOX_CHANGES: readonly OutboxChange[] = ['queued', 'drained', 'overflow'];
const WRITE_OUTCOMES: readonly WriteOutcome[] = ['allocated', 'overwritten', 'reinforced', 'gated_out'];
const EVICT_REASONS: readonly EvictReason[] = ['capacity', 'decayed', 'expired', 'erased'];
const LATENCY_KINDS: readonly LatencyKind[] = ['read', 'write', 'turn'];

/** Column order of `exportBuckets` rows: the bucket number, the counts, then p95 per latency kind (µs). */
export const FLEET_COLUMNS: readonly string[] = [
  'bucket',
  ...READ_RESULTS.map((r) => `reads.${r}`),
  ...WRITE_OUTCOMES.map((w) => `writes.${w}`),
  ...EVICT_REASONS.map((e) => `evictions.${e}`),
  ...OUTBOX_CHANGES.map((c) => `outbox.${c}`),
  ...LATENCY_KINDS.map((k) => `p95us.${k}`),
];

interface Bucket {
  reads: Record<ReadKind, number>;
  writes: Record<WriteOutcome, number>;
  evictions: Record<EvictReason, number>;
  outbox: Record<OutboxChange, number>;
  /** Microsecond histograms (perf_hooks, HdrHistogram-style log-linear buckets inside Node). */
  latency: Record<LatencyKind, RecordableHistogram | null>;
}

/** Latencies are kept up to 10 min in µs; longer ones are recorded as 10 min. */
const HIST_HIGHEST_US = 600_000_000;

/**
 * A latency histogram sized for what it holds: 1 µs to 10 min at 3 significant digits. Node's default
 * range (up to 2^53) allocates and walks a counts array of about 90,000 cells per histogram, which
 * made every snapshot cost milliseconds (bench/feed.ts).
 */
function newHistogram(): RecordableHistogram {
  return createHistogram({ lowest: 1, highest: HIST_HIGHEST_US, figures: 3 });
}

function zeros<K extends string>(keys: readonly K[]): Record<K, number> {
  const o = {} as Record<K, number>;
  for (const k of keys) o[k] = 0;
  return o;
}

function percentiles(h: RecordableHistogram | null): Percentiles {
  if (!h || h.count === 0) return { count: 0, p50: null, p95: null, p99: null };
  return { count: h.count, p50: h.percentile(50) / 1000, p95: h.percentile(95) / 1000, p99: h.percentile(99) / 1000 };
}

export class DashboardCollector {
  readonly retention: RetentionTracker;
  private readonly o: Required<Omit<CollectorOptions, 'retention'>>;
  private readonly buckets = new Map<number, Bucket>();
  /** Insertion order is recency: a session is moved to the end on every event. */
  private readonly sessions = new Map<string, SessionActivity>();

  constructor(options: CollectorOptions = {}) {
    const o = { ...COLLECTOR_DEFAULTS, ...options };
    for (const name of ['bucketMs', 'windowMs', 'topSessions', 'maxSessions'] as const) {
      if (!Number.isInteger(o[name]) || o[name] < 1) {
        throw new ConfigError(`collector: ${name} must be a positive integer, got ${String(o[name])}`, { details: { option: name, value: o[name] } });
      }
    }
    if (o.windowMs % o.bucketMs !== 0 || o.windowMs / o.bucketMs > 10_000) {
      throw new ConfigError(`collector: windowMs (${o.windowMs}) must be a multiple of bucketMs (${o.bucketMs}) and at most 10000 buckets`, {
        details: { option: 'windowMs', value: o.windowMs },
      });
    }
    this.o = { bucketMs: o.bucketMs, windowMs: o.windowMs, topSessions: o.topSessions, maxSessions: o.maxSessions };
    this.retention = options.retention ?? new RetentionTracker();
  }

  /** Subscribe to a tidemark instance (or any typed emitter); returns the function that unsubscribes. */
  attach(source: TidemarkEventSource): () => void {
    const detachRetention = this.retention.attach(source);
    const detach = subscribe(source, {
      read: (e) => {
        const b = this.bucket(e.atMs);
        if (READ_RESULTS.includes(e.result)) b.reads[e.result] += 1;
        this.latency(b, 'read', e.durationUs);
        const s = this.session(e.sessionHash, e.atMs, e.slotsInUse, e.capacity);
        s.reads += 1;
        if (e.result !== 'miss') s.hits += 1;
      },
      write: (e) => {
        if (WRITE_OUTCOMES.includes(e.outcome)) this.bucket(e.atMs).writes[e.outcome] += 1;
        this.session(e.sessionHash, e.atMs, e.slotsInUse, e.capacity).writes += 1;
      },
      gate: (e) => {
        if (!e.passed) this.bucket(e.atMs).writes.gated_out += 1;
      },
      evict: (e) => {
        if (EVICT_REASONS.includes(e.reason)) this.bucket(e.atMs).evictions[e.reason] += 1;
      },
      commit: (e) => {
        this.latency(this.bucket(e.atMs), 'write', e.durationUs);
        this.session(e.sessionHash, e.atMs, e.slotsInUse, e.capacity);
      },
      degraded: (e) => {
        if (e.stage !== 'read') return;
        this.bucket(e.atMs).reads.degraded += 1;
        const s = this.sessions.get(e.sessionHash);
        if (s) s.reads += 1;
      },
      outbox: (e) => {
        if ((OUTBOX_CHANGES as readonly string[]).includes(e.change)) this.bucket(Date.now()).outbox[e.change as OutboxChange] += 1;
      },
    });
    return () => {
      detach();
      detachRetention();
    };
  }

  /** Records the latency of one whole turn (request in to reply done), measured by the caller (the HTTP adapter). */
  recordTurn(durationUs: number, atMs = Date.now()): void {
    this.latency(this.bucket(atMs), 'turn', durationUs);
  }

  snapshot(nowMs = Date.now()): DashboardSnapshot {
    const { bucketMs, windowMs } = this.o;
    const n = windowMs / bucketMs;
    const last = Math.floor(nowMs / bucketMs);
    const first = last - n + 1;
    for (const k of this.buckets.keys()) if (k < first || k > last) this.buckets.delete(k);
    this.pruneSessions(nowMs);

    const t: number[] = [];
    const reads = Object.fromEntries(READ_RESULTS.map((k) => [k, [] as number[]])) as Record<ReadKind, number[]>;
    const writes = Object.fromEntries(WRITE_OUTCOMES.map((k) => [k, [] as number[]])) as Record<WriteOutcome, number[]>;
    const evictions = Object.fromEntries(EVICT_REASONS.map((k) => [k, [] as number[]])) as Record<EvictReason, number[]>;
    const outbox = Object.fromEntries(OUTBOX_CHANGES.map((k) => [k, [] as number[]])) as Record<OutboxChange, number[]>;
    const latency = Object.fromEntries(
      LATENCY_KINDS.map((k) => [k, { p50: [] as Array<number | null>, p95: [] as Array<number | null>, p99: [] as Array<number | null> }]),
    ) as DashboardSnapshot['latency'];
    const totals = { reads: zeros(READ_RESULTS), writes: zeros(WRITE_OUTCOMES), evictions: zeros(EVICT_REASONS), outbox: zeros(OUTBOX_CHANGES) };
    const merged = Object.fromEntries(LATENCY_KINDS.map((k) => [k, newHistogram()])) as Record<LatencyKind, RecordableHistogram>;

    for (let k = first; k <= last; k++) {
      t.push(k * bucketMs);
      const b = this.buckets.get(k);
      for (const r of READ_RESULTS) {
        const v = b?.reads[r] ?? 0;
        reads[r].push(v);
        totals.reads[r] += v;
      }
      for (const w of WRITE_OUTCOMES) {
        const v = b?.writes[w] ?? 0;
        writes[w].push(v);
        totals.writes[w] += v;
      }
      for (const e of EVICT_REASONS) {
        const v = b?.evictions[e] ?? 0;
        evictions[e].push(v);
        totals.evictions[e] += v;
      }
      for (const c of OUTBOX_CHANGES) {
        const v = b?.outbox[c] ?? 0;
        outbox[c].push(v);
        totals.outbox[c] += v;
      }
      for (const kind of LATENCY_KINDS) {
        const h = b?.latency[kind] ?? null;
        const p = percentiles(h);
        latency[kind].p50.push(p.p50);
        latency[kind].p95.push(p.p95);
        latency[kind].p99.push(p.p99);
        if (h) merged[kind].add(h);
      }
    }
    const readCount = totals.reads.slot + totals.reads.logbook + totals.reads.miss + totals.reads.degraded;

    const bins = Array.from({ length: 10 }, (_, i) => ({ lo: i / 10, hi: (i + 1) / 10, count: 0 }));
    let fillSum = 0;
    let filled = 0;
    for (const s of this.sessions.values()) {
      if (s.capacity <= 0) continue;
      const fill = Math.min(1, s.slotsInUse / s.capacity);
      bins[Math.min(9, Math.floor(fill * 10))]!.count += 1;
      fillSum += fill;
      filled += 1;
    }
    const busiest = [...this.sessions.values()]
      .sort((a, b) => b.reads + b.writes - (a.reads + a.writes) || b.lastMs - a.lastMs)
      .slice(0, this.o.topSessions)
      .map((s) => ({ ...s }));
    // Grouped curves: the cost follows distinct lifetimes and live slots, not every slot ever seen.
    const curves = this.retention.curves(nowMs);
    const ret = { clock: curves.clock, seconds: curves.seconds, alive: this.retention.aliveCount, halfLife: this.retention.halfLives(nowMs) };
    const curve = (c: RetentionSnapshot['clock']) => ({ steps: downsample(c.steps, CURVE_POINTS), median: c.median, n: c.n, events: c.events, censored: c.censored });

    return {
      atMs: nowMs,
      bucketMs,
      windowMs,
      t,
      reads,
      writes,
      evictions,
      outbox,
      latency,
      totals: {
        ...totals,
        hitRatio: readCount > 0 ? (totals.reads.slot + totals.reads.logbook) / readCount : null,
        latency: Object.fromEntries(LATENCY_KINDS.map((k) => [k, percentiles(merged[k])])) as Record<LatencyKind, Percentiles>,
      },
      occupancy: { bins, sessions: filled, meanFill: filled > 0 ? fillSum / filled : null },
      activeSessions: this.sessions.size,
      busiest,
      retention: { clock: curve(ret.clock), seconds: curve(ret.seconds), alive: ret.alive, halfLife: ret.halfLife },
    };
  }

  /**
   * The window's non-empty buckets as compact rows for the fleet view (see `FLEET_COLUMNS`): counts,
   * then the read, commit and turn p95 in µs (-1 without samples). About 100 bytes a bucket.
   */
  exportBuckets(nowMs = Date.now()): number[][] {
    const { bucketMs, windowMs } = this.o;
    const first = Math.floor(nowMs / bucketMs) - windowMs / bucketMs + 1;
    const rows: number[][] = [];
    for (const [k, b] of this.buckets) {
      if (k < first) continue;
      const row = [k];
      for (const r of READ_RESULTS) row.push(b.reads[r]);
      for (const w of WRITE_OUTCOMES) row.push(b.writes[w]);
      for (const e of EVICT_REASONS) row.push(b.evictions[e]);
      for (const c of OUTBOX_CHANGES) row.push(b.outbox[c]);
      for (const kind of LATENCY_KINDS) {
        const h = b.latency[kind];
        row.push(h && h.count > 0 ? h.percentile(95) : -1);
      }
      rows.push(row);
    }
    return rows.sort((x, y) => x[0]! - y[0]!);
  }

  /** Adds the counts of rows this process published before a restart, for buckets it has not filled since. */
  importBuckets(rows: readonly number[][]): void {
    for (const row of rows) {
      if (!Array.isArray(row) || row.length !== FLEET_COLUMNS.length || this.buckets.has(row[0]!)) continue;
      const b = this.bucket(row[0]! * this.o.bucketMs);
      let i = 1;
      for (const r of READ_RESULTS) b.reads[r] += row[i++]!;
      for (const w of WRITE_OUTCOMES) b.writes[w] += row[i++]!;
      for (const e of EVICT_REASONS) b.evictions[e] += row[i++]!;
      for (const c of OUTBOX_CHANGES) b.outbox[c] += row[i++]!;
    }
  }

  get bucketMs(): number {
    return this.o.bucketMs;
  }

  get windowMs(): number {
    return this.o.windowMs;
  }

  private bucket(atMs: number): Bucket {
    const k = Math.floor(atMs / this.o.bucketMs);
    let b = this.buckets.get(k);
    if (!b) {
      b = { reads: zeros(READ_RESULTS), writes: zeros(WRITE_OUTCOMES), evictions: zeros(EVICT_REASONS), outbox: zeros(OUTBOX_CHANGES), latency: { read: null, write: null, turn: null } };
      this.buckets.set(k, b);
      // Keep the map bounded even if nobody takes snapshots.
      if (this.buckets.size > 2 * (this.o.windowMs / this.o.bucketMs)) {
        const cutoff = k - this.o.windowMs / this.o.bucketMs;
        for (const old of this.buckets.keys()) if (old < cutoff) this.buckets.delete(old);
      }
    }
    return b;
  }

  private latency(b: Bucket, kind: LatencyKind, durationUs: number): void {
    if (!Number.isFinite(durationUs) || durationUs < 0) return;
    const h = (b.latency[kind] ??= newHistogram());
    // RecordableHistogram takes integers in [1, highest].
    h.record(Math.min(HIST_HIGHEST_US, Math.max(1, Math.round(durationUs))));
  }

  private session(hash: string, atMs: number, slotsInUse: number, capacity: number): SessionActivity {
    let s = this.sessions.get(hash);
    if (s) this.sessions.delete(hash);
    else s = { session: hash, reads: 0, hits: 0, writes: 0, slotsInUse: 0, capacity: 0, lastMs: 0 };
    s.slotsInUse = slotsInUse;
    s.capacity = capacity;
    s.lastMs = Math.max(s.lastMs, atMs);
    this.sessions.set(hash, s);
    if (this.sessions.size > this.o.maxSessions) this.sessions.delete(this.sessions.keys().next().value!);
    return s;
  }

  private pruneSessions(nowMs: number): void {
    const cutoff = nowMs - this.o.windowMs;
    // Not a scan-until-first-recent: events may carry out-of-order times (replays, clock skew).
    for (const [hash, s] of this.sessions) if (s.lastMs < cutoff) this.sessions.delete(hash);
  }
}

/**
 * Keeps at most `max` steps of a step curve, evenly spread over its steps, always keeping the last one
 * (the curve's end) — the page draws a few hundred pixels, so more points only cost bytes.
 */
export function downsample<T>(steps: readonly T[], max: number): T[] {
  if (steps.length <= max) return steps.slice();
  const out: T[] = [];
  const stride = (steps.length - 1) / (max - 1);
  for (let i = 0; i < max; i++) out.push(steps[Math.round(i * stride)]!);
  return out;
}
