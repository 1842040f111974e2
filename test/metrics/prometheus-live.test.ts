// The shipped rules and dashboard definition against a real Prometheus (Debian package `prometheus`)
// on loopback: a free port, a temp dir, a 1 s scrape of two `tidemark serve` processes on one Redis of
// our own. Every rule must evaluate without error, every recording rule and every dashboard query must
// parse and return data.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { ThrowawayRedis, freePort } from '../adapters/redis/helpers.js';
import { TURNS, chat, startServe, waitFor, type ServeProc } from '../adapters/http/serve-procs.js';

const PROMETHEUS = '/usr/bin/prometheus';
const RULES = fileURLToPath(new URL('../../ops/prometheus/tidemark-rules.yml', import.meta.url));
const DASHBOARD = fileURLToPath(new URL('../../ops/dashboards/tidemark-fleet.json', import.meta.url));
const run = existsSync(PROMETHEUS) || process.env.CI === 'true' ? describe : describe.skip;

interface PromResult {
  status: string;
  error?: string;
  data: { resultType: string; result: unknown[] };
}

run('rules and dashboard queries on a real Prometheus scraping two serve processes', () => {
  let redis: ThrowawayRedis;
  let procs: ServeProc[] = [];
  let prom: ChildProcess | undefined;
  let promUrl = '';
  let dir = '';

  const query = async (expr: string): Promise<PromResult> =>
    (await (await fetch(`${promUrl}/api/v1/query?query=${encodeURIComponent(expr)}`)).json()) as PromResult;

  beforeAll(async () => {
    redis = new ThrowawayRedis();
    await redis.start();
    procs = await Promise.all([
      startServe(['--redis', redis.url, '--instance', 'nursery-a'], { TIDEMARK_SECRET: 'live-test-secret-0123456789' }),
      startServe(['--redis', redis.url, '--instance', 'nursery-b'], { TIDEMARK_SECRET: 'live-test-secret-0123456789' }),
    ]);
    dir = mkdtempSync(join(tmpdir(), 'tidemark-prom-'));
    const port = await freePort();
    promUrl = `http://127.0.0.1:${port}`;
    const targets = procs.map((p) => new URL(p.url).host);
    writeFileSync(join(dir, 'prometheus.yml'), [
      'global:',
      '  scrape_interval: 1s',
      '  evaluation_interval: 1s',
      'rule_files:',
      `  - ${JSON.stringify(RULES)}`,
      'scrape_configs:',
      '  - job_name: tidemark',
      '    static_configs:',
      `      - targets: ${JSON.stringify(targets)}`,
      '',
    ].join('\n'));
    prom = spawn(PROMETHEUS, [`--config.file=${join(dir, 'prometheus.yml')}`, `--storage.tsdb.path=${join(dir, 'data')}`, `--web.listen-address=127.0.0.1:${port}`], { stdio: 'ignore' });
    await waitFor(async () => (await fetch(`${promUrl}/-/ready`)).ok, 30_000, 200);
  }, 120_000);

  afterAll(async () => {
    if (prom && prom.exitCode === null) {
      const exited = new Promise((r) => prom!.once('exit', r));
      prom.kill('SIGTERM');
      await exited;
    }
    await Promise.all(procs.map((p) => p.stop()));
    await redis?.stop();
    if (dir) rmSync(dir, { recursive: true, force: true });
  }, 60_000);

  it('scrapes both processes; every rule evaluates, every recording rule and dashboard query returns data', async () => {
    // Traffic on both, while Prometheus collects at least a few samples of every counter.
    let i = 0;
    const turn = () => chat(procs[i % 2]!.url, `plant-${i % 5}`, TURNS[i++ % TURNS.length]!);
    for (let k = 0; k < 12; k++) await turn();
    await waitFor(async () => {
      await turn();
      const up = await query('sum(up{job="tidemark"})');
      const rate = await query('tidemark:reads_all:rate5m');
      return Number((up.data.result[0] as { value: [number, string] } | undefined)?.value[1]) === 2 && rate.data.result.length === 1;
    }, 30_000, 250);
    for (let k = 0; k < 4; k++) await turn();
    await new Promise((r) => setTimeout(r, 2_500)); // two more evaluations of every rule

    const rules = (await (await fetch(`${promUrl}/api/v1/rules`)).json()) as {
      data: { groups: Array<{ name: string; rules: Array<{ type: string; name: string; query: string; health: string; lastError?: string }> }> };
    };
    const all = rules.data.groups.flatMap((g) => g.rules);
    expect(all).toHaveLength(35);
    for (const r of all) expect({ rule: r.name, health: r.health, lastError: r.lastError ?? '' }).toEqual({ rule: r.name, health: 'ok', lastError: '' });
    const reachedAges = new Set(
      ((await query('max by (age) (tidemark_store_slot_age_reached_total) > 0')).data.result as Array<{ metric: { age: string } }>).map((x) => x.metric.age),
    );
    expect(reachedAges.has('0')).toBe(true);
    for (const r of all) {
      const res = await query(r.query);
      expect({ rule: r.name, status: res.status, error: res.error }).toEqual({ rule: r.name, status: 'success', error: undefined });
      // A survival ratio has data exactly where some slot reached its age (Kaplan–Meier is undefined past the last one).
      const age = r.name === 'tidemark:slot_survival:ratio' ? /"age", "(\d+)"/.exec(r.query)?.[1] : undefined;
      const want = age === undefined || reachedAges.has(age);
      if (r.type === 'recording') expect({ rule: r.name, age, samples: res.data.result.length > 0 }).toEqual({ rule: r.name, age, samples: want });
    }

    const dash = JSON.parse(readFileSync(DASHBOARD, 'utf8')) as { panels: Array<{ title: string; targets: Array<{ expr: string }> }> };
    const exprs = dash.panels.flatMap((p) => p.targets.map((t) => ({ panel: p.title, expr: t.expr })));
    expect(exprs.length).toBeGreaterThanOrEqual(20);
    for (const { panel, expr } of exprs) {
      const res = await query(expr);
      expect({ panel, expr, status: res.status, samples: res.data?.result.length > 0 }).toEqual({ panel, expr, status: 'success', samples: true });
    }

    // Fleet figures: both instances scraped, the store's figures the same from both.
    const perInstance = await query('count by (instance) (tidemark_build_info)');
    expect(perInstance.data.result).toHaveLength(2);
    const spread = await query('max(tidemark_store_sessions) - min(tidemark_store_sessions)');
    expect(Number((spread.data.result[0] as { value: [number, string] }).value[1])).toBe(0);
  }, 120_000);
});
