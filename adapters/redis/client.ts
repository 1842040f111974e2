// Connecting to Redis for the store: the ioredis options that make calls fail fast during an outage
// (instead of hanging or queueing without bound), creation from a URL, and EVALSHA with the NOSCRIPT
// fallback. ioredis is imported only here, type-only or dynamically, so the core never loads it.

import { createRequire } from 'node:module';
import type { Cluster, ClusterOptions, Redis, RedisOptions } from 'ioredis';
import { ErrorCodes, StoreError } from '../../src/errors.js';
import type { LuaScript } from './scripts.js';

export type RedisClient = Redis | Cluster;

/**
 * ioredis options the store uses for clients it creates, and recommends for clients you pass in.
 * - `enableOfflineQueue: false`: while disconnected a command fails at once ("Stream isn't writeable")
 *   rather than waiting in memory for a reconnect; the core then degrades the read or puts the commit
 *   in its bounded outbox. (ioredis 5 otherwise queues without limit.)
 * - `autoResendUnfulfilledCommands: false`: a command in flight when the connection drops is failed,
 *   not silently re-sent after the reconnect. The commit script would refuse a re-sent commit anyway
 *   (version check) and recognise it by its commit id, but a failure the caller sees is easier to reason about.
 * - `maxRetriesPerRequest: 0`: only matters if the offline queue is switched back on; fails queued
 *   commands at the first failed reconnect.
 * - `commandTimeout`: a server that accepts the connection but stops answering (paused, swapping,
 *   a half-open TCP connection) fails a call after this many ms instead of hanging the turn.
 * - `connectTimeout`: bounds one connection attempt to a black-holed address.
 * - `retryStrategy`: never gives up reconnecting (a function that always returns a delay), backing off
 *   to 1 s, so the store comes back by itself when Redis does.
 */
export const REDIS_CLIENT_OPTIONS = {
  enableOfflineQueue: false,
  autoResendUnfulfilledCommands: false,
  maxRetriesPerRequest: 0,
  commandTimeout: 1000,
  connectTimeout: 1000,
  retryStrategy: (attempt: number): number => Math.min(50 * attempt, 1000),
} satisfies RedisOptions;

/** The same for Redis Cluster: per-node options plus a cluster-level offline queue switch and retry. */
export const REDIS_CLUSTER_OPTIONS = {
  enableOfflineQueue: false,
  clusterRetryStrategy: (attempt: number): number => Math.min(100 * attempt, 2000),
  // A failover moves slots; ioredis follows MOVED/ASK redirections and refreshes its slot map.
  retryDelayOnFailover: 100,
  retryDelayOnClusterDown: 100,
  maxRedirections: 16,
  redisOptions: { ...REDIS_CLIENT_OPTIONS },
} satisfies ClusterOptions;

/** Creates a single-node client from a `redis://` or `rediss://` URL with the options above. */
export async function connectUrl(url: string): Promise<Redis> {
  let RedisClass: typeof Redis;
  try {
    ({ Redis: RedisClass } = await import('ioredis'));
  } catch (cause) {
    throw new StoreError(ErrorCodes.STORE_UNAVAILABLE, 'redis store: the ioredis package is not installed; run `npm install ioredis`', { cause });
  }
  return new RedisClass(url, { ...REDIS_CLIENT_OPTIONS, lazyConnect: true });
}

/** Whether the optional peer ioredis can be found from here (checked at construction, synchronously). */
export function ioredisInstalled(): boolean {
  try {
    createRequire(import.meta.url).resolve('ioredis');
    return true;
  } catch {
    return false;
  }
}

export function isCluster(client: RedisClient): client is Cluster {
  return (client as { isCluster?: boolean }).isCluster === true;
}

/**
 * Waits for the first connection of a client (bounded by `timeoutMs`). Once a client has been ready,
 * later calls never wait: during an outage they fail at once and ioredis reconnects in the background.
 */
