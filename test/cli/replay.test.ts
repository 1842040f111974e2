import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { TurnBaseline, parseBaseline } from '../../cli/baselines.js';
import { parseProbes, parseTranscript } from '../../cli/jsonl.js';
import { percentile, recallOf, retrievedTurns, runReplay } from '../../cli/replay.js';
import { replayCli } from '../../cli/replay-cli.js';
import { HashingEmbedder } from '../../src/embed/hashing.js';
import { TINY_PROBES, TINY_TRANSCRIPT } from './fixtures.js';

const tiny = () => ({ turns: parseTranscript(TINY_TRANSCRIPT).items, probes: parseProbes(TINY_PROBES).items });
const dir = mkdtempSync(join(tmpdir(), 'tidemark-replay-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('retrievedTurns', () => {
  const items = [{ provenance: ['t7', 't5'] }, { provenance: ['t5', 't1'] }, { provenance: ['t9'] }];
  it('lists distinct source turns in rank order, a merged item spending several places', () => {
    expect(retrievedTurns(items, 1)).toEqual(['t7']);
    expect(retrievedTurns(items, 2)).toEqual(['t7', 't5']);
    expect(retrievedTurns(items, 3)).toEqual(['t7', 't5', 't1']);
    expect(retrievedTurns(items, 10)).toEqual(['t7', 't5', 't1', 't9']);
  });
  it('recall is the share of expected turns retrieved', () => {
    expect(recallOf(['t1', 't9'], ['t9', 't3'])).toBe(0.5);
    expect(recallOf(['t1'], [])).toBe(0);
  });
  it('percentile is nearest-rank', () => {
    expect(percentile([1, 2, 3, 4], 0.5)).toBe(2);
    expect(percentile([1, 2, 3, 4], 0.99)).toBe(4);
    expect(percentile([], 0.5)).toBe(0);
  });
});

