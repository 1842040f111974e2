// The HTTP adapter route by route, as a client sees it: each route's status, content type and caching
// headers, the methods it takes (405 with Allow), the options it refuses at construction, the admin rule
// (loopback without a token; with one, the bearer header or the dashboard cookie from everyone), CORS,
// body limits and parsing, the identity hook's answers, and the chat stream's events. Servers listen on
// port 0; a remote peer is given to the Fetch front-end as its address, as a server would pass it.

import { afterAll, describe, expect, it } from 'vitest';
import { createServer, request as httpRequest, type IncomingMessage, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { hostname } from 'node:os';
import { createParser, type EventSourceMessage } from 'eventsource-parser';
import { createHttpAdapter, HttpError, type ChatHandler, type HttpAdapter, type HttpAdapterOptions } from '../../../adapters/http/index.js';
import { ErrorCodes, InputError, TidemarkError } from '../../../src/errors.js';
import { DashboardCollector } from '../../../src/metrics/collector.js';
import { StoreHealth } from '../../../src/metrics/health.js';
import { createTidemark, type Tidemark } from '../../../src/middleware/tidemark.js';
import { InProcessStore } from '../../../src/store/in-process.js';

const TOKEN = 'nursery-admin-token-0123456789';
const REMOTE = { remoteAddress: '203.0.113.9' };
const LOCAL = { remoteAddress: '127.0.0.1' };
const JSON_TYPE = 'application/json; charset=utf-8';

const closers: Array<() => Promise<unknown> | void> = [];
afterAll(async () => {
  for (const close of closers.reverse()) await close();
});

/** A plant nursery's bot: it answers with the turn's text. */
const echo: ChatHandler = (input) => `Noted: ${String(input.text)}`;

function adapterOf(options: Partial<HttpAdapterOptions> = {}): { a: HttpAdapter; tm: Tidemark } {
  const tm = options.tidemark ?? createTidemark();
  const a = createHttpAdapter({ handler: echo, health: false, ...options, tidemark: tm });
  closers.push(() => tm.close({ timeoutMs: 200 }));
  closers.push(() => a.close());
  return { a, tm };
}

/** A Node server on a port of its own choosing, with the adapter's listener (or a stack) behind it. */
async function listen(handler: (req: IncomingMessage & { body?: unknown }, res: import('node:http').ServerResponse) => void): Promise<string> {
  const srv: Server = createServer(handler);
  await new Promise<void>((r) => srv.listen(0, '127.0.0.1', r));
  closers.push(async () => {
    srv.closeAllConnections();
    await new Promise((r) => srv.close(r));
  });
  return `http://127.0.0.1:${(srv.address() as AddressInfo).port}`;
}

async function served(options: Partial<HttpAdapterOptions> = {}): Promise<{ a: HttpAdapter; tm: Tidemark; url: string }> {
  const { a, tm } = adapterOf(options);
  return { a, tm, url: await listen(a.listener) };
}

async function errorOf(res: Response): Promise<{ status: number; type: string | null; code: string; message: string }> {
  const body = (await res.json()) as { error: { code: string; message: string } };
  expect(Object.keys(body)).toEqual(['error']);
  expect(Object.keys(body.error)).toEqual(['code', 'message']);
  return { status: res.status, type: res.headers.get('content-type'), code: body.error.code, message: body.error.message };
}

/** A response's headers as a plain object (every header, so an extra one shows). */
const headersOf = (res: Response): Record<string, string> => {
  const out: Record<string, string> = {};
  res.headers.forEach((v, k) => (out[k] = v));
  return out;
};

/** Resolves once `signal` aborts (at once if it already has). */
const untilAborted = (signal: AbortSignal): Promise<void> =>
  new Promise((r) => (signal.aborted ? r() : signal.addEventListener('abort', () => r(), { once: true })));

function events(text: string): EventSourceMessage[] {
  const out: EventSourceMessage[] = [];
  createParser({ onEvent: (e) => out.push(e) }).feed(text);
  return out;
}

const postJson = (url: string, body: unknown, headers: Record<string, string> = {}): Promise<Response> =>
  fetch(url, { method: 'POST', headers: { 'content-type': 'application/json', ...headers }, body: typeof body === 'string' ? body : JSON.stringify(body) });

const chatRequest = (body: unknown, headers: Record<string, string> = {}): Request =>
  new Request('http://h/chat', { method: 'POST', headers: { 'content-type': 'application/json', ...headers }, body: JSON.stringify(body) });

describe('options refused at construction', () => {
  const refusal = (options: Record<string, unknown>): { code: string; option: unknown; message: string } => {
    const tm = createTidemark();
    closers.push(() => tm.close({ timeoutMs: 200 }));
    try {
      createHttpAdapter({ tidemark: tm, handler: echo, health: false, ...options } as HttpAdapterOptions).close();
    } catch (err) {
      const e = err as TidemarkError;
      return { code: e.code, option: e.details.option, message: e.message };
    }
    return { code: 'accepted', option: undefined, message: '' };
  };

  it.each<[string, Record<string, unknown>, string, RegExp]>([
    ['no tidemark', { tidemark: undefined }, 'tidemark', /^http: option tidemark must be a tidemark instance, got undefined$/],
    ['a tidemark without wrap', { tidemark: { wrap: 1 } }, 'tidemark', /option tidemark must be a tidemark instance, got an object/],
    ['a handler that is not a function', { handler: 'reply' }, 'handler', /^http: option handler must be a function \(input, ctx\) => reply, got "reply"$/],
    ['a token of 15 characters', { token: 'a'.repeat(15) }, 'token', /^http: option token must be a string of at least 16 characters without spaces$/],
    ['a token with a space', { token: 'fern house token 0123' }, 'token', /option token/],
    ['a token that is not a string', { token: 1234567890123456789 }, 'token', /option token/],
    ['a resolveIdentity that is not a function', { resolveIdentity: {} }, 'resolveIdentity', /^http: option resolveIdentity must be a function \(request\) => \{ session, user\?, tenant\? \} \| null, got an object$/],
    ['maxBodyBytes below 64', { maxBodyBytes: 63 }, 'maxBodyBytes', /^http: option maxBodyBytes must be an integer >= 64, got 63$/],
    ['maxBodyBytes not an integer', { maxBodyBytes: 100.5 }, 'maxBodyBytes', /got 100\.5$/],
    ['an unknown memoryEvent', { memoryEvent: 'all' }, 'memoryEvent', /^http: option memoryEvent must be 'ids', 'full' or 'none', got "all"$/],
    ['feedIntervalMs below 50', { feedIntervalMs: 49 }, 'feedIntervalMs', /^http: option feedIntervalMs must be an integer >= 50, got 49$/],
    ['feedIntervalMs not an integer', { feedIntervalMs: 60.5 }, 'feedIntervalMs', /got 60\.5$/],
    ['basePath "/"', { basePath: '/' }, 'basePath', /^http: option basePath must be '' or start with "\/" and not end with one, got "\/"$/],
    ['basePath without a leading slash', { basePath: 'memory' }, 'basePath', /basePath/],
    ['basePath with a trailing slash', { basePath: '/memory/' }, 'basePath', /basePath/],
    ['basePath with a query', { basePath: '/memory?x' }, 'basePath', /basePath/],
    ['basePath with a fragment', { basePath: '/memory#x' }, 'basePath', /basePath/],
    ['basePath with an inner slash only', { basePath: 'memory/x' }, 'basePath', /basePath/],
    ['basePath not a string', { basePath: 7 }, 'basePath', /got 7$/],
  ])('%s', (_name, options, option, message) => {
    const r = refusal(options);
    expect(r.code).toBe('TIDEMARK_E_CONFIG');
    expect(r.option).toBe(option);
    expect(r.message).toMatch(message);
  });

  it('accepts the edges: a 16-character token, 64 bytes, 50 ms, a nested basePath, every memoryEvent', () => {
    for (const options of [
      { token: 'a'.repeat(16) },
      { maxBodyBytes: 64 },
      { feedIntervalMs: 50 },
      { basePath: '/a/b' },
      { basePath: '/m' },
      { basePath: '' },
      { memoryEvent: 'ids' },
      { memoryEvent: 'full' },
      { memoryEvent: 'none' },
      { resolveIdentity: () => null },
    ]) {
      expect({ options, ...refusal(options) }).toEqual({ options, code: 'accepted', option: undefined, message: '' });
    }
  });
});

describe('each route: status, content type, caching', () => {
  it('GET / lists the routes as JSON, or as a page for a browser', async () => {
    const { url } = await served();
    const res = await fetch(`${url}/`);
    expect([res.status, res.headers.get('content-type'), res.headers.get('cache-control')]).toEqual([200, JSON_TYPE, 'no-store']);
    const body = (await res.json()) as { name: string; routes: Array<{ route: string; what: string }> };
    expect(body.name).toBe('tidemark');
    expect(body.routes.map((r) => r.route)).toEqual([
      'POST /chat', 'GET /dashboard', 'GET /dashboard/data', 'GET /metrics', 'GET /sessions/:id', 'GET /healthz', 'GET /readyz',
    ]);
    const page = await fetch(`${url}/`, { headers: { accept: 'text/html,application/xhtml+xml' } });
    expect(page.headers.get('content-type')).toBe('text/html; charset=utf-8');
    expect(await page.text()).toContain('<li><code>GET /metrics</code> — Prometheus metrics (admin)</li>');
  });

  it('basePath: the routes live under it, the bare prefix is the index, a look-alike prefix is not ours', async () => {
    const { url } = await served({ basePath: '/memory', metrics: false });
    for (const path of ['/memory', '/memory/']) {
      const res = await fetch(url + path);
      expect(res.status).toBe(200);
      const routes = ((await res.json()) as { routes: Array<{ route: string }> }).routes.map((r) => r.route);
      // metrics: false leaves /metrics out of the list and out of the routes.
      expect(routes).toEqual(['POST /memory/chat', 'GET /memory/dashboard', 'GET /memory/dashboard/data', 'GET /memory/sessions/:id', 'GET /memory/healthz', 'GET /memory/readyz']);
    }
    expect((await fetch(`${url}/memory/healthz`)).status).toBe(200);
    expect((await errorOf(await fetch(`${url}/memoryx/healthz`))).status).toBe(404);
    expect((await errorOf(await fetch(`${url}/healthz`))).status).toBe(404);
    const gone = await errorOf(await fetch(`${url}/memory/metrics?x=1`));
    expect(gone).toEqual({ status: 404, type: JSON_TYPE, code: 'TIDEMARK_E_HTTP_BAD_REQUEST', message: 'no route /memory/metrics; tidemark serves /chat, /metrics, /dashboard and /sessions/:id' });
  });

  it('/healthz names the instance; /readyz without health is ready with no store', async () => {
    const { url } = await served({ instance: 'nursery-till-1' });
    const health = await fetch(`${url}/healthz`);
    expect([health.status, health.headers.get('content-type'), health.headers.get('cache-control')]).toEqual([200, JSON_TYPE, 'no-store']);
    expect(await health.json()).toEqual({ status: 'alive', instance: 'nursery-till-1', uptimeSeconds: 0 });
    const ready = await fetch(`${url}/readyz`);
    expect(ready.status).toBe(200);
    expect(await ready.json()).toEqual({ ready: true, instance: 'nursery-till-1', store: null });
    const { url: other } = await served();
    expect(((await (await fetch(`${other}/healthz`)).json()) as { instance: string }).instance).toBe(`${hostname()}:${process.pid}`);
  });

  it('/readyz with the default health: the in-process store answers', async () => {
    const tm = createTidemark();
    const { url } = await served({ tidemark: tm, health: undefined, instance: 'fern-1' });
    let body: { ready: boolean; store: string } = { ready: false, store: '' };
    for (let i = 0; i < 100 && !body.ready; i++) {
      body = (await (await fetch(`${url}/readyz`)).json()) as typeof body;
      if (!body.ready) await new Promise((r) => setTimeout(r, 20));
    }
    expect(body).toMatchObject({ ready: true, instance: 'fern-1', store: 'memory' });
  });

  it('admin routes answer loopback peers with their own content types, never cached', async () => {
    const { url, tm } = await served();
    await tm.write({ session: 'fern:house', text: 'My name is Ilse.' });
    const metrics = await fetch(`${url}/metrics`);
    expect([metrics.status, metrics.headers.get('content-type'), metrics.headers.get('cache-control')]).toEqual([200, 'text/plain; version=0.0.4; charset=utf-8', 'no-store']);
    expect(await metrics.text()).toContain('# TYPE tidemark_reads_total counter');
    for (const path of ['/dashboard', '/dashboard/']) {
      const page = await fetch(url + path);
      expect([page.status, page.headers.get('content-type'), page.headers.get('cache-control')]).toEqual([200, 'text/html; charset=utf-8', 'no-store']);
      expect(page.headers.get('content-security-policy')).toBe("default-src 'none'; script-src 'unsafe-inline'; style-src 'unsafe-inline'; connect-src 'self'; img-src data:");
      expect(await page.text()).toMatch(/^<!doctype html>/i);
    }
    const data = await fetch(`${url}/dashboard/data`);
    expect([data.status, data.headers.get('content-type'), data.headers.get('cache-control')]).toEqual([200, JSON_TYPE, 'no-store']);
    expect(await data.json()).toHaveProperty('totals');
    // An id is URL-decoded before it is looked up.
    const view = await fetch(`${url}/sessions/fern%3Ahouse`);
    expect([view.status, view.headers.get('content-type'), view.headers.get('cache-control')]).toEqual([200, JSON_TYPE, 'no-store']);
    const v = (await view.json()) as { session: string; slots: Array<{ value: string }> };
    expect(v.session).toBe('fern:house');
    expect(v.slots.map((s) => s.value)).toEqual(['Ilse']);
  });

  it('HEAD answers with the headers and no body', async () => {
    const { url } = await served();
    for (const path of ['/', '/healthz', '/readyz', '/metrics', '/dashboard', '/dashboard/data', '/sessions/fern-1']) {
      const res = await fetch(url + path, { method: 'HEAD' });
      expect({ path, status: res.status, body: await res.text() }).toEqual({ path, status: 200, body: '' });
    }
  });

  it('HEAD through the Fetch front-end: headers, no body', async () => {
    const { a } = adapterOf();
    for (const path of ['/healthz', '/sessions/fern-1', '/dashboard/data']) {
      const res = await a.fetch(new Request(`http://h${path}`, { method: 'HEAD' }), LOCAL);
      expect({ path, status: res.status, type: res.headers.get('content-type'), body: res.body }).toEqual({ path, status: 200, type: JSON_TYPE, body: null });
    }
  });

  it('/sessions/:id: a bad or undecodable id is a 400 INPUT_ID; ?user= scopes the view', async () => {
    const { url, tm } = await served();
    for (const id of ['a%20b', '%E0%A4%A', '', 'x'.repeat(129)]) {
      const e = await errorOf(await fetch(`${url}/sessions/${id}`));
      expect({ id, status: e.status, code: e.code }).toEqual({ id, status: 400, code: 'TIDEMARK_E_INPUT_ID' });
      expect(e.message).toMatch(/^session must be 1-128 characters of letters, digits and \. _ : @ -, got /);
    }
    await tm.write({ session: 'pots-1', user: 'ilse', text: 'I prefer terracotta pots.' });
    await tm.write({ session: 'pots-1', user: 'ilse', text: 'My soil is heavy clay.' });
    // An id that does not decode is judged as sent.
    expect((await errorOf(await fetch(`${url}/sessions/%E0%A4%A`))).message).toMatch(/, got "%E0%A4%A"$/);
    const scoped = (await (await fetch(`${url}/sessions/pots-1?user=ilse`)).json()) as { logbook: unknown[] };
    const empty = (await (await fetch(`${url}/sessions/pots-1?user=`)).json()) as { logbook: unknown[] };
    const unscoped = (await (await fetch(`${url}/sessions/pots-1`)).json()) as { logbook: unknown[] };
    const bad = await errorOf(await fetch(`${url}/sessions/pots-1?user=a%20b`));
    expect(bad.code).toBe('TIDEMARK_E_INPUT_ID');
    expect(scoped.logbook.length).not.toBe(unscoped.logbook.length);
    expect(empty.logbook.length).toBe(unscoped.logbook.length);
  });

  it('/sessions/:id answers 503 with the store code when the store fails', async () => {
    class DownStore extends InProcessStore {
      override async load(): Promise<never> {
        throw new Error('disk gone');
      }
    }
    const { url } = await served({ tidemark: createTidemark({ store: new DownStore() }) });
    const e = await errorOf(await fetch(`${url}/sessions/fern-1`));
    expect([e.status, e.code]).toEqual([503, 'TIDEMARK_E_STORE_UNAVAILABLE']);
  });
});

describe('methods', () => {
  it.each<[string, string, string]>([
    ['/', 'DELETE', 'GET, HEAD'],
    ['/healthz', 'POST', 'GET, HEAD'],
    ['/readyz', 'PUT', 'GET, HEAD'],
    ['/chat', 'GET', 'POST'],
    ['/metrics', 'POST', 'GET, HEAD'],
    ['/dashboard', 'POST', 'GET, HEAD'],
    ['/dashboard/feed', 'POST', 'GET'],
    ['/dashboard/data', 'DELETE', 'GET, HEAD'],
    ['/sessions/fern-1', 'DELETE', 'GET, HEAD'],
  ])('%s refuses %s with 405 and Allow: %s', async (path, method, allow) => {
    const { a } = adapterOf();
    const res = await a.fetch(new Request(`http://h${path}`, { method }), LOCAL);
    expect(res.headers.get('allow')).toBe(allow);
    const e = await errorOf(res);
    expect(e).toEqual({ status: 405, type: JSON_TYPE, code: 'TIDEMARK_E_HTTP_BAD_REQUEST', message: `method ${method} is not allowed here; use ${allow.split(', ').join(' or ')}` });
  });

  it('the feed takes GET only, not HEAD', async () => {
    const { a } = adapterOf();
    const res = await a.fetch(new Request('http://h/dashboard/feed', { method: 'HEAD' }), LOCAL);
    expect([res.status, res.headers.get('allow'), await res.text()]).toEqual([405, 'GET', '']);
  });

  it('a method is compared in upper case, whatever case the client sent', async () => {
    const { a } = adapterOf();
    const e = await errorOf(await a.fetch(new Request('http://h/chat', { method: 'patch' }), LOCAL));
    expect(e.message).toBe('method PATCH is not allowed here; use POST');
  });
});

describe('the admin rule with a token', () => {
  const ADMIN = ['/metrics', '/dashboard', '/dashboard/data', '/sessions/fern-1'];

  it('accepts "Bearer <token>" in any case and spacing from any peer; refuses anything else, saying how', async () => {
    const { a } = adapterOf({ token: TOKEN });
    for (const authorization of [`Bearer ${TOKEN}`, `bearer ${TOKEN}`, `BEARER   ${TOKEN}  `, `Bearer\t${TOKEN}`]) {
      for (const path of ADMIN) {
        const res = await a.fetch(new Request(`http://h${path}`, { headers: { authorization } }), REMOTE);
        expect({ authorization, path, status: res.status }).toEqual({ authorization, path, status: 200 });
        await res.arrayBuffer();
      }
    }
    for (const authorization of [undefined, `Basic ${TOKEN}`, TOKEN, `Bearer ${TOKEN}x`, `Bearer ${TOKEN.slice(0, -1)}`, 'Bearer ', `Token ${TOKEN}`, `xBearer ${TOKEN}`]) {
      for (const peer of [REMOTE, LOCAL]) {
        const res = await a.fetch(new Request('http://h/sessions/fern-1', { headers: authorization ? { authorization } : {} }), peer);
        expect({ authorization, status: res.status, challenge: res.headers.get('www-authenticate') }).toEqual({ authorization, status: 401, challenge: 'Bearer realm="tidemark"' });
        const e = await errorOf(res);
        expect([e.code, e.message]).toEqual(['TIDEMARK_E_HTTP_UNAUTHORIZED', 'this endpoint needs the admin token: send "Authorization: Bearer <token>"']);
      }
    }
  });

  it('the feed too: a token opens it to a remote peer', async () => {
    const { a } = adapterOf({ token: TOKEN, feedIntervalMs: 60_000 });
    const refused = await a.fetch(new Request('http://h/dashboard/feed'), REMOTE);
    expect(refused.status).toBe(401);
    await refused.text();
    const res = await a.fetch(new Request('http://h/dashboard/feed', { headers: { authorization: `Bearer ${TOKEN}` } }), REMOTE);
    expect(res.status).toBe(200);
    await res.body!.cancel();
  });

  it('without a token, a remote peer is told to configure one and gets no challenge', async () => {
    const { a } = adapterOf();
    const res = await a.fetch(new Request('http://h/metrics', { headers: { authorization: `Bearer ${TOKEN}` } }), REMOTE);
    expect(res.headers.get('www-authenticate')).toBeNull();
    expect(await errorOf(res)).toEqual({ status: 401, type: JSON_TYPE, code: 'TIDEMARK_E_HTTP_UNAUTHORIZED', message: 'admin endpoints answer loopback clients only; configure a token to allow remote access' });
  });

  it('the dashboard cookie: found among others, by its exact name and whole value only', async () => {
    const { a } = adapterOf({ token: TOKEN });
    const redirect = await a.fetch(new Request(`http://h/dashboard?token=${TOKEN}`), REMOTE);
    const pair = redirect.headers.get('set-cookie')!.split(';')[0]!;
    const value = pair.slice('tidemark_admin='.length);
    expect(value).toMatch(/^[0-9a-f]{64}$/);
    const status = async (cookie: string): Promise<number> => {
      const res = await a.fetch(new Request('http://h/dashboard/data', { headers: { cookie } }), REMOTE);
      await res.arrayBuffer();
      return res.status;
    };
    expect(await status(`theme=dark; ${pair}; lang=en`)).toBe(200);
    expect(await status(`theme=dark;${pair}`)).toBe(200);
    expect(await status(`tidemark_adminx=${value}`)).toBe(401);
    expect(await status(`tidemark_admin=${value.slice(1)}`)).toBe(401);
    expect(await status(`tidemark_admin=${value.slice(1)}0`)).toBe(401);
    expect(await status(`tidemark_admin=${value}=`)).toBe(401);
    expect(await status('theme=dark')).toBe(401);
  });

  it('?token= on the page: wrong is a 401; right redirects to the bare path with the cookie scoped to basePath', async () => {
    const { a } = adapterOf({ token: TOKEN, basePath: '/memory' });
    const wrong = await errorOf(await a.fetch(new Request('http://h/memory/dashboard?token=nope'), LOCAL));
    expect(wrong).toEqual({ status: 401, type: JSON_TYPE, code: 'TIDEMARK_E_HTTP_UNAUTHORIZED', message: 'wrong admin token' });
    const empty = await a.fetch(new Request('http://h/memory/dashboard?token='), LOCAL);
    expect(empty.status).toBe(401);
    await empty.text();
    const res = await a.fetch(new Request(`http://h/memory/dashboard/?token=${TOKEN}`), LOCAL);
    expect([res.status, res.headers.get('location'), res.headers.get('cache-control'), await res.text()]).toEqual([303, '/memory/dashboard', 'no-store', '']);
    expect(res.headers.get('set-cookie')).toMatch(/^tidemark_admin=[0-9a-f]{64}; HttpOnly; SameSite=Strict; Path=\/memory$/);
    const { a: plain } = adapterOf({ token: TOKEN });
    const root = await plain.fetch(new Request(`http://h/dashboard?token=${TOKEN}`), REMOTE);
    expect(root.headers.get('set-cookie')).toMatch(/; Path=\/; Secure$/);
  });

  it('without a token configured, ?token= is ignored: the loopback rule decides', async () => {
    const { a } = adapterOf();
    const local = await a.fetch(new Request(`http://h/dashboard?token=${TOKEN}`), LOCAL);
    expect([local.status, local.headers.get('set-cookie')]).toEqual([200, null]);
    await local.text();
    const remote = await a.fetch(new Request(`http://h/dashboard?token=${TOKEN}`), REMOTE);
    expect(remote.status).toBe(401);
    await remote.text();
  });

  it('a browser without the token gets a page saying how to open the dashboard; a script gets JSON', async () => {
    const { a } = adapterOf({ token: TOKEN });
    const page = await a.fetch(new Request('http://h/dashboard', { headers: { accept: 'text/html' } }), REMOTE);
    expect([page.status, page.headers.get('content-type'), page.headers.get('www-authenticate'), page.headers.get('cache-control')]).toEqual([401, 'text/html; charset=utf-8', 'Bearer realm="tidemark"', 'no-store']);
    const html = await page.text();
    expect(html).toContain('<code>/dashboard?token=YOUR_TOKEN</code>');
    expect(html).toContain('this endpoint needs the admin token: send &quot;Authorization: Bearer &lt;token&gt;&quot;.');
    const script = await errorOf(await a.fetch(new Request('http://h/dashboard', { headers: { accept: 'application/json' } }), REMOTE));
    expect([script.status, script.type]).toEqual([401, JSON_TYPE]);
    // Only the page itself has the HTML answer: its data route stays JSON for a browser too.
    const data = await errorOf(await a.fetch(new Request('http://h/dashboard/data', { headers: { accept: 'text/html' } }), REMOTE));
    expect(data.type).toBe(JSON_TYPE);
  });
});

describe('CORS', () => {
  it("'*' allows any origin without Vary; a list echoes an allowed origin with Vary and omits others", async () => {
    const { a: any } = adapterOf({ cors: { origin: '*' } });
    const star = await any.fetch(new Request('http://h/sessions/fern-1', { headers: { origin: 'https://pots.example' } }), LOCAL);
    expect([star.headers.get('access-control-allow-origin'), star.headers.get('vary')]).toEqual(['*', null]);
    const { a } = adapterOf({ cors: { origin: ['https://pots.example', 'https://ferns.example'] } });
    const at = async (origin: string | undefined, path = '/sessions/fern-1'): Promise<[string | null, string | null]> => {
      const res = await a.fetch(new Request(`http://h${path}`, { headers: origin ? { origin } : {} }), LOCAL);
      await res.arrayBuffer();
      return [res.headers.get('access-control-allow-origin'), res.headers.get('vary')];
    };
    expect(await at('https://ferns.example')).toEqual(['https://ferns.example', 'Origin']);
    expect(await at('https://evil.example')).toEqual([null, 'Origin']);
    expect(await at(undefined)).toEqual([null, null]);
    for (const path of ['/metrics', '/dashboard', '/dashboard/data', '/sessions/%20']) {
      expect(await at('https://pots.example', path)).toEqual(['https://pots.example', 'Origin']);
    }
    // The chat stream and its errors carry them too.
    const ok = await a.fetch(chatRequest({ session: 'c1', text: 'hello' }, { origin: 'https://pots.example' }), LOCAL);
    expect(ok.headers.get('access-control-allow-origin')).toBe('https://pots.example');
    await ok.text();
    const bad = await a.fetch(chatRequest({ session: 'a b', text: 'hello' }, { origin: 'https://pots.example' }), LOCAL);
    expect([bad.status, bad.headers.get('access-control-allow-origin')]).toEqual([400, 'https://pots.example']);
    await bad.text();
  });

  it('without cors, a request with an Origin gets no CORS header and no Vary', async () => {
    const { a } = adapterOf();
    const res = await a.fetch(new Request('http://h/sessions/fern-1', { headers: { origin: 'https://pots.example' } }), LOCAL);
    expect([res.status, res.headers.get('access-control-allow-origin'), res.headers.get('vary')]).toEqual([200, null, null]);
    await res.text();
  });

  it('a preflight lists the methods of its route, the headers and the max age', async () => {
    const { a } = adapterOf({ cors: { origin: 'https://pots.example' } });
    const pre = await a.fetch(new Request('http://h/metrics', { method: 'OPTIONS', headers: { origin: 'https://pots.example' } }));
    expect([pre.status, await pre.text()]).toEqual([204, '']);
    expect(headersOf(pre)).toEqual({
      'access-control-allow-origin': 'https://pots.example',
      vary: 'Origin',
      'access-control-allow-methods': 'GET, OPTIONS',
      'access-control-allow-headers': 'content-type, authorization',
      'access-control-max-age': '600',
    });
    const { a: short } = adapterOf({ cors: { origin: ['https://pots.example'], maxAgeSeconds: 30 } });
    const pre2 = await short.fetch(new Request('http://h/chat', { method: 'OPTIONS', headers: { origin: 'https://pots.example' } }));
    expect([pre2.headers.get('access-control-max-age'), pre2.headers.get('access-control-allow-methods')]).toEqual(['30', 'POST, OPTIONS']);
  });
});

describe('the /chat body', () => {
  it('takes any JSON media type, or none; refuses others with 415 naming the type', async () => {
    const { url } = await served();
    for (const type of ['application/json; charset=utf-8', 'application/vnd.nursery+json', 'APPLICATION/JSON']) {
      const res = await postJson(`${url}/chat`, { session: 'c1', text: 'hello' }, { 'content-type': type });
      expect({ type, status: res.status }).toEqual({ type, status: 200 });
      await res.text();
    }
    const bare = await fetch(`${url}/chat`, { method: 'POST', body: new TextEncoder().encode(JSON.stringify({ session: 'c1', text: 'hello' })) });
    expect(bare.status).toBe(200);
    await bare.text();
    for (const type of ['text/plain', 'application/jsonp', 'application/x-json', 'text/json', 'text/x-application/json']) {
      const e = await errorOf(await postJson(`${url}/chat`, { session: 'c1', text: 'hello' }, { 'content-type': type }));
      expect({ type, status: e.status, code: e.code, message: e.message }).toEqual({ type, status: 415, code: 'TIDEMARK_E_HTTP_BAD_REQUEST', message: `send the body as application/json, got ${JSON.stringify(type)}` });
    }
  });

  it('a body of exactly maxBodyBytes is taken; one byte more is a 413 naming both sizes', async () => {
    const { url } = await served({ maxBodyBytes: 128 });
    const exact = (n: number): string => {
      const head = JSON.stringify({ session: 'c1', text: 'hello' });
      return head.slice(0, -1) + ' '.repeat(n - head.length) + '}';
    };
    const ok = await postJson(`${url}/chat`, exact(128));
    expect(ok.status).toBe(200);
    await ok.text();
    expect(await errorOf(await postJson(`${url}/chat`, exact(129)))).toEqual({
      status: 413, type: JSON_TYPE, code: 'TIDEMARK_E_HTTP_BAD_REQUEST', message: 'the body is 129 bytes, over the limit of 128; raise maxBodyBytes or send less',
    });
  });

  it('a streamed body over the limit (no Content-Length) is a 413, on both front-ends', async () => {
    const { a, url } = await served({ maxBodyBytes: 128 });
    const raw = await new Promise<{ status: number; body: string }>((resolve, reject) => {
      const req = httpRequest(`${url}/chat`, { method: 'POST', headers: { 'content-type': 'application/json', 'transfer-encoding': 'chunked' } }, (res) => {
        let body = '';
        res.on('data', (c: Buffer) => (body += c.toString()));
        res.on('end', () => resolve({ status: res.statusCode!, body }));
      });
      req.on('error', reject);
      for (let i = 0; i < 3; i++) req.write(' '.repeat(60));
      req.end();
    });
    expect([raw.status, JSON.parse(raw.body).error.message]).toEqual([413, 'the body is over the limit of 128 bytes; raise maxBodyBytes or send less']);
    const over = new ReadableStream<Uint8Array>({
      start(c) {
        for (let i = 0; i < 3; i++) c.enqueue(new TextEncoder().encode(' '.repeat(60)));
        c.close();
      },
    });
    const e = await errorOf(await a.fetch(new Request('http://h/chat', { method: 'POST', body: over, duplex: 'half' } as RequestInit), LOCAL));
    expect([e.status, e.message]).toEqual([413, 'the body is over the limit of 128 bytes; raise maxBodyBytes or send less']);
    const exact = new ReadableStream<Uint8Array>({
      start(c) {
        c.enqueue(new TextEncoder().encode(`{"session":"c1","text":"ferns"}`.padEnd(128, ' ')));
        c.close();
      },
    });
    const atLimit = await a.fetch(new Request('http://h/chat', { method: 'POST', body: exact, duplex: 'half' } as RequestInit), LOCAL);
    expect(atLimit.status).toBe(200);
    await atLimit.text();
    // Under the limit, a body in several chunks is joined in order.
    const parts = ['{"session":', '"c1","text"', ':"hello ferns"}'];
    const joined = new ReadableStream<Uint8Array>({
      start(c) {
        for (const p of parts) c.enqueue(new TextEncoder().encode(p));
        c.close();
      },
    });
    const res = await a.fetch(new Request('http://h/chat', { method: 'POST', body: joined, duplex: 'half' } as RequestInit), LOCAL);
    expect(events(await res.text()).filter((m) => m.event === undefined).map((m) => m.data)).toEqual(['Noted: hello ferns']);
  });

  it('bad bytes, bad JSON and non-objects are 400s that do not echo the body', async () => {
    const { url, a } = await served();
    const notUtf8 = await errorOf(await fetch(`${url}/chat`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: new Uint8Array([0x7b, 0xff, 0xfe, 0x7d]) }));
    expect([notUtf8.status, notUtf8.message]).toEqual([400, 'the body is not valid UTF-8']);
    const broken = await errorOf(await postJson(`${url}/chat`, '{"session":"c1","text":"my secret fern'));
    expect([broken.status, broken.message]).toEqual([400, 'the body is not valid JSON; send { "session", "text", "user"? }']);
    for (const [body, got] of [['null', 'null'], ['"hello"', '"hello"'], ['[1,2]', 'an array of 2'], ['7', '7']]) {
      const e = await errorOf(await postJson(`${url}/chat`, body!));
      expect([e.status, e.code, e.message]).toEqual([400, 'TIDEMARK_E_HTTP_BAD_REQUEST', `the body must be a JSON object { "session", "text", "user"? }, got ${got}`]);
    }
    // A POST without any body is empty JSON, not a crash.
    const none = await errorOf(await a.fetch(new Request('http://h/chat', { method: 'POST' }), LOCAL));
    expect([none.status, none.message]).toEqual([400, 'the body is not valid JSON; send { "session", "text", "user"? }']);
  });

  it('bad ids name the field and are 400 INPUT_ID; a turn over maxTextBytes is a 413', async () => {
    const { url, tm } = await served({ tidemark: createTidemark({ maxTextBytes: 64 }) });
    const user = await errorOf(await postJson(`${url}/chat`, { session: 'c1', user: 7, text: 'hi' }));
    expect([user.status, user.code, user.message]).toEqual([400, 'TIDEMARK_E_INPUT_ID', 'user must be 1-128 characters of letters, digits and . _ : @ -, got 7']);
    const session = await errorOf(await postJson(`${url}/chat`, { session: 'a b', text: 'hi' }));
    expect(session.message).toBe('session must be 1-128 characters of letters, digits and . _ : @ -, got "a b"');
    const ok = await postJson(`${url}/chat`, { session: 'c1', user: 'ilse', text: 'My soil is heavy clay.' });
    expect(ok.status).toBe(200);
    await ok.text();
    await tm.flush();
    // The body's user scopes the turn's logbook entries.
    expect((await tm.inspect('c1', tm.tenant, { user: 'ilse' })).logbook.length).toBeGreaterThan(0);
    expect((await tm.inspect('c1')).logbook).toEqual([]);
    const long = await errorOf(await postJson(`${url}/chat`, { session: 'c1', text: 'fern '.repeat(20) }));
    expect([long.status, long.code]).toEqual([413, 'TIDEMARK_E_INPUT_TOO_LARGE']);
  });

  it('a body parsed upstream is used as it is: an object, a string or bytes', async () => {
    const { a } = adapterOf({ maxBodyBytes: 128 });
    const bodies: unknown[] = [];
    const url = await listen((req, res) => {
      req.resume();
      req.on('end', () => {
        req.body = bodies.shift();
        a.middleware(req, res, () => res.end('next'));
      });
    });
    const turn = JSON.stringify({ session: 'c1', text: 'hello pots' });
    for (const body of [JSON.parse(turn), turn, Buffer.from(turn), new TextEncoder().encode(turn)]) {
      bodies.push(body);
      const res = await fetch(`${url}/chat`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: '' });
      expect(events(await res.text()).filter((m) => m.event === undefined).map((m) => m.data)).toEqual(['Noted: hello pots']);
    }
    // An upstream parser that left null (nothing parsed) does not stand for the body: the stream is read.
    const streamed = await listen((req, res) => {
      req.body = null;
      a.middleware(req, res, () => res.end('next'));
    });
    const fromStream = await postJson(`${streamed}/chat`, turn);
    expect(events(await fromStream.text()).filter((m) => m.event === undefined).map((m) => m.data)).toEqual(['Noted: hello pots']);
    bodies.push(Buffer.from(' '.repeat(200)));
    const e = await errorOf(await fetch(`${url}/chat`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: '' }));
    expect([e.status, e.message]).toEqual([413, 'the body is 200 bytes, over the limit of 128; raise maxBodyBytes or send less']);
  });
});

