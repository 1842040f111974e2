// `npm run bench -- http [--seconds 10] [--connections 32] [--sessions 1000] [--repeat R] [--json]`:
// autocannon against `serve()` (the HTTP adapter, SSE) with a bot that streams its reply word by word,
// POST /chat with varied session ids and invented texts; then the same against the same HTTP path
// with memory off, to give the latency memory adds. Loopback only; each server runs in a child
// process so the load generator does not share its event loop.
//
// "Memory off" is not a tidemark configured to do nothing: such an instance still validates, embeds,
// loads, attends, extracts and commits every turn. Off is a plain Node http server that reads the same
// JSON body, checks the same fields and streams the same reply as the same SSE frames (the adapter's
// own sseFrame/SSE_HEADERS) without tidemark. The difference is what memory costs: the read before
// the first byte, the `memory` event, the passthrough, and the write after the end competing for the
// server's one thread.

import { spawn, type ChildProcess } from 'node:child_process';
import { createServer, type IncomingMessage } from 'node:http';
import type { AddressInfo } from 'node:net';
import { createRequire } from 'node:module';
import { createInterface } from 'node:readline';
import { fileURLToPath } from 'node:url';
import { SSE_HEADERS, sseFrame } from '../adapters/http/sse.js';
import { serve } from '../cli/serve.js';
import { ID_PATTERN } from '../src/middleware/validate.js';
import { fnv1a } from '../src/memory/text.js';
import { asciiTable, barChart, writeResult } from './lib/results.js';
import { generateScenario } from './lib/scenario.js';
import { loadAverage } from './load.js';
import { machine, parseArgs, percentile, round } from './lib/stats.js';

type Variant = 'off' | 'on';

/** The part of autocannon 9's programmatic API used here (it ships no type declarations). */
interface Histo {
  average: number;
  total: number;
  p50: number;
  p90: number;
  p99: number;
}
type Autocannon = (opts: {
  url: string;
  connections: number;
  duration: number;
  requests: Array<Record<string, unknown>>;
}) => Promise<{ requests: Histo; latency: Histo; errors: number; non2xx: number }>;
const autocannon = createRequire(import.meta.url)('autocannon') as Autocannon;

// ------------------------------------------------------------------ the bot (same for both variants)

const REPLIES = [
  'Thanks, I have noted that on your job card and the mechanic will see it when your bike comes in.',
  'We have those in stock at the moment, and I can set some aside for you until the weekend.',
  'Our workshop opens at half past eight on weekdays and at nine on Saturdays; we are closed on Sundays.',
  'That plant likes bright indirect light, so keep it away from the radiator and water it once a week.',
  'Good question! Let me check with the team and come back to you before the end of the day.',
  'In your next lesson we will practise the past tense with a short story, so bring your notebook.',
];

/** The reply for a message: picked by a hash of its text, so both variants stream the same reply. */
const replyFor = (text: string): string => REPLIES[fnv1a(text) % REPLIES.length]!;

/** Streams word by word, yielding to the event loop between words as a model streaming tokens does. */
async function* streamWords(text: string): AsyncGenerator<string> {
  for (const w of text.split(/(?<= )/)) {
    await new Promise<void>((r) => setImmediate(r));
    yield w;
  }
}

// ------------------------------------------------------------------ the servers (child process)

function readBody(req: IncomingMessage, limit: number): Promise<Buffer> {
  return new Promise((resolve, reject) => {
    const parts: Buffer[] = [];
    let size = 0;
    req.on('data', (c: Buffer) => {
      size += c.byteLength;
      if (size > limit) reject(new Error('body too large'));
      else parts.push(c);
    });
    req.on('end', () => resolve(Buffer.concat(parts, size)));
    req.on('error', reject);
  });
}

