// Prometheus metrics driven by the real middleware (createTidemark over a store that can be made to
// fail), read back with an independent parser and checked with promtool, the Prometheus project's own
// linter (Debian package `prometheus`, installed by scripts/ensure-prometheus.sh).

import { describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { EventEmitter } from 'eventemitter3';
import * as client from 'prom-client';
import { family, parsePrometheusTextFormat, value, type ParsedFamily } from './exposition.js';
import { ErrorCodes } from '../../src/errors.js';
import type { TidemarkEvents } from '../../src/middleware/events.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { StoreHealth } from '../../src/metrics/health.js';
import { prometheusMetrics } from '../../src/metrics/prometheus.js';
import { ControlledStore } from '../middleware/helpers.js';
import { InProcessStore } from '../../src/store/in-process.js';

const PROMTOOL = '/usr/bin/promtool';
const inCI = process.env.CI === 'true';

function seriesCount(parsed: ParsedFamily[]): number {
  let n = 0;
  for (const f of parsed) for (const m of f.metrics) n += m.buckets ? Object.keys(m.buckets).length + 2 : 1;
  return n;
}

const FACTS = ['My name is Dana.', 'My bike is a green tourer.', 'I live in Eastmoor.', 'My saddle height is 74 cm.', 'Can I book a service for Friday?', 'What is my name?'];
const bot = async (): Promise<string> => 'Noted, thanks.';

describe('prometheusMetrics on the real middleware', () => {
  it('counts degraded reads as reads, writes apart from gated candidates, the outbox and the store health', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, capacity: 4 });
    const health = new StoreHealth(store);
    await health.start(tm);
    const registry = new client.Registry();
    const m = await prometheusMetrics(tm, { registry, health });
    const first = parsePrometheusTextFormat(await m.metrics());
    // Zero-initialised from the first scrape: every read result, every known error code.
    expect(value(first, 'tidemark_reads_total', { result: 'degraded' })).toBe(0);
    expect(value(first, 'tidemark_errors_total', { stage: 'read', code: ErrorCodes.STORE_UNAVAILABLE })).toBe(0);
    expect(value(first, 'tidemark_store_errors_total', { code: ErrorCodes.STORE_OUTBOX_FULL })).toBe(0);
    expect(value(first, 'tidemark_store_up')).toBe(1);

    let gates = 0;
    let passed = 0;
    let commits = 0;
    tm.on('gate', (e) => {
      gates++;
      if (e.passed) passed++;
    });
    tm.on('commit', () => commits++);
    const reply = tm.wrap(bot);
    for (let i = 0; i < 6; i++) for await (const _ of await reply({ session: `s${i % 2}`, text: FACTS[i]! })) void _;
    await tm.flush();
    store.failLoad = true;
    store.failCommit = true;
    for (let i = 0; i < 3; i++) for await (const _ of await reply({ session: 's0', text: FACTS[i]! })) void _;
    await new Promise((r) => setImmediate(r));

    const down = parsePrometheusTextFormat(await m.metrics());
    expect(value(down, 'tidemark_reads_total', { result: 'degraded' })).toBe(3);
    expect(value(down, 'tidemark_reads_total', { result: 'slot' }) + value(down, 'tidemark_reads_total', { result: 'logbook' }) + value(down, 'tidemark_reads_total', { result: 'miss' })).toBe(6);
    expect(value(down, 'tidemark_degraded_total', { stage: 'read' })).toBe(3);
    expect(value(down, 'tidemark_degraded_total', { stage: 'write' })).toBe(value(down, 'tidemark_outbox_changes_total', { change: 'queued' }));
    expect(value(down, 'tidemark_outbox_changes_total', { change: 'queued' })).toBeGreaterThan(0);
    expect(value(down, 'tidemark_store_up')).toBe(0);
    // Candidates and writes are separate: no gated_out among writes.
    expect(family(down, 'tidemark_writes_total').metrics.map((x) => x.labels?.outcome).sort()).toEqual(['allocated', 'overwritten', 'reinforced']);
    expect(value(down, 'tidemark_candidates_total', { decision: 'passed' })).toBe(passed);
    expect(value(down, 'tidemark_candidates_total', { decision: 'gated_out' })).toBe(gates - passed);
    expect(value(down, 'tidemark_commit_duration_seconds')).toBe(commits);
    // Build info: the package's version and the store's kind.
    const pkg = JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string };
    expect(family(down, 'tidemark_build_info').metrics[0]!.labels).toEqual({ version: pkg.version, store: 'controlled' });

    store.failLoad = false;
    store.failCommit = false;
    await tm.flush();
    for await (const _ of await reply({ session: 's1', text: 'What is my name?' })) void _;
    const up = parsePrometheusTextFormat(await m.metrics());
    expect(value(up, 'tidemark_store_up')).toBe(1);
    expect(value(up, 'tidemark_outbox_changes_total', { change: 'drained' })).toBe(value(up, 'tidemark_outbox_changes_total', { change: 'queued' }));
    expect(value(up, 'tidemark_store_last_success_timestamp_seconds')).toBeCloseTo(health.state.lastSuccessMs! / 1000, 3);
    health.stop();
    m.stop();
    await tm.close();
  });

  it('reports the store truth figures from the store itself (in-process store)', async () => {
    const tm = createTidemark({ capacity: 4 });
    const m = await prometheusMetrics(tm, { registry: new client.Registry() });
    let allocated = 0;
    let capacityEvictions = 0;
    tm.on('write', (e) => void (e.outcome === 'allocated' && allocated++));
    tm.on('evict', (e) => void (e.reason === 'capacity' && capacityEvictions++));
    for (let i = 0; i < 9; i++) await tm.write({ session: `n${i % 3}`, text: FACTS[i % FACTS.length]!, role: 'user' });
    // Two more facts each for one session, past its capacity of 4.
    for (const text of ['My helmet is blue.', 'My frame is steel.', 'My tyres are 32 mm.', 'My dog is called Pip.']) await tm.write({ session: 'n0', text, role: 'user' });
    const stats = await tm.store.stats!('default');
    const parsed = parsePrometheusTextFormat(await m.metrics());
    expect(value(parsed, 'tidemark_store_sessions')).toBe(3);
    expect(value(parsed, 'tidemark_store_slots')).toBe(stats.slots);
    expect(value(parsed, 'tidemark_store_logbook_entries')).toBe(stats.logbookEntries);
    // Survival counts: every bound exported (zeros included), equal to the store's; every allocated
    // slot reached age 0, and the lifetimes that ended are the capacity evictions sent.
    expect(value(parsed, 'tidemark_store_slot_age_reached_total', { age: '0', unit: 'turns' })).toBe(allocated);
    let ended = 0;
    for (const age of ['0', '1', '2', '4', '8', '16', '32', '64', '128', '256', '512', '1024']) {
      expect(value(parsed, 'tidemark_store_slot_age_reached_total', { age, unit: 'turns' })).toBe(stats.counters?.[`survival.reached.${age}`] ?? 0);
      ended += value(parsed, 'tidemark_store_slot_lifetime_ended_total', { age, unit: 'turns' });
    }
    expect(ended).toBe(capacityEvictions);
    expect(capacityEvictions).toBeGreaterThan(0);
    m.stop();
    await tm.close();
  });

  it('keeps the series count independent of the number of sessions (2,000 distinct sessions)', async () => {
    const tm = createTidemark({ capacity: 4 });
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), prefix: 'tm_' });
    for (let i = 0; i < 10; i++) await tm.read({ session: `warm${i}`, text: 'What bike do I ride?' });
    const before = await m.metrics();
    for (let i = 0; i < 2_000; i++) await tm.read({ session: `s${i}`, text: 'When is my booking?' });
    const after = await m.metrics();
    const parsedAfter = parsePrometheusTextFormat(after);
    expect(seriesCount(parsedAfter)).toBe(seriesCount(parsePrometheusTextFormat(before)));
    expect(value(parsedAfter, 'tm_process_active_sessions')).toBe(2_010);
    expect(after).not.toMatch(/s1999|warm0/);
    m.stop();
    await tm.close();
  });

  (existsSync(PROMTOOL) || inCI ? it : it.skip)('passes `promtool check metrics` (names, units, help) with process metrics on', async () => {
    const tm = createTidemark({ capacity: 4 });
    const health = new StoreHealth(tm.store);
    await health.start(tm);
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), health, processMetrics: true });
    await tm.write({ session: 'p1', text: 'My name is Dana.', role: 'user' });
    const text = await m.metrics();
    expect(text).toContain('process_cpu_seconds_total');
    // promtool exits non-zero and prints each problem when the exposition breaks a convention.
    const out = execFileSync(PROMTOOL, ['check', 'metrics'], { input: text, encoding: 'utf8' });
    expect(out.trim()).toBe('');
    health.stop();
    m.stop();
    await tm.close();
  });

  (existsSync(PROMTOOL) || inCI ? it : it.skip)('labels allow-listed tenants by name and every other tenant as "other" (bounded, promtool clean)', async () => {
    const tm = createTidemark({ capacity: 4 });
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), tenantLabels: ['nursery', 'workshop'] });
    // 3 reads for the nursery, 2 for the workshop, 1 each for 4 tenants off the list.
    for (let i = 0; i < 3; i++) await tm.read({ tenant: 'nursery', session: `n${i}`, text: 'When is the fern delivery?' });
    for (let i = 0; i < 2; i++) await tm.read({ tenant: 'workshop', session: `w${i}`, text: 'Is my bike ready?' });
    for (const t of ['tutor', 'bakery', 'choir', 'library']) await tm.read({ tenant: t, session: 's', text: 'Hello?' });
    await tm.write({ tenant: 'nursery', session: 'n0', text: 'My name is Ilse.', role: 'user' });
    const text = await m.metrics();
    const parsed = parsePrometheusTextFormat(text);
    expect(value(parsed, 'tidemark_reads_total', { result: 'miss', tenant: 'nursery' })).toBe(3);
    expect(value(parsed, 'tidemark_reads_total', { result: 'miss', tenant: 'workshop' })).toBe(2);
    expect(value(parsed, 'tidemark_reads_total', { result: 'miss', tenant: 'other' })).toBe(4);
    expect(value(parsed, 'tidemark_writes_total', { outcome: 'allocated', tenant: 'nursery' })).toBe(1);
    expect(value(parsed, 'tidemark_writes_total', { outcome: 'allocated', tenant: 'other' })).toBe(0);
    // Only the listed ids and "other" appear, never a hash or an unlisted id.
    const tenants = new Set(family(parsed, 'tidemark_reads_total').metrics.map((x) => x.labels?.tenant));
    expect([...tenants].sort()).toEqual(['nursery', 'other', 'workshop']);
    expect(text).not.toMatch(/tutor|bakery|choir|library/);
    expect(execFileSync(PROMTOOL, ['check', 'metrics'], { input: text, encoding: 'utf8' }).trim()).toBe('');
    m.stop();
    await tm.close();
  });

  it('samples bytes per session from the store, at most every intervalMs, bounded by the sample', async () => {
    const store = new InProcessStore();
    const tm = createTidemark({ store, capacity: 4 });
    let calls = 0;
    const sample = store.sampleSessionBytes.bind(store);
    store.sampleSessionBytes = (tenant, n) => (calls++, sample(tenant, n));
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), sessionBytes: { sample: 5, intervalMs: 60_000 } });
    for (let i = 0; i < 8; i++) await tm.write({ session: `g${i}`, text: 'My fern is a maidenhair, potted in March.', role: 'user' });
    const parsed = parsePrometheusTextFormat(await m.metrics());
    expect(value(parsed, 'tidemark_store_sampled_sessions')).toBe(5);
    // Each session holds one slot's typed arrays at least: capacity × dim float32 keys.
    const bytes = value(parsed, 'tidemark_store_sampled_session_bytes');
    expect(bytes).toBeGreaterThan(4 * tm.embedder.dim * 4);
    // All 8 sessions alike: the sample's mean is any one session's estimate.
    const [one] = await sample('default', 1);
    expect(bytes).toBe(one);
    await m.metrics();
    expect(calls).toBe(1); // the second scrape within intervalMs reuses the sample
    m.stop();
    await tm.close();
  });

  it('refuses a tenant list that would not bound the label', async () => {
    const tm = createTidemark();
    await expect(prometheusMetrics(tm, { tenantLabels: ['other'] })).rejects.toThrow(/tenantLabels holds "other"/);
    await expect(prometheusMetrics(tm, { tenantLabels: Array.from({ length: 51 }, (_, i) => `t${i}`) })).rejects.toThrow(/at most 50/);
    await expect(prometheusMetrics(new EventEmitter<TidemarkEvents>(), { tenantLabels: ['nursery'] })).rejects.toThrow(/hashTenant/);
    await tm.close();
  });

  it('rejects a bad prefix naming the option and value', async () => {
    await expect(prometheusMetrics(new EventEmitter<TidemarkEvents>(), { prefix: 'bad-prefix' })).rejects.toThrow(/prefix must match .* got "bad-prefix"/);
  });

  it('creates its own registry (not the global one) when none is passed', async () => {
    const tm = createTidemark();
    const m = await prometheusMetrics(tm);
    expect(m.registry).not.toBe(client.register);
    expect(await client.register.metrics()).not.toContain('tidemark_');
    expect(m.contentType).toMatch(/^text\/plain/);
    m.stop();
    expect((await m.registry.metrics()).trim()).toBe('');
    await tm.close();
  });
});
