// Prometheus metrics for a tidemark instance, on prom-client (an optional peer dependency, loaded on
// first use). Metrics go to the registry the caller passes — never prom-client's global one. Names follow
// the Prometheus/OpenMetrics conventions: one prefix, base units (seconds), `_total` on counters.

import type * as PromClient from 'prom-client';
import { ConfigError, ErrorCodes, type TidemarkError } from '../errors.js';
import type { EvictReason, ReadResult, WriteOutcome } from '../types.js';
import { subscribe, type TidemarkEventSource } from './source.js';

export interface PrometheusMetricsOptions {
  /** Registry to register on. @default a new `Registry` of the prom-client module in use */
  registry?: PromClient.Registry;
  /** Prefix of every metric name; letters, digits and `_`, ending in `_`. @default 'tidemark_' */
  prefix?: string;
  /** The prom-client module, for callers that bundle their own copy. @default `await import('prom-client')` */
  client?: typeof PromClient;
  /** A session counts as active for this long after its last event. @default 300000 (5 min) */
  activeWindowMs?: number;
  /** Sessions remembered for the active-sessions gauge; past this the least recent are forgotten. @default 100000 */
  maxTrackedSessions?: number;
  /** Bucket bounds (seconds) of the duration histograms. @default DURATION_BUCKETS_SECONDS */
  durationBuckets?: readonly number[];
}

/**
 * Read/commit latencies here are sub-millisecond in memory and about a Redis round trip otherwise
 * (a loopback Redis round trip from ioredis is about 0.1 ms on these machines, DEVELOPERS.md); the buckets span 50 µs to 2.5 s, roughly ×2–2.5 apart (common practice).
 */
export const DURATION_BUCKETS_SECONDS: readonly number[] = [
  0.00005, 0.0001, 0.00025, 0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5,
];

export const PROMETHEUS_METRICS_DEFAULTS = {
  prefix: 'tidemark_',
  activeWindowMs: 300_000,
  maxTrackedSessions: 100_000,
  durationBuckets: DURATION_BUCKETS_SECONDS,
} as const;

/** The instance surface metrics read: events, and the outbox depth when the instance exposes it. */
export type MetricsSource = TidemarkEventSource & { readonly outboxDepth?: number };

export interface PrometheusMetrics {
  readonly registry: PromClient.Registry;
  /** The `Content-Type` of `metrics()` output. */
  readonly contentType: string;
  /** The exposition text of the whole registry. */
  metrics(): Promise<string>;
  /** Unsubscribes from the instance and removes these metrics from the registry. */
  stop(): void;
}

const READ_RESULTS: readonly ReadResult[] = ['slot', 'logbook', 'miss'];
const WRITE_OUTCOMES: readonly WriteOutcome[] = ['allocated', 'overwritten', 'reinforced', 'gated_out'];
const EVICT_REASONS: readonly EvictReason[] = ['capacity', 'decayed', 'expired', 'erased'];
const KNOWN_CODES: ReadonlySet<string> = new Set(Object.values(ErrorCodes));

/** Label values come only from closed sets, so the number of series never depends on traffic. */
function codeLabel(code: unknown): string {
  return typeof code === 'string' && KNOWN_CODES.has(code) ? code : 'other';
}

