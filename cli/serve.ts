// `tidemark serve`: the demo bike-workshop bot behind the HTTP adapter, on the in-process store or on
// Redis, with /chat (SSE), /metrics and /dashboard in one command. Binds to loopback unless told
// otherwise (another address needs a token for the admin endpoints), and its URL is the address it
// bound. /chat binds turns to callers through `resolveIdentity`; without it, loopback callers only.

import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { createHttpAdapter, isLoopback, type ChatHandler, type ResolveIdentity } from '../adapters/http/index.js';
import { ConfigError, describeValue } from '../src/errors.js';
import { createTidemark, type Tidemark, type TidemarkOptions } from '../src/middleware/tidemark.js';
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
}

export const SERVE_DEFAULTS = { port: 8787, feedIntervalMs: 1000 } as const;

export interface Serving {
  /** Base URL, e.g. `http://127.0.0.1:8787`. */
  url: string;
  readonly tidemark: Tidemark;
  readonly server: Server;
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
  const tm = createTidemark({ ...(options.tidemark ?? {}), ...(store ? { store } : {}) });
  const adapter = createHttpAdapter({
    tidemark: tm,
    handler: options.handler ?? demoHandler,
    ...(options.token ? { token: options.token } : {}),
    ...(options.resolveIdentity ? { resolveIdentity: options.resolveIdentity } : {}),
    feedIntervalMs: options.feedIntervalMs ?? SERVE_DEFAULTS.feedIntervalMs,
  });
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
  return {
    url: `http://${shownHost}:${addr.port}`,
    tidemark: tm,
    server,
    close() {
      closing ??= (async () => {
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
