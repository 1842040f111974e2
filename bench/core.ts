// `npm run bench -- core [--json] [--turns N]`: the cost of tidemark's own work per turn, in-process.
// read_us / write_us time the memory math alone (attention over a full table; planning a write),
// embed_us the built-in embedder, turn_us a whole turn through createTidemark (read + write with
// the in-process store, embedding included). Capacity 64 and 256 at dimension 384, one core.
// Beside each step, in the same loop, its floor: the plainest code doing the same arithmetic (a
// typed-array scan of the same size, a hash-and-add embedding), and the ratio, so a noisy machine
// slows both alike. Then bytes per idle and per active session, measured on the heap after a GC.

import { createTidemark } from '../src/middleware/tidemark.js';
import { HashingEmbedder } from '../src/embed/hashing.js';
import { attend, queryTerms } from '../src/memory/attention.js';
import { RuleExtractor } from '../src/memory/extract.js';
import { READ_DEFAULTS, WRITE_DEFAULTS } from '../src/memory/params.js';
import { SlotTable } from '../src/memory/slots.js';
import { planWrite } from '../src/memory/write.js';
import { fnv1a } from '../src/memory/text.js';
import { heapBytes, machine, parseArgs, percentile, rng, round } from './lib/stats.js';

const DIM = 384;
const NAMES = ['Dana', 'Ravi', 'Mei', 'Tomasz', 'Aoife', 'Kwame', 'Lucia', 'Jonas', 'Priya', 'Omar'];
const THINGS = ['bike', 'fern', 'monstera', 'lesson', 'booking', 'order', 'chain', 'saddle', 'pot', 'class', 'tyre', 'cactus'];
const DAYS = ['Monday', 'Tuesday', 'Wednesday', 'Thursday', 'Friday', 'Saturday'];

/** Invented turns in the bike workshop / plant nursery / language tutor scenarios. */
function sentence(r: () => number, i: number): string {
  const pick = <T>(a: T[]): T => a[Math.floor(r() * a.length)]!;
  switch (i % 6) {
    case 0: return `My ${pick(THINGS)} number ${i} is ${pick(['green', 'blue', 'tall', 'second-hand'])} ${pick(THINGS)} from ${pick(NAMES)}`;
    case 1: return `Can I book a ${pick(THINGS)} check for ${pick(DAYS)} at ${1 + (i % 11)}pm?`;
    case 2: return `I live in ${pick(['Hillcrest', 'Elmwood', 'Riverside', 'Northgate'])} near the ${pick(THINGS)} shop ${i}`;
    case 3: return `What time do you open on ${pick(DAYS)}?`;
    case 4: return `Remember that ${pick(NAMES)} will collect the ${pick(THINGS)} ${i}`;
    default: return `I need ${2 + (i % 7)} ${pick(THINGS)}s for the ${pick(NAMES)} order ${i}`;
  }
}

function fullTable(capacity: number, embedder: HashingEmbedder, r: () => number): SlotTable {
  const t = new SlotTable(capacity, DIM);
  for (let i = 0; i < capacity; i++) {
    const text = sentence(r, i);
    t.set(i, {
      id: `r${i}`, key: embedder.embedOne(text), keyText: text.split(' ').slice(0, 3).join(' '), value: text, provenance: [`t${i}`],
      strength: 0.3 + 0.7 * r(), halfLife: 200, stamp: i, created: i, createdMs: 0, updatedMs: 0, reads: 0, pinned: false,
    });
  }
  return t;
}

// ---- floors: the same arithmetic in the plainest code (no tidemark function is called).

/** A read's arithmetic: one dot product per slot over the whole key row, then a softmax. */
function readFloor(keys: Float32Array, q: Float32Array, cap: number, dim: number, out: Float64Array): number {
  let max = -Infinity;
  for (let i = 0; i < cap; i++) {
    let d = 0;
    const o = i * dim;
    for (let j = 0; j < dim; j++) d += q[j]! * keys[o + j]!;
    out[i] = d;
    if (d > max) max = d;
  }
  let sum = 0;
  for (let i = 0; i < cap; i++) sum += out[i] = Math.exp(out[i]! - max);
  return sum;
}

