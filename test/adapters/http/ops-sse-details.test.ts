// The HTTP adapter's small pieces with exact outputs: the operator's answers (/healthz uptime, /readyz in
// each store state, the route list, the page a browser gets without the token), the event-stream
// framing helpers, and how an error maps to a status and a JSON body.

import { describe, expect, it } from 'vitest';
import { createParser, type EventSourceMessage } from 'eventsource-parser';
import { errorResponse, HttpError, memorySummary, statusOf } from '../../../adapters/http/core.js';
import { healthzResponse, indexResponse, readyzResponse, unauthorizedPage, wantsHtml } from '../../../adapters/http/ops.js';
import { SSE_HEADERS, sseComment, sseFrame, sseRetry } from '../../../adapters/http/sse.js';
import { ConfigError, ErrorCodes, InputError, StoreError, TidemarkError } from '../../../src/errors.js';
import type { StoreHealth, StoreHealthState } from '../../../src/metrics/health.js';
import type { MemoryContext } from '../../../src/types.js';

const JSON_HEADERS = { 'content-type': 'application/json; charset=utf-8', 'cache-control': 'no-store' };
const healthIn = (state: StoreHealthState): StoreHealth => ({ state }) as unknown as StoreHealth;

describe('/healthz and /readyz answers', () => {
  it('uptime is whole seconds, rounded', () => {
    expect(healthzResponse('till-1', 1_000, 3_499)).toEqual({ status: 200, headers: JSON_HEADERS, body: JSON.stringify({ status: 'alive', instance: 'till-1', uptimeSeconds: 2 }) });
    expect(JSON.parse(healthzResponse('till-1', 1_000, 3_500).body as string).uptimeSeconds).toBe(3);
  });

  it('ready while the store answers; 503 with the reason and Retry-After before and during an outage', () => {
    expect(readyzResponse(null, 'till-1')).toEqual({ status: 200, headers: JSON_HEADERS, body: JSON.stringify({ ready: true, instance: 'till-1', store: null }) });
    const up = readyzResponse(healthIn({ store: 'redis', up: true, sinceMs: 10, lastSuccessMs: 90, cause: null }), 'till-1', 100);
    expect(up).toEqual({ status: 200, headers: JSON_HEADERS, body: JSON.stringify({ ready: true, instance: 'till-1', store: 'redis', lastSuccessMs: 90 }) });
    const unknown = readyzResponse(healthIn({ store: 'redis', up: null, sinceMs: 10, lastSuccessMs: null, cause: null }), 'till-1', 100);
    expect(unknown).toEqual({
      status: 503,
      headers: { ...JSON_HEADERS, 'retry-after': '1' },
      body: JSON.stringify({ ready: false, instance: 'till-1', store: 'redis', reason: 'store redis has not answered yet', downForMs: null, lastSuccessMs: null }),
    });
    const down = readyzResponse(healthIn({ store: 'redis', up: false, sinceMs: 40, lastSuccessMs: 30, cause: 'TIDEMARK_E_STORE_UNAVAILABLE: connect refused' }), 'till-1', 100);
    expect([down.status, JSON.parse(down.body as string)]).toEqual([
      503,
      { ready: false, instance: 'till-1', store: 'redis', reason: 'store redis is unreachable: TIDEMARK_E_STORE_UNAVAILABLE: connect refused', downForMs: 60, lastSuccessMs: 30 },
    ]);
    const silent = readyzResponse(healthIn({ store: 'redis', up: false, sinceMs: 40, lastSuccessMs: null, cause: null }), 'till-1', 100);
    expect(JSON.parse(silent.body as string).reason).toBe('store redis is unreachable: no answer');
  });
});

