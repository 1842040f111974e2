// The operator's routes of the HTTP adapter, kept apart from chat and auth: `GET /healthz` (the process
// is alive), `GET /readyz` (the store answers; 503 with the reason while it does not), `GET /` (what
// this server serves, instead of a 404), and the page a browser gets at the dashboard without a token.

import type { StoreHealth } from '../../src/metrics/health.js';
import type { CoreResponse } from './core.js';

const NO_STORE = { 'cache-control': 'no-store' };
const JSON_TYPE = { 'content-type': 'application/json; charset=utf-8', ...NO_STORE };

/** 200 whenever the process can answer at all. Never touches the store. */
export function healthzResponse(instance: string, startedMs: number, nowMs = Date.now()): CoreResponse {
  return { status: 200, headers: JSON_TYPE, body: JSON.stringify({ status: 'alive', instance, uptimeSeconds: Math.round((nowMs - startedMs) / 1000) }) };
}

/**
 * 200 while the store answers; 503 before its first answer and while it is unreachable, with the reason
 * (the store error's code and message) and how long it has been down.
 */
export function readyzResponse(health: StoreHealth | null, instance: string, nowMs = Date.now()): CoreResponse {
  if (!health) return { status: 200, headers: JSON_TYPE, body: JSON.stringify({ ready: true, instance, store: null }) };
  const s = health.state;
  if (s.up === true) {
    return { status: 200, headers: JSON_TYPE, body: JSON.stringify({ ready: true, instance, store: s.store, lastSuccessMs: s.lastSuccessMs }) };
  }
  const reason = s.up === null ? `store ${s.store} has not answered yet` : `store ${s.store} is unreachable: ${s.cause ?? 'no answer'}`;
  return {
    status: 503,
    headers: { ...JSON_TYPE, 'retry-after': '1' },
    body: JSON.stringify({ ready: false, instance, store: s.store, reason, downForMs: s.up === false ? nowMs - s.sinceMs : null, lastSuccessMs: s.lastSuccessMs }),
  };
}

/** The routes, for `GET /` (HTML for a browser, JSON otherwise). */
export function indexResponse(basePath: string, accept: string | undefined, routes: { metrics: boolean }): CoreResponse {
  const list: Array<[string, string]> = [
    ['POST /chat', 'a chat turn, answered as Server-Sent Events'],
    ['GET /dashboard', 'the live dashboard (admin)'],
    ['GET /dashboard/data', 'the dashboard snapshot as JSON (admin)'],
    ...(routes.metrics ? ([['GET /metrics', 'Prometheus metrics (admin)']] as Array<[string, string]>) : []),
    ['GET /sessions/:id', 'what memory holds for a session (admin)'],
    ['GET /healthz', 'the process is alive'],
    ['GET /readyz', 'the store answers (503 with the reason when not)'],
  ];
  const at = (r: string): string => r.replace(' /', ` ${basePath}/`);
  if (accept && /text\/html/i.test(accept)) {
    const items = list.map(([r, what]) => `<li><code>${at(r)}</code> — ${what}</li>`).join('');
    return {
      status: 200,
      headers: { 'content-type': 'text/html; charset=utf-8', ...NO_STORE, 'content-security-policy': "default-src 'none'; style-src 'unsafe-inline'" },
      body: `<!doctype html><html lang="en"><head><meta charset="utf-8"><title>tidemark</title><style>body{font:15px/1.5 sans-serif;margin:2em;color:#1e2b33}code{background:#efe9dd;padding:1px 4px;border-radius:3px}</style></head><body><h1>tidemark</h1><p>This server puts a chat bot behind tidemark's memory. Routes:</p><ul>${items}</ul><p>Admin routes answer loopback clients, or anyone with the admin token.</p></body></html>`,
    };
  }
  return { status: 200, headers: JSON_TYPE, body: JSON.stringify({ name: 'tidemark', routes: list.map(([route, what]) => ({ route: at(route), what })) }) };
}

/** True when the client is a browser navigating (it asks for HTML), not a script or Prometheus. */
export function wantsHtml(accept: string | undefined): boolean {
  return !!accept && /text\/html/i.test(accept);
}

/** What a browser gets at the dashboard without the admin token: how to open it. */
export function unauthorizedPage(path: string, message: string, headers: Record<string, string>): CoreResponse {
  const esc = (s: string): string => s.replace(/[&<>"]/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;' })[c]!);
  return {
    status: 401,
    headers: { 'content-type': 'text/html; charset=utf-8', ...NO_STORE, 'content-security-policy': "default-src 'none'; style-src 'unsafe-inline'", ...headers },
    body: `<!doctype html><html lang="en"><head><meta charset="utf-8"><title>tidemark · admin token needed</title><style>body{font:15px/1.5 sans-serif;margin:2em;color:#1e2b33;max-width:44em}code{background:#efe9dd;padding:1px 4px;border-radius:3px}</style></head><body><h1>The dashboard needs the admin token</h1><p>${esc(message)}.</p><p>Open it once as <code>${esc(path)}?token=YOUR_TOKEN</code>: the token is kept in an HttpOnly cookie and removed from the address bar. Scripts send <code>Authorization: Bearer YOUR_TOKEN</code> instead.</p></body></html>`,
  };
}