/** The same read scoring only the query's non-zero entries (what a hashing query needs). */
function sparseReadFloor(keys: Float32Array, idx: Int32Array, val: Float64Array, cap: number, dim: number, out: Float64Array): number {
  let max = -Infinity;
  for (let i = 0; i < cap; i++) {
    let d = 0;
    const o = i * dim;
    for (let k = 0; k < idx.length; k++) d += val[k]! * keys[o + idx[k]!]!;
    out[i] = d;
    if (d > max) max = d;
  }
  let sum = 0;
  for (let i = 0; i < cap; i++) sum += out[i] = Math.exp(out[i]! - max);
  return sum;
}

/** A write's arithmetic: per candidate, the best-matching slot by dot product over whole key rows. */
function writeFloor(keys: Float32Array, cands: readonly Float32Array[], cap: number, dim: number): number {
  let acc = 0;
  for (const c of cands) {
    let best = -1;
    let bestD = -Infinity;
    for (let i = 0; i < cap; i++) {
      let d = 0;
      const o = i * dim;
      for (let j = 0; j < dim; j++) d += c[j]! * keys[o + j]!;
      if (d > bestD) {
        bestD = d;
        best = i;
      }
    }
    acc += best;
  }
  return acc;
}

/** An embedding's arithmetic: hash each word and its character trigrams into the vector, normalise. */
function embedFloor(text: string, out: Float32Array): void {
  out.fill(0);
  for (const w of text.toLowerCase().split(/[^a-z0-9]+/)) {
    if (w.length === 0) continue;
    const h = fnv1a(w);
    out[h % out.length] += (h & 0x80000000) !== 0 ? -1 : 1;
    for (let j = 0; j + 3 <= w.length; j++) {
      const g = fnv1a(w.slice(j, j + 3));
      out[g % out.length] += (g & 0x80000000) !== 0 ? -0.25 : 0.25;
    }
  }
  let s = 0;
  for (let j = 0; j < out.length; j++) s += out[j]! * out[j]!;
  const inv = s > 0 ? 1 / Math.sqrt(s) : 0;
  for (let j = 0; j < out.length; j++) out[j] = out[j]! * inv;
}

interface Figures {
  capacity: number;
  dim: number;
  read_us_p50: number;
  read_us_p99: number;
  write_us_p50: number;
  write_us_p99: number;
  embed_us_p50: number;
  turn_us_p50: number;
  turn_us_p99: number;
  turns_per_s: number;
  /** Same-run floors (p50, µs) and our p50 over them. */
  read_floor_us_p50: number;
  read_sparse_floor_us_p50: number;
  write_floor_us_p50: number;
  embed_floor_us_p50: number;
  /** embed + read + write floors: a turn's memory arithmetic. */
  turn_floor_us_p50: number;
  read_ratio: number;
  write_ratio: number;
  embed_ratio: number;
  turn_ratio: number;
}

