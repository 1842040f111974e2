// `serve` binds to exactly the address its URL shows: loopback by default, with or without a token;
// another address only when asked for (and then with a token), shown as bound.

import type { AddressInfo } from 'node:net';
import { describe, expect, it } from 'vitest';
import { serve } from '../../cli/serve.js';

const TOKEN = 'serve-token-0123456789abcdef';

describe('serve bind', () => {
  it('binds loopback by default, also with a token, and shows what it bound', async () => {
    for (const options of [{}, { token: TOKEN }]) {
      const s = await serve({ port: 0, ...options });
      try {
        const addr = s.server.address() as AddressInfo;
        expect(addr.address).toBe('127.0.0.1');
        expect(s.url).toBe(`http://127.0.0.1:${addr.port}`);
      } finally {
        await s.close();
      }
    }
  });

  it('binds every interface only when asked, with a token, and says so', async () => {
    await expect(serve({ port: 0, host: '0.0.0.0' })).rejects.toThrow(/set a token or bind to 127.0.0.1/);
    const s = await serve({ port: 0, host: '0.0.0.0', token: TOKEN });
    try {
      const addr = s.server.address() as AddressInfo;
      expect(addr.address).toBe('0.0.0.0');
      expect(s.url).toBe(`http://0.0.0.0:${addr.port}`);
    } finally {
      await s.close();
    }
  });
});
