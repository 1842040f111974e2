// The fleet view on one shared store: two real middleware instances (as two processes would be), each
// with its own collector, publish their buckets; each dashboard shows their sum, a row per process,
// the worst p95 per bucket, the store's own figures, and takes its history back after a restart.

import { afterEach, describe, expect, it, vi } from 'vitest';
import { DashboardCollector } from '../../src/metrics/collector.js';
import { FleetView } from '../../src/metrics/fleet.js';
import { StoreHealth } from '../../src/metrics/health.js';
import { createTidemark, type Tidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';

const T0 = 1_700_000_000_000; // a 5 s bucket boundary

afterEach(() => {
  vi.useRealTimers();
});

interface Process {
  tm: Tidemark;
  collector: DashboardCollector;
  view: FleetView;
}

function process(store: InProcessStore, instance: string, extra: { outboxDepth?: () => number; health?: StoreHealth; liveMs?: number } = {}): Process {
  const tm = createTidemark({ store, capacity: 4 });
  const collector = new DashboardCollector({ bucketMs: 5_000, windowMs: 30_000 });
  collector.attach(tm);
  const view = new FleetView({ instance, store, collector, ...extra });
  return { tm, collector, view };
}

describe('FleetView', () => {
  it('sums the processes\' buckets, keeps a row per process and the worst p95 of each bucket', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    vi.setSystemTime(T0 + 100);
    const store = new InProcessStore();
    const a = process(store, 'alpha', { outboxDepth: () => 3 });
    const b = process(store, 'beta');
    await a.tm.read({ session: 'n1', text: 'When is my fern delivery?' });
    await a.tm.write({ session: 'n1', text: 'My name is Ilse.', role: 'user' });
    await a.tm.read({ session: 'n1', text: 'What is my name?' });
    a.collector.recordTurn(1_000, T0 + 100);
    vi.setSystemTime(T0 + 5_100);
    await b.tm.read({ session: 'w1', text: 'Is my bike ready?' });
    await b.tm.read({ session: 'w2', text: 'Is my bike ready?' });
    await b.tm.write({ session: 'w2', text: 'My bike is a green tourer.', role: 'user' });
    b.collector.recordTurn(8_000, T0 + 5_100);
    b.collector.recordTurn(500, T0 + 100); // below alpha's 1 ms in the first bucket
    a.collector.recordTurn(2_000, T0 + 5_200);
    await b.view.publish(T0 + 5_200);

    vi.setSystemTime(T0 + 9_000);
    const s = await a.view.build(T0 + 9_999);
    expect(s.instance).toBe('alpha');
    const last2 = (xs: number[]): number[] => xs.slice(-2);
    expect(last2(s.reads.miss)).toEqual([1, 2]);
    expect(last2(s.reads.slot)).toEqual([1, 0]);
    expect(s.totals.reads.miss).toBe(3);
    expect(s.totals.writes.allocated).toBe(2);
    expect(s.totals.hitRatio).toBeCloseTo(1 / 4, 12);
    // The p95 line: the worse of the two processes in each bucket (8 ms from beta in the second).
    // (Histograms keep 3 significant digits: 8,000 µs reads back as 8.003 ms.)
    const [p0, p1] = last2(s.latency.turn.p95 as number[]);
    expect(p0).toBeCloseTo(1, 2);
    expect(p1).toBeCloseTo(8, 1);
    expect(s.fleet!.map((r) => [r.instance, r.live, r.reads, r.hits, r.writes, r.outboxDepth, Math.round(r.turnP95!)])).toEqual([
      ['alpha', true, 2, 1, 1, 3, 2],
      ['beta', true, 2, 0, 1, 0, 8],
    ]);
    // The store's own figures: three sessions hold state (n1 wrote; reads create none).
    const stats = await store.stats('default');
    expect(s.figures).toEqual({ sessions: stats.sessions, slots: stats.slots, logbookEntries: stats.logbookEntries, source: stats.source });
    expect(s.store).toBeUndefined();
    await a.tm.close();
    await b.tm.close();
  });

  it('shows a process not heard from within liveMs as gone, its buckets still counted', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    vi.setSystemTime(T0 + 100);
    const store = new InProcessStore();
    const a = process(store, 'alpha', { liveMs: 2_000 });
    const b = process(store, 'beta');
    await b.tm.read({ session: 'w1', text: 'Is my bike ready?' });
    await b.view.publish(T0 + 100);
    vi.setSystemTime(T0 + 2_099);
    expect((await a.view.build(T0 + 2_099)).fleet!.find((r) => r.instance === 'beta')!.live).toBe(true);
    vi.setSystemTime(T0 + 2_100);
    const s = await a.view.build(T0 + 2_100);
    expect(s.fleet!.find((r) => r.instance === 'beta')!.live).toBe(false);
    expect(s.totals.reads.miss).toBe(1);
    await a.tm.close();
    await b.tm.close();
  });

  it('leaves out records of another version, another bucket width or broken JSON', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    vi.setSystemTime(T0 + 100);
    const store = new InProcessStore();
    const a = process(store, 'alpha');
    // Columns: bucket, reads slot/logbook/miss/degraded, writes ×4, evictions ×4, outbox ×3, p95 µs read/write/turn.
    const row = [T0 / 5_000, 1, 2, 7, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, -1, -1, 5_000];
    const later = [T0 / 5_000 + 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, -1, -1, 3_000];
    await store.putFleet('default', 'v2', JSON.stringify({ v: 2, bucketMs: 5_000, rows: [row], outboxDepth: 0, storeUp: true }), 60_000);
    await store.putFleet('default', 'wide', JSON.stringify({ v: 1, bucketMs: 10_000, rows: [row], outboxDepth: 0, storeUp: true }), 60_000);
    await store.putFleet('default', 'norows', JSON.stringify({ v: 1, bucketMs: 5_000, rows: 'x', outboxDepth: 0, storeUp: true }), 60_000);
    await store.putFleet('default', 'broken', '{not json', 60_000);
    await store.putFleet('default', 'good', JSON.stringify({ v: 1, bucketMs: 5_000, rows: [row, later], outboxDepth: 1, storeUp: true }), 60_000);
    const s = await a.view.build(T0 + 9_999);
    expect(s.fleet!.map((r) => r.instance)).toEqual(['alpha', 'good']);
    expect(s.totals.reads.miss).toBe(7);
    // Its row: 10 reads, 3 of them hits (slot and logbook), the worst turn p95 of its buckets; alpha had no turns.
    expect(s.fleet!.map((r) => [r.reads, r.hits, r.turnP95])).toEqual([[0, 0, null], [10, 3, 5]]);
    // Past the window its buckets no longer count, though its record is still in the store.
    const out = await a.view.build(T0 + 60_000);
    expect(out.totals.reads.miss).toBe(0);
    expect(out.fleet!.map((r) => r.instance)).toEqual(['alpha', 'good']);
    await a.tm.close();
  });

  it('takes its published buckets back after a restart, once', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    vi.setSystemTime(T0 + 100);
    const store = new InProcessStore();
    const before = process(store, 'alpha');
    for (let i = 0; i < 3; i++) await before.tm.read({ session: `n${i}`, text: 'When is my fern delivery?' });
    await before.view.publish(T0 + 200);
    await before.tm.close();
    // The same instance name in a new process: its first build takes the rows back.
    const after = process(store, 'alpha');
    await after.tm.read({ session: 'n9', text: 'When is my fern delivery?' }); // a later bucket
    vi.setSystemTime(T0 + 5_100);
    await after.tm.read({ session: 'n9', text: 'Hello?' });
    const s = await after.view.build(T0 + 5_200);
    // Bucket 0 already had a read of the new process, so it is not overwritten; nothing is counted twice.
    expect(s.totals.reads.miss).toBe(2);
    const fresh = process(store, 'alpha');
    let lists = 0;
    const list = store.listFleet.bind(store);
    store.listFleet = (tenant) => (lists++, list(tenant));
    const t = await fresh.view.build(T0 + 5_200);
    expect(t.totals.reads.miss).toBe(2);
    // The first build reads the records twice (its own history, then the fleet); later builds once: no second import.
    expect(lists).toBe(2);
    expect((await fresh.view.build(T0 + 5_200)).totals.reads.miss).toBe(2);
    expect(lists).toBe(3);
    await after.tm.close();
    await fresh.tm.close();
  });

  it('while the store is down: publishes nothing, keeps the last list of processes, shows no figures', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    vi.setSystemTime(T0 + 100);
    const store = new InProcessStore();
    let clock = T0 + 100;
    const health = new StoreHealth(store, { intervalMs: 60_000, now: () => clock });
    await health.start();
    const a = process(store, 'alpha', { health });
    const b = process(store, 'beta');
    await b.tm.read({ session: 'w1', text: 'Is my bike ready?' });
    await b.view.publish(T0 + 100);
    expect((await a.view.build(T0 + 200)).fleet!.map((r) => r.instance)).toEqual(['alpha', 'beta']);
    let puts = 0;
    const put = store.putFleet.bind(store);
    store.putFleet = (...args) => (puts++, put(...args));
    store.ping = () => Promise.reject(new Error('down (test)'));
    clock = T0 + 1_000;
    await health.check();
    const s = await a.view.build(T0 + 3_000);
    expect(puts).toBe(0);
    expect(s.fleet!.map((r) => r.instance)).toEqual(['alpha', 'beta']);
    expect(s.figures).toBeNull();
    expect(s.store).toMatchObject({ up: false, downForMs: 2_000 });
    await a.view.publish(T0 + 3_000);
    expect(puts).toBe(0);
    health.stop();
    await a.tm.close();
    await b.tm.close();
  });

  it('shares one snapshot per maxAgeMs between callers, and builds again at once when the store health changed', async () => {
    const store = new InProcessStore();
    let clock = T0;
    const health = new StoreHealth(store, { intervalMs: 60_000, now: () => clock });
    await health.start();
    const a = process(store, 'alpha', { health });
    const [x, y] = await Promise.all([a.view.shared(1_000, T0), a.view.shared(1_000, T0)]);
    expect(x).toBe(y);
    expect(await a.view.shared(1_000, T0 + 999)).toBe(x);
    const z = await a.view.shared(1_000, T0 + 1_000);
    expect(z).not.toBe(x);
    expect(z.atMs).toBe(T0 + 1_000);
    expect(z.store).toMatchObject({ up: true, downForMs: null });
    // The store goes down after that build: the next caller gets a new snapshot within maxAgeMs.
    clock = T0 + 1_100;
    store.ping = () => Promise.reject(new Error('down (test)'));
    await health.check();
    const w = await a.view.shared(1_000, T0 + 1_200);
    expect(w).not.toBe(z);
    expect(w.store?.up).toBe(false);
    health.stop();
    await a.tm.close();
  });

  it('publishes on its own unref\'d timer until stopped', async () => {
    vi.useFakeTimers();
    const store = new InProcessStore();
    const a = process(store, 'alpha');
    let puts = 0;
    const put = store.putFleet.bind(store);
    store.putFleet = (...args) => (puts++, put(...args));
    a.view.start(1_000);
    a.view.start(1_000); // a second start adds no second timer
    expect((a.view as unknown as { timer: NodeJS.Timeout }).timer.hasRef()).toBe(false);
    await vi.advanceTimersByTimeAsync(3_000);
    expect(puts).toBe(3);
    a.view.stop();
    await vi.advanceTimersByTimeAsync(3_000);
    expect(puts).toBe(3);
    await a.tm.close();
  });
});
