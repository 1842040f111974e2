// Prometheus metrics for a tidemark instance, on prom-client (an optional peer dependency, loaded on
// first use). Metrics go to the registry the caller passes — never prom-client's global one. Names follow
// the Prometheus/OpenMetrics conventions: one prefix, base units (seconds), `_total` on counters.

import { readFileSync } from 'node:fs';
import type * as PromClient from 'prom-client';
import { ConfigError, ErrorCodes, type TidemarkError } from '../errors.js';
import type { Store } from '../store/store.js';
import type { EvictReason, ReadResult, WriteOutcome } from '../types.js';
import type { StoreHealth } from './health.js';
import { subscribe, type TidemarkEventSource } from './source.js';
import { SURVIVAL_BOUNDS, SURVIVAL_FIELD, type SurvivalUnit } from './survival.js';

/**
 * The part of a prom-client `Registry` tidemark uses. Structural, so these declarations type-check in
 * an app without prom-client installed; a prom-client `Registry` is one (cast back to prom-client's
 * `Registry` to merge registries or use the rest of its API).
 */
export interface MetricsRegistry {
  readonly contentType: string;
  metrics(): Promise<string>;
  getMetricsAsArray(): ReadonlyArray<{ readonly name: string }>;
  removeSingleMetric(name: string): void;
}

/** The prom-client module as far as these declarations need to name it (structural, see `MetricsRegistry`). */
export interface PromClientModule {
  readonly Registry: unknown;
  readonly Counter: unknown;
  readonly Gauge: unknown;
  readonly Histogram: unknown;
}

export interface PrometheusMetricsOptions {
  /** Registry to register on (a prom-client `Registry`). @default a new `Registry` of the prom-client module in use */
  registry?: MetricsRegistry;
  /** Prefix of every metric name; letters, digits and `_`, ending in `_`. @default 'tidemark_' */
  prefix?: string;
  /** The prom-client module, for callers that bundle their own copy. @default `await import('prom-client')` */
  client?: PromClientModule;
  /** A session counts as active for this long after its last event; the dashboard's window. @default 900000 (15 min) */
  activeWindowMs?: number;
  /** Sessions remembered for the active-sessions gauge; past this the least recent are forgotten. @default 100000 */
  maxTrackedSessions?: number;
  /** Bucket bounds (seconds) of the duration histograms. @default DURATION_BUCKETS_SECONDS */
  durationBuckets?: readonly number[];
  /** Store health to export as `tidemark_store_up` and its last-success time. @default none (the gauges are left out) */
  health?: StoreHealth;
  /** Export the store's truth figures (sessions, slots, logbook entries) read from `store.stats()` at each scrape. @default true */
  storeFigures?: boolean;
  /**
   * Bytes per session from a random sample of the store's sessions (Redis `MEMORY USAGE`; in-process an
   * estimate), taken at most every `intervalMs` at a scrape: `tidemark_store_sampled_session_bytes`.
   * `false` turns it off. @default { sample: 20, intervalMs: 60000 }
   */
  sessionBytes?: { sample?: number; intervalMs?: number } | false;
  /**
   * Tenant ids that get their own value of a `tenant` label on the event counters (reads, writes,
   * candidates, evictions, logbook demotions, degraded turns); every other tenant counts under `other`.
   * The list bounds the series however many tenants there are. Needs an instance with `hashTenant`.
   * @default none (no tenant label)
   */
  tenantLabels?: readonly string[];
  /** Also register prom-client's default process metrics (CPU, memory, event-loop lag; `process_*`, `nodejs_*`). @default false */
  processMetrics?: boolean;
}

/**
 * Read/commit latencies here are sub-millisecond in memory and about a Redis round trip otherwise
 * (a loopback Redis round trip from ioredis is about 0.1 ms on these machines, DEVELOPERS.md); the buckets span 50 µs to 2.5 s, roughly ×2–2.5 apart (common practice).
 */
export const DURATION_BUCKETS_SECONDS: readonly number[] = [
  0.00005, 0.0001, 0.00025, 0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5,
];

