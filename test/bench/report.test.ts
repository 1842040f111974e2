// `bench report` in a real browser: the page made from one results file of each kind renders in
// Debian's Chromium (playwright-core) without console errors or network requests, and every chart
// holds data points. Needs /usr/bin/chromium: `bash scripts/ensure-chromium.sh`.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { chromium, type Browser } from 'playwright-core';
import { charts, renderReport, type ResultDoc } from '../../bench/report.js';

const CHROMIUM = '/usr/bin/chromium';
const ARTIFACTS = fileURLToPath(new URL('../artifacts/', import.meta.url));
const run = existsSync(CHROMIUM) || process.env.CI === 'true' ? describe : describe.skip;

// Results documents shaped as the benchmarks write them (figures made up for the test).
const windows = [0, 5, 10].map((t, i) => ({ t_s: t, count: 500, p50_ms: 2 + i, p99_ms: 20 + i, p999_ms: 40 + i, max_ms: 50, achieved_per_s: 100 }));
const rate = (offered: number, date: string, store = 'redis'): ResultDoc => ({
  name: `load-rate-${store}`, date, command: 'npm run bench -- load --rate', store, processes: 1, offered_per_s: offered, achieved_per_s: offered * 0.98,
  latency: { count: 1000, p50_ms: 2, p99_ms: offered / 10, p999_ms: offered / 5, max_ms: 90 }, windows, redis_per_turn: { commands: 17, cpu_us: 200, net_in_bytes: 1500, net_out_bytes: 400 },
  meta: { git_commit: 'abc123def456', git_dirty: false, node: 'v20', redis: ['7.0.15'], machine: { cpus: 2, cpu: 'test cpu' }, load: [1, 1, 1] },
});
const docs: ResultDoc[] = [
  rate(100, '2026-01-01T00:00:00.000Z'),
  rate(400, '2026-01-01T00:01:00.000Z'),
  {
    name: 'memory-redis', date: '2026-01-01T00:02:00.000Z', store: 'redis',
    points: [10, 200, 1000].map((n) => ({ exchanges: n, logbook_ratio: 9, bytes: { meta: 1500, slots: 20_000, events: 5000 + n * 20, logbook_entries: n * 380, logbook_index: n * 70, total: 26_500 + n * 470 } })),
  },
  { name: 'growth', date: '2026-01-01T00:03:00.000Z', lengths: [100, 1000, 10000], tidemark_us: [1200, 1250, 1400], baseline_us: [900, 5000, 85000] },
  {
    name: 'soak-steady', date: '2026-01-01T00:04:00.000Z', rate: 100, windows,
    samples: [0, 5, 10].map((t) => ({ t, rss_mb: 200 + t, heap_mb: 40 + t, redis_used_mb: 2 + t / 10, turns: t * 100 })),
  },
];

run('bench report in a real browser', () => {
  let browser: Browser;
  beforeAll(async () => {
    browser = await chromium.launch({ executablePath: CHROMIUM, args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking'] });
  });
  afterAll(async () => {
    await browser?.close();
  });

  it('makes one chart per curve from one results file of each kind', () => {
    const { charts: list, missing } = charts(docs);
    expect(list.map((c) => c.id)).toEqual(['throughput-vs-rate', 'p99-vs-rate', 'redis-commands-vs-rate', 'windows', 'bytes-by-tier', 'logbook-ratio', 'cost-vs-length', 'soak-latency', 'soak-memory']);
    expect(missing).toEqual([]);
  });

  it('renders without console errors or requests, every chart with data, and the run in the header', async () => {
    const html = renderReport(docs, new Date('2026-01-02T00:00:00Z'));
    const page = await browser.newPage();
    const problems: string[] = [];
    const requests: string[] = [];
    page.on('console', (m) => {
      if (m.type() === 'error' || m.type() === 'warning') problems.push(m.text());
    });
    page.on('pageerror', (e) => problems.push(e.message));
    page.on('request', (r) => requests.push(r.url()));
    await page.setContent(html, { waitUntil: 'load' });
    const figures = await page.$$eval('figure.chart', (els) =>
      els.map((el) => {
        const svg = el.querySelector('svg');
        const box = svg?.getBoundingClientRect();
        const points = Array.from(el.querySelectorAll('polyline')).reduce((n: number, p: Element) => n + (p.getAttribute('points') ?? '').trim().split(/\s+/).filter(Boolean).length, 0);
        return { id: el.id, width: box?.width ?? 0, height: box?.height ?? 0, points, markers: el.querySelectorAll('circle').length };
      }),
    );
    expect(figures).toHaveLength(9);
    for (const f of figures) {
      expect(f.width, f.id).toBeGreaterThan(100);
      expect(f.height, f.id).toBeGreaterThan(100);
      expect(f.points, f.id).toBeGreaterThanOrEqual(2);
    }
    const header = await page.textContent('header');
    expect(header).toMatch(/commit \S+/);
    expect(header).toContain('2026-01-02T00:00:00.000Z');
    expect(await page.textContent('table')).toContain('abc123def456');
    expect(problems).toEqual([]);
    expect(requests.filter((u) => !u.startsWith('about:') && !u.startsWith('data:'))).toEqual([]);
    mkdirSync(ARTIFACTS, { recursive: true });
    await page.screenshot({ path: `${ARTIFACTS}bench-report.png`, fullPage: true });
    await page.close();
  });
});
