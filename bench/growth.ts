// `npm run bench -- growth [--lengths 100,1000,10000,100000] [--window 200] [--block 20] [--repeat R]
// [--baseline-max 10000] [--vectors] [--json]`: the cost
// of one turn against the length of a session's history, for tidemark and for the full-history
// baseline (`flat` from cli/baselines.ts: every turn kept and ranked exhaustively with the same
// embedder, cosine + BM25), measured side by side in one run on one growing session each.
// A turn is read + write for tidemark (as in `core`), query + add for the baseline; both embed the
// query with the built-in embedder behind a cache (tidemark's own; a memo for the baseline), so the
// curves differ by how each searches. Both keep every turn; tidemark's logbook answers from an
// inverted index (cost grows with the postings of the query's words, not with the history), the
// baseline scans every turn. The baseline's scan makes a turn at 100,000 exchanges cost ~1 s, so past
// `--baseline-max` it is no longer grown or timed (its column reads null). `--vectors` keeps every
// turn's vector in the logbook too (the dense list: exact scan while small, HNSW past a size, both
// added to per turn), so the vector side is timed with the lexical one. The logbook keeps every turn
// (no entry cap) at every length.

import type { Embedder } from '../src/embed/embedder.js';
import { HashingEmbedder } from '../src/embed/hashing.js';
import { TurnBaseline } from '../cli/baselines.js';
import { createTidemark, type Tidemark } from '../src/middleware/tidemark.js';
import { InProcessStore, scopeOf } from '../src/store/in-process.js';
import { asciiTable, lineChart, writeResult } from './lib/results.js';
import { generateScenario } from './lib/scenario.js';
import { loadAverage } from './load.js';
import { machine, parseArgs, percentile, round } from './lib/stats.js';

const SESSION = 'growth';

/** The embedder with a memo in front, so the baseline, like tidemark, embeds a repeated text once. */
function memoized(e: HashingEmbedder): Embedder & { one(text: string): Float32Array } {
  const memo = new Map<string, Float32Array>();
  const one = (t: string): Float32Array => {
    let v = memo.get(t);
    if (!v) memo.set(t, (v = e.embedOne(t)));
    return v;
  };
  return { id: e.id, dim: e.dim, embed: async (texts) => texts.map(one), one };
}

interface Exchange {
  user: string;
  reply: string;
}

/** One long invented conversation (the scenario generator, one session of `pairs` exchanges). */
function conversation(pairs: number, seed: number): Exchange[] {
  const sc = generateScenario({ seed, sessions: 1, minTurns: 2 * pairs, maxTurns: 2 * pairs + 1 });
  const out: Exchange[] = [];
  for (let i = 0; i + 1 < sc.turns.length; i += 2) out.push({ user: sc.turns[i]!.text, reply: sc.turns[i + 1]!.text });
  return out;
}

interface Point {
  length: number;
  tidemark_us: number;
  baseline_us: number;
  tidemark_p95_us: number;
  baseline_p95_us: number;
  /** tidemark's read alone (median µs); the rest of the turn is the write. */
  tidemark_read_us: number;
  /** tidemark's logbook search alone (median µs, part of the read). */
  tidemark_search_us: number;
  slots_in_use: number;
  /** Logbook entries of the session (every turn, plus values that left working memory). */
  logbook_entries: number;
  baseline_items: number;
}

/** One exchange through tidemark; returns the read's share (µs) and the logbook search's. */
async function tidemarkTurn(tm: Tidemark, n: number, x: Exchange): Promise<{ readUs: number; searchUs: number }> {
  const t0 = performance.now();
  const ctx = await tm.read({ session: SESSION, text: x.user });
  const readUs = (performance.now() - t0) * 1000;
  await tm.write(
    [
      { session: SESSION, text: x.user, turn: `u${n}` },
      { session: SESSION, text: x.reply, role: 'assistant', turn: `a${n}` },
    ],
    { reinforce: tm.usedBy(ctx, x.reply) },
  );
  return { readUs, searchUs: ctx.trace.searchUs };
}

async function baselineTurn(b: TurnBaseline, emb: ReturnType<typeof memoized>, n: number, x: Exchange): Promise<void> {
  const q = emb.one(x.user);
  await b.query(SESSION, x.user, 8, q);
  await b.add({ session: SESSION, turn: `u${n}`, role: 'user', text: x.user }, q);
  await b.add({ session: SESSION, turn: `a${n}`, role: 'assistant', text: x.reply });
}