async function measure(capacity: number, turns: number): Promise<Figures> {
  const r = rng(capacity);
  const embedder = new HashingEmbedder({ dim: DIM });
  const extractor = new RuleExtractor();
  const table = fullTable(capacity, embedder, r);
  const queries = Array.from({ length: 512 }, (_, i) => sentence(r, i + 1000));
  const qv = queries.map((q) => embedder.embedOne(q));
  const qt = queries.map((q) => queryTerms(q));
  const cands = queries.map((q, i) => extractor.extract(q, 'user').map((c) => ({ candidate: c, key: embedder.embedOne(c.key), turn: `t${i}`, role: 'user' as const })));

  const sparse = qv.map((q) => {
    const idx = Int32Array.from(Array.from(q).flatMap((x, j) => (x !== 0 ? [j] : [])));
    return { idx, val: Float64Array.from(idx, (j) => q[j]!) };
  });
  const candKeys = cands.map((cs) => cs.map((c) => c.key));

  const reps = 20_000;
  const read = new Float64Array(reps);
  const write = new Float64Array(reps);
  const embed = new Float64Array(reps);
  const readF = new Float64Array(reps);
  const sparseF = new Float64Array(reps);
  const writeF = new Float64Array(reps);
  const embedF = new Float64Array(reps);
  const scratch = new Float64Array(capacity);
  const vec = new Float32Array(DIM);
  let sink = 0;
  // Warm up the JIT before timing (common practice for V8 micro-benchmarks).
  for (let i = 0; i < 2000; i++) {
    attend(table, capacity + 10, qv[i % 512]!, qt[i % 512]!, READ_DEFAULTS);
    sink += readFloor(table.keys, qv[i % 512]!, capacity, DIM, scratch) + writeFloor(table.keys, candKeys[i % 512]!, capacity, DIM);
    sink += sparseReadFloor(table.keys, sparse[i % 512]!.idx, sparse[i % 512]!.val, capacity, DIM, scratch);
    embedFloor(queries[i % 512]!, vec);
  }
  for (let i = 0; i < reps; i++) {
    const n = i % 512;
    // Each step and its floor run back to back on the same input, so load on the machine hits both.
    let t0 = performance.now();
    sink += readFloor(table.keys, qv[n]!, capacity, DIM, scratch);
    readF[i] = (performance.now() - t0) * 1000;
    t0 = performance.now();
    sink += sparseReadFloor(table.keys, sparse[n]!.idx, sparse[n]!.val, capacity, DIM, scratch);
    sparseF[i] = (performance.now() - t0) * 1000;
    t0 = performance.now();
    sink += writeFloor(table.keys, candKeys[n]!, capacity, DIM);
    writeF[i] = (performance.now() - t0) * 1000;
    t0 = performance.now();
    embedFloor(`${queries[n]} ${i}`, vec);
    embedF[i] = (performance.now() - t0) * 1000;
    t0 = performance.now();
    attend(table, capacity + 10, qv[n]!, qt[n]!, READ_DEFAULTS);
    read[i] = (performance.now() - t0) * 1000;
    t0 = performance.now();
    planWrite({
      table, now: capacity + 10, nowMs: 0, params: WRITE_DEFAULTS, tenant: 't', session: 's', candidates: cands[n]!,
      reinforce: [], newId: () => `n${i}`,
    });
    write[i] = (performance.now() - t0) * 1000;
    t0 = performance.now();
    embedder.embedOne(`${queries[n]} ${i}`);
    embed[i] = (performance.now() - t0) * 1000;
  }

  // Whole turns: read + write through createTidemark on the in-process store, one session per 200
  // turns so tables fill and evict as in production.
  const tm = createTidemark({ capacity, embedder });
  const turn = new Float64Array(turns);
  const texts = Array.from({ length: turns }, (_, i) => sentence(r, i));
  for (let i = 0; i < 500; i++) {
    await tm.read({ session: `warm${i % 5}`, text: texts[i]! });
    await tm.write({ session: `warm${i % 5}`, text: texts[i]! });
  }
  const start = performance.now();
  for (let i = 0; i < turns; i++) {
    const session = `s${Math.floor(i / 200)}`;
    const t0 = performance.now();
    // One moment for the turn's read and write, as wrap() gives them.
    const at = Date.now();
    const ctx = await tm.read({ session, text: texts[i]!, at });
    await tm.write({ session, text: texts[i]!, at }, { reinforce: ctx.items.filter((x) => x.source === 'slot').map((x) => x.id) });
    turn[i] = (performance.now() - t0) * 1000;
  }
  const elapsed = (performance.now() - start) / 1000;
  await tm.close();
  if (sink === 0.5) console.log('');
  const f = (a: Float64Array): number => round(percentile(a, 50));
  const floor = { read: f(readF), sparse: f(sparseF), write: f(writeF), embed: f(embedF) };
  const turnFloor = round(floor.read + floor.write + floor.embed);
  const ratio = (x: number, y: number): number => round(x / Math.max(y, 0.01), 1);
  return {
    capacity,
    dim: DIM,
    read_us_p50: round(percentile(read, 50)),
    read_us_p99: round(percentile(read, 99)),
    write_us_p50: round(percentile(write, 50)),
    write_us_p99: round(percentile(write, 99)),
    embed_us_p50: round(percentile(embed, 50)),
    turn_us_p50: round(percentile(turn, 50)),
    turn_us_p99: round(percentile(turn, 99)),
    turns_per_s: Math.round(turns / elapsed),
    read_floor_us_p50: floor.read,
    read_sparse_floor_us_p50: floor.sparse,
    write_floor_us_p50: floor.write,
    embed_floor_us_p50: floor.embed,
    turn_floor_us_p50: turnFloor,
    read_ratio: ratio(f(read), floor.read),
    write_ratio: ratio(f(write), floor.write),
    embed_ratio: ratio(f(embed), floor.embed),
    turn_ratio: ratio(f(turn), turnFloor),
  };
}

