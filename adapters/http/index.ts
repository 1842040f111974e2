// tidemark/http: put a tidemark-wrapped bot behind HTTP. One core (adapters/http/core.ts), three
// front-ends — a Fetch-API handler, a Node `http` request listener and an Express-style middleware —
// serving `POST /chat` (SSE), `/metrics`, `/dashboard` (+ `/feed`, `/data`) and `/sessions/:id`.

import type { IncomingMessage, ServerResponse } from 'node:http';
import { ErrorCodes } from '../../src/errors.js';
import { createHttpCore, errorResponse, HttpError, type CoreRequest, type CoreResponse, type HttpAdapterOptions, type HttpCore } from './core.js';

export { createHttpCore, HttpError, HTTP_ADAPTER_DEFAULTS, isLoopback, memorySummary } from './core.js';
export type { ChatHandler, ChatIdentity, CoreRequest, CoreResponse, CorsOptions, HttpAdapterOptions, HttpCore, IdentityRequest, ResolveIdentity } from './core.js';
export { sseFrame, sseComment, sseRetry, SSE_HEADERS } from './sse.js';
export type { SseMessage } from './sse.js';

export type FetchHandler = (req: Request, info?: { remoteAddress?: string }) => Promise<Response>;
export type NodeListener = (req: IncomingMessage, res: ServerResponse) => void;
export type ExpressMiddleware = (req: IncomingMessage & { body?: unknown }, res: ServerResponse, next: (err?: unknown) => void) => void;

export interface HttpAdapter {
  /**
   * Fetch-API handler. Standard `Request`s carry no peer address: pass `{ remoteAddress }` from your
   * server (or configure a token), otherwise admin routes treat the caller as remote.
   * Paths outside the adapter get a 404 JSON error.
   */
  fetch: FetchHandler;
  /** For `http.createServer(listener)`; paths outside the adapter get a 404 JSON error. */
  listener: NodeListener;
  /** For Express/Connect-style stacks: calls `next()` for paths the adapter does not own. */
  middleware: ExpressMiddleware;
  readonly core: HttpCore;
  /** Ends open dashboard feeds and unsubscribes from the tidemark instance. */
  close(): void;
}

/** Builds the three front-ends over one core (one collector, one set of metrics). */
export function createHttpAdapter(options: HttpAdapterOptions): HttpAdapter {
  const core = createHttpCore(options);
  return {
    core,
    fetch: fetchFrontEnd(core),
    listener: (req, res) => void nodeFrontEnd(core, req, res, null),
    middleware: (req, res, next) => void nodeFrontEnd(core, req, res, next),
    close: () => core.close(),
  };
}

/** Shorthands when only one front-end is wanted. */
export const fetchHandler = (options: HttpAdapterOptions): FetchHandler => createHttpAdapter(options).fetch;
export const nodeListener = (options: HttpAdapterOptions): NodeListener => createHttpAdapter(options).listener;
export const expressMiddleware = (options: HttpAdapterOptions): ExpressMiddleware => createHttpAdapter(options).middleware;

const notFound = (path: string): CoreResponse =>
  errorResponse(new HttpError(404, ErrorCodes.HTTP_BAD_REQUEST, `no route ${path.split('?')[0]}; tidemark serves /chat, /metrics, /dashboard and /sessions/:id`));

// ------------------------------------------------------------------ Fetch API

function fetchFrontEnd(core: HttpCore): FetchHandler {
  return async (req, info = {}) => {
    const url = new URL(req.url);
    const controller = new AbortController();
    const onAbort = (): void => controller.abort();
    if (req.signal.aborted) controller.abort();
    else req.signal.addEventListener('abort', onAbort, { once: true });
    const coreReq: CoreRequest = {
      method: req.method.toUpperCase(),
      url: url.pathname + url.search,
      header: (name) => req.headers.get(name) ?? undefined,
      remoteAddress: info.remoteAddress,
      signal: controller.signal,
      body: async (limit) => readLimited(req.body, limit),
    };
    const res = (await core.handle(coreReq)) ?? notFound(coreReq.url);
    const headers = new Headers(res.headers);
    if (typeof res.body === 'string' || res.body instanceof Uint8Array) {
      req.signal.removeEventListener('abort', onAbort);
      const payload = coreReq.method === 'HEAD' || res.status === 204 || res.status === 303 ? null : typeof res.body === 'string' ? res.body : new Uint8Array(res.body);
      return new Response(payload, { status: res.status, headers });
    }
    const it = res.body[Symbol.asyncIterator]();
    const encoder = new TextEncoder();
    const stream = new ReadableStream<Uint8Array>({
      // Pull-driven: the next chunk is asked of the reply only when the client has taken the last one.
      async pull(ctrl) {
        try {
          const r = await it.next();
          if (r.done) {
            req.signal.removeEventListener('abort', onAbort);
            ctrl.close();
          } else ctrl.enqueue(encoder.encode(r.value));
        } catch (err) {
          ctrl.error(err);
        }
      },
      async cancel() {
        controller.abort();
        req.signal.removeEventListener('abort', onAbort);
        await it.return?.();
      },
    });
    return new Response(stream, { status: res.status, headers });
  };
}