const wasReady = new WeakSet<RedisClient>();
/**
 * Clients whose first connection timed out: until one becomes ready, later calls fail at once instead
 * of each waiting `timeoutMs` again (ioredis keeps reconnecting in the background).
 */
const startFailed = new WeakSet<RedisClient>();

export async function ensureReady(client: RedisClient, timeoutMs: number): Promise<void> {
  if (client.status === 'ready') {
    wasReady.add(client);
    return;
  }
  // An outage after the first connection: fail now (ioredis keeps reconnecting in the background).
  if (wasReady.has(client)) throw unavailable('connect', new Error(`connection is ${client.status}`));
  if (client.status === 'wait') {
    client.connect().catch(() => undefined);
  }
  if (client.status === 'end' || client.status === 'close') {
    throw unavailable('connect', new Error(`connection is ${client.status}`));
  }
  if (startFailed.has(client)) throw unavailable('connect', new Error(`never connected (status ${client.status}); retrying in the background`));
  // Callers that arrive while the first connection is pending share one wait (one pair of
  // listeners): a listener pair per caller tripped Node's MaxListenersExceededWarning past 10.
  let wait = firstWait.get(client);
  if (!wait) {
    wait = firstConnection(client, timeoutMs).finally(() => firstWait.delete(client));
    firstWait.set(client, wait);
  }
  return wait;
}

const firstWait = new WeakMap<RedisClient, Promise<void>>();

function firstConnection(client: RedisClient, timeoutMs: number): Promise<void> {
  return new Promise<void>((resolve, reject) => {
    const done = (err?: Error): void => {
      clearTimeout(timer);
      client.off('ready', onReady);
      client.off('end', onEnd);
      if (err) reject(unavailable('connect', err));
      else resolve();
    };
    const onReady = (): void => {
      wasReady.add(client);
      done();
    };
    const onEnd = (): void => done(new Error('connection ended'));
    const timer = setTimeout(() => {
      if (!startFailed.has(client)) {
        startFailed.add(client);
        client.once('ready', () => {
          startFailed.delete(client);
          wasReady.add(client);
        });
      }
      done(new Error(`not ready after ${timeoutMs} ms (status ${client.status})`));
    }, timeoutMs);
    client.once('ready', onReady);
    client.once('end', onEnd);
  });
}

export function unavailable(op: string, cause: unknown): StoreError {
  if (cause instanceof StoreError) return cause;
  const msg = cause instanceof Error ? cause.message : String(cause);
  return new StoreError(
    ErrorCodes.STORE_UNAVAILABLE,
    `redis store: ${op} failed (${msg}); check that Redis is reachable — reads degrade and commits wait in the outbox meanwhile`,
    { cause, details: { op } },
  );
}

/** ioredis's binary-reply script commands (built from its command list; its typings leave them out). */
interface ScriptCommands {
  evalshaBuffer(sha: string, numKeys: number, ...rest: (string | Buffer | number)[]): Promise<unknown>;
  evalBuffer(lua: string, numKeys: number, ...rest: (string | Buffer | number)[]): Promise<unknown>;
}

/** EVALSHA with binary replies; on NOSCRIPT (script cache empty, e.g. after a restart) sends the script once in full. */
export async function runScript(client: RedisClient, s: LuaScript, keys: readonly string[], args: readonly (string | Buffer | number)[]): Promise<unknown> {
  try {
    // The typed command, not callBuffer('evalsha', [...]): with ioredis auto-pipelining on, callBuffer
    // with an argument array throws inside ioredis (5.11); the typed form pipelines like any command.
    return await (client as unknown as ScriptCommands).evalshaBuffer(s.sha, s.keys, ...keys, ...args);
  } catch (err) {
    if (err instanceof Error && err.message.startsWith('NOSCRIPT')) {
      return (client as unknown as ScriptCommands).evalBuffer(s.lua, s.keys, ...keys, ...args);
    }
    throw err;
  }
}