describe('resolveIdentity', () => {
  it('sees the request; its tenant and user bind the turn', async () => {
    const tm = createTidemark();
    const seen: Array<{ method: string; url: string; caller: string | undefined; remoteAddress: string | undefined }> = [];
    const { a } = adapterOf({
      tidemark: tm,
      resolveIdentity: (req) => {
        seen.push({ method: req.method, url: req.url, caller: req.header('x-caller'), remoteAddress: req.remoteAddress });
        return { session: 'bench-3', user: 'ilse', tenant: 'nursery' };
      },
    });
    const res = await a.fetch(new Request('http://h/chat?lang=en', { method: 'POST', headers: { 'content-type': 'application/json', 'x-caller': 'ilse' }, body: JSON.stringify({ text: 'My name is Ilse.' }) }), REMOTE);
    expect(res.status).toBe(200);
    await res.text();
    await tm.flush();
    expect(seen).toEqual([{ method: 'POST', url: '/chat?lang=en', caller: 'ilse', remoteAddress: '203.0.113.9' }]);
    expect((await tm.inspect('bench-3', 'nursery')).slots.map((s) => s.value)).toEqual(['Ilse']);
    expect((await tm.inspect('bench-3')).slots).toEqual([]);
    expect((await tm.inspect('bench-3', 'nursery', { user: 'ilse' })).logbook.length).toBeGreaterThan(0);
  });

  it.each<[string, unknown, number, string]>([
    ['no caller (undefined)', undefined, 401, 'resolveIdentity found no caller for this request'],
    ['no caller (null)', null, 401, 'resolveIdentity found no caller for this request'],
    ['a string', 'bench-3', 500, 'resolveIdentity returned no valid session id'],
    ['a bad session', { session: 'a b' }, 500, 'resolveIdentity returned no valid session id'],
    ['a numeric session', { session: 3 }, 500, 'resolveIdentity returned no valid session id'],
    ['a bad user', { session: 'bench-3', user: 'a b' }, 500, 'resolveIdentity returned an invalid user id'],
    ['a numeric user', { session: 'bench-3', user: 3 }, 500, 'resolveIdentity returned an invalid user id'],
    ['a bad tenant', { session: 'bench-3', tenant: 'a b' }, 500, 'resolveIdentity returned an invalid tenant id'],
    ['a numeric tenant', { session: 'bench-3', tenant: 3 }, 500, 'resolveIdentity returned an invalid tenant id'],
  ])('returning %s is a %i', async (_name, answer, status, message) => {
    const { a } = adapterOf({ resolveIdentity: () => answer as never });
    const e = await errorOf(await a.fetch(chatRequest({ text: 'hi' }), REMOTE));
    expect(e).toEqual({ status, type: JSON_TYPE, code: status === 401 ? 'TIDEMARK_E_HTTP_UNAUTHORIZED' : 'TIDEMARK_E_CONFIG', message });
  });

  it('an HttpError it throws is answered as it is; any other error is a 401 that does not echo it', async () => {
    const { a } = adapterOf({ resolveIdentity: () => { throw new HttpError(403, ErrorCodes.HTTP_UNAUTHORIZED, 'this shop is closed'); } });
    expect(await errorOf(await a.fetch(chatRequest({ text: 'hi' }), REMOTE))).toEqual({ status: 403, type: JSON_TYPE, code: 'TIDEMARK_E_HTTP_UNAUTHORIZED', message: 'this shop is closed' });
    const { a: b } = adapterOf({ resolveIdentity: async () => { throw new Error('no cookie for ilse'); } });
    expect(await errorOf(await b.fetch(chatRequest({ text: 'hi' }), REMOTE))).toEqual({ status: 401, type: JSON_TYPE, code: 'TIDEMARK_E_HTTP_UNAUTHORIZED', message: 'resolveIdentity refused this request' });
  });

  it('without it, the body ids are refused to a remote peer, saying why', async () => {
    const { a } = adapterOf();
    const e = await errorOf(await a.fetch(chatRequest({ session: 'c1', text: 'hi' }), REMOTE));
    expect(e.message).toBe('/chat takes the session from the request body, so it answers loopback clients only; set resolveIdentity to bind turns to your authenticated callers');
  });
});

