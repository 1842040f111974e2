// Over ~400 lines on purpose: routing, auth and the SSE reply share one request lifecycle; split after the reliability work lands.
// The HTTP core shared by the Fetch, Node `http` and Express-style front-ends: routing, auth for the
// admin endpoints, body limits, JSON errors with TidemarkError codes, and the streaming chat reply as
// Server-Sent Events. Front-ends only translate their request/response types to and from this core.

import { createHash, createHmac, timingSafeEqual } from 'node:crypto';
import { hostname } from 'node:os';
import { ConfigError, ErrorCodes, TidemarkError, describeValue, isTidemarkError } from '../../src/errors.js';
import { DashboardCollector } from '../../src/metrics/collector.js';
import { FleetView } from '../../src/metrics/fleet.js';
import { StoreHealth } from '../../src/metrics/health.js';
import { prometheusMetrics, type PrometheusMetrics } from '../../src/metrics/prometheus.js';
import type { Reply } from '../../src/middleware/stream.js';
import type { Tidemark, WrapContext, WrapInput } from '../../src/middleware/tidemark.js';
import { ID_PATTERN } from '../../src/middleware/validate.js';
import type { MemoryContext } from '../../src/types.js';
import { dashboardPage } from '../../src/dashboard/page.js';
import { healthzResponse, indexResponse, readyzResponse, unauthorizedPage, wantsHtml } from './ops.js';
import { SSE_HEADERS, sseFrame, sseRetry } from './sse.js';

/** The bot's own message handler, as passed to `tidemark.wrap()`. */
export type ChatHandler = (input: WrapInput, ctx: WrapContext) => Reply | Promise<Reply>;

export interface CorsOptions {
  /** Allowed origins (exact `scheme://host[:port]`), or `'*'` for any. */
  origin: string | readonly string[];
  /** @default 600 */
  maxAgeSeconds?: number;
}

export interface HttpAdapterOptions {
  /** The tidemark instance whose memory the chat uses and whose events feed metrics and the dashboard. */
  tidemark: Tidemark;
  /** The bot: receives the turn and `ctx.memory`, returns a string, an async iterable of strings or a ReadableStream. */
  handler: ChatHandler;
  /**
   * Bearer token for the admin endpoints (`/metrics`, `/dashboard*`, `/sessions/:id`). Without one they
   * answer loopback clients only. @default undefined
   */
  token?: string;
  /** Send CORS headers for these origins. Without it no CORS header is ever sent. @default undefined */
  cors?: CorsOptions;
  /** Largest request body in bytes; larger ones get 413. @default 65536 */
  maxBodyBytes?: number;
  /**
   * What the `memory` event at the start of a chat stream carries: `ids` (source, slot, revision id,
   * weight, provenance turn ids — no text), `full` (also the key and value text) or `none` (no event).
   * @default 'ids'
   */
  memoryEvent?: 'ids' | 'full' | 'none';
  /** Dashboard feed period. @default 1000 */
  feedIntervalMs?: number;
  /** Prometheus metrics to serve on `/metrics`; `false` turns the route off. @default created with `prometheusMetrics(tidemark)` */
  metrics?: PrometheusMetrics | false;
  /** Aggregator behind the dashboard. @default a new DashboardCollector attached to `tidemark` */
  collector?: DashboardCollector;
  /**
   * Show raw session ids (seen in `/chat` requests) instead of their keyed hashes in the dashboard's
   * busiest-sessions table. The dashboard is an admin view either way. @default false
   */
  revealSessionIds?: boolean;
  /** Path prefix the routes live under, e.g. `/memory`. @default '' */
  basePath?: string;
  /**
   * Who a `/chat` request is: binds the memory a turn reads and writes to your authenticated caller
   * (a verified session cookie, a signed token, headers set by your authenticating proxy). Return
   * null to refuse the request (401). **Required when `/chat` is reachable by anyone but you**: without
   * it, the session and user come from the request body — any caller could name another's — so
   * `/chat` then answers loopback clients only. The body's `session`/`user` are ignored when it is set.
   * @default undefined
   */
  resolveIdentity?: ResolveIdentity;
  /**
   * Store health behind `/readyz`, `tidemark_store_up` and the dashboard's outage banner; `false` turns
   * it off (`/readyz` then always answers 200). @default a StoreHealth on the instance's store, started here
   */
  health?: StoreHealth | false;
  /**
   * This process's name in the fleet view (the dashboard's header and per-instance rows); keep it stable
   * across restarts so the process takes its history back. @default `<hostname>:<pid>`
   */
  instance?: string;
}

