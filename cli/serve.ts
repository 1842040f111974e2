// `tidemark serve`: the demo bike-workshop bot behind the HTTP adapter, on the in-process store or on
// Redis, with /chat (SSE), /metrics and /dashboard in one command. Binds to loopback unless told
// otherwise (another address needs a token for the admin endpoints), and its URL is the address it
// bound. /chat binds turns to callers through `resolveIdentity`; without it, loopback callers only.

import { readFileSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { hostname } from 'node:os';
import { createHttpAdapter, isLoopback, type ChatHandler, type ResolveIdentity } from '../adapters/http/index.js';
import { ConfigError, describeValue } from '../src/errors.js';
import type { OutboxEvent } from '../src/middleware/events.js';
import { createTidemark, type Tidemark, type TidemarkOptions } from '../src/middleware/tidemark.js';
import { StoreHealth } from '../src/metrics/health.js';
import { demoHandler } from './demo-bot.js';

export interface ServeOptions {
  /** TCP port; 0 picks a free one. @default 8787 */
  port?: number;
  /** Address to bind; any other than loopback needs `token`. @default '127.0.0.1' */
  host?: string;
  /** Redis URL for the store (`redis://…`); without it memory lives in this process. @default undefined */
  redis?: string;
  /** Bearer token required by /metrics, /dashboard and /sessions (at least 16 characters). @default undefined */
  token?: string;
  /** The bot. @default the demo bike-workshop handler */
  handler?: ChatHandler;
  /** Options for the tidemark instance `serve` creates (store is set from `redis`). @default {} */
  tidemark?: Omit<TidemarkOptions, 'store'>;
  /** Dashboard feed period. @default 1000 */
  feedIntervalMs?: number;
  /**
   * Who a /chat request is (see the HTTP adapter's `resolveIdentity`). Required for /chat to answer
   * anyone but loopback clients. @default undefined
   */
  resolveIdentity?: ResolveIdentity;
  /**
   * Key of the session-id hash in events, metrics and the dashboard; give every process of a fleet the
   * same one so a session has one hash everywhere (`--secret`, `TIDEMARK_SECRET`). @default random per process
   */
  secret?: string;
  /** Slots per session (`--capacity`); overrides `tidemark.capacity`. @default 64 */
  capacity?: number;
  /** A JSON file of createTidemark options (`--config`); `tidemark` and the flags above override it. @default undefined */
  config?: string;
  /** This process's name in the fleet view. @default `<hostname>:<port>` */
  instance?: string;
  /**
   * Where the structured log goes: one JSON object per line, one per event that matters (startup,
   * store down/up, outbox drained/overflow); `false` for none. Never a secret, a message or a session id.
   * @default a line on stdout
   */
  log?: ((entry: Record<string, unknown>) => void) | false;
}

export const SERVE_DEFAULTS = { port: 8787, feedIntervalMs: 1000 } as const;

export interface Serving {
  /** Base URL, e.g. `http://127.0.0.1:8787`. */
  url: string;
  readonly tidemark: Tidemark;
  readonly server: Server;
  readonly health: StoreHealth;
  /** Stops accepting, ends open streams, flushes pending writes and closes the store. */
  close(): Promise<void>;
}

export async function serve(options: ServeOptions = {}): Promise<Serving> {
  const port = options.port ?? SERVE_DEFAULTS.port;
  if (!Number.isInteger(port) || port < 0 || port > 65535) {
    throw new ConfigError(`serve: port must be an integer in [0, 65535], got ${describeValue(port)}`, { details: { option: 'port' } });
  }
  const host = options.host ?? '127.0.0.1';
  if (!options.token && !isLoopback(host) && host !== 'localhost') {
    throw new ConfigError(`serve: binding to ${host} exposes the admin endpoints; set a token or bind to 127.0.0.1`, { details: { option: 'host' } });
  }
  let store: TidemarkOptions['store'];
  if (options.redis !== undefined) {
    if (typeof options.redis !== 'string' || !/^rediss?:\/\//.test(options.redis)) {
      throw new ConfigError(`serve: redis must be a redis:// or rediss:// URL, got ${describeValue(options.redis)}`, { details: { option: 'redis' } });
    }
    const { RedisSlotStore } = await import('../adapters/redis/index.js');
    store = new RedisSlotStore({ redis: options.redis });
  }
  const fromFile = options.config !== undefined ? readConfig(options.config) : {};
  const secret = options.secret ?? options.tidemark?.secret ?? fromFile.secret;
  if (secret !== undefined && (typeof secret !== 'string' || secret.length < 16)) {
    throw new ConfigError('serve: secret must be a string of at least 16 characters (it keys the session-id hash)', { details: { option: 'secret' } });
  }
  const tm = createTidemark({
    ...fromFile,
    ...(options.tidemark ?? {}),
    ...(options.capacity !== undefined ? { capacity: options.capacity } : {}),
    ...(secret !== undefined ? { secret } : {}),
    ...(store ? { store } : {}),
  });
  const log = options.log === false ? null : (options.log ?? jsonLine);
  // One health monitor for /readyz, the metrics, the dashboard and the log below.
  const health = new StoreHealth(tm.store);
  const firstAnswer = health.start(tm);
  // Stable across restarts (so a process takes its dashboard history back): host and port.
  const instance = options.instance ?? (port !== 0 ? `${hostname()}:${port}` : `${hostname()}:pid-${process.pid}`);
  const adapter = createHttpAdapter({
    tidemark: tm,
    handler: options.handler ?? demoHandler,
    ...(options.token ? { token: options.token } : {}),
    ...(options.resolveIdentity ? { resolveIdentity: options.resolveIdentity } : {}),
    feedIntervalMs: options.feedIntervalMs ?? SERVE_DEFAULTS.feedIntervalMs,
    health,
    instance,
  });
  const stopLogs = log ? logLifecycle(tm, health, log) : () => undefined;
  const server = createServer(adapter.listener);
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(port, host, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const addr = server.address() as AddressInfo;
  // Exactly the address bound: 0.0.0.0 is shown as 0.0.0.0 (every interface), never as loopback.
  const shownHost = addr.family === 'IPv6' ? `[${addr.address}]` : addr.address;
  let closing: Promise<void> | null = null;
  const url = `http://${shownHost}:${addr.port}`;
  // Startup says whether the store answered, and never carries a secret, a token or a password.
  await Promise.race([firstAnswer, new Promise((r) => setTimeout(r, 3500).unref())]);
  const h = health.state;
  log?.({
    level: h.up ? 'info' : 'warn',
    event: 'serving',
    url,
    instance,
    store: tm.store.name,
    ...(options.redis ? { redis: redactUrl(options.redis) } : {}),
    storeReady: h.up === true,
    ...(h.up === true ? {} : { cause: h.cause ?? 'no answer yet' }),
    capacity: tm.params.capacity,
    secret: secret !== undefined ? 'set' : 'random per process',
    token: options.token ? 'set' : 'none (admin routes answer loopback only)',
    config: options.config !== undefined ? 'file' : 'none',
  });
  return {
    url,
    tidemark: tm,
    server,
    health,
    close() {
      closing ??= (async () => {
        stopLogs();
        health.stop();
        adapter.close();
        await new Promise<void>((resolve) => {
          server.close(() => resolve());
          server.closeAllConnections();
        });
        await tm.close();
      })();
      return closing;
    },
  };
}

/** The default log sink: one JSON object per line on stdout, with the time first. */
function jsonLine(entry: Record<string, unknown>): void {
  process.stdout.write(`${JSON.stringify({ ts: new Date().toISOString(), ...entry })}\n`);
}

/** A Redis URL without its user and password. */
function redactUrl(raw: string): string {
  try {
    const u = new URL(raw);
    return `${u.protocol}//${u.hostname}${u.port ? `:${u.port}` : ''}${u.pathname && u.pathname !== '/' ? u.pathname : ''}`;
  } catch {
    return 'unparsable';
  }
}

function readConfig(path: string): Omit<TidemarkOptions, 'store'> {
  let doc: unknown;
  try {
    doc = JSON.parse(readFileSync(path, 'utf8'));
  } catch (cause) {
    throw new ConfigError(`serve: --config ${path} is not a readable JSON file of createTidemark options`, { cause, details: { option: 'config' } });
  }
  if (typeof doc !== 'object' || doc === null || Array.isArray(doc)) {
    throw new ConfigError(`serve: --config ${path} must hold a JSON object of createTidemark options, got ${describeValue(doc)}`, { details: { option: 'config' } });
  }
  if ('store' in doc) throw new ConfigError('serve: --config cannot set store; use --redis', { details: { option: 'config' } });
  return doc as Omit<TidemarkOptions, 'store'>;
}

/**
 * The lifecycle log: store down (with the cause) and back (with how long), the outbox drained after an
 * outage (how many writes) and overflowing (refused writes, at most one line per 10 s).
 */
function logLifecycle(tm: Tidemark, health: StoreHealth, log: (entry: Record<string, unknown>) => void): () => void {
  const offHealth = health.onChange((now, before) => {
    if (now.up === false) log({ level: 'error', event: 'store_down', store: now.store, cause: now.cause });
    else if (now.up === true && before.up === false) log({ level: 'info', event: 'store_up', store: now.store, downMs: now.sinceMs - before.sinceMs });
  });
  let queued = 0;
  let firstQueuedMs = 0;
  let refused = 0;
  let lastOverflowLog = 0;
  const onOutbox = (e: OutboxEvent): void => {
    if (e.change === 'queued') {
      if (queued === 0) firstQueuedMs = Date.now();
      queued++;
    } else if (e.change === 'overflow') {
      refused++;
      const now = Date.now();
      if (now - lastOverflowLog >= 10_000) {
        log({ level: 'error', event: 'outbox_overflow', refused, depth: e.depth, store: tm.store.name });
        lastOverflowLog = now;
        refused = 0;
      }
    } else if (e.change === 'drained' && e.depth === 0 && queued > 0) {
      log({ level: 'info', event: 'outbox_drained', writes: queued, ms: Date.now() - firstQueuedMs, store: tm.store.name });
      queued = 0;
    }
  };
  tm.on('outbox', onOutbox);
  return () => {
    offHealth();
    tm.off('outbox', onOutbox);
  };
}
