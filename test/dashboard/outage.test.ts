// The dashboard as an operator reads it, in Debian's Chromium (playwright-core): at idle, under load,
// during a store outage and after recovery, with a screenshot of each in test/artifacts/. `serve` runs on
// a redis-server of our own (a free port; never the one on 6379), killed and started again mid-test.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { chromium, type Browser, type Page } from 'playwright-core';
import { serve, type Serving } from '../../cli/serve.js';
import { ThrowawayRedis } from '../adapters/redis/helpers.js';

const CHROMIUM = '/usr/bin/chromium';
const ARTIFACTS = fileURLToPath(new URL('../artifacts/', import.meta.url));
const run = existsSync(CHROMIUM) || process.env.CI === 'true' ? describe : describe.skip;

// A plant nursery's help desk, invented.
const TURNS = [
  'My name is Ilse and I look after the fern house.',
  'I ordered three olive trees for delivery on Thursday.',
  'Actually, make the delivery Saturday morning.',
  'My soil is heavy clay.',
  'Which compost suits clay soil?',
  'When is my delivery?',
  'I prefer peat-free mixes.',
  'Do you stock terracotta pots?',
];

// The tests are ordered steps of one story (idle → load → outage → recovery → server gone) sharing one
// server, page and redis-server: `shuffle: false` keeps their order under `--sequence.shuffle`.
run('dashboard through a store outage, in a real browser', { shuffle: false }, () => {
  let redis: ThrowawayRedis;
  let s: Serving;
  let browser: Browser;
  let page: Page;
  const errors: string[] = [];

  async function chat(session: string, text: string): Promise<void> {
    const res = await fetch(`${s.url}/chat`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ session, text }) });
    await res.text();
  }
  async function traffic(n: number, from = 0): Promise<void> {
    for (let i = from; i < from + n; i++) await chat(`nursery-${i % 7}`, TURNS[i % TURNS.length]!);
  }
  const text = async (sel: string): Promise<string> => (await page.textContent(sel)) ?? '';
  const shot = async (name: string): Promise<void> => {
    mkdirSync(ARTIFACTS, { recursive: true });
    await page.screenshot({ path: `${ARTIFACTS}dashboard-${name}.png`, fullPage: true });
  };
  const nextSnapshot = async (): Promise<void> => {
    const t = Number(await page.getAttribute('body', 'data-updated'));
    await page.waitForFunction((t0) => Number(document.body.getAttribute('data-updated')) > t0, t, { timeout: 10_000 });
  };

  beforeAll(async () => {
    redis = new ThrowawayRedis();
    await redis.start();
    s = await serve({ port: 0, redis: redis.url, capacity: 4, instance: 'nursery-desk-1', feedIntervalMs: 500, secret: 'nursery-secret-0123456789', log: false });
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
    });
    page = await browser.newPage({ viewport: { width: 1360, height: 1000 }, deviceScaleFactor: 1 });
    page.on('pageerror', (e) => errors.push(String(e)));
    page.on('console', (m) => {
      if (m.type() === 'error' && !/Failed to load resource|ERR_CONNECTION_REFUSED|EventSource/.test(m.text())) errors.push(m.text());
    });
  }, 60_000);

  afterAll(async () => {
    await browser?.close();
    await s?.close().catch(() => undefined);
    await redis?.stop();
  }, 60_000);

  it('idle: names the process, says nothing has happened yet, no banner', async () => {
    await page.goto(`${s.url}/dashboard`);
    await page.waitForSelector('body[data-updated]', { timeout: 15_000 });
    expect(await text('#who')).toMatch(/^served by nursery-desk-1/);
    expect(await text('#k-median')).toBe('none left yet');
    expect(await text('[data-panel="reads"] .chart')).toContain('waiting for traffic');
    expect(await page.isVisible('#banner')).toBe(false);
    expect(await text('#status')).toBe('live');
    await shot('idle');
  }, 30_000);

  it('under load: counts beside percentages, axes with units, the process table', async () => {
    await traffic(40);
    await nextSnapshot();
    await nextSnapshot();
    const legend = await text('[data-panel="reads"] .legend');
    // Each result with its count and share, e.g. "miss12 (30%)".
    expect(legend).toMatch(/miss\d+ \(\d+%\)/);
    expect(await text('[data-panel="reads"] svg .unit')).toBe('reads / 5 s');
    expect(await text('[data-panel="writes"] svg .unit')).toBe('writes / 5 s');
    expect(await text('[data-panel="latency"] svg .unit')).toBe('ms');
    expect(await text('[data-panel="occupancy"] svg .unit')).toBe('sessions');
    expect(await text('#k-hit-n')).toMatch(/of 40 reads$/);
    expect(await text('#k-sessions')).toBe('7');
    expect(await text('#k-sessions-l')).toMatch(/^sessions stored/);
    const fleet = await text('[data-panel="fleet"]');
    expect(fleet).toContain('nursery-desk-1');
    expect(fleet).toContain('this page');
    expect(await page.isVisible('#banner')).toBe(false);
    await shot('load');
  }, 60_000);

  it('during an outage: a banner names the store and how long it has been down; degraded reads are counted', async () => {
    await redis.kill();
    await traffic(6, 40);
    await page.waitForSelector('#banner.down', { timeout: 10_000 });
    await page.waitForFunction(() => /unreachable for [1-9]\d* s/.test(document.getElementById('banner')!.textContent ?? ''), null, { timeout: 10_000 });
    const banner = await text('#banner');
    expect(banner).toMatch(/^Store redis unreachable for \d+ s\. Reads run with empty memory/);
    expect(await text('[data-panel="reads"] .legend')).toMatch(/degraded \(no memory\)6 \(\d+%\)/);
    expect(await text('[data-panel="fleet"]')).toMatch(/down/);
    await shot('outage');
  }, 60_000);

  it('after recovery: the banner goes, the drain shows in the outbox panel, not as a spike of writes', async () => {
    await redis.start();
    await page.waitForFunction(() => !document.getElementById('banner')!.classList.contains('down'), null, { timeout: 15_000 });
    await traffic(8, 46);
    await page.waitForFunction(() => /drained[1-9]/.test(document.querySelector('[data-panel="outbox"] .legend')!.textContent ?? ''), null, { timeout: 15_000 });
    expect(await text('[data-panel="outbox"] .legend')).toMatch(/queued\d+/);
    expect(await page.isVisible('#banner')).toBe(false);
    expect(await text('#status')).toBe('live');
    await shot('recovered');
    expect(errors).toEqual([]);
  }, 60_000);

  it('a page whose server stopped says so and greys its figures out', async () => {
    await s.close();
    await page.waitForSelector('body.stale', { timeout: 15_000 });
    expect(await text('#banner')).toMatch(/^No update for \d+ s/);
    await shot('stale');
  }, 30_000);
});