describe('the chat stream', () => {
  const sse = async (res: Response): Promise<EventSourceMessage[]> => events(await res.text());

  it('headers of an event stream; empty chunks are skipped; done counts the characters sent', async () => {
    const { a } = adapterOf({ handler: () => (async function* () { yield ''; yield 'Re'; yield ''; yield 'pot now'; })() });
    const res = await a.fetch(chatRequest({ session: 'c1', text: 'hello' }), LOCAL);
    expect(headersOf(res)).toEqual({ 'content-type': 'text/event-stream; charset=utf-8', 'cache-control': 'no-cache, no-transform', 'x-accel-buffering': 'no' });
    const got = await sse(res);
    expect(got.map((e) => [e.event ?? 'message', e.event === 'done' || e.event === 'memory' ? '' : e.data])).toEqual([['memory', ''], ['message', 'Re'], ['message', 'pot now'], ['done', '']]);
    const done = JSON.parse(got.at(-1)!.data) as { chars: number; ms: number };
    expect(done.chars).toBe(9);
    expect(Number.isInteger(done.ms) && done.ms >= 0).toBe(true);
  });

  it('memoryEvent: ids (no text), full (key and value), none (no event); slot numbers kept, slot 0 included', async () => {
    const tm = createTidemark();
    await tm.write({ session: 'c2', text: 'My name is Ilse.' });
    await tm.flush();
    const itemsOf = async (memoryEvent: 'ids' | 'full' | 'none'): Promise<EventSourceMessage[]> => {
      const { a } = adapterOf({ tidemark: tm, memoryEvent });
      return sse(await a.fetch(chatRequest({ session: 'c2', text: 'What is my name?' }), LOCAL));
    };
    const ids = await itemsOf('ids');
    const m = JSON.parse(ids[0]!.data) as { result: string; degraded: boolean; items: Array<Record<string, unknown>> };
    expect([ids[0]!.event, m.result, m.degraded]).toEqual(['memory', 'slot', false]);
    const slotItem = m.items.find((i) => i.source === 'slot')!;
    expect(Object.keys(slotItem)).toEqual(['source', 'slot', 'id', 'weight', 'provenance']);
    expect(slotItem.slot).toBe(0);
    expect(ids[0]!.data).not.toContain('Ilse');
    const full = await itemsOf('full');
    const f = JSON.parse(full[0]!.data) as { items: Array<Record<string, unknown>> };
    expect(f.items.find((i) => i.source === 'slot')).toMatchObject({ source: 'slot', slot: 0, value: 'Ilse' });
    expect(Object.keys(f.items.find((i) => i.source === 'slot')!)).toEqual(['source', 'slot', 'id', 'weight', 'provenance', 'key', 'value']);
    const none = await itemsOf('none');
    expect(none.map((e) => e.event ?? 'message')).toEqual(['message', 'done']);
  });

  it('every reply kind: a string, bytes split inside a character, strings from a stream, non-string chunks', async () => {
    const bytes = new TextEncoder().encode('Café ☕ ready');
    const replies: Record<string, () => unknown> = {
      string: () => 'Your order ships Saturday.',
      bytes: () => new ReadableStream<Uint8Array>({
        start(c) {
          // Split inside "é" (2 bytes) and "☕" (3 bytes).
          c.enqueue(bytes.slice(0, 4));
          c.enqueue(bytes.slice(4, 7));
          c.enqueue(bytes.slice(7, 8));
          c.enqueue(bytes.slice(8));
          c.close();
        },
      }),
      truncated: () => new ReadableStream<Uint8Array>({
        start(c) {
          c.enqueue(bytes.slice(0, 4));
          c.close();
        },
      }),
      strings: () => new ReadableStream<string>({
        start(c) {
          c.enqueue('Olive ');
          c.enqueue('trees');
          c.close();
        },
      }),
      numbers: () => (async function* () { yield 4; yield 2; })(),
    };
    const want: Record<string, string> = { string: 'Your order ships Saturday.', bytes: 'Café ☕ ready', truncated: 'Caf\uFFFD', strings: 'Olive trees', numbers: '42' };
    for (const [kind, make] of Object.entries(replies)) {
      const { a } = adapterOf({ handler: make as ChatHandler, memoryEvent: 'none' });
      const got = await sse(await a.fetch(chatRequest({ session: 'c3', text: 'hello' }), LOCAL));
      const text = got.filter((e) => e.event === undefined).map((e) => e.data).join('');
      expect({ kind, text, last: got.at(-1)!.event }).toEqual({ kind, text: want[kind], last: 'done' });
    }
  });

  it('a handler failing mid-stream ends it with an error event carrying only a code and a safe message', async () => {
    const failing = (err: unknown): ChatHandler => () => (async function* () { yield 'Checking '; throw err; })();
    const { a } = adapterOf({ handler: failing(new Error('stock db down for ilse@fern-house')), memoryEvent: 'none' });
    const text = await (await a.fetch(chatRequest({ session: 'c4', text: 'hello' }), LOCAL)).text();
    expect(text).not.toContain('ilse');
    expect(events(text).map((e) => [e.event ?? 'message', e.data])).toEqual([
      ['message', 'Checking '],
      ['error', JSON.stringify({ code: 'TIDEMARK_E_INTERNAL', message: 'internal error' })],
    ]);
    const { a: b } = adapterOf({ handler: failing(new InputError(ErrorCodes.INPUT_FIELD, 'role must be user or assistant')), memoryEvent: 'none' });
    const coded = events(await (await b.fetch(chatRequest({ session: 'c4', text: 'hello' }), LOCAL)).text());
    expect(coded.at(-1)).toMatchObject({ event: 'error', data: JSON.stringify({ code: 'TIDEMARK_E_INPUT_FIELD', message: 'role must be user or assistant' }) });
  });

  it('a request aborted before it is handled gets no reply and no done', async () => {
    const { a } = adapterOf();
    const gone = new AbortController();
    gone.abort();
    const res = await a.fetch(new Request('http://h/chat', { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ session: 'c5', text: 'hello' }), signal: gone.signal }), LOCAL);
    const got = events(await res.text()).map((e) => e.event ?? 'message');
    expect(got).toEqual(['memory']);
  });

  it('cancelling the Fetch response aborts the signal the handler was given', async () => {
    let signal: AbortSignal | undefined;
    const { a } = adapterOf({
      memoryEvent: 'none',
      handler: (_i, ctx) => (async function* () {
        signal = ctx.signal;
        yield 'Watering ';
        await untilAborted(ctx.signal!);
        yield 'never sent';
      })(),
    });
    const res = await a.fetch(chatRequest({ session: 'c6', text: 'hello' }), LOCAL);
    const reader = res.body!.getReader();
    expect(new TextDecoder().decode((await reader.read()).value)).toBe('data: Watering \n\n');
    expect(signal!.aborted).toBe(false);
    await reader.cancel();
    expect(signal!.aborted).toBe(true);
  });

  it('a Fetch Request whose signal aborts (the server saw the client go) aborts the handler', async () => {
    let signal: AbortSignal | undefined;
    const { a } = adapterOf({
      memoryEvent: 'none',
      handler: (_i, ctx) => (async function* () {
        signal = ctx.signal;
        yield 'Pruning ';
        await untilAborted(ctx.signal!);
      })(),
    });
    const client = new AbortController();
    const res = await a.fetch(new Request('http://h/chat', { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ session: 'c6', text: 'hello' }), signal: client.signal }), LOCAL);
    const reader = res.body!.getReader();
    await reader.read();
    expect(signal!.aborted).toBe(false);
    client.abort();
    expect(signal!.aborted).toBe(true);
    await reader.cancel();
  });

  it('with metrics off, a chat turn still streams to the end', async () => {
    const { a } = adapterOf({ metrics: false, memoryEvent: 'none' });
    const got = events(await (await a.fetch(chatRequest({ session: 'c7', text: 'hello' }), LOCAL)).text());
    expect(got.map((e) => e.event ?? 'message')).toEqual(['message', 'done']);
  });

  it('turns are timed for /metrics and the dashboard; revealSessionIds shows raw ids in the busiest table', async () => {
    for (const reveal of [false, true]) {
      const tm = createTidemark();
      const { a } = adapterOf({ tidemark: tm, revealSessionIds: reveal, feedIntervalMs: 50 });
      for (const session of ['olive-7', 'olive-7', 'fern-2']) await (await a.fetch(chatRequest({ session, text: 'My soil is heavy clay.' }), LOCAL)).text();
      await tm.flush();
      const metrics = await (await a.fetch(new Request('http://h/metrics'), LOCAL)).text();
      expect(metrics).toMatch(/^tidemark_turn_duration_seconds_count 3$/m);
      await new Promise((r) => setTimeout(r, 60)); // past one feed period, so the shared snapshot is rebuilt
      const data = (await (await a.fetch(new Request('http://h/dashboard/data'), LOCAL)).json()) as { busiest: Array<{ session: string }>; totals: { latency: { turn: { count: number } } } };
      expect(data.totals.latency.turn.count).toBe(3);
      const shown = data.busiest.map((r) => r.session).sort();
      const want = reveal ? ['fern-2', 'olive-7'] : [tm.hashSession(tm.tenant, 'fern-2'), tm.hashSession(tm.tenant, 'olive-7')].sort();
      expect({ reveal, shown }).toEqual({ reveal, shown: want });
    }
  });
});

