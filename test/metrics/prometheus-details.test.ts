// The Prometheus exposition checked value by value against the events the real middleware emitted in
// the same run: each histogram's count and sum equal what the events carried (in the metric's unit),
// each counter equals the events of its label, and the options refuse what would break the exposition.
// Read back with an independent parser (test/metrics/exposition.ts).

import { afterEach, describe, expect, it, vi } from 'vitest';
import { EventEmitter } from 'eventemitter3';
import * as client from 'prom-client';
import { findFamily as family, hist, labelledHist, parsePrometheusTextFormat, value } from './exposition.js';
import { ErrorCodes, StoreError } from '../../src/errors.js';
import type { CommitEvent, DemoteEvent, EvictEvent, GateEvent, ReadEvent, TidemarkEvents, WriteEvent } from '../../src/middleware/events.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { StoreHealth } from '../../src/metrics/health.js';
import { DURATION_BUCKETS_SECONDS, prometheusMetrics } from '../../src/metrics/prometheus.js';
import { InProcessStore } from '../../src/store/in-process.js';
import { ConflictingStore, ControlledStore } from '../middleware/helpers.js';

const total = (xs: readonly number[]): number => xs.reduce((a, b) => a + b, 0);

const NURSERY = [
  'My name is Ilse.',
  'I have a maidenhair fern on the north windowsill.',
  'My fern gets watered every Monday.',
  'Actually my fern gets watered every Thursday now.',
  'My greenhouse is 3 metres long.',
  'I ordered 12 terracotta pots.',
  'What day is my fern watered?',
  'How long is my greenhouse?',
];

afterEach(() => {
  vi.useRealTimers();
});

