// Fixed-rate (open-loop) load: turn n is due at start + n / rate, whatever happened to earlier turns,
// and its latency runs from that due time to its commit. A turn that had to wait — for the event
// loop, for its session's previous turn, for a free in-flight place — has the wait in its latency,
// so a stall shows in the tail instead of silently lowering the offered rate ("coordinated
// omission", G. Tene, "How NOT to Measure Latency", 2015). Histograms are HdrHistogram
// (hdr-histogram-js), so processes of a fleet can send theirs and be merged exactly.

import * as hdr from 'hdr-histogram-js';
import type { Tidemark, WrapContext, WrapInput } from '../../src/middleware/tidemark.js';
import { scripts, words } from '../load.js';

/** µs, 1 µs to 1 hour, 3 significant digits. */
export const newHistogram = (): hdr.Histogram => hdr.build({ lowestDiscernibleValue: 1, highestTrackableValue: 3_600_000_000, numberOfSignificantValueDigits: 3 });

export const encodeHistogram = (h: hdr.Histogram): string => hdr.encodeIntoCompressedBase64(h);
export const decodeHistogram = (s: string): hdr.Histogram => hdr.decodeFromCompressedBase64(s, 'packed', false);

export interface Percentiles {
  count: number;
  p50_ms: number;
  p99_ms: number;
  p999_ms: number;
  max_ms: number;
}

const ms = (us: number): number => Math.round(us) / 1000;
export const percentiles = (h: hdr.Histogram): Percentiles => ({
  count: h.totalCount,
  p50_ms: ms(h.getValueAtPercentile(50)),
  p99_ms: ms(h.getValueAtPercentile(99)),
  p999_ms: ms(h.getValueAtPercentile(99.9)),
  max_ms: ms(h.maxValue),
});

export interface FixedRateOptions {
  /** Turns per second offered by the whole fleet (this process takes its share). */
  rate: number;
  seconds: number;
  /** Sessions the turns go round (the conversation pool). */
  activeSessions: number;
  /** Sessions per user (0: no user id, so each session is its own logbook scope). */
  userSessions: number;
  /** Seconds per reporting window. */
  windowSeconds: number;
  /** Turns started but not committed, at most; later due turns wait (and the wait is timed). */
  maxInFlight: number;
  /**
   * This process's share of a fleet: turn n goes to session n % activeSessions and to process
   * floor(n / activeSessions) % of, so each round over the sessions moves to the next process and
   * every session's consecutive turns come from different processes.
   */
  index: number;
  of: number;
  tenant: string;
  /** Untimed turns on sessions of their own before the schedule starts (JIT, connections). @default 0 */
  warmup?: number;
  /** Called after the warm-up; returns the wall-clock (epoch ms) of the first due turn, shared by a fleet. Default: 50 ms from then. */
  ready?: () => Promise<number>;
}

/** What one process measured; histograms encoded so a parent can merge them. */
export interface FixedRateResult {
  offered_per_s: number;
  scheduled: number;
  completed: number;
  errors: number;
  /** Error events by stage and code (a turn may raise more than one). */
  error_codes: Record<string, number>;
  conflict_retries: number;
  seconds: number;
  /** Completed turns over the time from the first due turn to the last commit. */
  achieved_per_s: number;
  /** Latest start of a turn after its due time (ms): how far the driver itself fell behind. */
  max_start_lag_ms: number;
  histogram: string;
  /** Latency of the turns due in each window. */
  windows: string[];
  /** Turns committed in each window (by commit time; may run past the schedule's end). */
  done_per_window: number[];
}

/**
 * Runs the schedule on `tm`, whose store is set up by the caller; turns of one session run one at a
 * time in this process (a user waits for the reply), so a session's later turn waits for its earlier one.
 */
