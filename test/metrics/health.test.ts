// Store health: the probe on its timer (fake timers, no wall clock), its time limits, the events of the
// real middleware moving the answer, and what a listener is told.

import { afterEach, describe, expect, it, vi } from 'vitest';
import { ErrorCodes, StoreError } from '../../src/errors.js';
import { StoreHealth, type StoreHealthState } from '../../src/metrics/health.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import { ControlledStore } from '../middleware/helpers.js';

afterEach(() => {
  vi.useRealTimers();
});

/** A store whose ping answers, fails or hangs as the test says, counting the probes. */
class ProbedStore extends InProcessStore {
  pings = 0;
  answer: 'ok' | 'fail' | 'hang' = 'ok';
  failWith: unknown = new StoreError(ErrorCodes.STORE_UNAVAILABLE, 'connection refused (test)');
  override ping(): Promise<void> {
    this.pings++;
    if (this.answer === 'ok') return Promise.resolve();
    if (this.answer === 'fail') return Promise.reject(this.failWith);
    return new Promise(() => {});
  }
}

const flush = async (): Promise<void> => {
  for (let i = 0; i < 5; i++) await Promise.resolve();
};

describe('StoreHealth', () => {
  it('refuses a non-positive or non-finite interval or limit, naming the option', () => {
    const store = new InProcessStore();
    for (const option of ['intervalMs', 'timeoutMs', 'firstTimeoutMs'] as const) {
      for (const bad of [0, -1, Number.NaN, Number.POSITIVE_INFINITY]) {
        expect(() => new StoreHealth(store, { [option]: bad })).toThrow(expect.objectContaining({ code: ErrorCodes.CONFIG, details: { option, value: bad } }));
      }
    }
    expect(() => new StoreHealth(store, { intervalMs: 0.5, timeoutMs: 0.5, firstTimeoutMs: 0.5 })).not.toThrow();
  });

  it('is unknown until the first probe answers, then up, with the time it answered', async () => {
    const store = new ProbedStore();
    let clock = 1_000;
    const h = new StoreHealth(store, { now: () => clock });
    expect(h.state).toEqual({ store: 'memory', up: null, sinceMs: 1_000, lastSuccessMs: null, cause: null });
    clock = 1_250;
    await h.start();
    expect(h.state).toEqual({ store: 'memory', up: true, sinceMs: 1_250, lastSuccessMs: 1_250, cause: null });
    expect(store.pings).toBe(1);
    // A copy: changing it changes nothing.
    (h.state as { up: boolean }).up = false;
    expect(h.state.up).toBe(true);
    h.stop();
  });

  it('probes every intervalMs until stopped, and never two probes at once', async () => {
    vi.useFakeTimers();
    const store = new ProbedStore();
    const h = new StoreHealth(store, { intervalMs: 100, timeoutMs: 1_000 });
    const timersBefore = vi.getTimerCount();
    await h.start();
    expect(store.pings).toBe(1);
    expect((h as unknown as { timer: NodeJS.Timeout }).timer.hasRef()).toBe(false);
    // An answered probe leaves no limit timer behind: only the interval is pending.
    await flush();
    expect(vi.getTimerCount()).toBe(timersBefore + 1);
    await vi.advanceTimersByTimeAsync(99);
    expect(store.pings).toBe(1);
    await vi.advanceTimersByTimeAsync(1);
    expect(store.pings).toBe(2);
    // A probe that hangs: the ticks while it is out send no other probe.
    store.answer = 'hang';
    await vi.advanceTimersByTimeAsync(100);
    expect(store.pings).toBe(3);
    await vi.advanceTimersByTimeAsync(500);
    expect(store.pings).toBe(3);
    expect(h.state.up).toBe(true);
    // Its limit is timeoutMs once the store has answered.
    await vi.advanceTimersByTimeAsync(500);
    expect(h.state.up).toBe(false);
    expect(h.state.cause).toBe('no answer within 1000 ms');
    h.stop();
    // The probe timer does not keep the process alive.
    expect((h as unknown as { timer?: NodeJS.Timeout }).timer).toBeUndefined();
    const n = store.pings;
    await vi.advanceTimersByTimeAsync(1_000);
    expect(store.pings).toBe(n);
  });

  it('gives the first probe firstTimeoutMs before it counts as down', async () => {
    vi.useFakeTimers();
    const store = new ProbedStore();
    store.answer = 'hang';
    const h = new StoreHealth(store, { intervalMs: 10_000, timeoutMs: 100, firstTimeoutMs: 3_000 });
    const first = h.start();
    await vi.advanceTimersByTimeAsync(2_999);
    expect(h.state.up).toBeNull();
    await vi.advanceTimersByTimeAsync(1);
    await first;
    expect(h.state).toMatchObject({ up: false, cause: 'no answer within 3000 ms', lastSuccessMs: null });
    h.stop();
  });

  it('names the failure by code and message, or by the thrown value, at most 300 characters', async () => {
    const store = new ProbedStore();
    store.answer = 'fail';
    const h = new StoreHealth(store);
    await h.start();
    expect(h.state.cause).toBe(`${ErrorCodes.STORE_UNAVAILABLE}: connection refused (test)`);
    h.stop();
    for (const [thrown, cause] of [
      [new Error('plain'), 'plain'],
      ['a string', 'a string'],
      [{ code: 42, message: 'numeric code' }, 'numeric code'],
      [new Error('x'.repeat(400)), 'x'.repeat(300)],
    ] as const) {
      const s = new ProbedStore();
      s.answer = 'fail';
      s.failWith = thrown;
      const g = new StoreHealth(s);
      await g.start();
      expect(g.state.cause).toBe(cause);
      g.stop();
    }
  });

  it('uses listSessions as the probe when the store has no ping', async () => {
    const store = new InProcessStore();
    const calls: Array<[string, number | undefined]> = [];
    const list = store.listSessions.bind(store);
    store.listSessions = (tenant, limit) => (calls.push([tenant, limit]), list(tenant, limit));
    (store as { ping?: unknown }).ping = undefined;
    const h = new StoreHealth(store);
    await h.start();
    expect(calls).toEqual([['default', 1]]);
    expect(h.state.up).toBe(true);
    h.stop();
  });

  it('follows the instance: a degraded turn marks it down at once, a read that reached the store marks it up', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    let clock = 5_000;
    const h = new StoreHealth(store, { intervalMs: 60_000, now: () => clock });
    const changes: Array<[StoreHealthState, StoreHealthState]> = [];
    const off = h.onChange((now, before) => changes.push([now, before]));
    await h.start(tm);
    await h.start(tm); // a second start subscribes and probes nothing more
    expect(changes).toHaveLength(1);
    expect(changes[0]![1].up).toBeNull();
    expect(changes[0]![0].up).toBe(true);

    clock = 6_000;
    store.failLoad = true;
    await tm.read({ session: 'w', text: 'Is my bike ready?' });
    expect(h.state).toMatchObject({ up: false, sinceMs: 6_000, lastSuccessMs: 5_000 });
    expect(h.state.cause).toMatch(/^TIDEMARK_E_STORE_\w+: a read could not reach the store$/);
    // Still down: no second change for a second degraded read.
    await tm.read({ session: 'w', text: 'Is my bike ready?' });
    expect(changes).toHaveLength(2);
    expect(changes[1]![1]).toMatchObject({ up: true, sinceMs: 5_000 });

    clock = 7_000;
    store.failLoad = false;
    await tm.read({ session: 'w', text: 'Is my bike ready?' });
    expect(h.state).toEqual({ store: 'controlled', up: true, sinceMs: 7_000, lastSuccessMs: 7_000, cause: null });
    expect(changes).toHaveLength(3);
    // A commit that reached the store moves lastSuccessMs without a change of state.
    clock = 8_000;
    await tm.write({ session: 'w', text: 'My bike is a green tourer.', role: 'user' });
    expect(h.state).toMatchObject({ up: true, sinceMs: 7_000, lastSuccessMs: 8_000 });
    expect(changes).toHaveLength(3);

    off();
    store.failLoad = true;
    await tm.read({ session: 'w', text: 'Is my bike ready?' });
    expect(h.state.up).toBe(false);
    expect(changes).toHaveLength(3);
    // After stop() the instance's events no longer reach it.
    h.stop();
    store.failLoad = false;
    await tm.read({ session: 'w', text: 'Is my bike ready?' });
    expect(h.state.up).toBe(false);
    await tm.close();
  });
});
