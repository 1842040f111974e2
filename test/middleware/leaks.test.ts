// Events never carry raw ids: not the tenant, not the session or user inside an error's cause (a
// driver's error can hold the failed command and its keys).

import { inspect } from 'node:util';
import { describe, expect, it } from 'vitest';
import { createTidemark } from '../../src/index.js';
import { ControlledStore } from './helpers.js';

/** A store whose commits fail the way a driver's would: the error holds the command with its keys. */
class LeakyStore extends ControlledStore {
  override async commit(...a: Parameters<ControlledStore['commit']>): ReturnType<ControlledStore['commit']> {
    if (this.failCommit) {
      const [ref] = a;
      throw Object.assign(new Error('Connection is closed.'), { command: { name: 'evalsha', args: [`tm:{${ref.tenant}:${ref.session}}:meta`, ref.user] } });
    }
    return super.commit(...a);
  }
}

describe('events carry no raw ids', () => {
  it('tenant is hashed and an error event holds no cause with ids', async () => {
    const store = new LeakyStore();
    const tm = createTidemark({ store, tenant: 'acme-bikes-ltd' });
    const seen: unknown[] = [];
    for (const name of ['read', 'write', 'commit', 'degraded', 'outbox', 'error', 'logbook', 'gate'] as const) tm.on(name, (e: unknown) => seen.push(e));
    await tm.write({ session: 'rider-4471', user: 'user-olasunkanmi', text: 'My name is Ola.' });
    await tm.read({ session: 'rider-4471', user: 'user-olasunkanmi', text: 'What is my name?' });
    store.failCommit = true;
    const queued = await tm.write({ session: 'rider-4471', user: 'user-olasunkanmi', text: 'My bike is red.' });
    expect(queued.committed).toBe(false);
    expect(seen.some((e) => (e as { error?: { code: string } }).error?.code === 'TIDEMARK_E_STORE_UNAVAILABLE')).toBe(true);
    const dump = seen.map((e) => inspect(e, { depth: 20, showHidden: true })).join('\n');
    for (const raw of ['acme-bikes-ltd', 'rider-4471', 'user-olasunkanmi']) expect(dump).not.toContain(raw);
    await tm.close({ timeoutMs: 50 });
  });
});
