// The overall mutation score of src/ and adapters/ estimated from a seeded random sample of the code.
// A whole run is about 15,000 mutants, many hours on 2 cores; a sample of a few hundred places in the
// code gives the score within a few points in under an hour. Usage:
//   npm run mutate:sample -- [--size N] [--seed S] [--plan]      (runs under tsx: it shares bench/'s seeded generator)
//
//   1. List every mutant the way Stryker's own instrumenter does, over the files stryker.config.mjs
//      mutates, and group them by the syntax node they change (one node can carry several mutants:
//      `a < b` gives `a <= b`, `a >= b`, `true` and `false`).
//   2. Draw --size nodes uniformly without replacement (seeded: on the same code a rerun draws the
//      same set; an edit to a mutated file shifts it).
//   3. Run Stryker once per room (src/memory, adapters/redis, ...) on one range per drawn node
//      (file:line:col-line:col), against the suites that exercise that room (ROOM_TESTS below): the
//      whole suite per mutant is hours even for a sample, so the score is a lower bound (a mutant only
//      the suites left out would kill counts as not detected). The ignorer in mutate-sample-ignorer.mjs skips
//      the nodes nested in a range that hold no drawn node; mutants that still run outside the drawn
//      nodes are not counted. Rooms with no tests here (see ROOM_TESTS) are not run: their drawn
//      mutants count as not detected.
//   4. Print the score of the mutants on the drawn nodes, overall and per room, with a 95 % interval,
//      and list the drawn mutants no test noticed.
//
// Score as Stryker counts it: (killed + timeout) / (killed + timeout + survived + no coverage); ignored
// (static), compile and runtime errors are left out. Every mutant of a drawn node counts, so the sample
// is a cluster sample and the score a ratio estimate; its interval uses the ratio estimator's variance
// (Cochran, Sampling Techniques, 3rd ed., 1977, ch. 6, from memory) with a normal approximation.
// --plan stops after step 2 and prints how many mutants the run will test.
import { Instrumenter } from '@stryker-mutator/instrumenter';
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { parseArgs } from 'node:util';
import { rng } from '../bench/lib/stats.ts';
import config from '../stryker.config.mjs';
import { draw, inside, keyOf, nodeKey, rangeOf, ratioInterval, roomOf } from './mutate-sample-lib.mjs';

const { values: args } = parseArgs({
  options: {
    size: { type: 'string', default: '600' },
    seed: { type: 'string', default: '1' },
    plan: { type: 'boolean', default: false },
  },
});
const size = Number(args.size);
const seed = Number(args.seed);
const outDir = 'reports/mutation';
const tag = `sample-${seed}-${size}`;

/** Files that stryker.config.mjs mutates, from git so that build output and temp dirs are never read. */
function mutatedFiles() {
  const listed = spawnSync('git', ['ls-files', 'src', 'adapters'], { encoding: 'utf8' }).stdout.split('\n');
  const skip = new Set(config.mutate.filter((p) => p.startsWith('!') && !p.includes('*')).map((p) => p.slice(1)));
  return listed.filter((f) => f.endsWith('.ts') && !f.endsWith('.d.ts') && !skip.has(f));
}

const quiet = {
  isTraceEnabled: () => false, isDebugEnabled: () => false, isInfoEnabled: () => false,
  isWarnEnabled: () => true, isErrorEnabled: () => true, isFatalEnabled: () => true,
  trace() {}, debug() {}, info() {}, warn: console.warn, error: console.error, fatal: console.error,
};

async function allMutants(files) {
  const input = files.map((name) => ({ name, content: readFileSync(name, 'utf8'), mutate: true }));
  const { mutants } = await new Instrumenter(quiet).instrument(input, {
    plugins: null, excludedMutations: [], ignorers: [], noHeader: true,
  });
  return mutants;
}

/**
 * The suites that exercise each room (globs for TIDEMARK_MUTATE_TESTS, inside vitest.mutate.config.ts's
 * exclusions): its own, and those of the rooms that drive it (the middleware drives the store, the
 * logbook and the metrics; the HTTP adapter serves the dashboard). Left out everywhere: the Redis
 * Cluster, multi-process proof and race suites, which start servers or processes for every mutant.
 * adapters/transformers runs only logic.test.ts, its tests against a stand-in library: the real-model
 * suites load onnxruntime's native module, which cannot load in the worker threads Stryker's vitest
 * runner uses ("Module did not self-register"), so vitest.mutate.config.ts leaves them out.
 */
