// Vector index benchmark: HNSW build time, memory per item, search latency and recall@10 against the exact
// scan, measured side by side on the same seeded random unit vectors and the same queries.
// `npm run bench -- vectors [--json] [--sizes 10000,100000] [--queries 500] [--M 16] [--efc 100] [--ef 64]
//  [--ef-sweep 32,64,128] [--intrinsic 16]`; --intrinsic N draws low-rank vectors instead of uniform ones.

import type { VectorMatch } from '../src/vectors/vector-index.js';
import { ExactVectorIndex } from '../src/vectors/exact.js';
import { HNSW_VECTOR_INDEX_DEFAULTS, HnswVectorIndex } from '../src/vectors/hnsw.js';
import { rng as prng } from './lib/stats.js';

const DIM = 384;
const K = 10;


/** `n` random unit vectors, uniform on the sphere (normalised Gaussians, Box–Muller), in one buffer. */
function unitVectors(n: number, dim: number, seed: number): Float32Array {
  const rand = prng(seed);
  const out = new Float32Array(n * dim);
  for (let i = 0; i < n; i++) {
    let s = 0;
    for (let j = 0; j < dim; j += 2) {
      const r = Math.sqrt(-2 * Math.log(1 - rand()));
      const th = 2 * Math.PI * rand();
      const a = r * Math.cos(th);
      const b = r * Math.sin(th);
      out[i * dim + j] = a;
      s += a * a;
      if (j + 1 < dim) {
        out[i * dim + j + 1] = b;
        s += b * b;
      }
    }
    const inv = 1 / Math.sqrt(s);
    for (let j = 0; j < dim; j++) out[i * dim + j]! *= inv;
  }
  return out;
}

/**
 * `n` unit vectors with `intrinsic` degrees of freedom: a fixed random linear map of Gaussian
 * coordinates into `dim` dimensions, normalised. Closer to text embeddings than uniform vectors, which
 * have no structure at all (that embeddings have an intrinsic dimension far below 384 is common
 * knowledge in the field; the value 16 is illustrative, not measured).
 */
function lowRankVectors(n: number, dim: number, intrinsic: number, seed: number): Float32Array {
  const basis = unitVectors(intrinsic, dim, 99);
  const rand = prng(seed);
  const out = new Float32Array(n * dim);
  const z = new Float64Array(intrinsic);
  for (let i = 0; i < n; i++) {
    for (let c = 0; c < intrinsic; c++) z[c] = Math.sqrt(-2 * Math.log(1 - rand())) * Math.cos(2 * Math.PI * rand());
    let s = 0;
    for (let j = 0; j < dim; j++) {
      let x = 0;
      for (let c = 0; c < intrinsic; c++) x += z[c]! * basis[c * dim + j]!;
      out[i * dim + j] = x;
      s += x * x;
    }
    const inv = 1 / Math.sqrt(s);
    for (let j = 0; j < dim; j++) out[i * dim + j]! *= inv;
  }
  return out;
}

function percentile(sorted: number[], p: number): number {
  if (sorted.length === 0) return NaN;
  const i = Math.min(sorted.length - 1, Math.max(0, Math.ceil(p * sorted.length) - 1));
  return sorted[i]!;
}

function flag(argv: string[], name: string): string | undefined {
  const i = argv.indexOf(`--${name}`);
  return i >= 0 ? argv[i + 1] : undefined;
}

function numbers(s: string | undefined, fallback: number[]): number[] {
  if (!s) return fallback;
  const out = s.split(',').map((x) => Number(x.trim()));
  if (out.some((x) => !Number.isInteger(x) || x <= 0)) throw new Error(`expected a comma list of positive integers, got ${s}`);
  return out;
}

interface Row {
  items: number;
  build_s: number;
  bytes_per_item: number;
  search_ms_p50: number;
  search_ms_p99: number;
  recall_at_10: number;
  exact_ms_p50: number;
}

type Found = { ids: string[]; cosines: number[] };

/** Times each query (after a short warm-up); returns sorted latencies in ms and the results. */
function timeQueries(queries: Float32Array[], run: (q: Float32Array) => VectorMatch[]): { ms: number[]; results: Found[] } {
  for (let i = 0; i < Math.min(20, queries.length); i++) run(queries[i]!);
  const ms: number[] = [];
  const results: Found[] = [];
  for (const q of queries) {
    const t0 = performance.now();
    const r = run(q);
    ms.push(performance.now() - t0);
    results.push({ ids: r.map((m) => m.id), cosines: r.map((m) => m.cosine) });
  }
  return { ms: ms.sort((a, b) => a - b), results };
}

/**
 * recall@k with ties: a returned item counts when its cosine reaches the exact k-th best (within float32
 * rounding), the distance-threshold definition ANN-Benchmarks uses (Aumüller et al. 2018, from memory),
 * so a tie broken the other way is not a miss.
 */
function recallAt(approx: Found[], exact: Found[], k = K): number {
  let found = 0;
  let total = 0;
  for (let i = 0; i < exact.length; i++) {
    const e = exact[i]!;
    const want = Math.min(k, e.cosines.length);
    if (want === 0) continue;
    const kth = e.cosines[want - 1]! - 1e-5;
    total += want;
    found += Math.min(want, approx[i]!.cosines.filter((c) => c >= kth).length);
  }
  return total === 0 ? 1 : found / total;
}