/**
 * Heap bytes per session, measured: `idle` sessions that said one thing (a slot or two, one logbook
 * turn), `active` sessions 200 turns in (a full table, 400 logbook entries). Heap and array buffers
 * after a full GC, before and after, over the count; the embedding cache is off (it is shared by all
 * sessions and bounded, so it is not a per-session cost).
 */
async function sessionBytes(capacity: number, idle: number, active: number): Promise<{ idle: number; active: number }> {
  const r = rng(99);
  const texts = Array.from({ length: 400 }, (_, i) => sentence(r, i));
  const tm = createTidemark({ capacity, embedder: new HashingEmbedder({ dim: DIM }), embedCacheSize: 0 });
  await tm.write({ session: 'warm', text: texts[0]! });
  const b0 = heapBytes();
  for (let i = 0; i < idle; i++) {
    const session = `idle${i}`;
    await tm.read({ session, text: texts[i % 6]! });
    await tm.write({ session, text: texts[i % 6]! });
  }
  const b1 = heapBytes();
  for (let s = 0; s < active; s++) {
    for (let i = 0; i < 200; i++) {
      const session = `active${s}`;
      await tm.read({ session, text: texts[(s * 7 + i) % texts.length]! });
      await tm.write([{ session, text: texts[(s * 7 + i) % texts.length]! }, { session, role: 'assistant', text: texts[(s * 11 + i + 3) % texts.length]! }]);
    }
  }
  const b2 = heapBytes();
  await tm.close();
  return { idle: Math.round((b1 - b0) / idle), active: Math.round((b2 - b1) / active) };
}

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  const turns = Number(args.values.get('turns') ?? 20_000);
  const f64 = await measure(64, turns);
  const f256 = await measure(256, turns);
  const bytes = await sessionBytes(64, Number(args.values.get('idle') ?? 2000), Number(args.values.get('active') ?? 20));
  const rows = [f64, f256];
  console.log('tidemark core benchmark (in-process store, built-in embedder, one core)');
  console.log('p50 µs; in brackets the same-run floor (plainest code, same arithmetic) and our ratio to it');
  console.log('capacity x dim   read                 write                embed              turn p50/p99            turns/s');
  const cell = (x: number, floor: number, r: number, w: number): string => `${x} [${floor}, ${r}x]`.padEnd(w);
  for (const f of rows) {
    console.log(
      `${`${f.capacity} x ${f.dim}`.padEnd(16)} ${cell(f.read_us_p50, f.read_floor_us_p50, f.read_ratio, 20)} ${cell(f.write_us_p50, f.write_floor_us_p50, f.write_ratio, 20)} ${cell(f.embed_us_p50, f.embed_floor_us_p50, f.embed_ratio, 18)} ${`${f.turn_us_p50} / ${f.turn_us_p99} [${f.turn_floor_us_p50}, ${f.turn_ratio}x]`.padEnd(23)} ${f.turns_per_s}`,
    );
  }
  for (const f of rows) {
    console.log(`${f.capacity} x ${f.dim}: sparse read floor (a hashing query's non-zero entries only) ${f.read_sparse_floor_us_p50} µs; our read ${round(f.read_us_p50 / Math.max(f.read_sparse_floor_us_p50, 0.01), 1)}x of it; turn floor = embed + read + write floors`);
  }
  console.log(`bytes per session in process (heap after GC, 64 x ${DIM}): idle (one turn) ${bytes.idle} B, active (200 exchanges) ${bytes.active} B`);
  const memoryWork = f64.read_us_p50 + f64.write_us_p50;
  const floorWork = f64.read_floor_us_p50 + f64.write_floor_us_p50;
  console.log(`targets at 64 x 384: read+write p50 ${round(memoryWork)} µs (target <= 50; ${round(memoryWork / floorWork, 1)}x its floor, target <= 3x), ${f64.turns_per_s} turns/s sequential (target >= 20000, from bench load)`);
  if (args.flags.has('json')) {
    const { capacity: _c, ...top } = f64;
    console.log(JSON.stringify({ ...top, capacity: 64, capacity_256: f256, idle_session_bytes: bytes.idle, active_session_bytes: bytes.active, machine: machine() }));
  }
}
