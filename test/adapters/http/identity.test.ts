// Who a /chat turn belongs to: without resolveIdentity the ids come from the body, so /chat answers
// loopback peers only; with it, the hook's ids bind the turn and the body's are ignored, so a caller
// naming a victim's user id gets nothing of the victim's. Also the admin cookie: derived from the
// token (never the token), Secure toward remote peers, and a malformed one is a 401, not a 500.

import { afterAll, describe, expect, it } from 'vitest';
import { createHttpAdapter, type ChatHandler, type ResolveIdentity } from '../../../adapters/http/index.js';
import { createTidemark, type Tidemark } from '../../../src/middleware/tidemark.js';

const TOKEN = 'test-token-0123456789abcdef';
const open: Tidemark[] = [];
afterAll(async () => {
  await Promise.all(open.map((t) => t.close({ timeoutMs: 200 })));
});

/** Replies with the values it recalled, so a test sees what memory a turn was given. */
const echoRecall: ChatHandler = (_input, ctx) => ctx.memory.items.map((i) => i.value).join(' | ') || '(nothing)';

const post = (body: unknown, headers: Record<string, string> = {}): Request =>
  new Request('http://h/chat', { method: 'POST', headers: { 'content-type': 'application/json', ...headers }, body: JSON.stringify(body) });

/** The reply text of an SSE response (data of unnamed events). */
async function replyOf(res: Response): Promise<string> {
  const text = await res.text();
  return text
    .split('\n\n')
    .filter((block) => block.length > 0 && !/^event:/m.test(block))
    .map((block) => block.split('\n').filter((l) => l.startsWith('data:')).map((l) => l.slice(5).replace(/^ /, '')).join('\n'))
    .join('');
}

describe('/chat identity', () => {
  it('without resolveIdentity: body ids for loopback peers, 401 for anyone else', async () => {
    const tm = createTidemark();
    open.push(tm);
    const a = createHttpAdapter({ tidemark: tm, handler: echoRecall });
    try {
      const remote = await a.fetch(post({ session: 's1', text: 'hello' }), { remoteAddress: '203.0.113.9' });
      expect(remote.status).toBe(401);
      expect(((await remote.json()) as { error: { code: string } }).error.code).toBe('TIDEMARK_E_HTTP_UNAUTHORIZED');
      const local = await a.fetch(post({ session: 's1', text: 'hello' }), { remoteAddress: '127.0.0.1' });
      expect(local.status).toBe(200);
      await local.text();
    } finally {
      a.close();
    }
  });

  it('with resolveIdentity: the hook binds session and user, a caller naming a victim gets nothing of theirs', async () => {
    const tm = createTidemark();
    open.push(tm);
    // The victim told the bot their name in their own session.
    await tm.write({ session: 'victim-desk', user: 'victim', text: 'My name is Brigid Oyelaran.' });
    // A toy authentication: a header names the caller (in production: a verified cookie or token).
    const seen: Array<Record<string, unknown>> = [];
    const resolveIdentity: ResolveIdentity = (req) => {
      seen.push(req.body);
      const who = req.header('x-test-caller');
      return who ? { session: `desk-${who}`, user: who } : null;
    };
    const a = createHttpAdapter({ tidemark: tm, handler: echoRecall, resolveIdentity });
    try {
      // The attacker names the victim's user and session in the body; the hook's ids win.
      const res = await a.fetch(post({ session: 'victim-desk', user: 'victim', text: 'What is my name?' }, { 'x-test-caller': 'mallory' }), { remoteAddress: '203.0.113.9' });
      expect(res.status).toBe(200);
      const reply = await replyOf(res);
      expect(reply).not.toContain('Brigid');
      expect(reply).toBe('(nothing)');
      expect(seen[0]).toMatchObject({ session: 'victim-desk', text: 'What is my name?' });
      // The victim, identified as themself, still gets their memory.
      const own = await a.fetch(post({ text: 'What is my name?' }, { 'x-test-caller': 'victim' }), { remoteAddress: '203.0.113.10' });
      await tm.write({ session: 'desk-victim', user: 'victim', text: 'My bike is a blue cargo bike.' });
      expect(await replyOf(own)).toContain('Brigid Oyelaran');
      // No caller: 401, and the hook throwing is a 401 whose message does not echo the hook's.
      expect((await a.fetch(post({ session: 'x', text: 'hi' }), { remoteAddress: '203.0.113.9' })).status).toBe(401);
      const throwing = createHttpAdapter({ tidemark: tm, handler: echoRecall, resolveIdentity: () => { throw new Error('bad signature for victim'); } });
      const thrown = await throwing.fetch(post({ text: 'hi' }), { remoteAddress: '203.0.113.9' });
      expect(thrown.status).toBe(401);
      expect(await thrown.text()).not.toContain('victim');
      throwing.close();
    } finally {
      a.close();
    }
  });

  it('rejects a resolveIdentity that is not a function, naming the option', () => {
    const tm = createTidemark();
    open.push(tm);
    expect(() => createHttpAdapter({ tidemark: tm, handler: echoRecall, resolveIdentity: 'header' as never })).toThrow(/resolveIdentity must be a function/);
  });
});

describe('admin cookie', () => {
  it('holds no token, is Secure toward remote peers, and a malformed one is a 401', async () => {
    const tm = createTidemark();
    open.push(tm);
    const a = createHttpAdapter({ tidemark: tm, handler: echoRecall, token: TOKEN });
    try {
      const remote = await a.fetch(new Request(`http://h/dashboard?token=${TOKEN}`), { remoteAddress: '203.0.113.9' });
      expect(remote.status).toBe(303);
      const cookie = remote.headers.get('set-cookie')!;
      expect(cookie).not.toContain(TOKEN);
      expect(cookie).toMatch(/; Secure$/);
      const local = await a.fetch(new Request(`http://h/dashboard?token=${TOKEN}`), { remoteAddress: '127.0.0.1' });
      expect(local.headers.get('set-cookie')).not.toMatch(/Secure/);
      const ok = await a.fetch(new Request('http://h/dashboard/data', { headers: { cookie: cookie.split(';')[0]! } }), { remoteAddress: '203.0.113.9' });
      expect(ok.status).toBe(200);
      await ok.text();
      // The raw token as a cookie is not accepted: only the derived value is.
      expect((await a.fetch(new Request('http://h/dashboard/data', { headers: { cookie: `tidemark_admin=${TOKEN}` } }), { remoteAddress: '203.0.113.9' })).status).toBe(401);
      const bad = await a.fetch(new Request('http://h/dashboard/data', { headers: { cookie: 'tidemark_admin=%E0%A4%A' } }), { remoteAddress: '203.0.113.9' });
      expect(bad.status).toBe(401);
    } finally {
      a.close();
    }
  });
});