/**
 * Embedding with the built-in hashing embedder takes a few microseconds (its cache hits less than one),
 * a transformer model milliseconds: these buckets start at 1 µs so the fast path is resolved.
 */
export const EMBED_BUCKETS_SECONDS: readonly number[] = [
  0.000001, 0.0000025, 0.000005, 0.00001, 0.000025, 0.00005, 0.0001, 0.00025, 0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25,
];

/** Turn latency (request in to last byte out) includes the bot's own reply: milliseconds to tens of seconds. */
export const TURN_BUCKETS_SECONDS: readonly number[] = [0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30, 60];

export const PROMETHEUS_METRICS_DEFAULTS = {
  prefix: 'tidemark_',
  activeWindowMs: 900_000,
  maxTrackedSessions: 100_000,
  durationBuckets: DURATION_BUCKETS_SECONDS,
  storeFigures: true,
  processMetrics: false,
} as const;

/** The instance surface metrics read: events, and the outbox depth, store and decay unit when the instance exposes them. */
export type MetricsSource = TidemarkEventSource & {
  readonly outboxDepth?: number;
  readonly store?: Store;
  readonly tenant?: string;
  readonly params?: { readonly decayUnit?: 'turns' | 'seconds' };
  /** Keyed hash of a tenant id as events carry it; needed for `tenantLabels`. */
  hashTenant?(tenant: string): string;
};

/** At most this many tenants get their own label value (common practice: keep a label's values in the tens). */
export const MAX_TENANT_LABELS = 50;

/** The package version, for `tidemark_build_info` (package.json two levels up from src/ or dist/src/). */
function packageVersion(): string {
  for (const rel of ['../../package.json', '../../../package.json']) {
    try {
      const pkg = JSON.parse(readFileSync(new URL(rel, import.meta.url), 'utf8')) as { name?: string; version?: string };
      if (pkg.name === 'tidemark' && typeof pkg.version === 'string') return pkg.version;
    } catch {
      // try the next location
    }
  }
  return 'unknown';
}

export interface PrometheusMetrics {
  /** The prom-client `Registry` the metrics are on. */
  readonly registry: MetricsRegistry;
  /** The `Content-Type` of `metrics()` output. */
  readonly contentType: string;
  /** The exposition text of the whole registry. */
  metrics(): Promise<string>;
  /** Records one whole turn (request in to last byte out), measured by the HTTP adapter. */
  recordTurn(seconds: number): void;
  /** Unsubscribes from the instance and removes these metrics from the registry. */
  stop(): void;
}

const READ_RESULTS: readonly ReadResult[] = ['slot', 'logbook', 'miss'];
/** Writes are what changed a slot; a candidate the gate refused is not a write (see candidates_total). */
const WRITE_OUTCOMES: readonly Exclude<WriteOutcome, 'gated_out'>[] = ['allocated', 'overwritten', 'reinforced'];
const ERROR_STAGES = ['read', 'write', 'handler', 'outbox', 'store'] as const;
/** Every value of an `outbox` event's `change`, zero-initialised so `increase()` sees the first one. */
const OUTBOX_CHANGE_LABELS = ['queued', 'drained', 'overflow', 'retry', 'erased', 'expired', 'failed', 'abandoned'] as const;
const EVICT_REASONS: readonly EvictReason[] = ['capacity', 'decayed', 'expired', 'erased'];
/** Why a value went from a slot to the logbook. */
const DEMOTE_REASONS: readonly string[] = ['superseded', 'capacity', 'decayed', 'expired'];
const KNOWN_CODES: ReadonlySet<string> = new Set(Object.values(ErrorCodes));

/**
 * Leaves an unlabelled gauge out of the exposition until it is set again: unknown, not zero. prom-client's
 * `reset()` puts such a gauge back to 0 (lib/gauge.js), which would read as "no sessions" while the store
 * is down; an empty series map is what a labelled gauge has before its first value.
 */
function unset(gauge: PromClient.Gauge): void {
  gauge.reset();
  (gauge as unknown as { hashMap: Record<string, unknown> }).hashMap = {};
}