/** What `resolveIdentity` sees of a `/chat` request: its headers, peer and the parsed JSON body. */
export interface IdentityRequest {
  method: string;
  url: string;
  header(name: string): string | undefined;
  remoteAddress: string | undefined;
  /** The parsed JSON body (its `text` is the turn). */
  body: Record<string, unknown>;
}

/** Whose memory a turn uses. `tenant` defaults to the tidemark instance's. */
export interface ChatIdentity {
  session: string;
  user?: string;
  tenant?: string;
}

export type ResolveIdentity = (request: IdentityRequest) => ChatIdentity | null | undefined | Promise<ChatIdentity | null | undefined>;

export const HTTP_ADAPTER_DEFAULTS = {
  maxBodyBytes: 64 * 1024,
  memoryEvent: 'ids' as 'ids' | 'full' | 'none',
  feedIntervalMs: 1000,
  revealSessionIds: false,
  basePath: '',
};

/** A request as the core sees it. */
export interface CoreRequest {
  method: string;
  /** Path and query, e.g. `/chat` or `/sessions/s1?user=u1`. */
  url: string;
  header(name: string): string | undefined;
  /** Peer address (`req.socket.remoteAddress`), undefined when unknown (treated as remote). */
  remoteAddress: string | undefined;
  /** Reads the body, rejecting with a 413 error past `limit` bytes. */
  body(limit: number): Promise<Uint8Array>;
  /** A body some middleware already parsed (Express `req.body`), used instead of reading the stream. */
  parsedBody?: unknown;
  /** Aborts when the client goes away. */
  signal: AbortSignal;
}

export interface CoreResponse {
  status: number;
  headers: Record<string, string>;
  /** A complete body, or a stream of text chunks (SSE) to forward as they come. */
  body: string | Uint8Array | AsyncIterable<string>;
}

/** An HTTP-shaped error: a TidemarkError code plus the status to send. */
export class HttpError extends TidemarkError {
  readonly status: number;
  readonly headers: Record<string, string>;
  constructor(status: number, code: TidemarkError['code'], message: string, details: Record<string, unknown> = {}, headers: Record<string, string> = {}) {
    super(code, message, { details });
    this.status = status;
    this.headers = headers;
  }
}

/** Maps any error to a status: input problems are 4xx, anything else 500 without internals. */
export function statusOf(err: unknown): number {
  if (err instanceof HttpError) return err.status;
  if (isTidemarkError(err)) {
    if (err.code === ErrorCodes.INPUT_TOO_LARGE) return 413;
    if (err.code.startsWith('TIDEMARK_E_INPUT_') || err.code === ErrorCodes.HTTP_BAD_REQUEST) return 400;
    if (err.code === ErrorCodes.HTTP_UNAUTHORIZED) return 401;
    if (err.code.startsWith('TIDEMARK_E_STORE_')) return 503;
  }
  return 500;
}

export function errorResponse(err: unknown, extraHeaders: Record<string, string> = {}): CoreResponse {
  const status = statusOf(err);
  const body = isTidemarkError(err)
    ? { error: { code: err.code, message: err.message } }
    : { error: { code: 'TIDEMARK_E_INTERNAL', message: 'internal error' } };
  return {
    status,
    headers: { 'content-type': 'application/json; charset=utf-8', ...(err instanceof HttpError ? err.headers : {}), ...extraHeaders },
    body: JSON.stringify(body),
  };
}