describe('the dashboard feed', () => {
  it('opens with a retry hint, then a snapshot per period; close() ends it', async () => {
    const collector = new DashboardCollector();
    const { a } = adapterOf({ feedIntervalMs: 60_000, collector });
    expect(a.core.collector).toBe(collector);
    const res = await a.fetch(new Request('http://h/dashboard/feed'), LOCAL);
    expect(headersOf(res)).toEqual({ 'content-type': 'text/event-stream; charset=utf-8', 'cache-control': 'no-cache, no-transform', 'x-accel-buffering': 'no' });
    const reader = res.body!.getReader();
    const decode = (v: Uint8Array | undefined): string => new TextDecoder().decode(v);
    expect(decode((await reader.read()).value)).toBe('retry: 2000\n\n');
    const first = decode((await reader.read()).value);
    expect(first).toMatch(/^event: snapshot\ndata: \{.*\}\n\n$/);
    expect(JSON.parse(first.split('\n')[1]!.slice('data: '.length))).toHaveProperty('totals');
    // The next snapshot is a minute away: close() must end the stream now, not after it.
    const next = reader.read();
    a.close();
    expect(await next).toEqual({ done: true, value: undefined });
  });

  it('waits a whole period between snapshots, and a client leaving during the wait ends the feed at once', async () => {
    const { a } = adapterOf({ feedIntervalMs: 60_000 });
    const res = await a.fetch(new Request('http://h/dashboard/feed'), LOCAL);
    const reader = res.body!.getReader();
    await reader.read();
    await reader.read();
    let settled = false;
    const second = reader.read().then((r) => ((settled = true), r));
    for (let i = 0; i < 30; i++) await new Promise((r) => setImmediate(r));
    expect(settled).toBe(false);
    // The cancel must wake the minute-long wait (the test would time out otherwise).
    await reader.cancel();
    expect(await second).toEqual({ done: true, value: undefined });
  });

  it('a client going away ends its feed; other feeds go on', async () => {
    const { a } = adapterOf({ feedIntervalMs: 50 });
    const one = await a.fetch(new Request('http://h/dashboard/feed'), LOCAL);
    const two = await a.fetch(new Request('http://h/dashboard/feed'), LOCAL);
    const r1 = one.body!.getReader();
    const r2 = two.body!.getReader();
    await r1.read();
    await r2.read();
    await r1.cancel();
    const later: string[] = [];
    while (later.length < 2) later.push(new TextDecoder().decode((await r2.read()).value));
    expect(later.every((c) => c.startsWith('event: snapshot\n'))).toBe(true);
    await r2.cancel();
  });
});

