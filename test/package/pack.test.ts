// The package as a TypeScript user receives it: `npm pack` (which builds on prepack), the tarball
// installed alone into a fresh app in a temp folder, and `tsc --noEmit --strict` *without*
// skipLibCheck over a consumer file — first without the optional peers (prom-client, ioredis,
// hnswlib-node, @xenova/transformers), then with them. The README's quick start is the consumer file,
// so the first thing a user copies is checked too. Installs use `--prefer-offline`: the npm cache
// when it has the packages, else the npm registry (the only network the test needs).

import { execFile } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

const run = promisify(execFile);
const ROOT = resolve(import.meta.dirname, '../..');
const repoPkg = JSON.parse(readFileSync(join(ROOT, 'package.json'), 'utf8')) as {
  scripts: Record<string, string>;
  devDependencies: Record<string, string>;
};
/** The consumer uses the same TypeScript and Node types the repo pins. */
const pin = (name: string): string => `${name}@${repoPkg.devDependencies[name]}`;
const PEERS = ['prom-client', 'ioredis', 'hnswlib-node', '@xenova/transformers'].map(pin);
const NPM_FLAGS = ['--prefer-offline', '--ignore-scripts', '--no-audit', '--no-fund', '--loglevel=error'];

/** The README's quick start (the first ts block under "## Quick start"), runnable as printed. */
function quickStart(): string {
  const readme = readFileSync(join(ROOT, 'README.md'), 'utf8');
  const section = readme.split(/^## Quick start$/m)[1];
  const block = section?.match(/```ts\n([\s\S]*?)```/)?.[1];
  if (!block) throw new Error('README.md has no ```ts block under "## Quick start"');
  return block;
}

// Uses of every value export of the entries that need no optional peer, and of the HTTP adapter and
// the metrics subpath, whose declarations must not need prom-client (it is loaded at run time only).
const WITHOUT_PEERS = `
import { createTidemark, inProcessStore, hashingEmbedder, TidemarkError, ErrorCodes, type MemoryContext, type Store } from 'tidemark';
import { transformersEmbedder, type TransformersEmbedderOptions } from 'tidemark/transformers';
import { createHttpAdapter, type HttpAdapterOptions } from 'tidemark/http';
import { prometheusMetrics, type PrometheusMetrics, type MetricsRegistry } from 'tidemark/prometheus';
const store: Store = inProcessStore();
const memory = createTidemark({ store, embedder: hashingEmbedder({ dim: 64 }), hashKey: 'k', capacity: 16 });
const ctx: Promise<MemoryContext> = memory.read({ session: 's1', text: 'hello' });
const code: string = ErrorCodes.CONFIG;
const options: TransformersEmbedderOptions = { model: 'invented/model' };
const httpOptions: HttpAdapterOptions = { tidemark: memory, handler: (input) => String(input.text), metrics: false };
const later = (m: PrometheusMetrics): MetricsRegistry => m.registry;
export { ctx, code, options, transformersEmbedder, TidemarkError, createHttpAdapter, httpOptions, prometheusMetrics, later };
`;

// Every subpath, including those whose types come from an optional peer.
const WITH_PEERS = `
import { createTidemark } from 'tidemark';
import { redisSlotStore, REDIS_CLIENT_OPTIONS, type RedisSlotStoreOptions } from 'tidemark/redis';
import { createHttpAdapter, type HttpAdapterOptions } from 'tidemark/http';
import { prometheusMetrics, type PrometheusMetrics } from 'tidemark/prometheus';
import { transformersEmbedder } from 'tidemark/transformers';
import * as client from 'prom-client';
const tm = createTidemark({});
const redisOptions: RedisSlotStoreOptions = { prefix: 'app:' };
// prom-client's own Registry and module fit the structural option types.
const registry = new client.Registry();
const metrics: Promise<PrometheusMetrics> = prometheusMetrics(tm, { registry, client });
void metrics.then((m) => client.Registry.merge([m.registry as client.Registry, new client.Registry()]));
const httpOptions: HttpAdapterOptions = { tidemark: tm, handler: (input) => String(input.text) };
export { redisSlotStore, REDIS_CLIENT_OPTIONS, createHttpAdapter, redisOptions, metrics, httpOptions, transformersEmbedder };
`;

const TSCONFIG = {
  compilerOptions: { target: 'ES2022', module: 'NodeNext', moduleResolution: 'NodeNext', strict: true, noEmit: true, types: ['node'] },
  files: ['quick-start.ts', 'consumer.ts'],
};

let tmp = '';
let app = '';
let tarball = '';
let packed: { filename: string; files: { path: string }[] } = { filename: '', files: [] };

async function tsc(): Promise<{ ok: boolean; output: string }> {
  try {
    await run(process.execPath, [join(app, 'node_modules/typescript/bin/tsc'), '-p', 'tsconfig.json'], { cwd: app });
    return { ok: true, output: '' };
  } catch (e) {
    const err = e as { stdout?: string; stderr?: string };
    return { ok: false, output: `${err.stdout ?? ''}${err.stderr ?? ''}` };
  }
}

describe('the packed tarball in a fresh TypeScript app', () => {
  beforeAll(async () => {
    tmp = mkdtempSync(join(tmpdir(), 'tidemark-pack-'));
    app = join(tmp, 'app');
    const { stdout } = await run('npm', ['pack', '--json', '--pack-destination', tmp], { cwd: ROOT, maxBuffer: 64 * 1024 * 1024 });
    // npm prints the build's output before the JSON array when prepack runs.
    const list = JSON.parse(stdout.slice(stdout.indexOf('\n[') + 1)) as { filename: string; files: { path: string }[] }[];
    packed = list[0]!;
    tarball = join(tmp, packed.filename);
    await run('mkdir', ['-p', app]);
    writeFileSync(join(app, 'package.json'), JSON.stringify({ name: 'consumer-app', version: '1.0.0', private: true, type: 'module' }));
    writeFileSync(join(app, 'tsconfig.json'), JSON.stringify(TSCONFIG));
    writeFileSync(join(app, 'quick-start.ts'), `${quickStart()}\nexport {};\n`);
    await run('npm', ['install', ...NPM_FLAGS, tarball, pin('typescript'), pin('@types/node')], { cwd: app });
  }, 300_000);

  afterAll(() => {
    if (tmp) rmSync(tmp, { recursive: true, force: true });
  });

  it('ships no source maps, no prepare script, and says where the repository is', () => {
    const paths = packed.files.map((f) => f.path);
    expect(paths).toContain('dist/src/index.d.ts');
    expect(paths).toContain('dist/src/metrics/prometheus.d.ts');
    expect(paths.filter((p) => p.endsWith('.map'))).toEqual([]);
    expect(paths.filter((p) => p.endsWith('.ts') && !p.endsWith('.d.ts'))).toEqual([]);
    const shipped = JSON.parse(readFileSync(join(app, 'node_modules/tidemark/package.json'), 'utf8')) as {
      scripts?: Record<string, string>;
      repository?: { url?: string };
    };
    expect(shipped.scripts?.prepare).toBeUndefined();
    expect(shipped.scripts?.prepack).toBe('npm run build');
    expect(shipped.repository?.url).toMatch(/^git\+https:\/\//);
  });

  it('installs alone: the root entry loads and runs without any optional peer', async () => {
    const script = `import('tidemark').then(async (t) => { const m = t.createTidemark(); await m.write({ session: 's', text: 'My bike is a green Corvane.' }); const c = await m.read({ session: 's', text: 'which bike?' }); console.log(c.items[0].value); });`;
    const { stdout } = await run(process.execPath, ['--input-type=module', '-e', script], { cwd: app });
    expect(stdout.trim()).toBe('a green Corvane');
  }, 60_000);

  it("runs the README's quick start as printed: the second reply has the first turn's fact in its memory", async () => {
    writeFileSync(join(app, 'quick-start.mjs'), quickStart());
    const { stdout } = await run(process.execPath, ['quick-start.mjs'], { cwd: app });
    const [first, ...second] = stdout.trim().split('\n[memory: ');
    expect(first).toBe('[memory: empty] You said: My bike is a green Corvane Audax.');
    expect(second.join('')).toContain('- my bike: a green Corvane Audax\n');
    expect(stdout.trim().endsWith('You said: Which bike do I ride?')).toBe(true);
  }, 60_000);

  it('tsc --strict without skipLibCheck passes without the optional peers', async () => {
    writeFileSync(join(app, 'consumer.ts'), WITHOUT_PEERS);
    const r = await tsc();
    expect(r.output).toBe('');
    expect(r.ok).toBe(true);
  }, 120_000);

  it('tsc --strict without skipLibCheck passes with the optional peers, over every subpath', async () => {
    await run('npm', ['install', ...NPM_FLAGS, '--no-save', ...PEERS], { cwd: app });
    writeFileSync(join(app, 'consumer.ts'), WITH_PEERS);
    const r = await tsc();
    expect(r.output).toBe('');
    expect(r.ok).toBe(true);
  }, 300_000);
});