describe('runReplay on a hand-written transcript', () => {
  it('gives the exact probes, counters, tiers and baselines', async () => {
    const r = await runReplay({ ...tiny(), k: 3, baselines: ['window:2', 'flat', 'bm25'] });
    // Probes with `after` run right after their turn (t3, then t5), the rest at the end.
    expect(r.probes.map(({ id, session, kind, retrieved, recall, result }) => ({ id, session, kind, retrieved, recall, result }))).toEqual([
      { id: 'fact:bike', session: 's1', kind: 'fact', retrieved: ['t3'], recall: 1, result: 'slot' },
      { id: 'fact:service-early', session: 's1', kind: 'fact', retrieved: ['t5'], recall: 1, result: 'slot' },
      { id: 'fact:name', session: 's1', kind: 'fact', retrieved: ['t1'], recall: 1, result: 'slot' },
      // The update overwrote the booking: its slot carries both turns, newest first; nothing else scores
      // within a tenth of it.
      { id: 'latest:service', session: 's1', kind: 'latest', retrieved: ['t7', 't5'], recall: 1, result: 'slot' },
      { id: 'fact:other', session: 's2', kind: 'fact', retrieved: ['u1'], recall: 1, result: 'slot' },
    ]);
    // Every baseline keeps both roles; none can tell Thursday from Tuesday.
    expect(r.probes[3]!.baselines).toEqual({
      'window:2': { retrieved: ['t9', 't8'], recall: 0 }, flat: { retrieved: ['t6', 't5', 't2'], recall: 0 }, bm25: { retrieved: ['t6', 't5'], recall: 0 },
    });
    const { read_us, turns_per_s, turns_per_cpu_s, ...s } = r.summary;
    expect(read_us.p99).toBeGreaterThanOrEqual(read_us.p50);
    expect(turns_per_s).toBeGreaterThan(0);
    expect(turns_per_cpu_s).toBeGreaterThan(0);
    expect(s).toEqual({
      turns: 10, sessions: 2, probes: 5, k: 3, capacity: 64, recall_at_k: 1, recall_at_1: 1, value_at_k: null, value_at_1: null,
      by_kind: { fact: { probes: 4, recall_at_1: 1, recall_at_k: 1 }, latest: { probes: 1, recall_at_1: 1, recall_at_k: 1 } },
      reads: { slot: 0, logbook: 0, miss: 6 },
      probe_reads: { slot: 5, logbook: 0, miss: 0 },
      hit_precision: 1, hit_recall: 1,
      writes: { allocated: 4, overwritten: 1, reinforced: 0, gated_out: 1 },
      evictions: { capacity: 0, decayed: 0, expired: 0, erased: 0 },
      slots_in_use: 4, logbook_entries: 11, demoted_items: 1, skipped: 0,
      tiers: {
        working: { slots_in_use: 4, capacity: 64, writes: { allocated: 4, overwritten: 1, reinforced: 0, gated_out: 1, ambiguous: 0 }, evictions: { capacity: 0, decayed: 0, expired: 0, erased: 0 } },
        logbook: {
          entries: { turn: 10, superseded: 1, capacity: 0, decayed: 0, expired: 0 }, turns_kept: 10, demoted: 1,
          retention: { max_age_ms: 0, max_entries: 100_000, dropped_age: 0, dropped_count: 0 }, roles: ['user', 'assistant'],
        },
      },
    });
    expect(Object.keys(r.baselines)).toEqual(['window:2', 'flat', 'bm25']);
    const { read_us: _w, ...w } = r.baselines['window:2']!;
    expect(w).toEqual({
      recall_at_k: 0.6, recall_at_1: 0.6, value_at_k: null, value_at_1: null,
      by_kind: { fact: { probes: 4, recall_at_1: 0.75, recall_at_k: 0.75 }, latest: { probes: 1, recall_at_1: 0, recall_at_k: 0 } },
      items_kept: 3,
    });
    expect(r.baselines.flat!.items_kept).toBe(10);
    expect(r.baselines.bm25!.items_kept).toBe(10);
    expect(r.baselines.bm25!.recall_at_k).toBe(0.8);
  });

  it('checks values: an expected value above any rejected one, per kind from `kind` or `category`', async () => {
    const line = (o: object): string => JSON.stringify(o);
    const turns = parseTranscript([
      line({ session: 'c', turn: 'D1:1', role: 'user', speaker: 'Maren', text: 'I work at Quillfeather Press now.', at: '2025-03-03T10:00:00Z' }),
      line({ session: 'c', turn: 'D1:2', role: 'assistant', speaker: 'Kofi', text: 'Nice! I ran my first 10k yesterday.', at: '2025-03-03T10:01:00Z' }),
      line({ session: 'c', turn: 'D2:1', role: 'user', speaker: 'Maren', text: 'Big news: I started at Cindermoor Games on Monday.', at: '2025-04-10T10:00:00Z' }),
      line({ session: 'c', turn: 'D2:2', role: 'assistant', speaker: 'Kofi', text: 'Congratulations!', at: '2025-04-10T10:01:00Z' }),
    ].join('\n')).items;
    const probes = parseProbes([
      line({ id: 'p1', session: 'c', query: 'Where does Maren work now?', expect: ['D2:1'], expectText: ['Cindermoor'], rejectText: ['Quillfeather'], category: 4 }),
      line({ id: 'p2', session: 'c', query: 'When did Kofi run his first 10k?', expect: ['D1:2'], expectText: ['2025-03-02'], kind: 'temporal' }),
      line({ id: 'p3', session: 'c', query: 'Where did Maren work in March?', expectText: '/quillfeather/', kind: 'temporal' }),
    ].join('\n')).items;
    const r = await runReplay({ turns, probes, k: 2, baselines: ['bm25'] });
    const v = Object.fromEntries(r.probes.map((p) => [p.id, p.value]));
    // The newer employer comes first and the older one does not outrank it.
    expect(v.p1).toMatchObject({ ok: true, at_1: true, rank: 1 });
    expect(v.p1!.rejected_rank === null || v.p1!.rejected_rank > 1).toBe(true);
    // "yesterday" said on 3 March 2025 is shown as 2025-03-02 beside the turn.
    expect(v.p2).toMatchObject({ ok: true });
    expect(r.summary.by_kind).toMatchObject({ '4': { probes: 1 }, temporal: { probes: 2, value_probes: 2 } });
    // A probe without `expect` counts for values only.
    expect(r.probes.find((p) => p.id === 'p3')!.recall).toBe(0);
    expect(r.summary.recall_at_k).toBe(1);
    expect(r.summary.value_at_k).toBeGreaterThanOrEqual(2 / 3);
  });

  it('cuts retrieved at k', async () => {
    const r = await runReplay({ ...tiny(), k: 1 });
    expect(r.probes.find((p) => p.id === 'latest:service')!.retrieved).toEqual(['t7']);
    expect(r.summary.recall_at_k).toBe(1);
  });

  it('skips a probe whose `after` is not in the transcript, or fails in strict mode', async () => {
    const probes = parseProbes(JSON.stringify({ id: 'x', session: 's1', query: 'name?', expect: ['t1'], after: 't99' })).items;
    const r = await runReplay({ turns: tiny().turns, probes });
    expect(r.probes).toEqual([]);
    expect(r.issues).toEqual([{ file: 'probes', line: 1, message: 'field "after" names turn "t99", which is not in this session\'s transcript; probe skipped' }]);
    await expect(runReplay({ turns: tiny().turns, probes, strict: true })).rejects.toMatchObject({ code: 'TIDEMARK_E_REPLAY_FORMAT' });
  });

  it('reports a turn tidemark refuses as a skipped line', async () => {
    const turns = parseTranscript(`${JSON.stringify({ session: 's1', turn: 't1', role: 'user', text: 'x'.repeat(100) })}\n${JSON.stringify({ session: 's1', turn: 't2', role: 'user', text: 'My name is Dana.' })}`).items;
    const r = await runReplay({ turns, config: { maxTextBytes: 50 } });
    expect(r.summary.turns).toBe(1);
    expect(r.summary.skipped).toBe(1);
    expect(r.issues[0]!.line).toBe(1);
    expect(r.issues[0]!.message).toContain('maxTextBytes');
  });
});