describe('the Node front-end', () => {
  it('a path outside the adapter is a 404 naming the path without its query; Express gets next()', async () => {
    const { a, url } = await served();
    expect(await errorOf(await fetch(`${url}/plants?sort=asc`))).toEqual({
      status: 404, type: JSON_TYPE, code: 'TIDEMARK_E_HTTP_BAD_REQUEST', message: 'no route /plants; tidemark serves /chat, /metrics, /dashboard and /sessions/:id',
    });
    const viaFetch = await errorOf(await a.fetch(new Request('http://h/plants?sort=asc')));
    expect(viaFetch.message).toBe('no route /plants; tidemark serves /chat, /metrics, /dashboard and /sessions/:id');
  });

  it('a client leaving mid-stream aborts the handler', async () => {
    let aborted!: (v: boolean) => void;
    const seen = new Promise<boolean>((r) => (aborted = r));
    const { url } = await served({
      memoryEvent: 'none',
      handler: (_i, ctx) => (async function* () {
        yield 'Repotting ';
        await untilAborted(ctx.signal!);
        aborted(ctx.signal!.aborted);
      })(),
    });
    const gone = new AbortController();
    const live = await fetch(`${url}/chat`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ session: 'c8', text: 'hi' }), signal: gone.signal });
    const reader = live.body!.getReader();
    expect(new TextDecoder().decode((await reader.read()).value)).toBe('data: Repotting \n\n');
    gone.abort();
    expect(await seen).toBe(true);
  });
});

