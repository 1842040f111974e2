// The fleet view: when several processes share one store, each publishes its dashboard buckets to
// the store (one small record per process, kept for the window) and every dashboard draws their sum,
// with a row per process. Truth figures (sessions, slots, logbook entries) come from the store's own
// counters, not from any process's cache. A restarted process takes its published buckets back, so
// the history survives the restart. One snapshot is built per tick and shared by every reader.

import type { Store, StoreStats } from '../store/store.js';
import { FLEET_COLUMNS, type DashboardCollector, type DashboardSnapshot, type FleetInstance, type LatencyKind, type OutboxChange, type ReadKind } from './collector.js';
import type { StoreHealth } from './health.js';

export interface FleetViewOptions {
  /** This process's name in the fleet (shown in the page's header); stable across restarts to keep its history. */
  instance: string;
  store: Store;
  /** The tenant whose figures and fleet records the view reads. @default 'default' */
  tenant?: string;
  collector: DashboardCollector;
  health?: StoreHealth;
  /** Writes waiting in this process's outbox. */
  outboxDepth?: () => number;
  /** A process not heard from for this long is shown as gone (its buckets still count). @default 10000 */
  liveMs?: number;
}

/** What one process publishes. */
interface FleetPayload {
  v: 1;
  bucketMs: number;
  rows: number[][];
  outboxDepth: number;
  storeUp: boolean | null;
}

const col = (name: string): number => FLEET_COLUMNS.indexOf(name);
const READS: readonly ReadKind[] = ['slot', 'logbook', 'miss', 'degraded'];
const WRITES = ['allocated', 'overwritten', 'reinforced', 'gated_out'] as const;
const EVICTS = ['capacity', 'decayed', 'expired', 'erased'] as const;
const OUTBOX: readonly OutboxChange[] = ['queued', 'drained', 'overflow'];
const LATENCY: readonly LatencyKind[] = ['read', 'write', 'turn'];

export class FleetView {
  private readonly o: Required<Omit<FleetViewOptions, 'health' | 'outboxDepth'>> & Pick<FleetViewOptions, 'health' | 'outboxDepth'>;
  private seeded = false;
  /** Other processes' records as last read, so an outage keeps showing them. */
  private last: Array<{ instance: string; atMs: number; payload: FleetPayload }> = [];
  private lastFigures: (StoreStats & { atMs: number }) | null = null;
  private building: Promise<DashboardSnapshot> | null = null;
  private latest: DashboardSnapshot | null = null;

  constructor(options: FleetViewOptions) {
    this.o = { liveMs: 10_000, tenant: 'default', ...options };
  }

  private timer: NodeJS.Timeout | undefined;

  get instance(): string {
    return this.o.instance;
  }

  /**
   * Publishes this process's buckets every `intervalMs` whether or not anyone watches, so the other
   * processes' dashboards (and this one's after a restart) have them.
   */
  start(intervalMs: number): void {
    if (this.timer) return;
    this.timer = setInterval(() => void this.publish().catch(() => undefined), intervalMs);
    this.timer.unref();
  }

  stop(): void {
    if (this.timer) clearInterval(this.timer);
    this.timer = undefined;
  }

  /** Writes this process's record to the store (skipped while the store is known to be down). */
  async publish(nowMs = Date.now()): Promise<FleetPayload> {
    const { store, collector, instance } = this.o;
    const health = this.o.health?.state ?? null;
    await this.seed();
    const own: FleetPayload = { v: 1, bucketMs: collector.bucketMs, rows: collector.exportBuckets(nowMs), outboxDepth: this.o.outboxDepth?.() ?? 0, storeUp: health?.up ?? null };
    if (health?.up !== false && store.putFleet) await store.putFleet(this.o.tenant, instance, JSON.stringify(own), collector.windowMs);
    return own;
  }

  /** Takes back what this instance published before a restart (once). */
  private async seed(): Promise<void> {
    const { store, collector, instance } = this.o;
    if (this.seeded || this.o.health?.state.up === false || !store.listFleet) return;
    try {
      const mine = (await store.listFleet(this.o.tenant)).find((r) => r.instance === instance);
      if (mine) collector.importBuckets((JSON.parse(mine.payload) as FleetPayload).rows ?? []);
      this.seeded = true;
    } catch {
      // The store is not answering; try again next time.
    }
  }

  /**
   * The snapshot for `nowMs`, built at most once per `maxAgeMs`: callers within that time (every open
   * tab, `/dashboard/data`) share one build.
   */
  shared(maxAgeMs: number, nowMs = Date.now()): Promise<DashboardSnapshot> {
    // A change of store health since the last build is news the page must not wait a tick for.
    const changed = this.o.health !== undefined && this.latest !== null && this.o.health.state.sinceMs > this.latest.atMs;
    if (this.latest && nowMs - this.latest.atMs < maxAgeMs && !changed) return Promise.resolve(this.latest);
    return (this.building ??= this.build(nowMs).finally(() => (this.building = null)));
  }

