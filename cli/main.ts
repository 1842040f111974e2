#!/usr/bin/env node
// The tidemark command: demo, serve, replay, sweep, inspect. Each verb lives in its own module and is
// loaded only when called, so `tidemark demo` never loads the HTTP or Redis adapters.

import { Command, InvalidArgumentError } from 'commander';
import { existsSync, readFileSync } from 'node:fs';
import { isTidemarkError } from '../src/errors.js';

/** Our package.json, found by walking up from this file (it runs from cli/ and from dist/cli/). */
function packageVersion(): string {
  let dir = new URL('.', import.meta.url);
  for (let i = 0; i < 5; i++) {
    const candidate = new URL('package.json', dir);
    if (existsSync(candidate)) {
      const pkg = JSON.parse(readFileSync(candidate, 'utf8')) as { name?: string; version?: string };
      if (pkg.name === 'tidemark') return pkg.version ?? '0.0.0';
    }
    dir = new URL('..', dir);
  }
  return '0.0.0';
}

const int = (name: string) => (v: string): number => {
  const n = Number(v);
  if (!Number.isInteger(n) || n < 0) throw new InvalidArgumentError(`${name} must be a whole number, got ${v}`);
  return n;
};
const collect = (v: string, prev: string[]): string[] => [...prev, v];

const program = new Command()
  .name('tidemark')
  .description('Working memory for chatbots: try it, serve it, and measure it on your own transcripts.')
  .version(packageVersion());

program
  .command('demo', { isDefault: true })
  .description('run the bike workshop booking conversation and show what memory does on each turn')
  .option('--capacity <n>', 'memory slots for the demo session', int('--capacity'), 6)
  .option('--model <path>', 'embed with a transformer model from this local folder (needs @xenova/transformers)')
  .action(async (o: { capacity: number; model?: string }) => {
    const { runDemo } = await import('./demo.js');
    let embedder;
    if (o.model) {
      // Loaded only when asked for: the core never imports the transformers adapter.
      const { transformersEmbedder } = await import('../adapters/transformers/index.js');
      embedder = transformersEmbedder({ model: o.model });
      await embedder.warmup();
    }
    const r = await runDemo({ capacity: o.capacity, ...(embedder ? { tidemark: { embedder } } : {}) });
    if (!r.friday) process.exitCode = 1;
  });

program
  .command('serve')
  .description('serve the demo bot over HTTP: POST /chat (SSE), /metrics, /dashboard')
  .option('--port <n>', 'port to listen on', int('--port'), 8787)
  .option('--host <host>', 'address to bind (default 127.0.0.1; another needs --token, and /chat then still answers loopback callers only: bind callers with resolveIdentity in code)')
  .option('--redis <url>', 'keep memory in Redis at this URL instead of in-process')
  .option('--token <token>', 'bearer token for the admin endpoints and dashboard (also TIDEMARK_TOKEN)')
  .option('--secret <secret>', 'key of the session-id hash, the same on every process of a fleet (also TIDEMARK_SECRET; 16+ chars)')
  .option('--capacity <n>', 'memory slots per session', int('--capacity'))
  .option('--config <file>', 'a JSON file of createTidemark options (flags override it)')
  .option('--instance <name>', "this process's name on the fleet dashboard (default host:port)")
  .action(async (o: { port: number; host?: string; redis?: string; token?: string; secret?: string; capacity?: number; config?: string; instance?: string }) => {
    const { serve } = await import('./serve.js');
    const token = o.token ?? process.env.TIDEMARK_TOKEN;
    const secret = o.secret ?? process.env.TIDEMARK_SECRET;
    // The startup line (JSON, on stdout) names the URL, the store and whether it answered.
    const s = await serve({
      port: o.port,
      ...(o.host ? { host: o.host } : {}),
      ...(o.redis ? { redis: o.redis } : {}),
      ...(token ? { token } : {}),
      ...(secret ? { secret } : {}),
      ...(o.capacity !== undefined ? { capacity: o.capacity } : {}),
      ...(o.config ? { config: o.config } : {}),
      ...(o.instance ? { instance: o.instance } : {}),
    });
    const stop = (): void => void s.close().then(() => process.exit(0));
    process.once('SIGINT', stop);
    process.once('SIGTERM', stop);
  });

program
  .command('replay')
  .description('replay a JSON Lines transcript through tidemark, ask probes, and report recall beside baselines')
  .argument('<transcript>', 'transcript file, JSON Lines')
  .option('--probes <file>', 'probes file, JSON Lines')
  .option('--k <n>', 'items per probe read', int('--k'), 5)
  .option('--config <file>', 'JSON file of createTidemark options')
  .option('--baseline <spec>', 'baseline to run beside: window:N or flat (repeatable)', collect, [])
  .option('--strict', 'stop at the first malformed line instead of skipping it')
  .option('--json', 'print one JSON object on stdout')
  .action(async (transcript: string, o: Record<string, unknown>) => {
    const { replayCli } = await import('./replay-cli.js');
    process.exitCode = await replayCli(transcript, o);
  });

program
  .command('tune')
  .alias('sweep')
  .description('try a grid of settings on a transcript + probes and print the recall/cost frontier (`sweep` is its 0.1 name)')
  .argument('<transcript>', 'transcript file, JSON Lines')
  .requiredOption('--probes <file>', 'probes file, JSON Lines')
  .option('--k <n>', 'items per probe read', int('--k'), 5)
  .option('--grid <file>', 'JSON file with the grid to try')
  .option('--config <file>', 'JSON file of base createTidemark options')
  .option('--out <file>', 'write the frontier plot (.svg or .html)')
  .option('--strict', 'stop at the first malformed line instead of skipping it')
  .option('--json', 'print one JSON object on stdout')
  .action(async (transcript: string, o: Record<string, unknown>) => {
    // The 0.1 name clashed with the retention sweep (`retention.sweepMs`, `sweep()`); it works until 0.3.
    if (program.args[0] === 'sweep') process.stderr.write('tidemark: `sweep` was renamed `tune`; the old name goes in 0.3\n');
    const { tuneCli } = await import('./tune.js');
    process.exitCode = await tuneCli(transcript, o);
  });

try {
  await program.parseAsync(process.argv);
} catch (err) {
  if (isTidemarkError(err)) {
    process.stderr.write(`tidemark: ${err.code}: ${err.message}\n`);
    process.exitCode = 2;
  } else throw err;
}
