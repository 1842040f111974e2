// Loads the live dashboard in Debian's Chromium (driven by playwright-core) after a scripted chat
// through `serve()` (an erase included), checks that the figures a person reads equal the traffic sent
// and the store's own counts, and saves a screenshot to test/artifacts/dashboard.png. Needs /usr/bin/chromium: `bash scripts/ensure-chromium.sh`.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { existsSync, mkdirSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { chromium, type Browser } from 'playwright-core';
import { serve, type Serving } from '../../cli/serve.js';

const CHROMIUM = '/usr/bin/chromium';
const ARTIFACTS = fileURLToPath(new URL('../artifacts/', import.meta.url));
const haveChromium = existsSync(CHROMIUM);
// Skipped only on a developer machine without Chromium; under CI a missing browser is a failure.
const run = haveChromium || process.env.CI === 'true' ? describe : describe.skip;

// Invented customers of the demo bike workshop; enough distinct facts to fill small memories.
const FACTS = [
  'My name is {name}.',
  'My bike is a {colour} {model}.',
  'I live in {town}.',
  'My tyre pressure is {n} psi.',
  'My phone number is 0161 555 {n}{n}.',
  'I ride {n} km to work every day.',
  'My saddle height is {n} cm.',
  "I'm allergic to citrus degreaser.",
  'Can I book a full service for {day}?',
  'Actually, can we move it to {day} instead?',
  'My partner {name} may drop the bike off.',
  'My chain was replaced {n} months ago.',
];
const QUESTIONS = ['What bike do I ride?', 'When is my booking?', 'Which chain lube will you use?', 'What is my name?', 'Do you sell mudguards?'];
const NAMES = ['Dana', 'Ravi', 'Maren', 'Tomasz', 'Aiko', 'Femi', 'Lucía', 'Jonah'];
const COLOURS = ['green', 'red', 'teal', 'black', 'orange'];
const MODELS = ['Corvane', 'tourer', 'gravel bike', 'cargo bike', 'fixie'];
const TOWNS = ['Wexdale', 'Quarrowby', 'Fennickby', 'Saltwendle', 'Brindlecote'];
const DAYS = ['Monday', 'Tuesday', 'Wednesday', 'Thursday', 'Friday'];

function fill(template: string, i: number): string {
  return template
    .replace('{name}', NAMES[i % NAMES.length]!)
    .replace('{colour}', COLOURS[i % COLOURS.length]!)
    .replace('{model}', MODELS[(i >> 1) % MODELS.length]!)
    .replace('{town}', TOWNS[i % TOWNS.length]!)
    .replace(/\{n\}/g, String(10 + ((i * 7) % 80)))
    .replace('{day}', DAYS[i % DAYS.length]!);
}

const SESSIONS = 12;
const TURNS_PER_SESSION = 6;