/** Grows both to each length in turn and times `window` turns there, alternating tidemark and baseline turns. */
async function measure(lengths: readonly number[], window: number, block: number, seed: number, baselineMax: number, vectors: boolean): Promise<Point[]> {
  const convo = conversation(lengths[lengths.length - 1]! + window * lengths.length + 10, seed);
  const embedder = new HashingEmbedder({ dim: 384 });
  const store = new InProcessStore();
  const tm = createTidemark({ store, embedder, hashKey: 'growth-bench', logbook: { maxEntries: 0, vectors } });
  const emb = memoized(embedder);
  const base = new TurnBaseline({ kind: 'flat' }, { embedder: emb });
  // Warm the JIT on a session of its own before anything is timed (common practice).
  const warm = conversation(400, seed + 1000);
  for (let i = 0; i < warm.length; i++) {
    const x = warm[i]!;
    const ctx = await tm.read({ session: 'warm-up', text: x.user });
    await tm.write({ session: 'warm-up', text: x.user }, { reinforce: ctx.items.map((it) => it.id) });
    const q = emb.one(x.user);
    await base.query('warm-up', x.user, 8, q);
    await base.add({ session: 'warm-up', turn: `w${i}`, role: 'user', text: x.user }, q);
  }
  let n = 0;
  const points: Point[] = [];
  for (const length of lengths) {
    while (n < length) {
      const x = convo[n]!;
      await tidemarkTurn(tm, n, x);
      if (length <= baselineMax) await baselineTurn(base, emb, n, x);
      n++;
    }
    // Snapshot the history's size where the window starts.
    const snap = await store.load({ tenant: tm.tenant, session: SESSION });
    const entries = (await store.listLogbook(scopeOf({ tenant: tm.tenant, session: SESSION }), { limit: 10_000_000 })).length;
    const kept = base.itemsKept() - warm.length;
    const tUs = new Float64Array(window);
    const rUs = new Float64Array(window);
    const bUs = new Float64Array(window);
    const sUs = new Float64Array(window);
    for (let w0 = 0; w0 < window; w0 += block) {
      // Blocks of `block` turns each, alternating which goes first, so both share the machine's
      // noise; within a block one runs alone, so the other's scan (20,000 vectors at 10,000
      // exchanges) does not evict its caches before every turn. --block 1 alternates single turns.
      const end = Math.min(window, w0 + block);
      const order = (w0 / block) % 2 === 0;
      const sides = length <= baselineMax ? (order ? ['t', 'b'] : ['b', 't']) : ['t'];
      for (const which of sides) {
        for (let w = w0; w < end; w++) {
          const x = convo[n + w]!;
          const t0 = performance.now();
          if (which === 't') {
            const r = await tidemarkTurn(tm, n + w, x);
            rUs[w] = r.readUs;
            sUs[w] = r.searchUs;
          } else await baselineTurn(base, emb, n + w, x);
          (which === 't' ? tUs : bUs)[w] = (performance.now() - t0) * 1000;
        }
      }
    }
    n += window;
    points.push({
      length,
      tidemark_us: round(percentile(tUs, 50), 1),
      baseline_us: length <= baselineMax ? round(percentile(bUs, 50), 1) : NaN,
      tidemark_p95_us: round(percentile(tUs, 95), 1),
      baseline_p95_us: length <= baselineMax ? round(percentile(bUs, 95), 1) : NaN,
      tidemark_read_us: round(percentile(rUs, 50), 1),
      tidemark_search_us: round(percentile(sUs, 50), 1),
      slots_in_use: snap?.table.count() ?? 0,
      logbook_entries: entries,
      baseline_items: kept,
    });
  }
  await tm.close();
  return points;
}

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  const lengths = (args.values.get('lengths') ?? '100,1000,10000,100000').split(',').map(Number);
  if (lengths.length < 2 || lengths.some((l, i) => !Number.isInteger(l) || l < 1 || (i > 0 && l <= lengths[i - 1]!))) {
    throw new RangeError(`--lengths must be increasing integers >= 1, comma-separated, got ${args.values.get('lengths')}`);
  }
  const window = Number(args.values.get('window') ?? 200);
  const repeat = Number(args.values.get('repeat') ?? 1);
  if (!Number.isInteger(window) || window < 10) throw new RangeError(`--window must be an integer >= 10, got ${window}`);
  if (!Number.isInteger(repeat) || repeat < 1) throw new RangeError(`--repeat must be an integer >= 1, got ${repeat}`);
  const block = Number(args.values.get('block') ?? 20);
  if (!Number.isInteger(block) || block < 1 || block > window) throw new RangeError(`--block must be an integer from 1 to --window, got ${block}`);
  const baselineMax = Number(args.values.get('baseline-max') ?? 10_000);
  if (!Number.isInteger(baselineMax) || baselineMax < lengths[0]!) throw new RangeError(`--baseline-max must be an integer >= the first length, got ${args.values.get('baseline-max')}`);
  const vectors = args.flags.has('vectors');
  const runs: Point[][] = [];
  for (let r = 0; r < repeat; r++) runs.push(await measure(lengths, window, block, 7 + r, baselineMax, vectors));
  const med = (f: (p: Point) => number): number[] => lengths.map((_, i) => percentile(runs.map((run) => f(run[i]!)), 50));
  const tidemark = med((p) => p.tidemark_us);
  const baseline = med((p) => p.baseline_us);
  const last = lengths.length - 1;
  const ratio = round(tidemark[last]! / tidemark[0]!, 2);
  // The baseline's ratio over the longest length it ran at.
  const bLast = lengths.reduce((k, l, i) => (l <= baselineMax ? i : k), 0);
  const baselineRatio = round(baseline[bLast]! / baseline[0]!, 2);
  const at10k = lengths.indexOf(10_000);
  const p = runs[0]!;
  console.log(`per-turn cost against history length (one session, built-in embedder${vectors ? ', turn vectors in the logbook' : ''}, median of ${window} turns in alternating blocks of ${block}${repeat > 1 ? `, median of ${repeat} runs` : ''}; baseline up to ${baselineMax})`);
  console.log(asciiTable(
    ['history (exchanges)', 'tidemark µs', 'p95', 'of which read', 'of which search', 'flat baseline µs', 'p95', 'slots', 'logbook entries', 'baseline turns'],
    lengths.map((l, i) => [
      l, tidemark[i]!, med((x) => x.tidemark_p95_us)[i]!, med((x) => x.tidemark_read_us)[i]!, med((x) => x.tidemark_search_us)[i]!, l <= baselineMax ? baseline[i]! : '-',
      l <= baselineMax ? med((x) => x.baseline_p95_us)[i]! : '-', p[i]!.slots_in_use, p[i]!.logbook_entries, l <= baselineMax ? p[i]!.baseline_items : '-',
    ]),
  ));
  if (at10k > 0) console.log(`ratio 10000 / ${lengths[0]}: tidemark ${round(tidemark[at10k]! / tidemark[0]!, 2)} (target <= 1.5)`);
  console.log(`ratio ${lengths[last]} / ${lengths[0]}: tidemark ${ratio}; flat baseline ${lengths[bLast]} / ${lengths[0]}: ${baselineRatio}`);
  const svg = lineChart({
    title: 'Per-turn cost against history length', xLabel: 'history length (exchanges, log scale)', yLabel: 'µs per turn (median, log scale)',
    logX: true, logY: true,
    series: [{ name: 'tidemark', x: lengths, y: tidemark }, { name: 'flat baseline', x: lengths.slice(0, bLast + 1), y: baseline.slice(0, bLast + 1) }],
  });
  const out = { lengths, tidemark_us: tidemark, baseline_us: baseline.map((x, i) => (lengths[i]! <= baselineMax ? x : null)), ratio, ratio_10000: at10k > 0 ? round(tidemark[at10k]! / tidemark[0]!, 2) : null, baseline_ratio: baselineRatio, baseline_max: baselineMax, vectors, window, block, repeat, points: runs, load: loadAverage(), machine: machine() };
  const paths = writeResult('growth', out, svg, ['growth', ...argv]);
  console.log(`wrote ${paths.json} and ${paths.svg}`);
  if (args.flags.has('json')) console.log(JSON.stringify(out));
}