describe('baselines', () => {
  const embedder = new HashingEmbedder();
  it('parses specs and rejects others', () => {
    expect(parseBaseline('window:20')).toEqual({ kind: 'window', size: 20 });
    expect(parseBaseline('flat')).toEqual({ kind: 'flat' });
    expect(parseBaseline('bm25')).toEqual({ kind: 'bm25' });
    expect(() => parseBaseline('window:0')).toThrow(/window:N/);
  });
  it('window keeps the last N kept-role turns; flat keeps all; both rank by cosine + BM25', async () => {
    const w = new TurnBaseline({ kind: 'window', size: 2 }, { embedder });
    const f = new TurnBaseline({ kind: 'flat' }, { embedder });
    const turns = [
      { session: 's', turn: 'a', role: 'user' as const, text: 'my bike is a Corvane Tourer' },
      { session: 's', turn: 'b', role: 'assistant' as const, text: 'a Corvane Tourer, nice' },
      { session: 's', turn: 'c', role: 'user' as const, text: 'the weather is grim' },
      { session: 's', turn: 'd', role: 'user' as const, text: 'I live in Ashwendle' },
    ];
    for (const t of turns) {
      await w.add(t);
      await f.add(t);
    }
    expect(w.itemsKept()).toBe(2);
    expect(f.itemsKept()).toBe(4); // both roles by default
    expect((await f.query('s', 'which Corvane bike?', 1)).retrieved).toEqual(['a']);
    expect((await w.query('s', 'which Corvane bike?', 5)).retrieved).not.toContain('a');
    expect((await f.query('nobody', 'x', 3)).retrieved).toEqual([]);
  });
});

describe('replayCli', () => {
  const transcript = join(dir, 'transcript.jsonl');
  const probes = join(dir, 'probes.jsonl');
  writeFileSync(transcript, `${TINY_TRANSCRIPT}\n{broken\n`);
  writeFileSync(probes, TINY_PROBES);
  const io = () => {
    const out: string[] = [];
    const err: string[] = [];
    return { out, err, io: { stdout: (s: string) => void out.push(s), stderr: { write: (s: string) => err.push(s), isTTY: false } } };
  };

  it('prints one JSON object with --json and reports the bad line on stderr', async () => {
    const c = io();
    expect(await replayCli(transcript, { probes, json: true, k: '3', baseline: ['flat'] }, c.io)).toBe(0);
    const obj = JSON.parse(c.out.join(''));
    expect(Object.keys(obj)).toEqual(['summary', 'baselines', 'probes', 'issues']);
    expect(obj.summary.skipped).toBe(1);
    expect(obj.issues).toEqual([{ file: transcript, line: 11, message: 'not valid JSON' }]);
    expect(c.err.join('')).toContain('line 11: not valid JSON');
  });

  it('prints a table beside the baselines without --json', async () => {
    const c = io();
    expect(await replayCli(transcript, { probes, baseline: ['window:2', 'flat', 'bm25'] }, c.io)).toBe(0);
    const text = c.out.join('');
    expect(text).toMatch(/^tidemark\s+1\.000/m);
    expect(text).toMatch(/^window:2\s+0\.600/m);
    expect(text).toMatch(/^flat\s+/m);
    expect(text).toMatch(/^bm25\s+0\.800/m);
    // Both tiers in the summary: slots and logbook, the retention policy applied.
    expect(text).toMatch(/^working\s+4 slots in use/m);
    expect(text).toMatch(/^logbook\s+11 entries: 10 turns \(user \+ assistant\), 1 superseded, 0 evicted values; retention no max age, max 100,000 per scope \(deleted: 0 by age, 0 by count\)/m);
    expect(text).toContain('line 11: not valid JSON');
  });

  it('exits 2 with the code and line number in strict mode', async () => {
    const c = io();
    expect(await replayCli(transcript, { probes, strict: true }, c.io)).toBe(2);
    expect(c.err.join('')).toBe(`tidemark replay: TIDEMARK_E_REPLAY_FORMAT: ${transcript} line 11: not valid JSON\n`);
  });

  it('exits 2 on a missing file or a bad --k', async () => {
    const c = io();
    expect(await replayCli(join(dir, 'nope.jsonl'), {}, c.io)).toBe(2);
    expect(await replayCli(transcript, { k: 'zero' }, c.io)).toBe(2);
    expect(c.err.join('')).toContain('--k must be an integer');
  });
});