run('dashboard in a real browser', () => {
  let s: Serving;
  let browser: Browser;
  let turns = 0;
  /** What the real middleware's own read events say, counted beside the dashboard (not by it). */
  const seen = { reads: 0, hits: 0, allocated: 0, evicted: { capacity: 0, decayed: 0, expired: 0, erased: 0 } };

  async function chat(session: string, text: string): Promise<void> {
    const res = await fetch(`${s.url}/chat`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ session, text }) });
    expect(res.status).toBe(200);
    await res.text();
    turns++;
  }

  beforeAll(async () => {
    s = await serve({ port: 0, tidemark: { capacity: 3 }, feedIntervalMs: 500 });
    s.tidemark.on('read', (e) => {
      seen.reads++;
      if (e.result === 'slot' || e.result === 'logbook') seen.hits++;
    });
    s.tidemark.on('write', (e) => void (e.outcome === 'allocated' && seen.allocated++));
    s.tidemark.on('evict', (e) => void seen.evicted[e.reason]++);
    // A scripted conversation: 12 riders, 6 turns each, facts and questions interleaved; then one
    // rider asks to be forgotten.
    for (let i = 0; i < SESSIONS * TURNS_PER_SESSION; i++) {
      const session = `rider-${(i * 5) % SESSIONS}`;
      const text = i % 3 === 2 ? QUESTIONS[i % QUESTIONS.length]! : fill(FACTS[(i * 5 + (i >> 3)) % FACTS.length]!, i);
      await chat(session, text);
    }
    await s.tidemark.flush();
    await s.tidemark.erase({ session: 'rider-3' });
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
    });
  }, 60_000);

  afterAll(async () => {
    await browser?.close();
    await s?.close();
  });

  it('shows the numbers of the conversation sent, in every panel, and saves a screenshot', async () => {
    const page = await browser.newPage({ viewport: { width: 1360, height: 900 }, deviceScaleFactor: 1 });
    const errors: string[] = [];
    page.on('pageerror', (e) => errors.push(String(e)));
    page.on('console', (m) => {
      if (m.type() === 'error') errors.push(m.text());
    });
    await page.goto(`${s.url}/dashboard`);
    // Wait for the state, not for time: the first snapshot drawn ("connecting…" becomes "live").
    await page.waitForFunction(() => document.getElementById('status')?.textContent === 'live' && Number(document.body.getAttribute('data-updated')) > 0, undefined, { timeout: 25_000, polling: 100 });
    const panels = ['reads', 'occupancy', 'writes', 'evictions', 'survival', 'latency', 'sessions'];
    for (const id of panels) {
      const live = Number(await page.getAttribute(`[data-panel="${id}"]`, 'data-live'));
      expect(live, id).toBeGreaterThan(0);
      const marks = await page.locator(`[data-panel="${id}"] .chart`).locator('rect, path, td').count();
      expect(marks, `${id} draws something`).toBeGreaterThan(0);
    }
    // The latency lines show a mark a person can see: a joined line, or a dot for a bucket alone (a
    // chat shorter than one 5 s bucket has no line to join, and an unjoined path draws nothing).
    const visible = await page.locator('[data-panel="latency"] .chart').evaluate((el) =>
      Array.from(el.querySelectorAll('path')).filter((p) => (p.getAttribute('d') ?? '').includes('L')).length + el.querySelectorAll('circle.dot').length);
    expect(visible).toBeGreaterThanOrEqual(1);
    // The figures a person reads, against the traffic sent and the store itself.
    const reads = SESSIONS * TURNS_PER_SESSION;
    expect(turns).toBe(reads);
    expect(seen.reads).toBe(reads);
    const stats = await s.tidemark.store.stats!('default');
    expect(stats.sessions).toBe(SESSIONS - 1); // one rider erased
    expect(await page.textContent('#k-rpm')).toBe(String(reads)); // every read within the last minute
    expect(await page.textContent('#k-hit')).toBe(`${((seen.hits / reads) * 100).toFixed(1)}%`);
    expect(await page.textContent('#k-hit-n')).toBe(`hit share (slot + logbook) · ${seen.hits} of ${reads} reads`);
    expect(await page.textContent('#k-sessions')).toBe(String(SESSIONS - 1));
    expect(await page.textContent('#k-alive')).toBe(String(stats.slots));
    expect(await page.textContent('#k-alive-l')).toBe(`slots alive · ${stats.logbookEntries} logbook entries`);
    // Evictions by reason and the survival summary: the slots allocated, the lifetimes that ended
    // (capacity evictions here), the rest censored (alive, or erased with their rider).
    const ended = seen.evicted.capacity + seen.evicted.decayed + seen.evicted.expired;
    expect(ended).toBeGreaterThan(0);
    expect(seen.evicted.erased).toBeGreaterThan(0);
    const evictions = (await page.textContent('[data-panel="evictions"]')) ?? '';
    expect(evictions).toContain(`capacity${seen.evicted.capacity} (`);
    expect(evictions).toContain(`erased${seen.evicted.erased} (`);
    const survival = (await page.textContent('[data-panel="survival"]')) ?? '';
    expect(survival).toContain(`slots observed${seen.allocated}left memory${ended}still alive (censored)${seen.allocated - ended}`);
    // Busiest sessions show keyed hashes, never the raw ids.
    const table = (await page.textContent('[data-panel="sessions"]')) ?? '';
    expect(table).not.toMatch(/rider-/);
    expect(table).toMatch(/[0-9a-f]{12}/);
    mkdirSync(ARTIFACTS, { recursive: true });
    await page.screenshot({ path: `${ARTIFACTS}dashboard.png`, fullPage: true });
    expect(errors).toEqual([]);
  }, 60_000);
});