const T = (...rooms) => rooms.map((r) => (r.endsWith('.ts') ? r : `test/${r}/**/*.test.ts`)).join(',');
const REDIS_LIGHT = ['redis', 'codec', 'codec-seal', 'codec-fields', 'codec-crc', 'auto-pipeline', 'lifecycle', 'ready', 'seal-idle'].map((f) => `test/adapters/redis/${f}.test.ts`);
const ROOM_TESTS = {
  'src/memory': T('memory'),
  'src/middleware': T('middleware', 'metrics', 'store', 'adapters/http'),
  'src/metrics': T('metrics', 'middleware', 'dashboard', 'adapters/http'),
  'src/store': T('store', 'middleware', 'metrics'),
  'src/logbook': T('logbook', 'middleware', 'store'),
  'src/vectors': T('vectors', 'store', 'logbook'),
  'src/embed': T('embed', 'middleware'),
  'src/dashboard': T('dashboard', 'adapters/http'),
  'src (top level)': T('test/*.test.ts', 'middleware'),
  'adapters/http': T('adapters/http', 'dashboard', 'metrics'),
  'adapters/redis': T(...REDIS_LIGHT, 'store'),
  'adapters/transformers': T('test/adapters/transformers/logic.test.ts'),
};

const pct = (x) => `${(100 * x).toFixed(1)} %`;

const files = mutatedFiles();
const digest = (f) => createHash('sha256').update(readFileSync(f)).digest('hex');
const drawnFrom = new Map(files.map((f) => [f, digest(f)]));
const mutants = await allMutants(files);
const nodes = new Map();
for (const m of mutants) {
  const k = nodeKey(m.fileName, m.location);
  if (!nodes.has(k)) nodes.set(k, { fileName: m.fileName, location: m.location, mutants: [] });
  nodes.get(k).mutants.push(m);
}
const drawn = draw([...nodes.values()], size, rng(seed));
// What the run tests: mutants inside a drawn range whose node is, or holds, a drawn node.
const drawnIn = new Map();
for (const d of drawn) drawnIn.set(d.fileName, [...(drawnIn.get(d.fileName) ?? []), d.location]);
const tested = mutants.filter((m) => {
  const here = drawnIn.get(m.fileName) ?? [];
  return here.some((d) => inside(d, m.location)) && here.some((d) => inside(m.location, d));
});
const counted = drawn.reduce((a, d) => a + d.mutants.length, 0);
console.log(`${mutants.length} mutants on ${nodes.size} nodes in ${files.length} files; drew ${drawn.length} nodes (seed ${seed}) carrying ${counted} mutants; the run tests about ${tested.length}`);
const byRoom = new Map();
for (const node of drawn) {
  const room = roomOf(node.fileName);
  if (!byRoom.has(room)) byRoom.set(room, []);
  byRoom.get(room).push(node);
}
for (const [room, nodes] of [...byRoom].sort()) {
  const n = nodes.reduce((a, d) => a + d.mutants.length, 0);
  console.log(`  ${room.padEnd(24)} ${String(nodes.length).padStart(5)} nodes ${String(n).padStart(6)} mutants${ROOM_TESTS[room] ? '' : '  (no tests of its own here: counted as not detected)'}`);
}
if (args.plan) process.exit(0);