describe('prometheusMetrics: values equal the events of the same run', () => {
  it('histogram counts and sums, in seconds and ratios, and counters by label', async () => {
    const store = new ConflictingStore();
    // capacity 2: the later facts evict earlier ones, so lifetimes and demotions are observed too.
    const tm = createTidemark({ store, capacity: 2 });
    const reads: ReadEvent[] = [];
    const commits: CommitEvent[] = [];
    const gates: GateEvent[] = [];
    const evicts: EvictEvent[] = [];
    const writes: WriteEvent[] = [];
    const demotes: DemoteEvent[] = [];
    tm.on('read', (e) => reads.push(e));
    tm.on('commit', (e) => commits.push(e));
    tm.on('gate', (e) => gates.push(e));
    tm.on('evict', (e) => evicts.push(e));
    tm.on('write', (e) => writes.push(e));
    tm.on('demote', (e) => demotes.push(e));
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), durationBuckets: [0.5, 1] });
    const reply = tm.wrap(async () => 'Noted.');
    for (const [i, text] of NURSERY.entries()) {
      // Two commits meet a conflict and are planned again.
      if (i === 3) store.conflicts = 2;
      for await (const _ of await reply({ session: i % 3 === 2 ? 'tutor' : 'nursery', text })) void _;
    }
    await tm.flush();
    const text = await m.metrics();
    const p = parsePrometheusTextFormat(text);

    // The runs must hold what the checks below need, or they would pass on nothing.
    expect(reads.length).toBe(NURSERY.length);
    expect(reads.some((e) => e.slotItems > 0)).toBe(true);
    expect(reads.some((e) => e.slotItems === 0)).toBe(true);
    expect(evicts.length).toBeGreaterThan(0);
    expect(demotes.length).toBeGreaterThan(0);
    expect(total(commits.map((e) => e.retries))).toBe(2);

    const readH = hist(p, 'tidemark_read_duration_seconds');
    expect(readH.count).toBe(reads.length);
    expect(readH.sum).toBeCloseTo(total(reads.map((e) => e.durationUs / 1e6)), 9);
    // The bounds given, not the defaults: le="0.5", le="1", le="+Inf" only.
    expect(Object.keys(readH.buckets).sort()).toEqual(['+Inf', '0.5', '1']);
    const commitH = hist(p, 'tidemark_commit_duration_seconds');
    expect(commitH.count).toBe(commits.length);
    expect(commitH.sum).toBeCloseTo(total(commits.map((e) => e.durationUs / 1e6)), 9);
    const embedRead = labelledHist(text, 'tidemark_embed_duration_seconds', 'stage="read"');
    expect(embedRead.count).toBe(reads.length);
    expect(embedRead.sum).toBeCloseTo(total(reads.map((e) => e.embedUs / 1e6)), 9);
    const embedWrite = labelledHist(text, 'tidemark_embed_duration_seconds', 'stage="write"');
    expect(embedWrite.count).toBe(commits.length);
    expect(embedWrite.sum).toBeCloseTo(total(commits.map((e) => e.embedUs / 1e6)), 9);
    // Occupancy: one observation per read and per commit, the fraction of slots in use.
    const occ = hist(p, 'tidemark_slot_occupancy_ratio');
    expect(occ.count).toBe(reads.length + commits.length);
    expect(occ.sum).toBeCloseTo(total([...reads, ...commits].map((e) => e.slotsInUse / e.capacity)), 9);
    // Attention: only reads that returned slots have weights to describe.
    const withSlots = reads.filter((e) => e.slotItems > 0);
    const top = hist(p, 'tidemark_attention_top_weight');
    expect(top.count).toBe(withSlots.length);
    expect(top.sum).toBeCloseTo(total(withSlots.map((e) => e.topWeight)), 9);
    const ent = hist(p, 'tidemark_attention_entropy_nats');
    expect(ent.count).toBe(withSlots.length);
    expect(ent.sum).toBeCloseTo(total(withSlots.map((e) => e.entropy)), 9);
    const gate = hist(p, 'tidemark_write_gate_score');
    expect(gate.count).toBe(gates.length);
    expect(gate.sum).toBeCloseTo(total(gates.map((e) => e.score)), 9);
    // Lifetimes: session clock (turns by default, in the metric's name) and wall clock in seconds.
    const lifeTurns = hist(p, 'tidemark_evicted_slot_lifetime_turns');
    expect(lifeTurns.count).toBe(evicts.length);
    expect(lifeTurns.sum).toBeCloseTo(total(evicts.map((e) => e.lifetime)), 9);
    const lifeSec = hist(p, 'tidemark_evicted_slot_lifetime_seconds');
    expect(lifeSec.count).toBe(evicts.length);
    expect(lifeSec.sum).toBeCloseTo(total(evicts.map((e) => e.lifetimeMs / 1000)), 9);
    expect(family(p, 'tidemark_evicted_slot_lifetime_clock_seconds')).toBeUndefined();

    expect(value(p, 'tidemark_commit_conflict_retries_total')).toBe(2);
    for (const outcome of ['allocated', 'overwritten', 'reinforced']) {
      expect(value(p, 'tidemark_writes_total', { outcome })).toBe(writes.filter((e) => e.outcome === outcome).length);
    }
    for (const reason of ['capacity', 'decayed', 'expired', 'erased']) {
      expect(value(p, 'tidemark_evictions_total', { reason })).toBe(evicts.filter((e) => e.reason === reason).length);
    }
    for (const reason of ['superseded', 'capacity', 'decayed', 'expired']) {
      expect(value(p, 'tidemark_logbook_demoted_total', { reason })).toBe(demotes.filter((e) => e.reason === reason).length);
    }
    for (const result of ['slot', 'logbook', 'miss']) {
      expect(value(p, 'tidemark_reads_total', { result })).toBe(reads.filter((e) => e.result === result).length);
    }
    expect(value(p, 'tidemark_process_active_sessions')).toBe(2);
    m.stop();
    await tm.close();
  });

  it('names the lifetime histogram for the clock the instance decays by', async () => {
    const tm = createTidemark({ store: new InProcessStore(), decayUnit: 'seconds' });
    const m = await prometheusMetrics(tm, { registry: new client.Registry() });
    const p = parsePrometheusTextFormat(await m.metrics());
    expect(family(p, 'tidemark_evicted_slot_lifetime_clock_seconds')?.help).toMatch(/in seconds of session clock/);
    expect(family(p, 'tidemark_evicted_slot_lifetime_turns')).toBeUndefined();
    m.stop();
    await tm.close();
  });

  it('uses the default duration buckets and the turn buckets when none are given', async () => {
    const tm = createTidemark();
    const m = await prometheusMetrics(tm, { registry: new client.Registry() });
    await tm.read({ session: 'b1', text: 'Is my bike ready?' });
    m.recordTurn(0.3);
    const p = parsePrometheusTextFormat(await m.metrics());
    const read = hist(p, 'tidemark_read_duration_seconds');
    expect(Object.keys(read.buckets).map(Number).filter(Number.isFinite).sort((a, b) => a - b)).toEqual([...DURATION_BUCKETS_SECONDS]);
    // 0.3 s lies between the turn bounds 0.25 and 0.5.
    const turn = hist(p, 'tidemark_turn_duration_seconds');
    expect(turn).toMatchObject({ count: 1, sum: 0.3 });
    expect(turn.buckets['0.25']).toBe(0);
    expect(turn.buckets['0.5']).toBe(1);
    expect(turn.buckets['60']).toBe(1);
    m.stop();
    await tm.close();
  });
});