describe('the Node front-end sends the stream headers before the first chunk', () => {
  it('a client sees 200 and the event-stream type while the bot is still thinking', async () => {
    let release!: () => void;
    const thinking = new Promise<void>((r) => (release = r));
    const { url } = await served({
      memoryEvent: 'none',
      handler: () => (async function* () {
        await thinking;
        yield 'Your ferns ship Friday.';
      })(),
    });
    const res = await postJson(`${url}/chat`, { session: 'c9', text: 'hello' });
    expect([res.status, res.headers.get('content-type')]).toEqual([200, 'text/event-stream; charset=utf-8']);
    release();
    expect(events(await res.text()).map((e) => e.data)[0]).toBe('Your ferns ship Friday.');
  });
});

describe('errors to a client', () => {
  it('an error that is not a tidemark error is a 500 with no detail', async () => {
    const { a } = adapterOf({ metrics: { contentType: 'text/plain', registry: {} as never, metrics: async () => { throw new Error('registry at /srv/x broke'); }, recordTurn: () => undefined, stop: () => undefined } });
    expect(await errorOf(await a.fetch(new Request('http://h/metrics'), LOCAL))).toEqual({ status: 500, type: JSON_TYPE, code: 'TIDEMARK_E_INTERNAL', message: 'internal error' });
  });

  it('a StoreError from a custom metrics source is a 503', async () => {
    const { a } = adapterOf({ metrics: { contentType: 'text/plain', registry: {} as never, metrics: async () => { throw new TidemarkError(ErrorCodes.STORE_UNAVAILABLE, 'store redis failed (stats)'); }, recordTurn: () => undefined, stop: () => undefined } });
    const e = await errorOf(await a.fetch(new Request('http://h/metrics'), LOCAL));
    expect([e.status, e.code, e.message]).toEqual([503, 'TIDEMARK_E_STORE_UNAVAILABLE', 'store redis failed (stats)']);
  });
});