describe('the route list and the page without the token', () => {
  it('HTML for a browser (any case), JSON otherwise, under the base path', () => {
    const html = indexResponse('/desk', 'TEXT/HTML', { metrics: true });
    expect(html.headers).toEqual({ 'content-type': 'text/html; charset=utf-8', 'cache-control': 'no-store', 'content-security-policy': "default-src 'none'; style-src 'unsafe-inline'" });
    expect(html.body).toContain('<ul><li><code>POST /desk/chat</code> — a chat turn, answered as Server-Sent Events</li><li><code>GET /desk/dashboard</code>');
    expect(html.body).toContain('<li><code>GET /desk/readyz</code> — the store answers (503 with the reason when not)</li></ul>');
    const plain = indexResponse('', 'application/json', { metrics: false });
    expect(plain).toEqual({
      status: 200,
      headers: JSON_HEADERS,
      body: JSON.stringify({
        name: 'tidemark',
        routes: [
          { route: 'POST /chat', what: 'a chat turn, answered as Server-Sent Events' },
          { route: 'GET /dashboard', what: 'the live dashboard (admin)' },
          { route: 'GET /dashboard/data', what: 'the dashboard snapshot as JSON (admin)' },
          { route: 'GET /sessions/:id', what: 'what memory holds for a session (admin)' },
          { route: 'GET /healthz', what: 'the process is alive' },
          { route: 'GET /readyz', what: 'the store answers (503 with the reason when not)' },
        ],
      }),
    });
    expect(indexResponse('', undefined, { metrics: true }).headers['content-type']).toBe('application/json; charset=utf-8');
  });

  it('wantsHtml: only a client that asks for text/html', () => {
    expect([undefined, '', 'application/json', '*/*', 'text/plain'].map(wantsHtml)).toEqual([false, false, false, false, false]);
    expect(['text/html', 'application/xhtml+xml,Text/HTML;q=0.9'].map(wantsHtml)).toEqual([true, true]);
  });

  it('the page escapes the path and message and keeps the challenge header', () => {
    const page = unauthorizedPage('/d<b>&"', 'say "a" & <b>', { 'www-authenticate': 'Bearer realm="tidemark"' });
    expect(page.status).toBe(401);
    expect(page.headers).toEqual({
      'content-type': 'text/html; charset=utf-8',
      'cache-control': 'no-store',
      'content-security-policy': "default-src 'none'; style-src 'unsafe-inline'",
      'www-authenticate': 'Bearer realm="tidemark"',
    });
    expect(page.body).toContain('<p>say &quot;a&quot; &amp; &lt;b&gt;.</p>');
    expect(page.body).toContain('<code>/d&lt;b&gt;&amp;&quot;?token=YOUR_TOKEN</code>');
    expect(page.body).not.toContain('<b>');
  });
});

describe('event-stream framing', () => {
  const parse = (text: string): EventSourceMessage[] => {
    const out: EventSourceMessage[] = [];
    createParser({ onEvent: (e) => out.push(e) }).feed(text);
    return out;
  };

  it('event, id, then one data line per line', () => {
    expect(sseFrame({ event: 'note', id: '7', data: 'a\r\nb' })).toBe('event: note\nid: 7\ndata: a\ndata: b\n\n');
    expect(parse(sseFrame({ event: 'note', id: 'n-7', data: 'x' }))).toEqual([{ event: 'note', id: 'n-7', data: 'x' }]);
  });

  it('refuses an event or id that would break the framing', () => {
    for (const bad of ['a\nb', 'a\rb', 'a\r\nb', 'a\0b']) {
      expect(() => sseFrame({ event: bad, data: '' })).toThrow('SSE event must be a single line without NUL');
      expect(() => sseFrame({ id: bad, data: '' })).toThrow('SSE id must be a single line without NUL');
    }
  });

  it('a comment is one line; retry is whole non-negative milliseconds', () => {
    expect(sseComment('keep\r\nalive\nnow\rplease')).toBe(': keep alive now please\n\n');
    expect(parse(sseComment('x') + sseFrame({ data: 'y' }))).toEqual([{ event: undefined, id: undefined, data: 'y' }]);
    expect([sseRetry(1500.9), sseRetry(-5), sseRetry(0)]).toEqual(['retry: 1500\n\n', 'retry: 0\n\n', 'retry: 0\n\n']);
  });

  it('headers tell proxies not to buffer or transform', () => {
    expect(SSE_HEADERS).toEqual({ 'content-type': 'text/event-stream; charset=utf-8', 'cache-control': 'no-cache, no-transform', 'x-accel-buffering': 'no' });
  });
});

