// The operator's outage, end to end: two `tidemark serve` processes on one Redis of our own (never the
// one on 6379) with a shared secret, chat traffic, Redis killed and started again. Checks what an
// operator relies on: /readyz, tidemark_store_up, degraded reads counted, the fleet on the dashboard
// with the store's own slot count and an outage flag, one log line at each end of the outage, and one
// hash per session across the processes.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import parsePrometheusTextFormat from 'parse-prometheus-text-format';
import type { DashboardSnapshot } from '../../../src/metrics/collector.js';
import { ThrowawayRedis, newClient, scanKeys } from '../redis/helpers.js';
import { TURNS, chat, startServe, waitFor, type ServeProc } from './serve-procs.js';

const SECRET = 'fleet-test-secret-0123456789';
const hasRedisServer = (() => {
  try {
    require('node:child_process').execFileSync('redis-server', ['--version'], { stdio: 'ignore' });
    return true;
  } catch {
    return false;
  }
})();
const run = hasRedisServer || process.env.CI === 'true' ? describe : describe.skip;

async function metric(url: string, name: string, labels: Record<string, string> = {}): Promise<number> {
  const text = await (await fetch(`${url}/metrics`)).text();
  const fam = parsePrometheusTextFormat(text).find((f) => f.name === name);
  const sample = fam?.metrics.find((m) => Object.entries(labels).every(([k, v]) => m.labels?.[k] === v));
  if (!sample) throw new Error(`no ${name}${JSON.stringify(labels)} at ${url}`);
  return Number(sample.value);
}

async function data(url: string): Promise<DashboardSnapshot> {
  return (await (await fetch(`${url}/dashboard/data`)).json()) as DashboardSnapshot;
}

const status = async (url: string, path: string): Promise<number> => (await fetch(`${url}${path}`)).status;