async function readLimited(body: ReadableStream<Uint8Array> | null, limit: number): Promise<Uint8Array> {
  if (!body) return new Uint8Array(0);
  const reader = body.getReader();
  const parts: Uint8Array[] = [];
  let size = 0;
  for (;;) {
    const r = await reader.read();
    if (r.done) break;
    size += r.value.byteLength;
    if (size > limit) {
      await reader.cancel().catch(() => undefined);
      throw new HttpError(413, ErrorCodes.HTTP_BAD_REQUEST, `the body is over the limit of ${limit} bytes; raise maxBodyBytes or send less`, { maxBodyBytes: limit });
    }
    parts.push(r.value);
  }
  return concat(parts, size);
}

function concat(parts: readonly Uint8Array[], size: number): Uint8Array {
  const out = new Uint8Array(size);
  let at = 0;
  for (const p of parts) {
    out.set(p, at);
    at += p.byteLength;
  }
  return out;
}

// ------------------------------------------------------------------ Node http / Express

async function nodeFrontEnd(core: HttpCore, req: IncomingMessage & { body?: unknown; originalUrl?: string }, res: ServerResponse, next: ((err?: unknown) => void) | null): Promise<void> {
  const controller = new AbortController();
  // 'close' on the response fires when it finished or when the client went away; only the latter aborts.
  res.on('close', () => {
    if (!res.writableFinished) controller.abort();
  });
  const coreReq: CoreRequest = {
    method: (req.method ?? 'GET').toUpperCase(),
    url: req.url ?? '/',
    header: (name) => {
      const v = req.headers[name.toLowerCase()];
      return Array.isArray(v) ? v.join(', ') : v;
    },
    remoteAddress: req.socket?.remoteAddress,
    signal: controller.signal,
    parsedBody: req.body,
    body: (limit) => readNodeBody(req, limit),
  };
  let out: CoreResponse | null;
  try {
    out = await core.handle(coreReq);
  } catch (err) {
    out = errorResponse(err);
  }
  if (!out) {
    if (next) return next();
    out = notFound(coreReq.url);
  }
  if (res.headersSent) return;
  res.writeHead(out.status, out.headers);
  if (typeof out.body === 'string' || out.body instanceof Uint8Array) {
    res.end(coreReq.method === 'HEAD' ? undefined : out.body);
    return;
  }
  res.flushHeaders();
  const it = out.body[Symbol.asyncIterator]();
  try {
    for (;;) {
      if (controller.signal.aborted) break;
      const r = await it.next();
      if (r.done) break;
      // Honour backpressure: wait for 'drain' rather than buffering a slow client's stream in memory.
      if (!res.write(r.value)) await new Promise<void>((resolve) => {
        const done = (): void => {
          res.off('drain', done);
          res.off('close', done);
          resolve();
        };
        res.on('drain', done);
        res.on('close', done);
      });
    }
  } catch {
    // The core turns handler errors into an `error` event; anything else ends the stream.
  } finally {
    if (controller.signal.aborted) await it.return?.(undefined);
    if (!res.writableEnded) res.end();
  }
}

function readNodeBody(req: IncomingMessage, limit: number): Promise<Uint8Array> {
  return new Promise((resolve, reject) => {
    const parts: Buffer[] = [];
    let size = 0;
    let done = false;
    req.on('data', (chunk: Buffer) => {
      if (done) return;
      size += chunk.byteLength;
      if (size > limit) {
        done = true;
        // Stop reading but let the socket drain so the 413 can still be written.
        req.removeAllListeners('data');
        req.resume();
        reject(new HttpError(413, ErrorCodes.HTTP_BAD_REQUEST, `the body is over the limit of ${limit} bytes; raise maxBodyBytes or send less`, { maxBodyBytes: limit }));
        return;
      }
      parts.push(chunk);
    });
    req.on('end', () => {
      if (!done) {
        done = true;
        resolve(new Uint8Array(Buffer.concat(parts, size)));
      }
    });
    req.on('error', (err) => {
      if (!done) {
        done = true;
        reject(err);
      }
    });
  });
}