mkdirSync(outDir, { recursive: true });
const status = new Map();
for (const [room, nodes] of [...byRoom].sort()) {
  const tests = ROOM_TESTS[room];
  if (!tests) continue;
  // The ranges are positions in the code as drawn: a file edited since would put them elsewhere.
  const edited = [...new Set(nodes.map((n) => n.fileName))].filter((f) => digest(f) !== drawnFrom.get(f));
  if (edited.length > 0) {
    console.error(`${edited.join(', ')} changed since the draw; rerun when the tree is still`);
    process.exit(1);
  }
  const name = `${tag}-${room.replace(/[^a-z]+/g, '-')}`;
  const locations = join(outDir, `${name}.locations.json`);
  writeFileSync(locations, JSON.stringify(nodes.map((m) => ({
    start: { line: m.location.start.line + 1, column: m.location.start.column },
    end: { line: m.location.end.line + 1, column: m.location.end.column },
  }))));
  const configFile = join(outDir, `${name}.config.mjs`);
  writeFileSync(
    configFile,
    `import base from '../../stryker.config.mjs';\n` +
      `export default { ...base, mutate: ${JSON.stringify(nodes.map(rangeOf))},\n` +
      `  plugins: ['@stryker-mutator/*', ${JSON.stringify(resolve('scripts/mutate-sample-ignorer.mjs'))}], ignorers: ['tidemark-sample'],\n` +
      `  incrementalFile: '${outDir}/${name}.incremental.json', tempDirName: '.stryker-tmp-${name}',\n` +
      `  reporters: ['progress', 'json'], jsonReporter: { fileName: '${outDir}/${name}.json' } };\n`,
  );
  console.log(`\n${room}: ${nodes.length} nodes against ${tests}`);
  const run = spawnSync('npx', ['stryker', 'run', configFile], {
    stdio: 'inherit',
    env: { ...process.env, TIDEMARK_MUTATE_SAMPLE: locations, TIDEMARK_MUTATE_TESTS: tests },
  });
  if (run.status !== 0) process.exit(run.status ?? 1);
  const report = JSON.parse(readFileSync(join(outDir, `${name}.json`), 'utf8'));
  for (const [fileName, file] of Object.entries(report.files)) {
    // The report's positions count lines and columns from 1.
    for (const m of file.mutants) {
      const { start, end } = m.location;
      const location = { start: { line: start.line - 1, column: start.column - 1 }, end: { line: end.line - 1, column: end.column - 1 } };
      status.set(keyOf(fileName, location, m), m.status);
    }
  }
}
// A room with no tests of its own: its drawn mutants are not detected.
for (const [room, nodes] of byRoom) if (!ROOM_TESTS[room]) for (const node of nodes) for (const m of node.mutants) status.set(keyOf(m.fileName, m.location, m), 'NoCoverage');

const DETECTED = new Set(['Killed', 'Timeout']);
const UNDETECTED = new Set(['Survived', 'NoCoverage']);
const rooms = new Map();
const survivors = [];
let missing = 0;
for (const node of drawn) {
  const cluster = { detected: 0, total: 0 };
  for (const m of node.mutants) {
    const s = status.get(keyOf(m.fileName, m.location, m));
    if (s === undefined) { missing++; continue; }
    if (!DETECTED.has(s) && !UNDETECTED.has(s)) continue;
    cluster.total++;
    if (DETECTED.has(s)) cluster.detected++;
    else survivors.push(`${rangeOf(m)} ${m.mutatorName} → ${JSON.stringify(m.replacement).slice(0, 60)} (${s})`);
  }
  if (cluster.total === 0) continue;
  for (const room of ROOM_TESTS[roomOf(node.fileName)] ? ['all', 'all with tests here', roomOf(node.fileName)] : ['all', roomOf(node.fileName)]) {
    if (!rooms.has(room)) rooms.set(room, []);
    rooms.get(room).push(cluster);
  }
}
console.log(`\nMutation score of the drawn nodes (seed ${seed}; ${missing} drawn mutants not in the report):`);
console.log('room                      nodes  mutants  score    95 % interval');
for (const [room, clusters] of [...rooms].sort(([a], [b]) => Number(!a.startsWith('all')) - Number(!b.startsWith('all')) || a.localeCompare(b))) {
  const { score, lo, hi } = ratioInterval(clusters);
  const total = clusters.reduce((a, c) => a + c.total, 0);
  console.log(`${room.padEnd(24)} ${String(clusters.length).padStart(6)} ${String(total).padStart(8)}  ${pct(score).padStart(7)}  ${pct(lo)} – ${pct(hi)}`);
}
console.log(`\nDrawn mutants no test noticed (${survivors.length}):`);
for (const s of survivors) console.log(`  ${s}`);
