// `npm run bench -- core [--json] [--turns N]`: the cost of tidemark's own work per turn, in-process.
// read_us / write_us time the memory math alone (attention over a full table; planning a write),
// embed_us the built-in embedder, turn_us a whole turn through createTidemark (read + write with
// the in-process store, embedding included). Capacity 64 and 256 at dimension 384, one core.

import { createTidemark } from '../src/middleware/tidemark.js';
import { HashingEmbedder } from '../src/embed/hashing.js';
import { attend, queryTerms } from '../src/memory/attention.js';
import { RuleExtractor } from '../src/memory/extract.js';
import { READ_DEFAULTS, WRITE_DEFAULTS } from '../src/memory/params.js';
import { SlotTable } from '../src/memory/slots.js';
import { planWrite } from '../src/memory/write.js';
import { machine, parseArgs, percentile, rng, round } from './lib/stats.js';

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

  const reps = 20_000;
  const read = new Float64Array(reps);
  const write = new Float64Array(reps);
  const embed = new Float64Array(reps);
  // Warm up the JIT before timing (common practice for V8 micro-benchmarks).
  for (let i = 0; i < 2000; i++) attend(table, capacity + 10, qv[i % 512]!, qt[i % 512]!, READ_DEFAULTS);
  for (let i = 0; i < reps; i++) {
    const n = i % 512;
    let t0 = performance.now();
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
    const ctx = await tm.read({ session, text: texts[i]! });
    await tm.write({ session, text: texts[i]! }, { reinforce: ctx.items.filter((x) => x.source === 'slot').map((x) => x.id) });
    turn[i] = (performance.now() - t0) * 1000;
  }
  const elapsed = (performance.now() - start) / 1000;
  await tm.close();
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
  };
}

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  const turns = Number(args.values.get('turns') ?? 20_000);
  const f64 = await measure(64, turns);
  const f256 = await measure(256, turns);
  const rows = [f64, f256];
  console.log('tidemark core benchmark (in-process store, built-in embedder, one core)');
  console.log('capacity x dim   read p50/p99 µs   write p50/p99 µs   embed p50 µs   turn p50/p99 µs   turns/s');
  for (const f of rows) {
    console.log(
      `${`${f.capacity} x ${f.dim}`.padEnd(16)} ${`${f.read_us_p50} / ${f.read_us_p99}`.padEnd(17)} ${`${f.write_us_p50} / ${f.write_us_p99}`.padEnd(18)} ${String(f.embed_us_p50).padEnd(14)} ${`${f.turn_us_p50} / ${f.turn_us_p99}`.padEnd(17)} ${f.turns_per_s}`,
    );
  }
  const memoryWork = f64.read_us_p50 + f64.write_us_p50;
  console.log(`targets at 64 x 384: read+write p50 ${round(memoryWork)} µs (target <= 50), ${f64.turns_per_s} turns/s (target >= 20000)`);
  if (args.flags.has('json')) {
    const { capacity: _c, ...top } = f64;
    console.log(JSON.stringify({ ...top, capacity: 64, capacity_256: f256, machine: machine() }));
  }
}