run('two serve processes on one Redis through an outage', () => {
  let redis: ThrowawayRedis;
  let a: ServeProc;
  let b: ServeProc;

  beforeAll(async () => {
    redis = new ThrowawayRedis();
    await redis.start();
    [a, b] = await Promise.all([
      startServe(['--redis', redis.url, '--instance', 'bikes-a', '--capacity', '8'], { TIDEMARK_SECRET: SECRET }),
      startServe(['--redis', redis.url, '--instance', 'bikes-b', '--capacity', '8'], { TIDEMARK_SECRET: SECRET }),
    ]);
  }, 90_000);

  afterAll(async () => {
    await Promise.all([a?.stop(), b?.stop()]);
    await redis?.stop();
  }, 60_000);

  it('says not-ready within 1 s of the stop and ready within 2 s of the return; counts and logs the outage; shows the fleet', async () => {
    // Traffic, round-robin over both processes; one session is the busiest on both.
    for (let i = 0; i < 32; i++) {
      const session = i % 4 < 2 ? 'bk-shared' : `bk-${i % 6}`;
      await chat(i % 2 === 0 ? a.url : b.url, session, TURNS[i % TURNS.length]!);
    }
    expect(await status(a.url, '/readyz')).toBe(200);
    expect(await status(b.url, '/readyz')).toBe(200);
    expect(await metric(a.url, 'tidemark_store_up')).toBe(1);
    expect(await metric(b.url, 'tidemark_store_up')).toBe(1);
    // The same session has the same keyed hash on both processes (shared secret).
    const [da, db] = await Promise.all([data(a.url), data(b.url)]);
    expect(da.busiest[0]!.session).toMatch(/^[0-9a-f]{12}$/);
    expect(db.busiest[0]!.session).toBe(da.busiest[0]!.session);

    // The outage: SIGKILL, as a crashed host looks to clients.
    const t0 = performance.now();
    await redis.kill();
    await Promise.all([
      waitFor(async () => (await status(a.url, '/readyz')) === 503, 3_000),
      waitFor(async () => (await status(b.url, '/readyz')) === 503, 3_000),
    ]);
    const notReadyMs = performance.now() - t0;
    expect(notReadyMs).toBeLessThanOrEqual(1_000);
    const why = (await (await fetch(`${a.url}/readyz`)).json()) as { ready: boolean; reason: string; store: string };
    expect(why).toMatchObject({ ready: false, store: 'redis' });
    expect(why.reason).toMatch(/store redis is unreachable/);

    const degradedBefore = (await metric(a.url, 'tidemark_reads_total', { result: 'degraded' })) + (await metric(b.url, 'tidemark_reads_total', { result: 'degraded' }));
    const OUTAGE_TURNS = 6;
    for (let i = 0; i < OUTAGE_TURNS; i++) await chat(i % 2 === 0 ? a.url : b.url, `bk-${i}`, TURNS[i]!);
    const degradedAfter = (await metric(a.url, 'tidemark_reads_total', { result: 'degraded' })) + (await metric(b.url, 'tidemark_reads_total', { result: 'degraded' }));
    expect(degradedAfter - degradedBefore).toBe(OUTAGE_TURNS);
    expect(await metric(a.url, 'tidemark_store_up')).toBe(0);
    expect(await metric(b.url, 'tidemark_store_up')).toBe(0);
    const during = await data(a.url);
    expect(during.store).toMatchObject({ up: false, store: 'redis' });
    expect(during.store!.downForMs).toBeGreaterThanOrEqual(0);
    expect(during.totals.reads.degraded).toBeGreaterThan(0);

    // Back: the same port, the same append-only file.
    await redis.start();
    const t1 = performance.now();
    await Promise.all([
      waitFor(async () => (await status(a.url, '/readyz')) === 200, 5_000),
      waitFor(async () => (await status(b.url, '/readyz')) === 200, 5_000),
    ]);
    expect(performance.now() - t1).toBeLessThanOrEqual(2_000);
    expect(await metric(a.url, 'tidemark_store_up')).toBe(1);
    expect(await metric(b.url, 'tidemark_store_up')).toBe(1);

    // One line at the start of the outage and one at its end, on each process.
    for (const p of [a, b]) {
      await waitFor(async () => p.logs.some((l) => l.event === 'store_up'), 2_000);
      expect(p.logs.filter((l) => l.event === "store_down"), JSON.stringify(p.logs)).toHaveLength(1);
      expect(p.logs.filter((l) => l.event === 'store_up')).toHaveLength(1);
      expect(Number(p.logs.find((l) => l.event === 'store_up')!.downMs)).toBeGreaterThan(0);
      const text = JSON.stringify(p.logs);
      expect(text).not.toContain(SECRET);
      expect(text).not.toContain('bk-shared');
    }

    // The fleet: both instances, and slots alive equal to what Redis holds, once the outboxes drained.
    const client = newClient(redis.url);
    try {
      await waitFor(async () => {
        const s = await data(b.url);
        const slotKeys = await scanKeys(client, 'tidemark:{*}:slots');
        let slots = 0;
        for (const k of slotKeys) slots += await client.hlen(k);
        const reads = s.fleet!.reduce((n, f) => n + f.reads, 0);
        // Each process publishes once a tick: wait until both records carry every turn.
        return s.fleet!.every((f) => f.outboxDepth === 0) && reads === 32 + OUTAGE_TURNS && s.figures?.slots === slots && s.store?.up === true;
      }, 10_000, 200).catch(async (err) => {
        const s = await data(b.url);
        throw new Error(`${(err as Error).message}; last: ${JSON.stringify({ fleet: s.fleet, figures: s.figures, store: s.store, reads: s.totals.reads })}`);
      });
      const after = await data(b.url);
      expect(after.instance).toBe('bikes-b');
      expect(after.fleet!.map((f) => f.instance)).toEqual(['bikes-a', 'bikes-b']);
      expect(after.fleet!.every((f) => f.live)).toBe(true);
      // The fleet's series are the sum of both processes' own.
      const [ra, rb] = [after.fleet!.find((f) => f.instance === 'bikes-a')!, after.fleet!.find((f) => f.instance === 'bikes-b')!];
      const t = after.totals.reads;
      expect(t.slot + t.logbook + t.miss + t.degraded).toBe(ra.reads + rb.reads);
      expect(ra.reads + rb.reads).toBe(32 + OUTAGE_TURNS);
      expect(ra.degraded + rb.degraded).toBe(OUTAGE_TURNS);
      expect(after.figures!.sessions).toBe((await scanKeys(client, 'tidemark:{*}:meta')).length);
    } finally {
      client.disconnect();
    }
    // Store-kept figures read alike from both processes: slot survival counts and sampled session size.
    const reached = await metric(a.url, 'tidemark_store_slot_age_reached_total', { age: '0', unit: 'turns' });
    expect(reached).toBeGreaterThan(0);
    expect(await metric(b.url, 'tidemark_store_slot_age_reached_total', { age: '0', unit: 'turns' })).toBe(reached);
    expect(await metric(a.url, 'tidemark_store_sampled_session_bytes')).toBeGreaterThan(0);
    // The outbox drained after the return, and said so.
    expect([...a.logs, ...b.logs].some((l) => l.event === 'outbox_drained')).toBe(true);
  }, 120_000);
});
