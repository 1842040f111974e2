// Shared pieces of the Redis integration suites: reaching the real server (fail under CI, skip with a
// reason elsewhere), unique key prefixes, cleanup by SCAN, throwaway redis-server processes and the
// local Cluster started by scripts/redis-cluster.sh.

import { execFileSync, spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { connect, createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Cluster, Redis } from 'ioredis';
import { REDIS_CLIENT_OPTIONS, REDIS_CLUSTER_OPTIONS } from '../../../adapters/redis/index.js';

export const repoRoot = resolve(fileURLToPath(new URL('../../..', import.meta.url)));
export const REDIS_URL = process.env.REDIS_URL ?? 'redis://127.0.0.1:6379';
const inCI = process.env.CI === 'true';

/** A key prefix no other run or engineer uses. */
export function uniquePrefix(tag: string): string {
  return `tidemark-test:${tag}-${process.pid}-${Date.now().toString(36)}:`;
}

/** Null when Redis answers PING at `url`, else why not. Under CI an unreachable Redis throws (the suite fails). */
export async function probeRedis(url = REDIS_URL): Promise<string | null> {
  const c = new Redis(url, { ...REDIS_CLIENT_OPTIONS, lazyConnect: true, retryStrategy: () => null });
  c.on('error', () => undefined);
  try {
    await c.connect();
    await c.ping();
    return null;
  } catch (err) {
    const reason = `Redis at ${url} unreachable (${(err as Error).message}); start one with: redis-server --port 6379 --save '' --appendonly no`;
    if (inCI) throw new Error(`CI=true and ${reason}`);
    return reason;
  } finally {
    c.disconnect();
  }
}

export function newClient(url = REDIS_URL): Redis {
  const c = new Redis(url, { ...REDIS_CLIENT_OPTIONS });
  c.on('error', () => undefined);
  return c;
}

/** One command a MONITOR connection reported: its arguments and its source (`127.0.0.1:port`, or `lua`). */
export interface SeenCommand {
  args: string[];
  source: string;
}

/** Decodes one quoted MONITOR argument (Redis escapes `"`, `\\`, control characters and `\xNN`). */
function unquote(s: string): string {
  return s.replace(/\\(x[0-9a-fA-F]{2}|.)/g, (_m, e: string) =>
    e.length === 3 ? String.fromCharCode(parseInt(e.slice(1), 16)) : ({ n: '\n', r: '\r', t: '\t', a: '\x07', b: '\b' } as Record<string, string>)[e] ?? e);
}

/**
 * Every command the Redis at `url` runs, from a MONITOR connection of its own: a plain socket, not
 * ioredis, whose monitor mode can mistake a line that arrives with its own handshake for a reply
 * ("Command queue state error") while other clients are busy. Resolves once MONITOR is on.
 */
export async function watchCommands(url: string, onCommand: (c: SeenCommand) => void): Promise<{ close(): void }> {
  const { hostname, port } = new URL(url);
  const socket = connect(Number(port || 6379), hostname || '127.0.0.1');
  let buffered = '';
  let on = false;
  await new Promise<void>((resolveOn, reject) => {
    socket.once('error', reject);
    socket.on('data', (chunk) => {
      buffered += chunk.toString('latin1');
      let nl: number;
      while ((nl = buffered.indexOf('\r\n')) >= 0) {
        const line = buffered.slice(0, nl);
        buffered = buffered.slice(nl + 2);
        if (!on) {
          on = line === '+OK';
          if (on) resolveOn();
          continue;
        }
        const m = /^\+\d+\.\d+ \[\d+ ([^\]]+)\] (.*)$/.exec(line);
        if (m) onCommand({ source: m[1]!, args: [...m[2]!.matchAll(/"((?:[^"\\]|\\.)*)"/g)].map((a) => unquote(a[1]!)) });
      }
    });
    socket.write('MONITOR\r\n');
  });
  socket.on('error', () => undefined);
  return { close: () => socket.destroy() };
}

/** Every key under `pattern` on a single node or on each master of a cluster. */
export async function scanKeys(client: Redis | Cluster, pattern: string): Promise<string[]> {
  const nodes = client instanceof Cluster ? client.nodes('master') : [client];
  const out: string[] = [];
  for (const node of nodes) {
    let cursor = '0';
    do {
      const [next, keys] = await node.scan(cursor, 'MATCH', pattern, 'COUNT', 1000);
      cursor = next;
      out.push(...keys);
    } while (cursor !== '0');
  }
  return out;
}

/** Deletes every key of a test prefix (one DEL per key: on a cluster they live on different slots). */
export async function deletePrefix(client: Redis | Cluster, prefix: string): Promise<number> {
  const keys = await scanKeys(client, `${prefix.replace(/[*?[\]\\]/g, '\\$&')}*`);
  for (const k of keys) await client.del(k);
  return keys.length;
}

/** A TCP port nothing listens on right now (the OS picks it). */
export async function freePort(): Promise<number> {
  return new Promise((res, rej) => {
    const srv = createServer();
    srv.once('error', rej);
    srv.listen(0, '127.0.0.1', () => {
      const { port } = srv.address() as { port: number };
      srv.close(() => res(port));
    });
  });
}

/**
 * A redis-server of our own, with an append-only file fsynced per `fsync` (default `always`). A SIGKILL
 * of the server is a process crash: what it wrote to the file is in the OS page cache, so the restart
 * reads it back under any fsync policy (a power loss, not simulated here, is what needs `always`). With
 * `persist: false`, no persistence at all, so a restart comes back empty.
 *
 * Ports: without a `port`, the first start takes a free one and, should another process bind it between
 * the pick and redis-server's own bind, starts again on a fresh one (a lost race is a retry, not a failed
 * test). Restarts keep the port the server first bound, as a restarted host would.
 */
export class ThrowawayRedis {
  readonly dir = mkdtempSync(join(tmpdir(), 'tidemark-redis-'));
  private proc: ChildProcess | undefined;
  private bound: number | undefined;
  constructor(port?: number, readonly persist = true, readonly fsync: 'always' | 'everysec' | 'no' = 'always') {
    this.bound = port;
  }

  get port(): number {
    if (this.bound === undefined) throw new Error('ThrowawayRedis: start() it first; the port is the one it binds');
    return this.bound;
  }

  get url(): string {
    return `redis://127.0.0.1:${this.port}`;
  }

  async start(): Promise<void> {
    if (this.bound !== undefined) return this.startOn(this.bound);
    for (let attempt = 1; ; attempt++) {
      const port = await freePort();
      try {
        await this.startOn(port);
        this.bound = port;
        return;
      } catch (err) {
        if (attempt >= 5) throw err;
      }
    }
  }

  private async startOn(port: number): Promise<void> {
    const proc = spawn('redis-server', [
      '--port', String(port), '--bind', '127.0.0.1', '--dir', this.dir, '--save', '',
      ...(this.persist ? ['--appendonly', 'yes', '--appendfsync', this.fsync] : ['--appendonly', 'no']),
    ], { stdio: 'ignore' });
    this.proc = proc;
    const probe = new Redis(`redis://127.0.0.1:${port}`, { lazyConnect: true, retryStrategy: () => null, enableOfflineQueue: false });
    probe.on('error', () => undefined);
    try {
      for (let i = 0; i < 100; i++) {
        // A server that exited (its port taken) will never answer; whoever answers then is not ours.
        if (proc.exitCode !== null) break;
        try {
          await probe.connect();
          await probe.ping();
          if (proc.exitCode === null) return;
        } catch {
          await new Promise((r) => setTimeout(r, 50));
        }
      }
    } finally {
      probe.disconnect();
    }
    if (proc.exitCode === null) proc.kill('SIGKILL');
    throw new Error(`redis-server on port ${port} did not start`);
  }

  /** SIGKILL: no shutdown, no final save — what a crashed host looks like to clients. */
  async kill(): Promise<void> {
    const p = this.proc;
    if (!p || p.exitCode !== null) return;
    const exited = new Promise((r) => p.once('exit', r));
    p.kill('SIGKILL');
    await exited;
  }

  async stop(): Promise<void> {
    await this.kill();
    rmSync(this.dir, { recursive: true, force: true });
  }
}

const clusterScript = join(repoRoot, 'scripts', 'redis-cluster.sh');

/**
 * Starts the local 3-master cluster with scripts/redis-cluster.sh unless it already runs; returns its
 * ports and whether this call started it (then the caller stops it when done).
 */
export function startCluster(): { ports: number[]; started: boolean } {
  let wasRunning = true;
  try {
    execFileSync('bash', [clusterScript, 'status'], { stdio: ['ignore', 'pipe', 'ignore'] });
  } catch {
    wasRunning = false;
  }
  const out = execFileSync('bash', [clusterScript, 'start'], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'], timeout: 60_000 });
  const ports = out.trim().split(/\s+/).map(Number);
  if (ports.length !== 3 || ports.some((p) => !Number.isInteger(p))) throw new Error(`redis-cluster.sh start printed ${JSON.stringify(out)}`);
  return { ports, started: !wasRunning };
}

export function stopCluster(): void {
  execFileSync('bash', [clusterScript, 'stop'], { stdio: 'ignore', timeout: 60_000 });
}

export function newCluster(ports: number[]): Cluster {
  const c = new Cluster(ports.map((port) => ({ host: '127.0.0.1', port })), { ...REDIS_CLUSTER_OPTIONS });
  c.on('error', () => undefined);
  return c;
}

/** What a writer child (writer-child.ts) reports when it exits. */
export interface WriterResult {
  writes: number;
  retries: number;
  abandoned: number;
}

/**
 * Starts `count` writer children (writer-child.ts) on one key prefix, waits until each is ready, then
 * sets the start signal so they all write at once; resolves with each child's report.
 */
export async function runWriters(admin: Redis, prefix: string, count: number, args: readonly string[]): Promise<WriterResult[]> {
  const child = join(repoRoot, 'test', 'adapters', 'redis', 'writer-child.ts');
  const procs = Array.from({ length: count }, (_, p) => {
    const cp = spawn(process.execPath, ['--import', 'tsx', child, REDIS_URL, prefix, String(p), ...args], {
      cwd: repoRoot,
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let out = '';
    let err = '';
    cp.stdout.on('data', (d: Buffer) => (out += d.toString()));
    cp.stderr.on('data', (d: Buffer) => (err += d.toString()));
    const ready = new Promise<void>((resolve, reject) => {
      cp.stdout.on('data', () => out.includes('ready\n') && resolve());
      cp.once('exit', (code) => reject(new Error(`writer ${p} exited ${code} before ready: ${err}`)));
    });
    const exit = new Promise<WriterResult>((resolve, reject) => {
      cp.once('exit', (code) => {
        if (code !== 0) return reject(new Error(`writer ${p} exited ${code}: ${err}`));
        resolve(JSON.parse(out.trim().split('\n').pop()!) as WriterResult);
      });
    });
    return { ready, exit };
  });
  await Promise.all(procs.map((p) => p.ready));
  await admin.set(`${prefix}go`, '1');
  return Promise.all(procs.map((p) => p.exit));
}
