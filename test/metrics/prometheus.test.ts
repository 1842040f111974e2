import { describe, expect, it } from 'vitest';
import { EventEmitter } from 'eventemitter3';
import * as client from 'prom-client';
// Independent parser of the Prometheus text exposition format (npm: parse-prometheus-text-format 1.1.1,
// ported from the Prometheus Python client's parser), so the test does not trust prom-client's own output.
import parsePrometheusTextFormat, { type ParsedFamily } from 'parse-prometheus-text-format';
import { ErrorCodes, StoreError } from '../../src/errors.js';
import type { TidemarkEvents } from '../../src/middleware/events.js';
import { prometheusMetrics } from '../../src/metrics/prometheus.js';
import { emitTurn } from './synthetic.js';

function family(parsed: ParsedFamily[], name: string): ParsedFamily {
  const f = parsed.find((x) => x.name === name);
  if (!f) throw new Error(`no metric family ${name} in ${parsed.map((x) => x.name).join(', ')}`);
  return f;
}

function value(parsed: ParsedFamily[], name: string, labels: Record<string, string> = {}): number {
  const sample = family(parsed, name).metrics.find((m) => Object.entries(labels).every(([k, v]) => m.labels?.[k] === v));
  if (!sample) throw new Error(`no sample ${name}${JSON.stringify(labels)}`);
  return Number(sample.value ?? sample.count);
}

function seriesCount(parsed: ParsedFamily[]): number {
  let n = 0;
  for (const f of parsed) for (const m of f.metrics) n += m.buckets ? Object.keys(m.buckets).length + 2 : 1;
  return n;
}

describe('prometheusMetrics', () => {
  it('counts reads, writes (gated_out from the gate), evictions and durations, in a registry of its own', async () => {
    const bus = new EventEmitter<TidemarkEvents>();
    const registry = new client.Registry();
    const m = await prometheusMetrics(bus, { registry });
    emitTurn(bus, { sessionHash: 'h1', result: 'slot', readUs: 1500 });
    emitTurn(bus, { sessionHash: 'h1', result: 'logbook', outcome: 'overwritten', evict: 'capacity' });
    emitTurn(bus, { sessionHash: 'h2', result: 'miss', passed: false, evict: 'decayed' });
    emitTurn(bus, { sessionHash: 'h2', result: 'miss', outcome: 'reinforced', slotsInUse: 8 });
    bus.emit('outbox', { depth: 3, change: 'queued' });
    bus.emit('error', { stage: 'write', error: new StoreError(ErrorCodes.STORE_UNAVAILABLE, 'down') });
    bus.emit('degraded', { sessionHash: 'h2', tenant: 'default', atMs: Date.now(), stage: 'read', code: ErrorCodes.STORE_UNAVAILABLE });

    const text = await m.metrics();
    const parsed = parsePrometheusTextFormat(text);
    expect(value(parsed, 'tidemark_reads_total', { result: 'slot' })).toBe(1);
    expect(value(parsed, 'tidemark_reads_total', { result: 'logbook' })).toBe(1);
    expect(value(parsed, 'tidemark_reads_total', { result: 'miss' })).toBe(2);
    expect(value(parsed, 'tidemark_writes_total', { outcome: 'allocated' })).toBe(1);
    expect(value(parsed, 'tidemark_writes_total', { outcome: 'overwritten' })).toBe(1);
    expect(value(parsed, 'tidemark_writes_total', { outcome: 'reinforced' })).toBe(1);
    expect(value(parsed, 'tidemark_writes_total', { outcome: 'gated_out' })).toBe(1);
    expect(value(parsed, 'tidemark_evictions_total', { reason: 'capacity' })).toBe(1);
    expect(value(parsed, 'tidemark_evictions_total', { reason: 'decayed' })).toBe(1);
    expect(value(parsed, 'tidemark_evictions_total', { reason: 'erased' })).toBe(0);
    expect(value(parsed, 'tidemark_active_sessions')).toBe(2);
    expect(value(parsed, 'tidemark_slots_in_use')).toBe(3 + 8);
    expect(value(parsed, 'tidemark_outbox_depth')).toBe(3);
    expect(value(parsed, 'tidemark_store_errors_total', { code: 'TIDEMARK_E_STORE_UNAVAILABLE' })).toBe(1);
    expect(value(parsed, 'tidemark_degraded_total', { stage: 'read' })).toBe(1);

    // Durations in seconds: the 1500 µs read lands in the le=0.0025 bucket but not le=0.001.
    const read = family(parsed, 'tidemark_read_duration_seconds');
    expect(read.type).toBe('HISTOGRAM');
    expect(Number(read.metrics[0]!.count)).toBe(4);
    expect(Number(read.metrics[0]!.sum)).toBeCloseTo(0.0015 + 3 * 0.0004, 9);
    expect(Number(read.metrics[0]!.buckets!['0.001'])).toBe(3);
    expect(Number(read.metrics[0]!.buckets!['0.0025'])).toBe(4);
    expect(Number(family(parsed, 'tidemark_attention_top_weight').metrics[0]!.count)).toBe(4);

    // Conventions: one prefix, counters end in _total, every family has help text.
    for (const f of parsed) {
      expect(f.name.startsWith('tidemark_')).toBe(true);
      expect(f.help.length).toBeGreaterThan(10);
      if (f.type === 'COUNTER') expect(f.name.endsWith('_total')).toBe(true);
    }
    // Nothing went to prom-client's global registry.
    expect(await client.register.metrics()).not.toContain('tidemark_');
    m.stop();
    expect((await registry.metrics()).trim()).toBe('');
  });

  it('keeps series count independent of the number of sessions (10,000 distinct sessions)', async () => {
    const bus = new EventEmitter<TidemarkEvents>();
    const m = await prometheusMetrics(bus, { registry: new client.Registry(), prefix: 'tm_' });
    for (let i = 0; i < 10; i++) emitTurn(bus, { sessionHash: `warm${i}`, evict: 'capacity' });
    const before = await m.metrics();
    for (let i = 0; i < 10_000; i++) {
      emitTurn(bus, { sessionHash: `s${i}`, result: (['slot', 'logbook', 'miss'] as const)[i % 3], evict: i % 7 === 0 ? 'decayed' : undefined });
    }
    const after = await m.metrics();
    const parsedAfter = parsePrometheusTextFormat(after);
    expect(seriesCount(parsedAfter)).toBe(seriesCount(parsePrometheusTextFormat(before)));
    expect(value(parsedAfter, 'tm_active_sessions')).toBe(10_010);
    expect(after).not.toMatch(/s9999|warm0/);
    m.stop();
  });

  it('rejects a bad prefix naming the option and value', async () => {
    await expect(prometheusMetrics(new EventEmitter<TidemarkEvents>(), { prefix: 'bad-prefix' })).rejects.toThrow(/prefix must match .* got "bad-prefix"/);
  });

  it('creates its own registry (not the global one) when none is passed', async () => {
    const bus = new EventEmitter<TidemarkEvents>();
    const m = await prometheusMetrics(bus);
    expect(m.registry).not.toBe(client.register);
    expect(m.contentType).toMatch(/^text\/plain/);
    m.stop();
  });
});
