// `npm run bench -- soak [--seconds S] [--sessions N] [--concurrency C] [--json]`: bounded mixed load
// (turns, plain reads, erasures) on a throwaway redis-server that this benchmark starts on a free
// port and SIGKILLs and restarts on the same port half-way through. It reports errors, degraded
// reads, the outbox peak and lost writes, which must be 0: every write the core acknowledged
// (committed, or queued in the outbox) is checked afterwards in the store.

import { spawn, type ChildProcess } from 'node:child_process';
import { createServer, connect } from 'node:net';

// ------------------------------------------------------------------ a throwaway redis-server

/** A redis-server child of this process, on its own port, without persistence. */
export interface ThrowawayRedis {
  port: number;
  url: string;
  pid: number | undefined;
  /** SIGKILL (no shutdown, no save): what a crash or an OOM kill looks like to clients. */
  kill(): Promise<void>;
  /** Starts a fresh, empty server on the same port. */
  restart(): Promise<void>;
  /** Stops the server this helper started (by its pid; never any other redis). */
  stop(): Promise<void>;
}

/** A free TCP port on loopback (the kernel picks it; a race with another process is unlikely). */
export function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const srv = createServer();
    srv.once('error', reject);
    srv.listen(0, '127.0.0.1', () => {
      const addr = srv.address();
      const port = typeof addr === 'object' && addr ? addr.port : 0;
      srv.close(() => resolve(port));
    });
  });
}

/** Resolves once `PING` on the port answers `+PONG`, or rejects after `timeoutMs`. */
export async function waitForPong(port: number, timeoutMs = 5000): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  for (;;) {
    const ok = await new Promise<boolean>((resolve) => {
      const s = connect(port, '127.0.0.1');
      let buf = '';
      const done = (v: boolean): void => {
        s.destroy();
        resolve(v);
      };
      s.setTimeout(500, () => done(false));
      s.on('error', () => done(false));
      s.on('connect', () => s.write('PING\r\n'));
      s.on('data', (d) => {
        buf += d.toString();
        if (buf.includes('\r\n')) done(buf.startsWith('+PONG'));
      });
    });
    if (ok) return;
    if (Date.now() > deadline) throw new Error(`redis-server on port ${port} did not answer PING within ${timeoutMs} ms`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

/** Starts `redis-server` on a free loopback port (or `port`), with no RDB/AOF, as a child process. */
export async function throwawayRedis(port?: number): Promise<ThrowawayRedis> {
  const p = port ?? (await freePort());
  let child: ChildProcess | undefined;
  const start = async (): Promise<void> => {
    child = spawn('redis-server', ['--port', String(p), '--bind', '127.0.0.1', '--save', '', '--appendonly', 'no', '--protected-mode', 'yes', '--loglevel', 'warning'], {
      stdio: 'ignore',
    });
    const c = child;
    await new Promise<void>((resolve, reject) => {
      c.once('error', (err) => reject(new Error(`could not start redis-server (is it installed?): ${err.message}`)));
      c.once('spawn', () => resolve());
    });
    await waitForPong(p);
  };
  const killWith = async (signal: NodeJS.Signals): Promise<void> => {
    const c = child;
    child = undefined;
    if (!c || c.exitCode !== null || c.signalCode !== null) return;
    const exited = new Promise<void>((resolve) => c.once('exit', () => resolve()));
    c.kill(signal);
    await exited;
  };
  await start();
  return {
    port: p,
    url: `redis://127.0.0.1:${p}`,
    get pid() {
      return child?.pid;
    },
    kill: () => killWith('SIGKILL'),
    restart: start,
    stop: () => killWith('SIGTERM'),
  };
}

export default async function main(_argv: string[]): Promise<void> {
  throw new Error('soak: not written yet');
}
