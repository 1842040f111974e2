// The instance's life: refusing work after close() with a code, reporting the writes close() could
// not store (return value and events), the same error for read(null) and write(null), and flush()
// settling by its deadline even when the only pending timer is unref'd (in a child process, where an
// unsettled top-level await would end Node with exit code 13).

import { execFileSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { describe, expect, it, vi } from 'vitest';
import { createTidemark } from '../../src/index.js';
import { ControlledStore } from './helpers.js';

describe('lifecycle', () => {
  it('read(null) and write(null) give the same code', async () => {
    const tm = createTidemark();
    const r = await tm.read(null as never).catch((e: { code: string }) => e.code);
    const w = await tm.write(null as never).catch((e: { code: string }) => e.code);
    expect(r).toBe('TIDEMARK_E_INPUT_FIELD');
    expect(w).toBe(r);
    await tm.close();
  });

  it('refuses read, write and wrap after close() with TIDEMARK_E_CLOSED', async () => {
    const tm = createTidemark();
    const bot = tm.wrap(async () => 'ok');
    await tm.close();
    for (const call of [() => tm.write({ session: 's', text: 'My name is Ola.' }), () => tm.read({ session: 's', text: 'name?' }), () => bot({ session: 's', text: 'hi' })]) {
      await expect(call()).rejects.toMatchObject({ code: 'TIDEMARK_E_CLOSED' });
    }
  });

  it('close() with writes still queued reports them: return value, a closed event, an outbox event each', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store });
    store.failCommit = true;
    expect((await tm.write({ session: 's', text: 'My name is Ola.' })).committed).toBe(false);
    expect((await tm.write({ session: 't', text: 'My bike is red.' })).committed).toBe(false);
    const closed: number[] = [];
    const abandoned: string[] = [];
    tm.on('closed', (e) => closed.push(e.abandoned));
    tm.on('outbox', (e) => e.change === 'abandoned' && abandoned.push(e.sessionHash ?? ''));
    expect(await tm.close({ timeoutMs: 30 })).toEqual({ abandoned: 2 });
    expect(closed).toEqual([2]);
    expect(abandoned).toHaveLength(2);
  });

  it('a write queued longer than outbox.maxAgeMs is given up with TIDEMARK_E_STORE_OUTBOX_EXPIRED and an expired event', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store, outbox: { maxAgeMs: 60_000, retryMs: 60_000, maxRetryMs: 60_000 } });
    const changes: string[] = [];
    const codes: string[] = [];
    tm.on('outbox', (e) => changes.push(e.change));
    tm.on('error', (e) => codes.push(e.error.code));
    store.failCommit = true;
    expect((await tm.write({ session: 's', text: 'My name is Ola.' })).committed).toBe(false);
    store.failCommit = false;
    // Only the clock moves (no timer runs early): the entry is now two minutes old.
    vi.useFakeTimers({ toFake: ['Date'] });
    try {
      vi.setSystemTime(Date.now() + 120_000);
      expect(await tm.flush({ timeoutMs: 1000 })).toEqual({ outboxDepth: 0 });
    } finally {
      vi.useRealTimers();
    }
    expect(changes).toEqual(['queued', 'expired']);
    expect(codes).toContain('TIDEMARK_E_STORE_OUTBOX_EXPIRED');
    expect(store.commits).toBe(1);
    await tm.close();
  });

  it('flush({ timeoutMs }) settles by its deadline when the only pending timer is unref\'d', () => {
    const child = fileURLToPath(new URL('./flush-child.ts', import.meta.url));
    const out = execFileSync(process.execPath, ['--import', 'tsx', child], { encoding: 'utf8', timeout: 20_000 });
    expect(out.trim()).toBe('flushed: outboxDepth 1');
  });
});
