// Admin routes (/metrics, /dashboard, its feed and data, /sessions/:id) answer loopback peers only
// when no token is set: every non-loopback IPv4 and IPv6 peer (public, private, link-local, the
// IPv4-mapped form of a remote address, a look-alike of 127.x) gets a 401 and no data, while the whole
// 127.0.0.0/8 block, ::1 and ::ffff:127.x pass. Peers are given as the socket would report them.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createHttpAdapter, type ChatHandler } from '../../../adapters/http/index.js';
import { isLoopback } from '../../../adapters/http/core.js';
import { createTidemark } from '../../../src/middleware/tidemark.js';

const REMOTE = [
  '203.0.113.9', // TEST-NET-3
  '198.51.100.7', // TEST-NET-2
  '10.0.0.1',
  '192.168.1.20',
  '169.254.1.1',
  '128.0.0.1',
  '126.255.255.255',
  '0.0.0.0',
  '2001:db8::1', // documentation prefix
  'fe80::1',
  'fd00::1',
  '::',
  '::ffff:203.0.113.9',
  '::ffff:10.0.0.1',
  '::2',
  '127.0.0.1.example',
  '1127.0.0.1',
];
const LOOPBACK = ['127.0.0.1', '127.8.9.10', '127.255.255.254', '::1', '::ffff:127.0.0.1', '::ffff:127.1.2.3'];
const ADMIN: Array<[string, string]> = [
  ['GET', '/metrics'],
  ['GET', '/dashboard'],
  ['GET', '/dashboard/data'],
  ['GET', '/sessions/desk-1'],
  ['GET', '/dashboard/feed'],
];

const handler: ChatHandler = () => 'ok';
const tm = createTidemark();
const adapter = createHttpAdapter({ tidemark: tm, handler });
beforeAll(async () => {
  await tm.write({ session: 'desk-1', text: 'My name is Dana.' });
});
afterAll(async () => {
  await tm.close({ timeoutMs: 200 });
});

describe('isLoopback', () => {
  it.each(REMOTE)('%s is not loopback', (a) => {
    expect(isLoopback(a)).toBe(false);
  });
  it.each(LOOPBACK)('%s is loopback', (a) => {
    expect(isLoopback(a)).toBe(true);
  });
  it('an unknown peer is treated as remote', () => {
    expect(isLoopback(undefined)).toBe(false);
    expect(isLoopback('')).toBe(false);
  });
});

describe('admin routes without a token', () => {
  it('refuse every remote IPv4 and IPv6 peer with a 401 and no data', async () => {
    for (const [method, path] of ADMIN) {
      for (const remoteAddress of [...REMOTE, undefined]) {
        const res = await adapter.fetch(new Request(`http://h${path}`, { method }), { remoteAddress });
        expect({ method, path, remoteAddress, status: res.status }).toEqual({ method, path, remoteAddress, status: 401 });
        const body = await res.text();
        expect(body).toContain('TIDEMARK_E_HTTP_UNAUTHORIZED');
        expect(body).not.toContain('Dana');
      }
    }
    expect((await tm.inspect('desk-1')).slots.map((s) => s.value)).toEqual(['Dana']);
  });

  it('answer loopback peers', async () => {
    for (const remoteAddress of LOOPBACK) {
      const res = await adapter.fetch(new Request('http://h/sessions/desk-1'), { remoteAddress });
      expect({ remoteAddress, status: res.status }).toEqual({ remoteAddress, status: 200 });
      expect(await res.text()).toContain('Dana');
      const metrics = await adapter.fetch(new Request('http://h/metrics'), { remoteAddress });
      expect(metrics.status).toBe(200);
    }
  });
});