export default async function main(argv: string[]): Promise<void> {
  const json = argv.includes('--json');
  const sizes = numbers(flag(argv, 'sizes'), [10_000, 100_000]);
  const nQueries = numbers(flag(argv, 'queries'), [500])[0]!;
  const M = numbers(flag(argv, 'M'), [HNSW_VECTOR_INDEX_DEFAULTS.M])[0]!;
  const efConstruction = numbers(flag(argv, 'efc'), [HNSW_VECTOR_INDEX_DEFAULTS.efConstruction])[0]!;
  const ef = numbers(flag(argv, 'ef'), [HNSW_VECTOR_INDEX_DEFAULTS.ef])[0]!;
  const sweep = numbers(flag(argv, 'ef-sweep'), []);
  const intrinsic = flag(argv, 'intrinsic') ? numbers(flag(argv, 'intrinsic'), [])[0]! : 0;
  const workload = intrinsic > 0 ? `low-rank random unit vectors (intrinsic dimension ${intrinsic})` : 'uniform random unit vectors';
  const vectors = (n: number, seed: number): Float32Array =>
    intrinsic > 0 ? lowRankVectors(n, DIM, intrinsic, seed) : unitVectors(n, DIM, seed);

  console.log(`vector index bench: ${workload}, dim ${DIM}, k ${K}, ${nQueries} queries, M ${M}, efConstruction ${efConstruction}, ef ${ef}`);
  const qbuf = vectors(nQueries, 7);
  const queries = Array.from({ length: nQueries }, (_, i) => qbuf.subarray(i * DIM, (i + 1) * DIM));
  const rows: Row[] = [];
  const sweepLines: string[] = [];

  for (const n of sizes) {
    const data = vectors(n, 42);
    const ids = Array.from({ length: n }, (_, i) => `item-${i}`);

    // Memory: resident-set growth across the build (native graph + the side vectors + id maps). Pages
    // hnswlib reserves for capacity but never touches are not resident, so they do not count.
    const rss0 = process.memoryUsage().rss;
    const t0 = performance.now();
    const hnsw = new HnswVectorIndex(DIM, { M, efConstruction, ef, initialCapacity: 1024 });
    for (let i = 0; i < n; i++) hnsw.add(ids[i]!, data.subarray(i * DIM, (i + 1) * DIM));
    const buildS = (performance.now() - t0) / 1000;
    const bytesPerItem = (process.memoryUsage().rss - rss0) / n;

    const exact = new ExactVectorIndex(DIM, n);
    for (let i = 0; i < n; i++) exact.add(ids[i]!, data.subarray(i * DIM, (i + 1) * DIM));
    const ex = timeQueries(queries, (q) => exact.search(q, K));
    const hn = timeQueries(queries, (q) => hnsw.search(q, K));

    rows.push({
      items: n,
      build_s: round(buildS, 2),
      bytes_per_item: Math.round(bytesPerItem),
      search_ms_p50: round(percentile(hn.ms, 0.5), 3),
      search_ms_p99: round(percentile(hn.ms, 0.99), 3),
      recall_at_10: round(recallAt(hn.results, ex.results), 4),
      exact_ms_p50: round(percentile(ex.ms, 0.5), 3),
    });

    for (const e of sweep) {
      hnsw.setEf(e);
      const s = timeQueries(queries, (q) => hnsw.search(q, K));
      sweepLines.push(
        `  items ${n}  ef ${String(e).padStart(4)}  p50 ${percentile(s.ms, 0.5).toFixed(3)} ms  p99 ${percentile(s.ms, 0.99).toFixed(3)} ms  recall@10 ${recallAt(s.results, ex.results).toFixed(4)}`,
      );
    }
    hnsw.clear();
    exact.clear();
  }

  const header = ['items', 'build_s', 'bytes/item', 'hnsw p50 ms', 'hnsw p99 ms', 'recall@10', 'exact p50 ms', 'speed-up'];
  const table = rows.map((r) => [
    String(r.items),
    r.build_s.toFixed(2),
    String(r.bytes_per_item),
    r.search_ms_p50.toFixed(3),
    r.search_ms_p99.toFixed(3),
    r.recall_at_10.toFixed(4),
    r.exact_ms_p50.toFixed(3),
    `${(r.exact_ms_p50 / r.search_ms_p50).toFixed(1)}x`,
  ]);
  const widths = header.map((h, i) => Math.max(h.length, ...table.map((t) => t[i]!.length)));
  const line = (cells: string[]): string => cells.map((c, i) => c.padStart(widths[i]!)).join('  ');
  console.log(line(header));
  for (const t of table) console.log(line(t));
  // hnswlib's own layout for comparison: vector + 2M bottom-layer links + count + label per element.
  const graphBytes = DIM * 4 + 2 * M * 4 + 4 + 8;
  console.log(`bytes/item is the RSS growth over the build; hnswlib's bottom layer alone is ${graphBytes} B an item, the side vectors ${DIM * 4} B`);
  if (sweepLines.length > 0) {
    console.log('ef sweep (same graph, same queries):');
    for (const l of sweepLines) console.log(l);
  }
  if (json) {
    const params = { dim: DIM, k: K, queries: nQueries, M, efConstruction, ef, workload: intrinsic > 0 ? `low-rank-${intrinsic}` : 'uniform' };
    console.log(JSON.stringify({ sizes: rows, params }));
  }
}

function round(x: number, digits: number): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}