export async function runFixedRate(tm: Tidemark, o: FixedRateOptions): Promise<FixedRateResult> {
  const convo = scripts(Math.min(o.activeSessions, 64), 50, 7);
  const total = Math.floor(o.rate * o.seconds);
  const overall = newHistogram();
  const windows: hdr.Histogram[] = Array.from({ length: Math.ceil(o.seconds / o.windowSeconds) }, newHistogram);
  const pending = new Map<string, (ok: boolean) => void>();
  let errors = 0;
  let retries = 0;
  const onCommit = (e: { sessionHash?: string; retries: number }): void => {
    retries += e.retries;
    settle(e.sessionHash, true);
  };
  const errorCodes: Record<string, number> = {};
  const onError = (e: { stage: string; sessionHash?: string; error: { code: string; message: string } }): void => {
    const k = `${e.stage} ${e.error.code}${/timed out/i.test(e.error.message) ? ' (timed out)' : ''}`;
    errorCodes[k] = (errorCodes[k] ?? 0) + 1;
    if (e.stage === 'write' || e.stage === 'outbox') settle(e.sessionHash, false);
  };
  const settle = (hash: string | undefined, ok: boolean): void => {
    const f = hash === undefined ? undefined : pending.get(hash);
    if (f) {
      pending.delete(hash!);
      f(ok);
    }
  };
  tm.on('commit', onCommit);
  tm.on('error', onError);
  const wrapped = tm.wrap((input: WrapInput, _ctx: WrapContext) => words(input.reply as string));

  const chains = new Map<string, Promise<void>>();
  const turnsOf = new Map<string, number>();
  let inFlight = 0;
  const waiting: Array<() => void> = [];
  let completed = 0;
  let lastDone = 0;
  let maxLag = 0;
  const donePerWindow: number[] = [];
  const warm = o.warmup ?? 0;
  if (warm > 0) {
    let next = 0;
    await Promise.all(
      Array.from({ length: 16 }, async (_, w) => {
        while (next < warm) {
          const n = next++;
          const sc = convo[n % convo.length]!;
          const t = Math.floor(n / 16);
          const input: WrapInput = { session: `warm${o.index}-${w}`, text: sc.user[t % sc.user.length]!, reply: sc.reply[t % sc.reply.length]! };
          for await (const _chunk of await wrapped(input)) {
            // consumed
          }
        }
      }),
    );
    await tm.flush();
  }
  const startAt = o.ready ? await o.ready() : Date.now() + 50;
  const t0 = performance.now() + (startAt - Date.now());

  const oneTurn = async (n: number, due: number): Promise<void> => {
    if (inFlight >= o.maxInFlight) await new Promise<void>((r) => waiting.push(r));
    inFlight++;
    const i = n % o.activeSessions;
    const session = `s${i}`;
    const hash = tm.hashSession(o.tenant, session);
    const t = turnsOf.get(session) ?? 0;
    turnsOf.set(session, t + 1);
    const sc = convo[i % convo.length]!;
    maxLag = Math.max(maxLag, performance.now() - due);
    const done = new Promise<boolean>((r) => pending.set(hash, r));
    let ok = false;
    try {
      const input: WrapInput = { session, text: sc.user[t % sc.user.length]!, reply: sc.reply[t % sc.reply.length]! };
      if (o.userSessions > 0) input.user = `u${Math.floor(i / o.userSessions)}`;
      for await (const _chunk of await wrapped(input)) {
        // consumed as a client would
      }
      ok = await done;
    } catch {
      pending.delete(hash);
    }
    inFlight--;
    waiting.shift()?.();
    const end = performance.now();
    if (!ok) {
      errors++;
      return;
    }
    completed++;
    const dw = Math.floor((end - t0) / 1000 / o.windowSeconds);
    if (dw >= 0) donePerWindow[dw] = (donePerWindow[dw] ?? 0) + 1;
    lastDone = Math.max(lastDone, end);
    const us = Math.max(1, (end - due) * 1000);
    overall.recordValue(us);
    windows[Math.min(windows.length - 1, Math.floor((due - t0) / 1000 / o.windowSeconds))]!.recordValue(us);
  };

  const all: Promise<void>[] = [];
  let scheduled = 0;
  for (let n = 0; n < total; n++) {
    if (Math.floor(n / o.activeSessions) % o.of !== o.index) continue;
    const due = t0 + (n / o.rate) * 1000;
    const wait = due - performance.now();
    if (wait > 1) await new Promise((r) => setTimeout(r, wait));
    const session = `s${n % o.activeSessions}`;
    const run = (chains.get(session) ?? Promise.resolve()).then(() => oneTurn(n, due));
    chains.set(session, run);
    all.push(run);
    scheduled++;
  }
  await Promise.all(all);
  tm.off('commit', onCommit);
  tm.off('error', onError);
  const seconds = Math.max(1e-3, (lastDone - t0) / 1000);
  return {
    offered_per_s: o.rate / o.of,
    scheduled,
    completed,
    errors,
    error_codes: errorCodes,
    conflict_retries: retries,
    seconds: Math.round(seconds * 1000) / 1000,
    achieved_per_s: Math.round(completed / seconds),
    max_start_lag_ms: Math.round(maxLag * 10) / 10,
    histogram: encodeHistogram(overall),
    windows: windows.map(encodeHistogram),
    done_per_window: Array.from(donePerWindow, (x) => x ?? 0),
  };
}

/** Merges the results of a fleet's processes: histograms added (never percentiles averaged). */
export function mergeResults(parts: readonly FixedRateResult[], windowSeconds: number): {
  offered_per_s: number;
  scheduled: number;
  completed: number;
  errors: number;
  error_codes: Record<string, number>;
  conflict_retries: number;
  achieved_per_s: number;
  max_start_lag_ms: number;
  latency: Percentiles;
  /** Per window: latency of the turns due in it, and turns committed in it over the window's length. */
  windows: Array<{ t_s: number } & Percentiles & { achieved_per_s: number }>;
} {
  const overall = newHistogram();
  for (const p of parts) overall.add(decodeHistogram(p.histogram));
  const n = Math.max(...parts.map((p) => p.windows.length));
  const windows = Array.from({ length: n }, (_, w) => {
    const h = newHistogram();
    for (const p of parts) if (p.windows[w]) h.add(decodeHistogram(p.windows[w]!));
    const done = parts.reduce((a, p) => a + (p.done_per_window?.[w] ?? 0), 0);
    return { t_s: w * windowSeconds, ...percentiles(h), achieved_per_s: Math.round(done / windowSeconds) };
  });
  const completed = parts.reduce((a, p) => a + p.completed, 0);
  const seconds = Math.max(...parts.map((p) => p.seconds));
  return {
    offered_per_s: parts.reduce((a, p) => a + p.offered_per_s, 0),
    scheduled: parts.reduce((a, p) => a + p.scheduled, 0),
    completed,
    errors: parts.reduce((a, p) => a + p.errors, 0),
    error_codes: parts.reduce<Record<string, number>>((a, p) => {
      for (const [k, v] of Object.entries(p.error_codes ?? {})) a[k] = (a[k] ?? 0) + v;
      return a;
    }, {}),
    conflict_retries: parts.reduce((a, p) => a + p.conflict_retries, 0),
    achieved_per_s: Math.round(completed / seconds),
    max_start_lag_ms: Math.max(...parts.map((p) => p.max_start_lag_ms)),
    latency: percentiles(overall),
    windows,
  };
}