export async function prometheusMetrics(tm: MetricsSource, options: PrometheusMetricsOptions = {}): Promise<PrometheusMetrics> {
  const o = { ...PROMETHEUS_METRICS_DEFAULTS, ...options };
  if (typeof o.prefix !== 'string' || !/^[a-zA-Z_][a-zA-Z0-9_]*_$/.test(o.prefix)) {
    throw new ConfigError(`metrics: prefix must match [a-zA-Z_][a-zA-Z0-9_]*_ (end in "_"), got ${JSON.stringify(o.prefix)}`, {
      details: { option: 'prefix', value: o.prefix },
    });
  }
  for (const name of ['activeWindowMs', 'maxTrackedSessions'] as const) {
    if (!Number.isFinite(o[name]) || o[name] <= 0) {
      throw new ConfigError(`metrics: ${name} must be a positive number, got ${String(o[name])}`, { details: { option: name, value: o[name] } });
    }
  }
  const buckets = [...o.durationBuckets];
  if (buckets.length === 0 || buckets.some((b, i) => !(b > 0) || (i > 0 && b <= buckets[i - 1]!))) {
    throw new ConfigError('metrics: durationBuckets must be increasing positive numbers of seconds', {
      details: { option: 'durationBuckets', value: buckets },
    });
  }
  let client = options.client;
  if (!client) {
    try {
      const mod = (await import('prom-client')) as typeof PromClient & { default?: typeof PromClient };
      client = mod.Registry ? mod : mod.default!;
    } catch (cause) {
      throw new ConfigError('metrics: prom-client is not installed; run `npm install prom-client` or pass `client`', {
        cause,
        details: { option: 'client' },
      });
    }
  }
  const registry = options.registry ?? new client.Registry();
  const p = o.prefix;
  const registers = [registry];

  // Sessions by keyed hash with their last event time and slots in use; insertion order = recency.
  const sessions = new Map<string, { lastMs: number; slots: number }>();
  const touch = (hash: string, atMs: number, slots?: number): void => {
    const prev = sessions.get(hash);
    if (prev) sessions.delete(hash);
    sessions.set(hash, { lastMs: Math.max(atMs, prev?.lastMs ?? 0), slots: slots ?? prev?.slots ?? 0 });
    if (sessions.size > o.maxTrackedSessions) sessions.delete(sessions.keys().next().value!);
  };
  const prune = (): void => {
    const cutoff = Date.now() - o.activeWindowMs;
    for (const [hash, s] of sessions) if (s.lastMs < cutoff) sessions.delete(hash);
  };
  let outboxDepth = 0;

  const reads = new client.Counter({ name: `${p}reads_total`, help: 'Memory reads by result: the top item was a relevant slot (slot) or a relevant logbook entry (logbook), or nothing relevant was found (miss).', labelNames: ['result'], registers });
  const writes = new client.Counter({ name: `${p}writes_total`, help: 'Candidate writes by outcome: new slot (allocated), replaced a value (overwritten), strengthened a slot (reinforced), refused by the write gate (gated_out).', labelNames: ['outcome'], registers });
  const evictions = new client.Counter({ name: `${p}evictions_total`, help: 'Slots that left working memory, by reason.', labelNames: ['reason'], registers });
  const archived = new client.Counter({ name: `${p}archived_items_total`, help: 'Values that left working memory for the logbook, by reason.', labelNames: ['reason'], registers });
  const readDuration = new client.Histogram({ name: `${p}read_duration_seconds`, help: 'Time of one memory read, embedding included.', buckets, registers });
  const writeDuration = new client.Histogram({ name: `${p}write_duration_seconds`, help: 'Time of one memory commit (store time included).', buckets, registers });
  const embedDuration = new client.Histogram({ name: `${p}embed_duration_seconds`, help: 'Time spent embedding, by stage (read query or write candidates).', labelNames: ['stage'], buckets, registers });
  const occupancy = new client.Histogram({ name: `${p}slot_occupancy_ratio`, help: 'Fraction of a session\'s slots in use, observed at each read and commit.', buckets: [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1], registers });
  const topWeight = new client.Histogram({ name: `${p}attention_top_weight`, help: 'Largest attention weight of a read (1 = one slot took all the attention).', buckets: [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1], registers });
  // Entropy of k weights is at most ln k; ln 64 ≈ 4.16 for the default capacity.
  const entropy = new client.Histogram({ name: `${p}attention_entropy_nats`, help: 'Shannon entropy (nats) of a read\'s slot attention weights (0 = focused, ln n = uniform).', buckets: [0.05, 0.1, 0.25, 0.5, 0.75, 1, 1.5, 2, 2.5, 3, 3.5, 4, 4.5], registers });
  const gateScore = new client.Histogram({ name: `${p}write_gate_score`, help: 'Write-gate salience score of each candidate.', buckets: [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1], registers });
  const lifetimeTurns = new client.Histogram({ name: `${p}slot_lifetime_clock`, help: 'Lifetime of evicted slots in session clock units (turns, or seconds with decayUnit "seconds").', buckets: [1, 2, 4, 8, 16, 32, 64, 128, 256, 512, 1024], registers });
  const lifetimeSeconds = new client.Histogram({ name: `${p}slot_lifetime_seconds`, help: 'Wall-clock lifetime of evicted slots.', buckets: [1, 10, 60, 300, 900, 3600, 14400, 86400, 604800], registers });
  const retries = new client.Counter({ name: `${p}commit_conflict_retries_total`, help: 'Commits redone because another writer committed first.', registers });
  const storeErrors = new client.Counter({ name: `${p}store_errors_total`, help: 'Store failures and conflicts that surfaced as errors, by error code.', labelNames: ['code'], registers });
  const errors = new client.Counter({ name: `${p}errors_total`, help: 'Errors emitted, by stage and error code.', labelNames: ['stage', 'code'], registers });
  const degraded = new client.Counter({ name: `${p}degraded_total`, help: 'Reads answered with empty memory and writes queued because the store failed, by stage.', labelNames: ['stage'], registers });
  const outboxChanges = new client.Counter({ name: `${p}outbox_changes_total`, help: 'Pending-write outbox changes: queued, drained (committed later) or overflow (refused).', labelNames: ['change'], registers });
  const active = new client.Gauge({
    name: `${p}active_sessions`,
    help: `Sessions with an event in the last ${o.activeWindowMs / 1000} s.`,
    registers,
    collect() {
      prune();
      this.set(sessions.size);
    },
  });
  const slotsInUse = new client.Gauge({
    name: `${p}slots_in_use`,
    help: 'Slots in use, summed over active sessions (latest value seen per session).',
    registers,
    collect() {
      prune();
      let sum = 0;
      for (const s of sessions.values()) sum += s.slots;
      this.set(sum);
    },
  });
  const outbox = new client.Gauge({
    name: `${p}outbox_depth`,
    help: 'Writes waiting in the outbox for the store.',
    registers,
    collect() {
      this.set(typeof tm.outboxDepth === 'number' ? tm.outboxDepth : outboxDepth);
    },
  });

  // Zero-initialise every labelled series so dashboards and rate() see them from the first scrape.
  for (const r of READ_RESULTS) reads.inc({ result: r }, 0);
  for (const w of WRITE_OUTCOMES) writes.inc({ outcome: w }, 0);
  for (const r of EVICT_REASONS) evictions.inc({ reason: r }, 0);
  for (const r of ['superseded', 'capacity', 'decayed', 'expired']) archived.inc({ reason: r }, 0);
  for (const s of ['read', 'write']) degraded.inc({ stage: s }, 0);
  for (const c of ['queued', 'drained', 'overflow']) outboxChanges.inc({ change: c }, 0);

  const unsubscribe = subscribe(tm, {
    read(e) {
      reads.inc({ result: READ_RESULTS.includes(e.result) ? e.result : 'miss' });
      readDuration.observe(e.durationUs / 1e6);
      embedDuration.observe({ stage: 'read' }, e.embedUs / 1e6);
      if (e.capacity > 0) occupancy.observe(e.slotsInUse / e.capacity);
      if (e.slotItems > 0) {
        topWeight.observe(e.topWeight);
        entropy.observe(e.entropy);
      }
      touch(e.sessionHash, e.atMs, e.slotsInUse);
    },
    write(e) {
      if (WRITE_OUTCOMES.includes(e.outcome)) writes.inc({ outcome: e.outcome });
      touch(e.sessionHash, e.atMs, e.slotsInUse);
    },
    gate(e) {
      gateScore.observe(e.score);
      if (!e.passed) writes.inc({ outcome: 'gated_out' });
    },
    evict(e) {
      if (EVICT_REASONS.includes(e.reason)) evictions.inc({ reason: e.reason });
      lifetimeTurns.observe(e.lifetime);
      lifetimeSeconds.observe(e.lifetimeMs / 1000);
    },
    archive(e) {
      if (['superseded', 'capacity', 'decayed', 'expired'].includes(e.reason)) archived.inc({ reason: e.reason });
    },
    commit(e) {
      writeDuration.observe(e.durationUs / 1e6);
      embedDuration.observe({ stage: 'write' }, e.embedUs / 1e6);
      if (e.capacity > 0) occupancy.observe(e.slotsInUse / e.capacity);
      if (e.retries > 0) retries.inc(e.retries);
      touch(e.sessionHash, e.atMs, e.slotsInUse);
    },
    degraded(e) {
      degraded.inc({ stage: e.stage === 'write' ? 'write' : 'read' });
    },
    outbox(e) {
      outboxDepth = e.depth;
      if (['queued', 'drained', 'overflow'].includes(e.change)) outboxChanges.inc({ change: e.change });
    },
    error(e) {
      const code = codeLabel((e.error as Partial<TidemarkError> | undefined)?.code);
      const stage = ['read', 'write', 'handler', 'outbox', 'store'].includes(e.stage) ? e.stage : 'other';
      errors.inc({ stage, code });
      if (code.startsWith('TIDEMARK_E_STORE_')) storeErrors.inc({ code });
    },
  });

  const all = [reads, writes, evictions, archived, readDuration, writeDuration, embedDuration, occupancy, topWeight, entropy, gateScore, lifetimeTurns, lifetimeSeconds, retries, storeErrors, errors, degraded, outboxChanges, active, slotsInUse, outbox];
  return {
    registry,
    contentType: registry.contentType,
    metrics: () => registry.metrics(),
    stop() {
      unsubscribe();
      for (const m of all) registry.removeSingleMetric((m as unknown as { name: string }).name);
    },
  };
}