describe('errors as HTTP', () => {
  it.each<[string, unknown, number]>([
    ['an HttpError', new HttpError(418, ErrorCodes.HTTP_BAD_REQUEST, 'teapot'), 418],
    ['a turn over the size limit', new InputError(ErrorCodes.INPUT_TOO_LARGE, 'too large'), 413],
    ['bad text', new InputError(ErrorCodes.INPUT_TEXT, 'empty'), 400],
    ['a bad field', new InputError(ErrorCodes.INPUT_FIELD, 'role'), 400],
    ['a bad request code without status', new TidemarkError(ErrorCodes.HTTP_BAD_REQUEST, 'bad'), 400],
    ['an unauthorized code without status', new TidemarkError(ErrorCodes.HTTP_UNAUTHORIZED, 'who'), 401],
    ['a store outage', new StoreError(ErrorCodes.STORE_UNAVAILABLE, 'down'), 503],
    ['a store conflict', new StoreError(ErrorCodes.STORE_CONFLICT, 'busy'), 503],
    ['a config error', new ConfigError('bad option'), 500],
    ['a closed instance', new TidemarkError(ErrorCodes.CLOSED, 'closed'), 500],
    ['a plain error', new Error('x'), 500],
    ['a thrown string', 'x', 500],
  ])('%s is %i', (_name, err, status) => {
    expect(statusOf(err)).toBe(status);
  });

  it('the body holds the code and message only; headers merge the error\'s and the caller\'s', () => {
    const err = new HttpError(401, ErrorCodes.HTTP_UNAUTHORIZED, 'token needed', { secret: 'x' }, { 'www-authenticate': 'Bearer' });
    expect(errorResponse(err, { vary: 'Origin' })).toEqual({
      status: 401,
      headers: { 'content-type': 'application/json; charset=utf-8', 'www-authenticate': 'Bearer', vary: 'Origin' },
      body: JSON.stringify({ error: { code: 'TIDEMARK_E_HTTP_UNAUTHORIZED', message: 'token needed' } }),
    });
    expect(errorResponse(new Error('db at 10.0.0.5 refused ilse'))).toEqual({
      status: 500,
      headers: { 'content-type': 'application/json; charset=utf-8' },
      body: JSON.stringify({ error: { code: 'TIDEMARK_E_INTERNAL', message: 'internal error' } }),
    });
  });
});

describe('memorySummary', () => {
  const memory = {
    trace: { result: 'slot' },
    degraded: true,
    items: [
      { source: 'slot', slot: 0, id: 'r1', weight: 0.75, provenance: ['t1'], key: 'name', value: 'Ilse' },
      { source: 'logbook', id: 'e9', weight: 0.25, provenance: ['t4'], key: 'soil', value: 'heavy clay' },
    ],
  } as unknown as MemoryContext;

  it('ids only, unless full; a logbook item has no slot field at all', () => {
    const ids = memorySummary(memory, false);
    expect(ids).toEqual({ result: 'slot', degraded: true, items: [{ source: 'slot', slot: 0, id: 'r1', weight: 0.75, provenance: ['t1'] }, { source: 'logbook', id: 'e9', weight: 0.25, provenance: ['t4'] }] });
    expect(ids.items.map((i) => Object.keys(i))).toEqual([['source', 'slot', 'id', 'weight', 'provenance'], ['source', 'id', 'weight', 'provenance']]);
    expect(memorySummary(memory, true).items.map((i) => Object.keys(i))).toEqual([
      ['source', 'slot', 'id', 'weight', 'provenance', 'key', 'value'],
      ['source', 'id', 'weight', 'provenance', 'key', 'value'],
    ]);
    expect(memorySummary(memory, true).items[1]).toMatchObject({ key: 'soil', value: 'heavy clay' });
  });
});