describe('what the adapter wires together', () => {
  it('the dashboard shows the store state and the outbox depth; /metrics has tidemark_store_up', async () => {
    const tm = createTidemark();
    const { a } = adapterOf({ tidemark: tm, health: undefined, instance: 'till-9' });
    await a.core.health!.start();
    const data = (await (await a.fetch(new Request('http://h/dashboard/data'), LOCAL)).json()) as { store?: { up: boolean | null }; fleet?: Array<{ instance: string; outboxDepth: number }> };
    expect(data.store?.up).toBe(true);
    expect(data.fleet?.find((f) => f.instance === 'till-9')?.outboxDepth).toBe(0);
    expect(await (await a.fetch(new Request('http://h/metrics'), LOCAL)).text()).toMatch(/^tidemark_store_up 1$/m);
  });

  it('close() leaves metrics the caller passed in running, and redirects carry no body', async () => {
    let stopped = 0;
    const { a } = adapterOf({ token: TOKEN, metrics: { contentType: 'text/plain', registry: {} as never, metrics: async () => '', recordTurn: () => undefined, stop: () => void stopped++ } });
    const url = await listen(a.listener);
    const redirect = await fetch(`${url}/dashboard?token=${TOKEN}`, { redirect: 'manual' });
    expect([redirect.status, await redirect.text()]).toEqual([303, '']);
    a.close();
    await new Promise((r) => setImmediate(r));
    expect(stopped).toBe(0);
  });
});

