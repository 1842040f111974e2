// `tidemark serve` as real child processes for the fleet tests: started with the command's own flags,
// their JSON-lines log collected, their URL read back from the startup line (they listen on port 0).

import { spawn, type ChildProcess } from 'node:child_process';
import { resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

export const repoRoot = resolve(fileURLToPath(new URL('../../..', import.meta.url)));

export interface ServeProc {
  readonly url: string;
  readonly instance: string;
  /** Every JSON line the process logged so far. */
  readonly logs: Array<Record<string, unknown>>;
  readonly proc: ChildProcess;
  stop(): Promise<void>;
}

/** Starts `tidemark serve --port 0 ...args` and resolves once its startup line names the URL. */
export async function startServe(args: readonly string[], env: Record<string, string> = {}): Promise<ServeProc> {
  const proc = spawn(process.execPath, ['--import', 'tsx', 'cli/main.ts', 'serve', '--port', '0', ...args], {
    cwd: repoRoot,
    env: { ...process.env, ...env },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  const logs: Array<Record<string, unknown>> = [];
  let stderr = '';
  proc.stderr!.on('data', (d: Buffer) => (stderr += d.toString()));
  let buf = '';
  const started = new Promise<Record<string, unknown>>((res, rej) => {
    proc.stdout!.on('data', (d: Buffer) => {
      buf += d.toString();
      let nl: number;
      while ((nl = buf.indexOf('\n')) >= 0) {
        const line = buf.slice(0, nl);
        buf = buf.slice(nl + 1);
        try {
          const entry = JSON.parse(line) as Record<string, unknown>;
          logs.push(entry);
          if (entry.event === 'serving') res(entry);
        } catch {
          // not a log line
        }
      }
    });
    proc.once('exit', (code) => rej(new Error(`serve exited with ${code} before serving: ${stderr.slice(-2000)}`)));
  });
  const first = await started;
  return {
    url: String(first.url),
    instance: String(first.instance),
    logs,
    proc,
    async stop() {
      if (proc.exitCode !== null) return;
      const exited = new Promise((r) => proc.once('exit', r));
      proc.kill('SIGTERM');
      const t = setTimeout(() => proc.kill('SIGKILL'), 5_000);
      await exited;
      clearTimeout(t);
    },
  };
}

/** One chat turn; resolves to the SSE text. */
export async function chat(url: string, session: string, text: string): Promise<string> {
  const res = await fetch(`${url}/chat`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ session, text }) });
  const body = await res.text();
  if (res.status !== 200) throw new Error(`chat answered ${res.status}: ${body}`);
  return body;
}

/** Polls `check` every `everyMs` until it returns true; resolves to the ms it took, or rejects after `limitMs`. */
export async function waitFor(check: () => Promise<boolean>, limitMs: number, everyMs = 25): Promise<number> {
  const t0 = performance.now();
  for (;;) {
    if (await check().catch(() => false)) return performance.now() - t0;
    if (performance.now() - t0 > limitMs) throw new Error(`condition not met within ${limitMs} ms`);
    await new Promise((r) => setTimeout(r, everyMs));
  }
}

// Invented customers of the demo bike workshop.
export const TURNS = [
  'My name is Dana.',
  'My bike is a green tourer.',
  'I live in Eastmoor.',
  'My saddle height is 74 cm.',
  'Can I book a full service for Friday?',
  'Actually, can we move it to Monday instead?',
  'What bike do I ride?',
  'When is my booking?',
];