/** Memory off: the same route, checks and SSE frames, no tidemark. */
async function serveOff(): Promise<{ url: string; close(): Promise<void> }> {
  const server = createServer(async (req, res) => {
    if (req.method !== 'POST' || req.url !== '/chat') {
      res.writeHead(404, { 'content-type': 'application/json' }).end('{"error":{"code":"TIDEMARK_E_HTTP_BAD_REQUEST"}}');
      return;
    }
    const t0 = performance.now();
    let body: { session?: unknown; text?: unknown };
    try {
      body = JSON.parse(new TextDecoder('utf-8', { fatal: true }).decode(await readBody(req, 64 * 1024)));
    } catch {
      res.writeHead(400, { 'content-type': 'application/json' }).end('{"error":{"code":"TIDEMARK_E_HTTP_BAD_REQUEST"}}');
      return;
    }
    if (typeof body.session !== 'string' || !ID_PATTERN.test(body.session) || typeof body.text !== 'string' || body.text.length === 0) {
      res.writeHead(400, { 'content-type': 'application/json' }).end('{"error":{"code":"TIDEMARK_E_INPUT_ID"}}');
      return;
    }
    res.writeHead(200, SSE_HEADERS);
    res.flushHeaders();
    let chars = 0;
    for await (const chunk of streamWords(replyFor(body.text))) {
      chars += chunk.length;
      if (!res.write(sseFrame({ data: chunk }))) await new Promise((r) => res.once('drain', r));
    }
    res.end(sseFrame({ event: 'done', data: JSON.stringify({ chars, ms: Math.round(performance.now() - t0) }) }));
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  const { port } = server.address() as AddressInfo;
  return {
    url: `http://127.0.0.1:${port}`,
    close: () => new Promise((resolve) => {
      server.close(() => resolve());
      server.closeAllConnections();
    }),
  };
}

/** Memory on: `serve()` with the in-process store and the same streaming bot. */
async function serveOn(): Promise<{ url: string; close(): Promise<void> }> {
  const s = await serve({ port: 0, host: '127.0.0.1', handler: (input) => streamWords(replyFor(String(input.text))), tidemark: { hashKey: 'http-bench' } });
  return { url: s.url, close: () => s.close() };
}

async function child(variant: Variant): Promise<void> {
  const s = variant === 'on' ? await serveOn() : await serveOff();
  process.stdout.write(`LISTEN ${s.url}\n`);
  await new Promise<void>((resolve) => process.once('SIGTERM', () => resolve()));
  await s.close();
}

/** Starts a server child and resolves with its URL once it listens. */
function spawnServer(variant: Variant): Promise<{ url: string; proc: ChildProcess }> {
  const runner = fileURLToPath(new URL('./run.ts', import.meta.url));
  const proc = spawn(process.execPath, ['--import', 'tsx', runner, 'http', '--serve-child', variant], { stdio: ['ignore', 'pipe', 'inherit'] });
  return new Promise((resolve, reject) => {
    const rl = createInterface({ input: proc.stdout! });
    const timer = setTimeout(() => reject(new Error(`${variant} server did not start within 20 s`)), 20_000);
    rl.on('line', (line) => {
      if (line.startsWith('LISTEN ')) {
        clearTimeout(timer);
        resolve({ url: line.slice(7).trim(), proc });
      }
    });
    proc.once('exit', (code) => reject(new Error(`${variant} server exited with ${code}`)));
  });
}

async function stopServer(proc: ChildProcess): Promise<void> {
  if (proc.exitCode !== null) return;
  const exited = new Promise<void>((r) => proc.once('exit', () => r()));
  proc.kill('SIGTERM');
  await exited;
}

// ------------------------------------------------------------------ the load

interface Figures {
  variant: Variant;
  requests_per_s: number;
  latency_ms_p50: number;
  latency_ms_p90: number;
  latency_ms_p99: number;
  requests: number;
  errors: number;
  non2xx: number;
}

async function hammer(url: string, variant: Variant, seconds: number, connections: number, sessions: number, texts: readonly string[]): Promise<Figures> {
  let k = 0;
  const result = await autocannon({
    url,
    connections,
    duration: seconds,
    requests: [
      {
        method: 'POST',
        path: '/chat',
        headers: { 'content-type': 'application/json' },
        // A different session and text on every request.
        setupRequest: (req: Record<string, unknown>) => {
          const n = k++;
          return { ...req, body: JSON.stringify({ session: `web-${n % sessions}`, text: texts[n % texts.length] }) };
        },
      },
    ],
  });
  return {
    variant,
    requests_per_s: round(result.requests.average, 0),
    latency_ms_p50: result.latency.p50,
    latency_ms_p90: result.latency.p90,
    latency_ms_p99: result.latency.p99,
    requests: result.requests.total,
    errors: result.errors,
    non2xx: result.non2xx,
  };
}

export default async function main(argv: string[]): Promise<void> {
  const args = parseArgs(argv);
  const serveChild = args.values.get('serve-child');
  if (serveChild) return child(serveChild === 'on' ? 'on' : 'off');
  const seconds = Number(args.values.get('seconds') ?? 10);
  const connections = Number(args.values.get('connections') ?? 32);
  const sessions = Number(args.values.get('sessions') ?? 1000);
  const repeat = Number(args.values.get('repeat') ?? 1);
  for (const [name, v, min] of [['seconds', seconds, 1], ['connections', connections, 1], ['sessions', sessions, 1], ['repeat', repeat, 1]] as const) {
    if (!Number.isInteger(v) || v < min || (name === 'seconds' && v > 120)) throw new RangeError(`--${name} must be an integer >= ${min}${name === 'seconds' ? ' and <= 120' : ''}, got ${v}`);
  }
  const texts = generateScenario({ seed: 5, sessions: 40 }).turns.filter((t) => t.role === 'user').map((t) => t.text);

  const runs: Figures[] = [];
  // Off and on alternate, so slow spells on a shared machine hit both.
  for (let r = 0; r < repeat; r++) {
    for (const variant of ['off', 'on'] as const) {
      const { url, proc } = await spawnServer(variant);
      try {
        // A short warm-up (JIT, connections) that is not measured (common practice).
        await hammer(url, variant, 2, connections, sessions, texts);
        runs.push(await hammer(url, variant, seconds, connections, sessions, texts));
      } finally {
        await stopServer(proc);
      }
    }
  }
  const pick = (v: Variant, f: (x: Figures) => number): number => percentile(runs.filter((x) => x.variant === v).map(f), 50);
  const row = (v: Variant) => ({
    requests_per_s: pick(v, (x) => x.requests_per_s),
    latency_ms_p50: pick(v, (x) => x.latency_ms_p50),
    latency_ms_p90: pick(v, (x) => x.latency_ms_p90),
    latency_ms_p99: pick(v, (x) => x.latency_ms_p99),
    errors: runs.filter((x) => x.variant === v).reduce((a, x) => a + x.errors + x.non2xx, 0),
  });
  const off = row('off');
  const on = row('on');
  const added = { p50_ms: round(on.latency_ms_p50 - off.latency_ms_p50, 2), p99_ms: round(on.latency_ms_p99 - off.latency_ms_p99, 2) };
  console.log(`http: autocannon, ${connections} connections, ${seconds} s per run, ${sessions} sessions, streamed SSE replies${repeat > 1 ? `, median of ${repeat} runs` : ''}`);
  console.log(asciiTable(['memory', 'req/s', 'p50 ms', 'p90 ms', 'p99 ms', 'errors'], [
    ['off', off.requests_per_s, off.latency_ms_p50, off.latency_ms_p90, off.latency_ms_p99, off.errors],
    ['on (serve)', on.requests_per_s, on.latency_ms_p50, on.latency_ms_p90, on.latency_ms_p99, on.errors],
  ]));
  console.log(`memory adds ${added.p50_ms} ms at p50 and ${added.p99_ms} ms at p99; throughput ratio on/off ${round(on.requests_per_s / off.requests_per_s, 2)}`);
  const svg = barChart({
    title: `POST /chat (SSE), ${connections} connections: memory off vs on`, yLabel: 'latency (ms)',
    groups: ['p50', 'p90', 'p99'],
    series: [
      { name: `off ${off.requests_per_s} req/s`, values: [off.latency_ms_p50, off.latency_ms_p90, off.latency_ms_p99] },
      { name: `on ${on.requests_per_s} req/s`, values: [on.latency_ms_p50, on.latency_ms_p90, on.latency_ms_p99] },
    ],
  });
  const out = { connections, seconds, sessions, off, on, added_latency_ms: added, throughput_ratio: round(on.requests_per_s / off.requests_per_s, 3), runs, load: loadAverage(), machine: machine() };
  const paths = writeResult(`http-c${connections}`, out, svg, ['http', ...argv]);
  console.log(`wrote ${paths.json} and ${paths.svg}`);
  if (args.flags.has('json')) console.log(JSON.stringify(out));
}