describe('store recovery', () => {
  it('a health given by the caller is not started by the adapter', async () => {
    const tm = createTidemark();
    const health = new StoreHealth(tm.store);
    const { a } = adapterOf({ tidemark: tm, health });
    const res = await a.fetch(new Request('http://h/readyz'));
    expect(res.status).toBe(503);
    expect(((await res.json()) as { reason: string }).reason).toBe('store memory has not answered yet');
    a.close();
    expect(health.state.up).toBe(null);
  });

  it('close() stops its own collector counting', async () => {
    const tm = createTidemark();
    const { a } = adapterOf({ tidemark: tm });
    await tm.read({ session: 'till-5', text: 'hello' });
    const reads = (): number => a.core.collector.snapshot().totals.reads.miss;
    expect(reads()).toBe(1);
    a.close();
    await tm.read({ session: 'till-5', text: 'hello again' });
    expect(reads()).toBe(1);
  });

  it('when the store answers again, the writes waiting in the outbox are sent at once, not at their next retry', async () => {
    class FlakyStore extends InProcessStore {
      down = false;
      override async commit(...a: Parameters<InProcessStore['commit']>) {
        if (this.down) throw new Error('connection reset');
        return super.commit(...a);
      }
    }
    const store = new FlakyStore();
    const tm = createTidemark({ store });
    // The health follows this source's events only; its probe timer is never started by a clock here.
    const source = new (await import('node:events')).EventEmitter();
    const health = new StoreHealth(store, { intervalMs: 3_600_000 });
    await health.start(source);
    const { a } = adapterOf({ tidemark: tm, health });
    store.down = true;
    await tm.write({ session: 'till-4', text: 'I ordered three olive trees.' }).catch(() => undefined);
    expect(tm.outboxDepth).toBe(1);
    source.emit('degraded', { code: 'TIDEMARK_E_STORE_UNAVAILABLE', stage: 'write' });
    expect(health.state.up).toBe(false);
    store.down = false;
    source.emit('read', {});
    expect(health.state.up).toBe(true);
    // The outbox's own retry is seconds away; the drain the recovery starts needs no timer.
    for (let i = 0; i < 50 && tm.outboxDepth > 0; i++) await new Promise((r) => setImmediate(r));
    expect(tm.outboxDepth).toBe(0);
    expect((await tm.inspect('till-4')).turns).toBe(1);
    // Closed, the adapter leaves the caller's health running and no longer drains on recovery.
    a.close();
    source.emit('degraded', { code: 'TIDEMARK_E_STORE_UNAVAILABLE', stage: 'read' });
    expect(health.state.up).toBe(false);
    store.down = true;
    await tm.write({ session: 'till-4', text: 'Make it four olive trees.' }).catch(() => undefined);
    store.down = false;
    source.emit('read', {});
    expect(health.state.up).toBe(true);
    for (let i = 0; i < 20; i++) await new Promise((r) => setImmediate(r));
    expect(tm.outboxDepth).toBe(1);
    health.stop();
  });
});
