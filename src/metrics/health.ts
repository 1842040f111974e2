// Is the store reachable? One answer per process, shared by `/readyz`, the `tidemark_store_up` gauge,
// the dashboard's outage banner and `serve`'s logs. It probes the store on a timer (a PING on Redis)
// and also listens to the instance: a degraded read or a queued write marks it down at once, a read or
// commit that reached the store marks it up, so traffic moves the answer faster than the probe.

import { ConfigError } from '../errors.js';
import type { Store } from '../store/store.js';
import { subscribe, type TidemarkEventSource } from './source.js';

export interface StoreHealthOptions {
  /** Time between probes. 250 ms keeps `/readyz` within 1 s of a change (a probe, plus its timeout). @default 250 */
  intervalMs?: number;
  /** A probe slower than this counts as a failure. @default 500 */
  timeoutMs?: number;
  /**
   * The first probe's limit: it may have to wait for the connection itself (Redis: `connectTimeout`,
   * 1 s, plus a slow start). A refused connection still fails it at once. @default 3000
   */
  firstTimeoutMs?: number;
  /** Clock, for tests. @default Date.now */
  now?: () => number;
}

export const STORE_HEALTH_DEFAULTS = { intervalMs: 250, timeoutMs: 500, firstTimeoutMs: 3000 } as const;

export interface StoreHealthState {
  /** The store's short name (`memory`, `redis`, `cluster`). */
  store: string;
  /** null until the first probe or event answered. */
  up: boolean | null;
  /** When `up` last changed (ms), or when the monitor started. */
  sinceMs: number;
  /** The last time the store answered (ms), null if never. */
  lastSuccessMs: number | null;
  /** Why it is down: the error's code and message (no message text of users ever reaches a store error). */
  cause: string | null;
}

export type HealthListener = (now: StoreHealthState, before: StoreHealthState) => void;

/** The probe: `store.ping()` when the store has one, else a one-session list (every store has it). */
function probeOf(store: Store): () => Promise<unknown> {
  return store.ping ? () => store.ping!() : () => store.listSessions('default', 1);
}

function describeError(err: unknown): string {
  const e = err as { code?: unknown; message?: unknown };
  const code = typeof e?.code === 'string' ? `${e.code}: ` : '';
  return `${code}${typeof e?.message === 'string' ? e.message : String(err)}`.slice(0, 300);
}

export class StoreHealth {
  private s: StoreHealthState;
  private readonly o: Required<Omit<StoreHealthOptions, 'now'>>;
  private readonly now: () => number;
  private readonly probe: () => Promise<unknown>;
  private readonly listeners = new Set<HealthListener>();
  private timer: NodeJS.Timeout | undefined;
  private inFlight = false;
  private detach: (() => void) | undefined;
  private firstAnswer: Promise<void>;
  private resolveFirst!: () => void;

  constructor(store: Store, options: StoreHealthOptions = {}) {
    const o = { ...STORE_HEALTH_DEFAULTS, ...options };
    for (const name of ['intervalMs', 'timeoutMs', 'firstTimeoutMs'] as const) {
      if (!Number.isFinite(o[name]) || o[name] <= 0) {
        throw new ConfigError(`store health: ${name} must be a positive number of ms, got ${String(o[name])}`, { details: { option: name, value: o[name] } });
      }
    }
    this.o = { intervalMs: o.intervalMs, timeoutMs: o.timeoutMs, firstTimeoutMs: o.firstTimeoutMs };
    this.now = options.now ?? Date.now;
    this.probe = probeOf(store);
    this.s = { store: store.name, up: null, sinceMs: this.now(), lastSuccessMs: null, cause: null };
    this.firstAnswer = new Promise((r) => (this.resolveFirst = r));
  }

  get state(): StoreHealthState {
    return { ...this.s };
  }

  /** Calls `fn` on every change of `up` (including the first answer); returns the unsubscribe. */
  onChange(fn: HealthListener): () => void {
    this.listeners.add(fn);
    return () => this.listeners.delete(fn);
  }

  /** Starts probing and follows the instance's events; resolves after the first probe answered. */
  start(source?: TidemarkEventSource): Promise<void> {
    if (source && !this.detach) {
      this.detach = subscribe(source, {
        read: () => this.succeeded(),
        commit: () => this.succeeded(),
        degraded: (e) => this.failed(`${e.code}: a ${e.stage} could not reach the store`),
      });
    }
    if (!this.timer) {
      this.timer = setInterval(() => void this.check(), this.o.intervalMs);
      this.timer.unref();
      void this.check();
    }
    return this.firstAnswer;
  }

  stop(): void {
    if (this.timer) clearInterval(this.timer);
    this.timer = undefined;
    this.detach?.();
    this.detach = undefined;
  }

  /** Probes once now (skipped while a probe is still out). */
  async check(): Promise<void> {
    if (this.inFlight) return;
    this.inFlight = true;
    let timer: NodeJS.Timeout | undefined;
    const limit = this.s.up === null ? this.o.firstTimeoutMs : this.o.timeoutMs;
    try {
      await Promise.race([
        this.probe(),
        new Promise((_, reject) => {
          timer = setTimeout(() => reject(new Error(`no answer within ${limit} ms`)), limit);
        }),
      ]);
      this.succeeded();
    } catch (err) {
      this.failed(describeError(err));
    } finally {
      clearTimeout(timer);
      this.inFlight = false;
    }
  }

  private succeeded(): void {
    const now = this.now();
    this.s.lastSuccessMs = now;
    if (this.s.up !== true) this.change(true, null, now);
  }

  private failed(cause: string): void {
    if (this.s.up !== false) this.change(false, cause, this.now());
  }

  private change(up: boolean, cause: string | null, now: number): void {
    const before = { ...this.s };
    this.s = { ...this.s, up, cause, sinceMs: now };
    this.resolveFirst();
    for (const fn of this.listeners) fn(this.state, before);
  }
}