describe('prometheusMetrics: turns, errors, outbox, sessions', () => {
  it('records a turn of 0 s and refuses negative or non-finite turn times', async () => {
    const tm = createTidemark();
    const m = await prometheusMetrics(tm, { registry: new client.Registry() });
    m.recordTurn(-0.001);
    m.recordTurn(Number.NaN);
    m.recordTurn(Number.POSITIVE_INFINITY);
    m.recordTurn(0);
    const turn = hist(parsePrometheusTextFormat(await m.metrics()), 'tidemark_turn_duration_seconds');
    expect(turn.count).toBe(1);
    expect(turn.sum).toBe(0);
    m.stop();
    await tm.close();
  });

  it('counts errors by stage and known code, unknown codes as "other", store codes also under store_errors_total', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, capacity: 2, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const seen: Array<[string, string]> = [];
    tm.on('error', (e) => seen.push([e.stage, e.error.code]));
    const m = await prometheusMetrics(tm, { registry: new client.Registry() });
    store.failLoad = true;
    await tm.read({ session: 'w1', text: 'When is my bike ready?' });
    // A handler that throws something that is not a tidemark error.
    const reply = tm.wrap(async (): Promise<string> => {
      throw new Error('bot crashed');
    });
    await expect(async () => {
      for await (const _ of await reply({ session: 'w1', text: 'Hello?' })) void _;
    }).rejects.toThrow('bot crashed');
    const p = parsePrometheusTextFormat(await m.metrics());
    expect(seen.length).toBeGreaterThan(0);
    const byLabel = new Map<string, number>();
    for (const [stage, code] of seen) {
      const label = `${stage}|${(Object.values(ErrorCodes) as string[]).includes(code) ? code : 'other'}`;
      byLabel.set(label, (byLabel.get(label) ?? 0) + 1);
    }
    for (const [label, n] of byLabel) {
      const [stage, code] = label.split('|') as [string, string];
      expect(value(p, 'tidemark_errors_total', { stage, code })).toBe(n);
    }
    const storeCodes = seen.filter(([, code]) => code.startsWith('TIDEMARK_E_STORE_'));
    expect(storeCodes.length).toBeGreaterThan(0);
    for (const code of new Set(storeCodes.map(([, c]) => c))) {
      expect(value(p, 'tidemark_store_errors_total', { code })).toBe(storeCodes.filter(([, c]) => c === code).length);
    }
    expect(total(family(p, 'tidemark_errors_total')!.metrics.map((s) => Number(s.value)))).toBe(seen.length);
    m.stop();
    await tm.close();
  });

  it('maps an unknown error code and an unknown stage to "other" (any typed emitter)', async () => {
    const ee = new EventEmitter<TidemarkEvents>();
    const m = await prometheusMetrics(ee, { registry: new client.Registry() });
    ee.emit('error', { stage: 'handler', error: Object.assign(new Error('x'), { code: 'NOT_OURS' }) as never });
    ee.emit('error', { stage: 'elsewhere' as never, error: new StoreError(ErrorCodes.STORE_UNAVAILABLE, 'down') });
    ee.emit('error', { stage: 'read', error: undefined as never });
    const p = parsePrometheusTextFormat(await m.metrics());
    expect(value(p, 'tidemark_errors_total', { stage: 'handler', code: 'other' })).toBe(1);
    expect(value(p, 'tidemark_errors_total', { stage: 'other', code: ErrorCodes.STORE_UNAVAILABLE })).toBe(1);
    expect(value(p, 'tidemark_errors_total', { stage: 'read', code: 'other' })).toBe(1);
    expect(value(p, 'tidemark_store_errors_total', { code: ErrorCodes.STORE_UNAVAILABLE })).toBe(1);
    // No instance: no store kind, the outbox depth from the events.
    expect(family(p, 'tidemark_build_info')!.metrics[0]!.labels?.store).toBe('unknown');
    ee.emit('outbox', { depth: 7, change: 'queued' });
    ee.emit('outbox', { depth: 6, change: 'retry' });
    const q = parsePrometheusTextFormat(await m.metrics());
    expect(value(q, 'tidemark_outbox_depth')).toBe(6);
    expect(value(q, 'tidemark_outbox_changes_total', { change: 'retry' })).toBe(1);
    expect(value(q, 'tidemark_degraded_total', { stage: 'write' })).toBe(1);
    // A read of a session with no slots configured has no occupancy to observe.
    const read = { sessionHash: 'h', tenant: 't', atMs: Date.now(), result: 'miss', items: 0, slotItems: 0, logbookItems: 0, scanned: 0, slotsInUse: 0, capacity: 0, logbookSize: 0, topWeight: 0, entropy: 0, topCosine: 0, topCoverage: 0, durationUs: 5, searchUs: 1, embedUs: 1 } as const;
    ee.emit('read', read as never);
    ee.emit('read', { ...read, slotsInUse: 1, capacity: 4 } as never);
    expect(hist(parsePrometheusTextFormat(await m.metrics()), 'tidemark_slot_occupancy_ratio')).toMatchObject({ count: 1, sum: 0.25 });
    // A sweep's slots count as expired evictions; a sweep of nothing adds nothing.
    ee.emit('sweep', { tenant: 't', atMs: Date.now(), reason: 'expired', sessions: 2, slots: 5, logbookEntries: 1 });
    ee.emit('sweep', { tenant: 't', atMs: Date.now(), reason: 'expired', sessions: 0, slots: 0, logbookEntries: 0 });
    expect(value(parsePrometheusTextFormat(await m.metrics()), 'tidemark_evictions_total', { reason: 'expired' })).toBe(5);
    m.stop();
  });

  it('reports the instance\'s own outbox depth while writes wait for the store', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    store.failCommit = true;
    await tm.write({ session: 'n1', text: 'My fern is a maidenhair.', role: 'user' });
    await tm.write({ session: 'n2', text: 'My cactus is a barrel cactus.', role: 'user' });
    expect(tm.outboxDepth).toBe(2);
    // Attached after the writes were queued: the gauge reads the instance, not the events it missed.
    const m = await prometheusMetrics(tm, { registry: new client.Registry() });
    expect(value(parsePrometheusTextFormat(await m.metrics()), 'tidemark_outbox_depth')).toBe(2);
    store.failCommit = false;
    await tm.flush();
    expect(value(parsePrometheusTextFormat(await m.metrics()), 'tidemark_outbox_depth')).toBe(0);
    m.stop();
    await tm.close();
  });

  it('counts a session as active for activeWindowMs after its last event, at most maxTrackedSessions', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    const t0 = 1_800_000_000_000;
    vi.setSystemTime(t0);
    const tm = createTidemark();
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), activeWindowMs: 60_000, maxTrackedSessions: 3 });
    await tm.read({ session: 'a', text: 'Hello?' });
    vi.setSystemTime(t0 + 30_000);
    await tm.read({ session: 'b', text: 'Hello?' });
    await tm.write({ session: 'c', text: 'My name is Pia.', role: 'user' });
    // At the edge of the window a is still active (its last event is exactly 60 s old).
    vi.setSystemTime(t0 + 60_000);
    expect(value(parsePrometheusTextFormat(await m.metrics()), 'tidemark_process_active_sessions')).toBe(3);
    vi.setSystemTime(t0 + 60_001);
    expect(value(parsePrometheusTextFormat(await m.metrics()), 'tidemark_process_active_sessions')).toBe(2);
    // A fourth and fifth session: only the 3 most recent are kept.
    await tm.read({ session: 'a', text: 'Hello?' });
    await tm.read({ session: 'd', text: 'Hello?' });
    await tm.read({ session: 'e', text: 'Hello?' });
    expect(value(parsePrometheusTextFormat(await m.metrics()), 'tidemark_process_active_sessions')).toBe(3);
    // A clock that steps back (skew between hosts) does not make a session older than its newest event.
    vi.setSystemTime(t0);
    await tm.read({ session: 'e', text: 'Hello?' });
    vi.setSystemTime(t0 + 120_000);
    expect(value(parsePrometheusTextFormat(await m.metrics()), 'tidemark_process_active_sessions')).toBe(3);
    vi.setSystemTime(t0 + 120_002);
    expect(value(parsePrometheusTextFormat(await m.metrics()), 'tidemark_process_active_sessions')).toBe(0);
    m.stop();
    await tm.close();
  });
});