  /** Builds a fresh snapshot: publish, read the fleet and the store's figures, merge. */
  async build(nowMs = Date.now()): Promise<DashboardSnapshot> {
    const { store, collector, instance } = this.o;
    const health = this.o.health?.state ?? null;
    const reachable = health?.up !== false;
    await this.seed();
    const snap = collector.snapshot(nowMs);
    let own: FleetPayload = { v: 1, bucketMs: collector.bucketMs, rows: collector.exportBuckets(nowMs), outboxDepth: this.o.outboxDepth?.() ?? 0, storeUp: health?.up ?? null };
    if (reachable && store.putFleet && store.listFleet) {
      try {
        own = await this.publish(nowMs);
        const records = await store.listFleet(this.o.tenant);
        this.last = [];
        for (const r of records) {
          if (r.instance === instance) continue;
          try {
            const payload = JSON.parse(r.payload) as FleetPayload;
            if (payload.v === 1 && payload.bucketMs === collector.bucketMs && Array.isArray(payload.rows)) this.last.push({ instance: r.instance, atMs: r.atMs, payload });
          } catch {
            // A record another version wrote; left out.
          }
        }
      } catch {
        // Keep the last list: an outage should not make the other processes vanish from the page.
      }
    }
    if (reachable && store.stats) {
      try {
        this.lastFigures = { ...(await store.stats(this.o.tenant)), atMs: nowMs };
      } catch {
        // Shown as unknown below.
      }
    }
    const merged = this.merge(snap, own, nowMs);
    merged.instance = instance;
    merged.figures = this.lastFigures && reachable ? { sessions: this.lastFigures.sessions, slots: this.lastFigures.slots, logbookEntries: this.lastFigures.logbookEntries, source: this.lastFigures.source } : null;
    if (health) merged.store = { ...health, downForMs: health.up === false ? Math.max(0, nowMs - health.sinceMs) : null };
    this.latest = merged;
    return merged;
  }

  /** Adds the other processes' buckets into this process's series and builds the per-instance rows. */
  private merge(snap: DashboardSnapshot, own: FleetPayload, nowMs: number): DashboardSnapshot {
    const bucketMs = snap.bucketMs;
    const index = new Map<number, number>();
    snap.t.forEach((t, i) => index.set(Math.floor(t / bucketMs), i));
    const rows: FleetInstance[] = [this.row(this.o.instance, nowMs, own, true)];
    for (const other of this.last) {
      rows.push(this.row(other.instance, other.atMs, other.payload, nowMs - other.atMs < this.o.liveMs));
      for (const r of other.payload.rows) {
        const i = index.get(r[0]!);
        if (i === undefined) continue;
        for (const k of READS) {
          snap.reads[k][i]! += r[col(`reads.${k}`)]!;
          snap.totals.reads[k] += r[col(`reads.${k}`)]!;
        }
        for (const k of WRITES) {
          snap.writes[k][i]! += r[col(`writes.${k}`)]!;
          snap.totals.writes[k] += r[col(`writes.${k}`)]!;
        }
        for (const k of EVICTS) {
          snap.evictions[k][i]! += r[col(`evictions.${k}`)]!;
          snap.totals.evictions[k] += r[col(`evictions.${k}`)]!;
        }
        for (const k of OUTBOX) {
          snap.outbox[k][i]! += r[col(`outbox.${k}`)]!;
          snap.totals.outbox[k] += r[col(`outbox.${k}`)]!;
        }
        // Percentiles do not add up: the fleet's p95 line is the worst process's p95 in each bucket.
        for (const k of LATENCY) {
          const us = r[col(`p95us.${k}`)]!;
          const cur = snap.latency[k].p95[i];
          if (us >= 0 && (cur === null || cur === undefined || us / 1000 > cur)) snap.latency[k].p95[i] = us / 1000;
        }
      }
    }
    const t = snap.totals.reads;
    const all = t.slot + t.logbook + t.miss + t.degraded;
    snap.totals.hitRatio = all > 0 ? (t.slot + t.logbook) / all : null;
    snap.fleet = rows.sort((a, b) => (a.instance < b.instance ? -1 : a.instance > b.instance ? 1 : 0));
    return snap;
  }

  private row(instance: string, atMs: number, p: FleetPayload, live: boolean): FleetInstance {
    let reads = 0;
    let hits = 0;
    let degraded = 0;
    let writes = 0;
    let worst = -1;
    for (const r of p.rows) {
      for (const k of READS) reads += r[col(`reads.${k}`)]!;
      hits += r[col('reads.slot')]! + r[col('reads.logbook')]!;
      degraded += r[col('reads.degraded')]!;
      writes += r[col('writes.allocated')]! + r[col('writes.overwritten')]! + r[col('writes.reinforced')]!;
      worst = Math.max(worst, r[col('p95us.turn')]!);
    }
    return { instance, live, lastSeenMs: atMs, reads, hits, degraded, writes, outboxDepth: p.outboxDepth, storeUp: p.storeUp, turnP95: worst >= 0 ? worst / 1000 : null };
  }
}