/** Label values come only from closed sets, so the number of series never depends on traffic. */
function codeLabel(code: unknown): string {
  return typeof code === 'string' && KNOWN_CODES.has(code) ? code : 'other';
}

/**
 * The `tenant` label value of an event: the allow-listed id whose hash it carries, else `other`; null
 * when no allow-list is set (no tenant label at all).
 */
function tenantLabeller(tm: MetricsSource, allow: readonly string[] | undefined): { labels: readonly string[]; of(hash: string): string } | null {
  if (allow === undefined) return null;
  const bad = (why: string): never => {
    throw new ConfigError(`metrics: tenantLabels ${why}`, { details: { option: 'tenantLabels', value: allow } });
  };
  if (!Array.isArray(allow)) bad('must be an array of tenant ids');
  if (allow.length > MAX_TENANT_LABELS) bad(`lists ${allow.length} tenants; at most ${MAX_TENANT_LABELS} get their own label value (the rest count as "other")`);
  for (const t of allow) if (typeof t !== 'string' || t === '' || t === 'other' || t.length > 64) bad(`holds ${JSON.stringify(t)}; each must be a non-empty id of at most 64 characters, not "other"`);
  if (typeof tm.hashTenant !== 'function') bad('needs an instance with hashTenant() (a tidemark instance has it): events carry hashed tenant ids');
  const byHash = new Map(allow.map((t) => [tm.hashTenant!(t), t]));
  return { labels: [...new Set(allow), 'other'], of: (hash) => byHash.get(hash) ?? 'other' };
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
  const tenantOf = tenantLabeller(tm, options.tenantLabels);
  let client = options.client as typeof PromClient | undefined;
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
  const registry = (options.registry as PromClient.Registry | undefined) ?? new client.Registry();
  const p = o.prefix;
  const registers = [registry];
  const store = tm.store;
  const health = options.health;

  // Sessions by keyed hash with their last event time; insertion order = recency.
  const sessions = new Map<string, number>();
  const touch = (hash: string, atMs: number): void => {
    const prev = sessions.get(hash);
    if (prev !== undefined) sessions.delete(hash);
    sessions.set(hash, Math.max(atMs, prev ?? 0));
    if (sessions.size > o.maxTrackedSessions) sessions.delete(sessions.keys().next().value!);
  };
  const prune = (): void => {
    const cutoff = Date.now() - o.activeWindowMs;
    for (const [hash, last] of sessions) if (last < cutoff) sessions.delete(hash);
  };
  let outboxDepth = 0;
  const lifetimeUnit = tm.params?.decayUnit ?? 'turns';

  // With tenantLabels, the event counters carry a bounded `tenant` label too.
  const tl = (names: string[]): string[] => (tenantOf ? [...names, 'tenant'] : names);
  const tenantValues: ReadonlyArray<string | null> = tenantOf ? tenantOf.labels : [null];
  const withTenant = <L extends Record<string, string>>(labels: L, tenant: string | null): L => (tenant === null ? labels : Object.assign({}, labels, { tenant }));
  const at = <L extends Record<string, string>>(labels: L, e: { tenant: string }): L => withTenant(labels, tenantOf ? tenantOf.of(e.tenant) : null);
  const reads = new client.Counter({ name: `${p}reads_total`, help: 'Memory reads by result: the top item was a relevant slot (slot) or a relevant logbook entry (logbook), nothing relevant was found (miss), or the store could not be read and the handler ran with empty memory (degraded).', labelNames: tl(['result']), registers });
  const writes = new client.Counter({ name: `${p}writes_total`, help: 'Slot writes by outcome: new slot (allocated), replaced a value (overwritten), strengthened a slot (reinforced). Gated-out candidates are not writes: see candidates_total.', labelNames: tl(['outcome']), registers });
  const candidates = new client.Counter({ name: `${p}candidates_total`, help: 'Extracted candidates by the write gate\'s decision: passed (went on to a write) or gated_out (kept in the logbook only).', labelNames: tl(['decision']), registers });
  const evictions = new client.Counter({ name: `${p}evictions_total`, help: 'Slots that left working memory, by reason.', labelNames: tl(['reason']), registers });
  const demoted = new client.Counter({ name: `${p}logbook_demoted_total`, help: 'Values that left working memory for the logbook (demoted), by reason: superseded by a newer value, or evicted for capacity, decay or age.', labelNames: tl(['reason']), registers });
  const readDuration = new client.Histogram({ name: `${p}read_duration_seconds`, help: 'Time of one memory read (store load and logbook search), embedding included.', buckets, registers });
  const commitDuration = new client.Histogram({ name: `${p}commit_duration_seconds`, help: 'Time of one commit of a turn\'s memory write: extract, gate, plan and the store\'s commit, conflict retries included.', buckets, registers });
  const turnDuration = new client.Histogram({ name: `${p}turn_duration_seconds`, help: 'Time of one chat turn over HTTP, request in to last byte of the reply out (the bot\'s own time included).', buckets: [...TURN_BUCKETS_SECONDS], registers });
  const embedDuration = new client.Histogram({ name: `${p}embed_duration_seconds`, help: 'Time spent embedding, by stage (read query or write candidates).', labelNames: ['stage'], buckets: [...EMBED_BUCKETS_SECONDS], registers });
  const occupancy = new client.Histogram({ name: `${p}slot_occupancy_ratio`, help: 'Fraction of a session\'s slots in use, observed at each read and commit.', buckets: [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1], registers });
  const topWeight = new client.Histogram({ name: `${p}attention_top_weight`, help: 'Largest attention weight of a read (1 = one slot took all the attention).', buckets: [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1], registers });
  // Entropy of k weights is at most ln k; ln 64 ≈ 4.16 for the default capacity.
  const entropy = new client.Histogram({ name: `${p}attention_entropy_nats`, help: 'Shannon entropy (nats) of a read\'s slot attention weights (0 = focused, ln n = uniform).', buckets: [0.05, 0.1, 0.25, 0.5, 0.75, 1, 1.5, 2, 2.5, 3, 3.5, 4, 4.5], registers });
  const gateScore = new client.Histogram({ name: `${p}write_gate_score`, help: 'Write-gate salience score of each candidate.', buckets: [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1], registers });
  // The unit is in the name: turns by default, seconds when the instance decays in seconds.
  const lifetimeClock = new client.Histogram({
    name: lifetimeUnit === 'turns' ? `${p}evicted_slot_lifetime_turns` : `${p}evicted_slot_lifetime_clock_seconds`,
    help: `Lifetime of slots that left working memory, in ${lifetimeUnit === 'turns' ? 'turns of their session' : 'seconds of session clock'}. Evicted slots only: live slots are not in it (biased short); see store survival in retention().`,
    buckets: [1, 2, 4, 8, 16, 32, 64, 128, 256, 512, 1024],
    registers,
  });
  const lifetimeSeconds = new client.Histogram({ name: `${p}evicted_slot_lifetime_seconds`, help: 'Wall-clock lifetime of slots that left working memory (evicted slots only, biased short).', buckets: [1, 10, 60, 300, 900, 3600, 14400, 86400, 604800], registers });
  const retries = new client.Counter({ name: `${p}commit_conflict_retries_total`, help: 'Commits redone because another writer committed first.', registers });
  const storeErrors = new client.Counter({ name: `${p}store_errors_total`, help: 'Store failures and conflicts that surfaced as errors, by error code.', labelNames: ['code'], registers });
  const errors = new client.Counter({ name: `${p}errors_total`, help: 'Errors emitted, by stage and error code.', labelNames: ['stage', 'code'], registers });
  const degraded = new client.Counter({ name: `${p}degraded_total`, help: 'Store failures met by a turn, by stage: read (answered with empty memory) and write (queued in the outbox; equals outbox_changes_total{change="queued"}).', labelNames: ['stage'], registers });
  const outboxChanges = new client.Counter({ name: `${p}outbox_changes_total`, help: 'Pending-write outbox changes: queued, drained (committed later), overflow (refused), retry (queued again after a conflict or failure), erased (accepted before an erase; not stored), expired (waited past outbox.maxAgeMs), failed (refused for good by the store), abandoned (still queued when close() ran out of time).', labelNames: ['change'], registers });
  const active = new client.Gauge({
    name: `${p}process_active_sessions`,
    help: `Sessions this process served in the last ${o.activeWindowMs / 1000} s. Per process: behind a load balancer one session reaches several processes, so do not sum it; the fleet's figure is store_sessions.`,
    registers,
    collect() {
      prune();
      this.set(sessions.size);
    },
  });
  const outbox = new client.Gauge({
    name: `${p}outbox_depth`,
    help: 'Writes waiting in this process\'s outbox for the store (per process; sums across a fleet).',
    registers,
    collect() {
      this.set(typeof tm.outboxDepth === 'number' ? tm.outboxDepth : outboxDepth);
    },
  });
  const version = packageVersion();
  const buildInfo = new client.Gauge({ name: `${p}build_info`, help: 'Always 1; labels: the tidemark version and the store kind.', labelNames: ['version', 'store'], registers });
  buildInfo.set({ version, store: store?.name ?? 'unknown' }, 1);
  const all: Array<{ name: string }> = [reads, writes, candidates, evictions, demoted, readDuration, commitDuration, turnDuration, embedDuration, occupancy, topWeight, entropy, gateScore, lifetimeClock, lifetimeSeconds, retries, storeErrors, errors, degraded, outboxChanges, active, outbox, buildInfo] as unknown as Array<{ name: string }>;

  if (health) {
    all.push(new client.Gauge({
      name: `${p}store_up`,
      help: 'Whether the store answers (1) or not (0), from a probe every 250 ms and from the turns themselves. Absent until the first answer.',
      registers,
      collect() {
        const s = health.state;
        if (s.up !== null) this.set(s.up ? 1 : 0);
      },
    }) as unknown as { name: string });
    all.push(new client.Gauge({
      name: `${p}store_last_success_timestamp_seconds`,
      help: 'Unix time the store last answered this process (a probe, a read or a commit).',
      registers,
      collect() {
        const s = health.state;
        if (s.lastSuccessMs !== null) this.set(s.lastSuccessMs / 1000);
      },
    }) as unknown as { name: string });
  }
  if (store?.stats && o.storeFigures) {
    // One stats() call per scrape serves all three gauges; the figure is the store's, the same from
    // every process: aggregate with max(), never sum.
    let pending: Promise<void> | null = null;
    let figures: { sessions: number; slots: number; logbookEntries: number; counters?: Record<string, number> } | null = null;
    const refresh = (): Promise<void> =>
      (pending ??= store.stats!(tm.tenant ?? 'default').then(
        (f) => void (figures = f),
        () => void (figures = null),
      ).finally(() => setImmediate(() => (pending = null))));
    const figure = (name: string, help: string, pick: (f: NonNullable<typeof figures>) => number) =>
      new client.Gauge({
        name: `${p}${name}`,
        help,
        registers,
        async collect() {
          await refresh();
          if (figures) this.set(pick(figures));
          else unset(this);
        },
      }) as unknown as { name: string };
    all.push(figure('store_sessions', 'Sessions of this tenant holding state in the store (the store\'s own count: the same from every process, aggregate with max()).', (f) => f.sessions));
    all.push(figure('store_slots', 'Slots in use over every session in the store (the store\'s own count; aggregate with max()).', (f) => f.slots));
    all.push(figure('store_logbook_entries', 'Long-term (logbook) entries over every scope in the store (the store\'s own count; aggregate with max()).', (f) => f.logbookEntries));
    // Slot survival counts the commits keep in the store (src/metrics/survival.ts): per lifetime
    // interval, slots that reached its lower bound and slots whose lifetime ended inside it. Live and
    // erased slots are in the first only (right-censored), so a Kaplan–Meier estimate over the fleet
    // is a PromQL product (see the tidemark:slot_survival:* rules). Absent where the store keeps no
    // counters (Redis Cluster).
    const unit: SurvivalUnit = lifetimeUnit === 'seconds' ? 'seconds' : 'turns';
    const survivalCounter = (name: string, help: string, prefix: string) =>
      new client.Counter({
        name: `${p}${name}`,
        help,
        labelNames: ['age', 'unit'],
        registers,
        async collect() {
          await refresh();
          this.reset();
          if (!figures?.counters) return;
          for (const b of SURVIVAL_BOUNDS[unit]) this.inc({ age: String(b), unit }, figures.counters[`${prefix}${b}`] ?? 0);
        },
      }) as unknown as { name: string };
    all.push(survivalCounter('store_slot_age_reached_total', `Slots that lived to at least \`age\` (in \`unit\` of their session clock): at risk in the lifetime interval starting there. The store's own count: aggregate with max().`, SURVIVAL_FIELD.reached));
    all.push(survivalCounter('store_slot_lifetime_ended_total', `Slots whose lifetime ended (evicted for capacity, decay or age; an erase is censored, not an end) in the interval starting at \`age\`. The store's own count: aggregate with max().`, SURVIVAL_FIELD.ended));
  }
  const sizing = options.sessionBytes === false ? null : { sample: 20, intervalMs: 60_000, ...options.sessionBytes };
  if (sizing && (!Number.isInteger(sizing.sample) || sizing.sample < 1 || sizing.sample > 1000 || !(sizing.intervalMs >= 1000))) {
    throw new ConfigError('metrics: sessionBytes needs sample an integer 1–1000 and intervalMs ≥ 1000', { details: { option: 'sessionBytes', value: options.sessionBytes } });
  }
  if (store?.sampleSessionBytes && sizing) {
    // A slow, bounded sample: at most `sample` sessions every `intervalMs`, whatever the scrape rate.
    let sampled: { atMs: number; bytes: number[] } | null = null;
    let sampling: Promise<void> | null = null;
    const resample = (): Promise<void> => {
      if (sampled && Date.now() - sampled.atMs < sizing.intervalMs) return Promise.resolve();
      return (sampling ??= store.sampleSessionBytes!(tm.tenant ?? 'default', sizing.sample).then(
        (bytes) => void (sampled = { atMs: Date.now(), bytes }),
        () => void (sampled = null),
      ).finally(() => (sampling = null)));
    };
    all.push(new client.Gauge({
      name: `${p}store_sampled_session_bytes`,
      help: `Mean bytes a session takes in the store, over a random sample of up to ${sizing.sample} sessions taken every ${sizing.intervalMs / 1000} s (Redis: MEMORY USAGE of its keys; in-process: an estimate). The store's figure: aggregate with max().`,
      registers,
      async collect() {
        await resample();
        const b = sampled?.bytes ?? [];
        if (b.length > 0) this.set(b.reduce((x, y) => x + y, 0) / b.length);
        else unset(this);
      },
    }) as unknown as { name: string });
    all.push(new client.Gauge({
      name: `${p}store_sampled_sessions`,
      help: 'Sessions in the latest bytes-per-session sample (fewer than asked when the tenant has fewer).',
      registers,
      async collect() {
        await resample();
        this.set(sampled?.bytes.length ?? 0);
      },
    }) as unknown as { name: string });
  }
  if (o.processMetrics) {
    const before = new Set(registry.getMetricsAsArray().map((m) => m.name));
    client.collectDefaultMetrics({ register: registry });
    for (const m of registry.getMetricsAsArray()) {
      if (before.has(m.name)) continue;
      // prom-client 15 names three gauges `nodejs_active_*_total`, which `promtool check metrics`
      // rejects (a `_total` suffix belongs to counters): they are left out.
      if (m.name.endsWith('_total') && (m as unknown as { type?: string }).type !== 'counter') registry.removeSingleMetric(m.name);
      else all.push({ name: m.name });
    }
  }

  // Zero-initialise every labelled series so dashboards and increase() see them from the first scrape.
  for (const t of tenantValues) {
    for (const r of [...READ_RESULTS, 'degraded']) reads.inc(withTenant({ result: r }, t), 0);
    for (const w of WRITE_OUTCOMES) writes.inc(withTenant({ outcome: w }, t), 0);
    for (const d of ['passed', 'gated_out']) candidates.inc(withTenant({ decision: d }, t), 0);
    for (const r of EVICT_REASONS) evictions.inc(withTenant({ reason: r }, t), 0);
    for (const r of DEMOTE_REASONS) demoted.inc(withTenant({ reason: r }, t), 0);
  }
  for (const s of ['read', 'write']) degraded.inc({ stage: s }, 0);
  for (const c of OUTBOX_CHANGE_LABELS) outboxChanges.inc({ change: c }, 0);
  for (const stage of ERROR_STAGES) for (const code of [...KNOWN_CODES, 'other']) errors.inc({ stage, code }, 0);
  for (const code of KNOWN_CODES) if (code.startsWith('TIDEMARK_E_STORE_')) storeErrors.inc({ code }, 0);

  const unsubscribe = subscribe(tm, {
    read(e) {
      reads.inc(at({ result: READ_RESULTS.includes(e.result) ? e.result : 'miss' }, e));
      readDuration.observe(e.durationUs / 1e6);
      embedDuration.observe({ stage: 'read' }, e.embedUs / 1e6);
      if (e.capacity > 0) occupancy.observe(e.slotsInUse / e.capacity);
      if (e.slotItems > 0) {
        topWeight.observe(e.topWeight);
        entropy.observe(e.entropy);
      }
      touch(e.sessionHash, e.atMs);
    },
    write(e) {
      if (WRITE_OUTCOMES.includes(e.outcome)) writes.inc(at({ outcome: e.outcome }, e));
      touch(e.sessionHash, e.atMs);
    },
    gate(e) {
      gateScore.observe(e.score);
      candidates.inc(at({ decision: e.passed ? 'passed' : 'gated_out' }, e));
    },
    evict(e) {
      if (EVICT_REASONS.includes(e.reason)) evictions.inc(at({ reason: e.reason }, e));
      lifetimeClock.observe(e.lifetime);
      lifetimeSeconds.observe(e.lifetimeMs / 1000);
    },
    sweep(e) {
      // Slots the retention sweep deleted left working memory as `expired`, like those a commit expires.
      if (e.slots > 0) evictions.inc({ reason: 'expired' }, e.slots);
    },
    demote(e) {
      if (DEMOTE_REASONS.includes(e.reason)) demoted.inc(at({ reason: e.reason }, e));
    },
    commit(e) {
      commitDuration.observe(e.durationUs / 1e6);
      embedDuration.observe({ stage: 'write' }, e.embedUs / 1e6);
      if (e.capacity > 0) occupancy.observe(e.slotsInUse / e.capacity);
      if (e.retries > 0) retries.inc(e.retries);
      touch(e.sessionHash, e.atMs);
    },
    degraded(e) {
      // A degraded read is a read: counted once under reads_total{result="degraded"} and here. A degraded
      // write is counted from the outbox's `queued` (below), so the two figures cannot drift apart.
      if (e.stage === 'read') {
        reads.inc(at({ result: 'degraded' }, e));
        degraded.inc({ stage: 'read' });
        touch(e.sessionHash, e.atMs);
      }
    },
    outbox(e) {
      outboxDepth = e.depth;
      outboxChanges.inc({ change: e.change });
      if (e.change === 'queued') degraded.inc({ stage: 'write' });
    },
    error(e) {
      const code = codeLabel((e.error as Partial<TidemarkError> | undefined)?.code);
      const stage = (ERROR_STAGES as readonly string[]).includes(e.stage) ? e.stage : 'other';
      errors.inc({ stage, code });
      if (code.startsWith('TIDEMARK_E_STORE_')) storeErrors.inc({ code });
    },
  });

  return {
    registry,
    contentType: registry.contentType,
    metrics: () => registry.metrics(),
    recordTurn(seconds) {
      if (Number.isFinite(seconds) && seconds >= 0) turnDuration.observe(seconds);
    },
    stop() {
      unsubscribe();
      for (const m of all) registry.removeSingleMetric(m.name);
    },
  };
}