describe('prometheusMetrics: optional gauges and the life cycle', () => {
  it('leaves the store figures out with storeFigures: false and the byte sample out with sessionBytes: false', async () => {
    const tm = createTidemark();
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), storeFigures: false, sessionBytes: false });
    await tm.write({ session: 'p1', text: 'My name is Pia.', role: 'user' });
    const p = parsePrometheusTextFormat(await m.metrics());
    for (const name of ['tidemark_store_sessions', 'tidemark_store_slots', 'tidemark_store_logbook_entries', 'tidemark_store_slot_age_reached_total', 'tidemark_store_sampled_session_bytes', 'tidemark_store_sampled_sessions', 'tidemark_store_up']) {
      expect(family(p, name)).toBeUndefined();
    }
    m.stop();
    await tm.close();
  });

  it('drops the store figures while stats() fails and shows them again when it answers', async () => {
    const store = new InProcessStore();
    const tm = createTidemark({ store });
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), sessionBytes: false });
    await tm.write({ session: 'p1', text: 'My name is Pia.', role: 'user' });
    const stats = store.stats.bind(store);
    store.stats = () => Promise.reject(new Error('store down (test)'));
    const down = parsePrometheusTextFormat(await m.metrics());
    expect(family(down, 'tidemark_store_sessions')?.metrics ?? []).toEqual([]);
    expect(family(down, 'tidemark_store_slot_age_reached_total')?.metrics ?? []).toEqual([]);
    store.stats = stats;
    await new Promise((r) => setImmediate(r));
    const up = parsePrometheusTextFormat(await m.metrics());
    expect(value(up, 'tidemark_store_sessions')).toBe(1);
    expect(value(up, 'tidemark_store_slots')).toBe(1);
    expect(value(up, 'tidemark_store_slot_age_reached_total', { age: '0', unit: 'turns' })).toBe(1);
    m.stop();
    await tm.close();
  });

  it('drops the byte sample when sampling fails, and samples again after intervalMs', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    const t0 = 1_800_000_000_000;
    vi.setSystemTime(t0);
    const store = new InProcessStore();
    const tm = createTidemark({ store });
    const real = store.sampleSessionBytes.bind(store);
    let calls = 0;
    let fail = true;
    store.sampleSessionBytes = (tenant, n) => (calls++, fail ? Promise.reject(new Error('down (test)')) : real(tenant, n));
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), sessionBytes: { sample: 2, intervalMs: 1_000 } });
    await tm.write({ session: 'p1', text: 'My name is Pia.', role: 'user' });
    const down = parsePrometheusTextFormat(await m.metrics());
    expect(family(down, 'tidemark_store_sampled_session_bytes')?.metrics ?? []).toEqual([]);
    expect(value(down, 'tidemark_store_sampled_sessions')).toBe(0);
    fail = false;
    // A failed sample is not kept: the next scrape tries again at once.
    const up = parsePrometheusTextFormat(await m.metrics());
    expect(value(up, 'tidemark_store_sampled_sessions')).toBe(1);
    const n = calls;
    vi.setSystemTime(t0 + 999);
    await m.metrics();
    expect(calls).toBe(n);
    vi.setSystemTime(t0 + 1_000);
    await m.metrics();
    expect(calls).toBe(n + 1);
    m.stop();
    await tm.close();
  });

  it('stop() removes every metric it registered, health, store and process metrics included', async () => {
    const tm = createTidemark();
    const health = new StoreHealth(tm.store);
    await health.start(tm);
    const registry = new client.Registry();
    const m = await prometheusMetrics(tm, { registry, health, processMetrics: true, tenantLabels: ['nursery'] });
    await tm.write({ session: 'p1', text: 'My name is Pia.', role: 'user' });
    const p = parsePrometheusTextFormat(await m.metrics());
    expect(family(p, 'process_cpu_seconds_total')).toBeDefined();
    expect(family(p, 'tidemark_store_up')).toBeDefined();
    expect(family(p, 'tidemark_store_sampled_sessions')).toBeDefined();
    // promtool rejects a `_total` gauge: prom-client's nodejs_active_*_total gauges are left out.
    expect(p.filter((f) => f.name.endsWith('_total') && f.type !== 'COUNTER').map((f) => f.name)).toEqual([]);
    m.stop();
    expect(registry.getMetricsAsArray()).toEqual([]);
    // After stop no event reaches the (removed) metrics and nothing is registered again.
    await tm.read({ session: 'p1', text: 'What is my name?' });
    expect((await registry.metrics()).trim()).toBe('');
    health.stop();
    await tm.close();
  });

  it('zero-initialises every labelled series, per allow-listed tenant too', async () => {
    const tm = createTidemark();
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), tenantLabels: ['nursery', 'nursery'] });
    const p = parsePrometheusTextFormat(await m.metrics());
    for (const tenant of ['nursery', 'other']) {
      for (const result of ['slot', 'logbook', 'miss', 'degraded']) expect(value(p, 'tidemark_reads_total', { result, tenant })).toBe(0);
      for (const outcome of ['allocated', 'overwritten', 'reinforced']) expect(value(p, 'tidemark_writes_total', { outcome, tenant })).toBe(0);
      for (const decision of ['passed', 'gated_out']) expect(value(p, 'tidemark_candidates_total', { decision, tenant })).toBe(0);
      for (const reason of ['capacity', 'decayed', 'expired', 'erased']) expect(value(p, 'tidemark_evictions_total', { reason, tenant })).toBe(0);
      for (const reason of ['superseded', 'capacity', 'decayed', 'expired']) expect(value(p, 'tidemark_logbook_demoted_total', { reason, tenant })).toBe(0);
    }
    // The duplicate id counts once: 2 tenant values × 4 read results.
    expect(family(p, 'tidemark_reads_total')!.metrics).toHaveLength(8);
    for (const stage of ['read', 'write']) expect(value(p, 'tidemark_degraded_total', { stage })).toBe(0);
    for (const change of ['queued', 'drained', 'overflow', 'retry', 'erased', 'expired', 'failed', 'abandoned']) {
      expect(value(p, 'tidemark_outbox_changes_total', { change })).toBe(0);
    }
    const codes = Object.values(ErrorCodes) as string[];
    for (const stage of ['read', 'write', 'handler', 'outbox', 'store']) {
      for (const code of [...codes, 'other']) expect(value(p, 'tidemark_errors_total', { stage, code })).toBe(0);
    }
    const storeCodes = codes.filter((c) => c.startsWith('TIDEMARK_E_STORE_'));
    expect(family(p, 'tidemark_store_errors_total')!.metrics.map((s) => s.labels?.code).sort()).toEqual(storeCodes.sort());
    m.stop();
    await tm.close();
  });
});