const json = (status: number, value: unknown, headers: Record<string, string> = {}): CoreResponse => ({
  status,
  headers: { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store', ...headers },
  body: JSON.stringify(value),
});

/** True for 127.0.0.0/8, ::1 and their IPv4-mapped forms. */
export function isLoopback(address: string | undefined): boolean {
  if (!address) return false;
  const a = address.startsWith('::ffff:') ? address.slice(7) : address;
  return a === '::1' || /^127\.\d{1,3}\.\d{1,3}\.\d{1,3}$/.test(a);
}

const COOKIE = 'tidemark_admin';

/** Routes the core answers, with their methods; anything else under them is a 405, elsewhere `null`. */
type Route = 'chat' | 'metrics' | 'dashboard' | 'dashboard-feed' | 'dashboard-data' | 'session' | 'index' | 'healthz' | 'readyz';

export interface HttpCore {
  /** Answers a request, or returns null when the path is not one of the adapter's routes. */
  handle(req: CoreRequest): Promise<CoreResponse | null>;
  readonly collector: DashboardCollector;
  /** Store health (null when turned off). */
  readonly health: StoreHealth | null;
  /** The fleet view the dashboard draws (one shared snapshot per feed tick). */
  readonly fleet: FleetView;
  /** Stops feeds, unsubscribes the collector and the metrics this adapter created. */
  close(): void;
}

export function createHttpCore(options: HttpAdapterOptions): HttpCore {
  const o = { ...HTTP_ADAPTER_DEFAULTS, ...options };
  if (!o.tidemark || typeof o.tidemark.wrap !== 'function') {
    throw new ConfigError(`http: option tidemark must be a tidemark instance, got ${describeValue(o.tidemark)}`, { details: { option: 'tidemark' } });
  }
  if (typeof o.handler !== 'function') {
    throw new ConfigError(`http: option handler must be a function (input, ctx) => reply, got ${describeValue(o.handler)}`, { details: { option: 'handler' } });
  }
  if (o.token !== undefined && (typeof o.token !== 'string' || o.token.length < 16 || /\s/.test(o.token))) {
    throw new ConfigError('http: option token must be a string of at least 16 characters without spaces', { details: { option: 'token' } });
  }
  if (o.resolveIdentity !== undefined && typeof o.resolveIdentity !== 'function') {
    throw new ConfigError(`http: option resolveIdentity must be a function (request) => { session, user?, tenant? } | null, got ${describeValue(o.resolveIdentity)}`, { details: { option: 'resolveIdentity' } });
  }
  if (!Number.isInteger(o.maxBodyBytes) || o.maxBodyBytes < 64) {
    throw new ConfigError(`http: option maxBodyBytes must be an integer >= 64, got ${describeValue(o.maxBodyBytes)}`, { details: { option: 'maxBodyBytes' } });
  }
  if (!['ids', 'full', 'none'].includes(o.memoryEvent)) {
    throw new ConfigError(`http: option memoryEvent must be 'ids', 'full' or 'none', got ${describeValue(o.memoryEvent)}`, { details: { option: 'memoryEvent' } });
  }
  if (!Number.isInteger(o.feedIntervalMs) || o.feedIntervalMs < 50) {
    throw new ConfigError(`http: option feedIntervalMs must be an integer >= 50, got ${describeValue(o.feedIntervalMs)}`, { details: { option: 'feedIntervalMs' } });
  }
  if (typeof o.basePath !== 'string' || (o.basePath !== '' && !/^\/[^?#]*[^/?#]$/.test(o.basePath))) {
    throw new ConfigError(`http: option basePath must be '' or start with "/" and not end with one, got ${describeValue(o.basePath)}`, { details: { option: 'basePath' } });
  }
  const origins = o.cors ? (typeof o.cors.origin === 'string' ? [o.cors.origin] : [...o.cors.origin]) : [];
  const tm = o.tidemark;
  const tokenDigest = o.token ? createHash('sha256').update(o.token).digest() : undefined;

  const ownCollector = !options.collector;
  const collector = options.collector ?? new DashboardCollector();
  const detachCollector = ownCollector ? collector.attach(tm) : () => undefined;
  // Created now, not at the first scrape, so counters include everything since the adapter started.
  const ownMetrics = options.metrics === undefined;
  const ownHealth = options.health === undefined;
  const health = options.health === false ? null : (options.health ?? new StoreHealth(tm.store));
  if (ownHealth && health) void health.start(tm);
  // The store is back: drain the outbox now rather than at its next backoff retry (up to tens of
  // seconds away after a long outage), so readers of those sessions see their writes sooner.
  const offDrain = health?.onChange((now, before) => {
    if (now.up === true && before.up === false) void tm.flush({ timeoutMs: 60_000 }).catch(() => undefined);
  });
  const instance = options.instance ?? `${hostname()}:${process.pid}`;
  const startedMs = Date.now();
  const fleet = new FleetView({ instance, store: tm.store, tenant: tm.tenant, collector, ...(health ? { health } : {}), outboxDepth: () => tm.outboxDepth });
  fleet.start(o.feedIntervalMs);
  const metricsPromise: Promise<PrometheusMetrics> | null = options.metrics ? Promise.resolve(options.metrics) : ownMetrics ? prometheusMetrics(tm, health ? { health } : {}) : null;
  metricsPromise?.catch(() => undefined);
  const feeds = new Set<AbortController>();
  const revealed = new Map<string, string>();

  // The adapter wraps the bot per request so it can see ctx.memory and send it as the stream's first
  // event (wrap() only builds a closure; the cost is nil).
  const wrapFor = (sink: (m: MemoryContext) => void) =>
    tm.wrap(async (input: WrapInput, ctx: WrapContext) => {
      sink(ctx.memory);
      return o.handler(input, ctx);
    });

  const routeOf = (path: string): { route: Route; param?: string } | null => {
    if (o.basePath) {
      if (path !== o.basePath && !path.startsWith(`${o.basePath}/`)) return null;
      path = path.slice(o.basePath.length) || '/';
    }
    switch (path) {
      case '/':
        return { route: 'index' };
      case '/healthz':
        return { route: 'healthz' };
      case '/readyz':
        return { route: 'readyz' };
      case '/chat':
        return { route: 'chat' };
      case '/metrics':
        return o.metrics === false ? null : { route: 'metrics' };
      case '/dashboard':
      case '/dashboard/':
        return { route: 'dashboard' };
      case '/dashboard/feed':
        return { route: 'dashboard-feed' };
      case '/dashboard/data':
        return { route: 'dashboard-data' };
    }
    if (path.startsWith('/sessions/')) return { route: 'session', param: path.slice('/sessions/'.length) };
    return null;
  };

  const corsHeaders = (req: CoreRequest): Record<string, string> => {
    if (!o.cors) return {};
    const origin = req.header('origin');
    if (!origin) return {};
    if (origins.includes('*')) return { 'access-control-allow-origin': '*' };
    return origins.includes(origin) ? { 'access-control-allow-origin': origin, vary: 'Origin' } : { vary: 'Origin' };
  };

  const tokenMatches = (candidate: string | undefined): boolean => {
    if (!tokenDigest || !candidate) return false;
    return timingSafeEqual(createHash('sha256').update(candidate).digest(), tokenDigest);
  };
  /**
   * The dashboard cookie holds a value derived from the token (HMAC), never the token itself, so a
   * leaked cookie does not give the bearer token for /metrics scrapers and other tools.
   */
  const cookieValue = o.token ? createHmac('sha256', o.token).update('tidemark dashboard cookie v1').digest('hex') : undefined;
  const cookieMatches = (candidate: string | undefined): boolean => {
    if (!cookieValue || !candidate || candidate.length !== cookieValue.length) return false;
    return timingSafeEqual(Buffer.from(candidate), Buffer.from(cookieValue));
  };

  const cookieToken = (req: CoreRequest): string | undefined => {
    const raw = req.header('cookie');
    if (!raw) return undefined;
    for (const part of raw.split(';')) {
      const [k, ...v] = part.trim().split('=');
      if (k !== COOKIE) continue;
      try {
        return decodeURIComponent(v.join('='));
      } catch {
        return undefined; // A malformed cookie is no token (401), not a server error.
      }
    }
    return undefined;
  };

  /** Admin check: a token, when configured, is required of everyone; without one only loopback peers pass. */
  const authorize = (req: CoreRequest): void => {
    if (tokenDigest) {
      const auth = req.header('authorization');
      const bearer = auth && /^Bearer\s+/i.test(auth) ? auth.replace(/^Bearer\s+/i, '').trim() : undefined;
      if (tokenMatches(bearer) || cookieMatches(cookieToken(req))) return;
      throw new HttpError(401, ErrorCodes.HTTP_UNAUTHORIZED, 'this endpoint needs the admin token: send "Authorization: Bearer <token>"', {}, {
        'www-authenticate': 'Bearer realm="tidemark"',
      });
    }
    if (!isLoopback(req.remoteAddress)) {
      throw new HttpError(401, ErrorCodes.HTTP_UNAUTHORIZED, 'admin endpoints answer loopback clients only; configure a token to allow remote access');
    }
  };

  const onlyMethods = (req: CoreRequest, allowed: readonly string[]): void => {
    if (!allowed.includes(req.method)) {
      throw new HttpError(405, ErrorCodes.HTTP_BAD_REQUEST, `method ${req.method} is not allowed here; use ${allowed.join(' or ')}`, { method: req.method }, {
        allow: allowed.join(', '),
      });
    }
  };

  const readJson = async (req: CoreRequest): Promise<unknown> => {
    if (req.parsedBody !== undefined && req.parsedBody !== null && typeof req.parsedBody === 'object' && !(req.parsedBody instanceof Uint8Array)) {
      return req.parsedBody;
    }
    const type = req.header('content-type');
    if (type && !/^application\/([a-z.+-]*\+)?json\b/i.test(type)) {
      throw new HttpError(415, ErrorCodes.HTTP_BAD_REQUEST, `send the body as application/json, got ${describeValue(type)}`);
    }
    const declared = Number(req.header('content-length'));
    if (Number.isFinite(declared) && declared > o.maxBodyBytes) throw tooLarge(declared, o.maxBodyBytes);
    const bytes = typeof req.parsedBody === 'string' ? new TextEncoder().encode(req.parsedBody) : req.parsedBody instanceof Uint8Array ? req.parsedBody : await req.body(o.maxBodyBytes);
    if (bytes.byteLength > o.maxBodyBytes) throw tooLarge(bytes.byteLength, o.maxBodyBytes);
    let text: string;
    try {
      text = new TextDecoder('utf-8', { fatal: true }).decode(bytes);
    } catch {
      throw new HttpError(400, ErrorCodes.HTTP_BAD_REQUEST, 'the body is not valid UTF-8');
    }
    try {
      return JSON.parse(text);
    } catch {
      // JSON.parse's own message quotes part of the body, which may be message text: not echoed.
      throw new HttpError(400, ErrorCodes.HTTP_BAD_REQUEST, 'the body is not valid JSON; send { "session", "text", "user"? }');
    }
  };

  const badId = (field: string, v: unknown): HttpError =>
    new HttpError(400, ErrorCodes.INPUT_ID, `${field} must be 1-128 characters of letters, digits and . _ : @ -, got ${describeValue(v)}`, { field });

  /**
   * The session and user of a `/chat` turn: from `resolveIdentity` when set (the body's ids ignored),
   * else from the body — and then only for loopback peers, since any caller could name anyone's.
   */
  const identify = async (req: CoreRequest, body: Record<string, unknown>): Promise<{ session: string; text: unknown; user?: string; tenant?: string }> => {
    const { text } = body;
    if (!o.resolveIdentity) {
      if (!isLoopback(req.remoteAddress)) {
        throw new HttpError(401, ErrorCodes.HTTP_UNAUTHORIZED, '/chat takes the session from the request body, so it answers loopback clients only; set resolveIdentity to bind turns to your authenticated callers');
      }
      const { session, user } = body;
      if (typeof session !== 'string' || !ID_PATTERN.test(session)) throw badId('session', session);
      if (user !== undefined && (typeof user !== 'string' || !ID_PATTERN.test(user))) throw badId('user', user);
      return { session, text, ...(user !== undefined ? { user } : {}) };
    }
    let id: ChatIdentity | null | undefined;
    try {
      id = await o.resolveIdentity({ method: req.method, url: req.url, header: (n) => req.header(n), remoteAddress: req.remoteAddress, body });
    } catch (err) {
      if (err instanceof HttpError) throw err;
      // The hook's own message may name the caller: not echoed.
      throw new HttpError(401, ErrorCodes.HTTP_UNAUTHORIZED, 'resolveIdentity refused this request');
    }
    if (id === null || id === undefined) throw new HttpError(401, ErrorCodes.HTTP_UNAUTHORIZED, 'resolveIdentity found no caller for this request');
    if (typeof id !== 'object' || typeof id.session !== 'string' || !ID_PATTERN.test(id.session)) throw new HttpError(500, ErrorCodes.CONFIG, 'resolveIdentity returned no valid session id');
    if (id.user !== undefined && (typeof id.user !== 'string' || !ID_PATTERN.test(id.user))) throw new HttpError(500, ErrorCodes.CONFIG, 'resolveIdentity returned an invalid user id');
    if (id.tenant !== undefined && (typeof id.tenant !== 'string' || !ID_PATTERN.test(id.tenant))) throw new HttpError(500, ErrorCodes.CONFIG, 'resolveIdentity returned an invalid tenant id');
    return { session: id.session, text, ...(id.user !== undefined ? { user: id.user } : {}), ...(id.tenant !== undefined ? { tenant: id.tenant } : {}) };
  };

  const chat = async (req: CoreRequest, cors: Record<string, string>): Promise<CoreResponse> => {
    const t0 = performance.now();
    const body = await readJson(req);
    if (typeof body !== 'object' || body === null || Array.isArray(body)) {
      throw new HttpError(400, ErrorCodes.HTTP_BAD_REQUEST, `the body must be a JSON object { "session", "text", "user"? }, got ${describeValue(body)}`);
    }
    const { session, text, user, tenant } = await identify(req, body as Record<string, unknown>);
    if (o.revealSessionIds) {
      const hash = tm.hashSession(tm.tenant, session);
      revealed.delete(hash);
      revealed.set(hash, session);
      if (revealed.size > 10_000) revealed.delete(revealed.keys().next().value!);
    }
    let memory: MemoryContext | undefined;
    const input = { session, text, ...(user !== undefined ? { user } : {}), ...(tenant !== undefined ? { tenant } : {}) } as WrapInput;
    // Validation errors (empty text, oversized text) reject here, before any byte of the stream is sent.
    const reply = await wrapFor((m) => (memory = m))(input, { signal: req.signal });
    const memoryEvent = o.memoryEvent;
    return {
      status: 200,
      headers: { ...SSE_HEADERS, ...cors },
      body: (async function* stream() {
        let chars = 0;
        let failed = false;
        try {
          if (memoryEvent !== 'none' && memory) yield sseFrame({ event: 'memory', data: JSON.stringify(memorySummary(memory, memoryEvent === 'full')) });
          for await (const chunk of asChunks(reply)) {
            if (req.signal.aborted) return;
            if (chunk.length === 0) continue;
            chars += chunk.length;
            yield sseFrame({ data: chunk });
          }
        } catch (err) {
          failed = true;
          if (req.signal.aborted) return;
          const e = errorResponse(err);
          yield sseFrame({ event: 'error', data: typeof e.body === 'string' ? JSON.stringify(JSON.parse(e.body).error) : '{}' });
        } finally {
          if (!req.signal.aborted) {
            const us = (performance.now() - t0) * 1000;
            collector.recordTurn(us);
            if (metricsPromise) void metricsPromise.then((m) => m.recordTurn(us / 1e6), () => undefined);
          }
        }
        if (!failed) yield sseFrame({ event: 'done', data: JSON.stringify({ chars, ms: Math.round(performance.now() - t0) }) });
      })(),
    };
  };

  // One snapshot per feed period, built once and serialised once for every open tab and /dashboard/data.
  const serialised = new WeakMap<object, string>();
  const snapshotJson = async (): Promise<string> => {
    const s = await fleet.shared(o.feedIntervalMs);
    let text = serialised.get(s);
    if (text === undefined) {
      const shown = o.revealSessionIds ? { ...s, busiest: s.busiest.map((row) => ({ ...row, session: revealed.get(row.session) ?? row.session })) } : s;
      text = JSON.stringify(shown);
      serialised.set(s, text);
    }
    return text;
  };

  const feed = (req: CoreRequest, cors: Record<string, string>): CoreResponse => {
    const stop = new AbortController();
    feeds.add(stop);
    const onAbort = (): void => stop.abort();
    req.signal.addEventListener('abort', onAbort, { once: true });
    const interval = o.feedIntervalMs;
    return {
      status: 200,
      headers: { ...SSE_HEADERS, ...cors },
      body: (async function* run() {
        try {
          yield sseRetry(2000);
          while (!stop.signal.aborted) {
            yield sseFrame({ event: 'snapshot', data: await snapshotJson() });
            await sleep(interval, stop.signal);
          }
        } finally {
          req.signal.removeEventListener('abort', onAbort);
          feeds.delete(stop);
        }
      })(),
    };
  };

  const session = async (req: CoreRequest, id: string, query: URLSearchParams, cors: Record<string, string>): Promise<CoreResponse> => {
    let decoded: string;
    try {
      decoded = decodeURIComponent(id);
    } catch {
      decoded = id;
    }
    if (!ID_PATTERN.test(decoded)) {
      throw new HttpError(400, ErrorCodes.INPUT_ID, `session must be 1-128 characters of letters, digits and . _ : @ -, got ${describeValue(decoded)}`, { field: 'session' });
    }
    const user = query.get('user') ?? undefined;
    const view = await tm.inspect(decoded, tm.tenant, user ? { user } : {});
    return json(200, view, cors);
  };

  return {
    collector,
    health,
    fleet,
    async handle(req) {
      const q = req.url.indexOf('?');
      const path = q < 0 ? req.url : req.url.slice(0, q);
      const query = new URLSearchParams(q < 0 ? '' : req.url.slice(q + 1));
      const match = routeOf(path);
      if (!match) return null;
      const cors = corsHeaders(req);
      try {
        if (req.method === 'OPTIONS' && o.cors) {
          return {
            status: 204,
            headers: {
              ...cors,
              'access-control-allow-methods': match.route === 'chat' ? 'POST, OPTIONS' : 'GET, OPTIONS',
              'access-control-allow-headers': 'content-type, authorization',
              'access-control-max-age': String(o.cors.maxAgeSeconds ?? 600),
            },
            body: '',
          };
        }
        switch (match.route) {
          case 'index':
            onlyMethods(req, ['GET', 'HEAD']);
            return indexResponse(o.basePath, req.header('accept'), { metrics: o.metrics !== false });
          case 'healthz':
            onlyMethods(req, ['GET', 'HEAD']);
            return healthzResponse(instance, startedMs);
          case 'readyz':
            onlyMethods(req, ['GET', 'HEAD']);
            return readyzResponse(health, instance);
          case 'chat':
            onlyMethods(req, ['POST']);
            return await chat(req, cors);
          case 'metrics': {
            onlyMethods(req, ['GET', 'HEAD']);
            authorize(req);
            const m = await metricsPromise!;
            return { status: 200, headers: { 'content-type': m.contentType, 'cache-control': 'no-store', ...cors }, body: await m.metrics() };
          }
          case 'dashboard': {
            onlyMethods(req, ['GET', 'HEAD']);
            // A browser cannot send a bearer header when navigating: `?token=` sets an HttpOnly cookie
            // and redirects to the bare URL, so the token leaves the address bar at once.
            const given = query.get('token');
            if (tokenDigest && given !== null) {
              if (!tokenMatches(given)) throw new HttpError(401, ErrorCodes.HTTP_UNAUTHORIZED, 'wrong admin token');
              return {
                status: 303,
                headers: {
                  location: path.replace(/\/$/, ''),
                  // Secure except to a loopback peer (a browser on this machine over plain http).
                  'set-cookie': `${COOKIE}=${cookieValue}; HttpOnly; SameSite=Strict; Path=${o.basePath || '/'}${isLoopback(req.remoteAddress) ? '' : '; Secure'}`,
                  'cache-control': 'no-store',
                },
                body: '',
              };
            }
            try {
              authorize(req);
            } catch (err) {
              // A browser without the token gets a page that says how to open the dashboard, not raw JSON.
              if (err instanceof HttpError && err.status === 401 && wantsHtml(req.header('accept'))) return unauthorizedPage(path, err.message, err.headers);
              throw err;
            }
            return {
              status: 200,
              headers: {
                'content-type': 'text/html; charset=utf-8',
                'cache-control': 'no-store',
                // The page is self-contained: inline script and style, no outside resource.
                'content-security-policy': "default-src 'none'; script-src 'unsafe-inline'; style-src 'unsafe-inline'; connect-src 'self'; img-src data:",
                ...cors,
              },
              body: dashboardPage(),
            };
          }
          case 'dashboard-feed':
            onlyMethods(req, ['GET']);
            authorize(req);
            return feed(req, cors);
          case 'dashboard-data':
            onlyMethods(req, ['GET', 'HEAD']);
            authorize(req);
            return { status: 200, headers: { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store', ...cors }, body: await snapshotJson() };
          case 'session':
            onlyMethods(req, ['GET', 'HEAD']);
            authorize(req);
            return await session(req, match.param ?? '', query, cors);
        }
      } catch (err) {
        return errorResponse(err, cors);
      }
    },
    close() {
      for (const f of feeds) f.abort();
      if (ownHealth) health?.stop();
      offDrain?.();
      fleet.stop();
      detachCollector();
      if (ownMetrics && metricsPromise) void metricsPromise.then((m) => m.stop(), () => undefined);
    },
  };
}

function tooLarge(bytes: number, limit: number): HttpError {
  return new HttpError(413, ErrorCodes.HTTP_BAD_REQUEST, `the body is ${bytes} bytes, over the limit of ${limit}; raise maxBodyBytes or send less`, {
    bytes,
    maxBodyBytes: limit,
  });
}

/** What the `memory` event says about a read. Without `full`, no key or value text. */
export function memorySummary(memory: MemoryContext, full: boolean) {
  return {
    result: memory.trace.result,
    degraded: memory.degraded,
    items: memory.items.map((i) => ({
      source: i.source,
      ...(i.slot !== undefined ? { slot: i.slot } : {}),
      id: i.id,
      weight: i.weight,
      provenance: i.provenance,
      ...(full ? { key: i.key, value: i.value } : {}),
    })),
  };
}

/** Any reply kind as text chunks. */
async function* asChunks(reply: Reply): AsyncGenerator<string> {
  if (typeof reply === 'string') {
    yield reply;
    return;
  }
  if (typeof (reply as ReadableStream).getReader === 'function') {
    const decoder = new TextDecoder();
    const reader = (reply as ReadableStream<string | Uint8Array>).getReader();
    try {
      for (;;) {
        const r = await reader.read();
        if (r.done) break;
        yield typeof r.value === 'string' ? r.value : decoder.decode(r.value, { stream: true });
      }
      const tail = decoder.decode();
      if (tail) yield tail;
    } finally {
      await reader.cancel().catch(() => undefined);
    }
    return;
  }
  for await (const chunk of reply as AsyncIterable<string>) yield String(chunk);
}

function sleep(ms: number, signal: AbortSignal): Promise<void> {
  return new Promise((resolve) => {
    if (signal.aborted) return resolve();
    const t = setTimeout(done, ms);
    function done(): void {
      clearTimeout(t);
      signal.removeEventListener('abort', done);
      resolve();
    }
    signal.addEventListener('abort', done, { once: true });
  });
}