describe('prometheusMetrics: options', () => {
  const ee = (): EventEmitter<TidemarkEvents> => new EventEmitter<TidemarkEvents>();
  const refused = async (options: Parameters<typeof prometheusMetrics>[1], option: string, message: RegExp): Promise<void> => {
    const err = await prometheusMetrics(ee(), { registry: new client.Registry(), ...options }).then(
      () => undefined,
      (e: unknown) => e,
    );
    expect(err).toMatchObject({ code: ErrorCodes.CONFIG, details: { option } });
    expect((err as Error).message).toMatch(message);
  };

  it('refuses a prefix that does not end in "_" or starts with a digit, and takes one that fits', async () => {
    await refused({ prefix: 'tidemark' }, 'prefix', /end in "_"/);
    await refused({ prefix: '9lives_' }, 'prefix', /got "9lives_"/);
    await refused({ prefix: 'bike shop_' }, 'prefix', /got "bike shop_"/);
    await refused({ prefix: 7 as never }, 'prefix', /got 7/);
    const m = await prometheusMetrics(ee(), { registry: new client.Registry(), prefix: '_ws2_' });
    expect(await m.metrics()).toContain('_ws2_reads_total');
    m.stop();
  });

  it('refuses a window or a session bound that is not a positive number', async () => {
    for (const bad of [0, -1, Number.NaN, Number.POSITIVE_INFINITY]) {
      await refused({ activeWindowMs: bad }, 'activeWindowMs', /activeWindowMs must be a positive number/);
      await refused({ maxTrackedSessions: bad }, 'maxTrackedSessions', /maxTrackedSessions must be a positive number/);
    }
    const m = await prometheusMetrics(ee(), { registry: new client.Registry(), activeWindowMs: 1, maxTrackedSessions: 1 });
    m.stop();
  });

  it('refuses duration buckets that are empty, not positive or not increasing', async () => {
    for (const bad of [[], [0, 1], [-0.1, 1], [0.1, 0.1], [0.2, 0.1], [0.1, Number.NaN]]) {
      await refused({ durationBuckets: bad }, 'durationBuckets', /increasing positive numbers/);
    }
    const m = await prometheusMetrics(ee(), { registry: new client.Registry(), durationBuckets: [0.001] });
    m.stop();
  });

  it('refuses a byte sample outside 1–1000 sessions or an interval under one second, only when the store can sample', async () => {
    const tm = createTidemark();
    for (const bad of [{ sample: 0 }, { sample: 1001 }, { sample: 2.5 }, { intervalMs: 999 }, { intervalMs: Number.NaN }]) {
      const err = await prometheusMetrics(tm, { registry: new client.Registry(), sessionBytes: bad }).then(
        () => undefined,
        (e: unknown) => e,
      );
      expect(err).toMatchObject({ code: ErrorCodes.CONFIG, details: { option: 'sessionBytes' } });
    }
    for (const ok of [{ sample: 1 }, { sample: 1000 }, { intervalMs: 1000 }]) {
      const m = await prometheusMetrics(tm, { registry: new client.Registry(), sessionBytes: ok });
      m.stop();
    }
    await tm.close();
  });

  it('refuses tenant lists that are not arrays of short non-empty ids, and takes 50 ids of 64 characters', async () => {
    const tm = createTidemark();
    const bad: Array<[unknown, RegExp]> = [
      ['nursery', /must be an array/],
      [[''], /holds ""/],
      [['x'.repeat(65)], /at most 64 characters/],
      [[42], /holds 42/],
      [Array.from({ length: 51 }, (_, i) => `t${i}`), /lists 51 tenants/],
    ];
    for (const [tenantLabels, message] of bad) {
      const err = await prometheusMetrics(tm, { registry: new client.Registry(), tenantLabels: tenantLabels as never }).then(
        () => undefined,
        (e: unknown) => e,
      );
      expect(err).toMatchObject({ code: ErrorCodes.CONFIG, details: { option: 'tenantLabels' } });
      expect((err as Error).message).toMatch(message);
    }
    const ids = Array.from({ length: 50 }, (_, i) => `${String(i).padStart(2, '0')}${'x'.repeat(62)}`);
    const m = await prometheusMetrics(tm, { registry: new client.Registry(), tenantLabels: ids });
    await tm.read({ tenant: ids[49]!, session: 's', text: 'Hello?' });
    expect(value(parsePrometheusTextFormat(await m.metrics()), 'tidemark_reads_total', { result: 'miss', tenant: ids[49]! })).toBe(1);
    m.stop();
    await tm.close();
  });
});
