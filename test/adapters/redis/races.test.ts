// Races and faults between bot processes sharing one Redis: an erase while another process's reply
// streams, a user erase while another process opens sessions for that user, a write waiting in
// another process's outbox during an erase, a commit retried after its reply was lost and many other
// commits, and conflicts met by queued writes and by wrap(). Each "process" is a tidemark instance
// with its own store and its own Redis connection (own caches, own outbox), as separate bot
// processes would be.

import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Redis } from 'ioredis';
import { RedisSlotStore, redisSlotStore } from '../../../adapters/redis/index.js';
import { createTidemark, type Tidemark } from '../../../src/index.js';
import type { CommitRequest, CommitResult } from '../../../src/store/store.js';
import type { SessionRef } from '../../../src/types.js';
import { commitOf, slot } from '../../store/conformance.js';
import { FaultProxy } from './proxy.js';
import { REDIS_URL, deletePrefix, newClient, probeRedis, scanKeys, uniquePrefix } from './helpers.js';
import { rng } from '../../../bench/lib/stats.js';

const down = await probeRedis();
const target = new URL(REDIS_URL);

/**
 * A RedisSlotStore that runs a hook (once) just before its next commit — another writer getting in
 * first — and optionally waits before every commit (a busy process).
 */
class HookedStore extends RedisSlotStore {
  before: (() => Promise<void>) | undefined;
  delayMs: (() => number) | undefined;
  /** While set, every logbook search waits for it (a stalled Redis). */
  searchStall: Promise<void> | undefined;
  override async searchLogbook(...a: Parameters<RedisSlotStore['searchLogbook']>): ReturnType<RedisSlotStore['searchLogbook']> {
    if (this.searchStall) await this.searchStall;
    return super.searchLogbook(...a);
  }
  override async commit(ref: SessionRef, req: CommitRequest): Promise<CommitResult> {
    const hook = this.before;
    this.before = undefined;
    if (hook) await hook();
    if (this.delayMs) await new Promise((r) => setTimeout(r, this.delayMs!()));
    return super.commit(ref, req);
  }
}

/** An async iterable reply whose chunks wait for `gate` after the first one. */
async function* replyAfter(gate: Promise<void>, chunks: string[]): AsyncGenerator<string> {
  yield chunks[0]!;
  await gate;
  for (const c of chunks.slice(1)) yield c;
}

describe.skipIf(down !== null)(`races and faults across processes${down ? ` (skipped: ${down})` : ''}`, () => {
  let admin: Redis;
  const prefixes: string[] = [];
  const open: Tidemark[] = [];
  const proc = (prefix: string, over: Parameters<typeof createTidemark>[0] = {}, url = REDIS_URL): Tidemark => {
    const tm = createTidemark({ store: redisSlotStore({ redis: url, prefix }), tenant: 'shop', ...over });
    open.push(tm);
    return tm;
  };
  /**
   * Processes A (plain) and B (a store whose commits run a hook first, so A can get in before them) on
   * a fresh prefix; B makes no in-commit retries, so a lost race sends its write to the outbox.
   */
  const racers = (tag: string, retryMs: number): { prefix: string; a: Tidemark; b: Tidemark; hooked: HookedStore } => {
    const prefix = uniquePrefix(tag);
    prefixes.push(prefix);
    const a = proc(prefix);
    const hooked = new HookedStore({ redis: REDIS_URL, prefix });
    const b = createTidemark({ store: hooked, tenant: 'shop', commitRetries: 0, outbox: { retryMs, maxRetryMs: retryMs * 2 } });
    open.push(b);
    return { prefix, a, b, hooked };
  };
  /** Data keys (not tombstones) left under a prefix. */
  // Tombstones hold a time, the marker a constant, the tenant's counters and fleet hash only figures:
  // none holds anything a user said, so none is a data key.
  const dataKeys = async (prefix: string): Promise<string[]> =>
    (await scanKeys(admin, `${prefix}*`)).filter((k) => !k.endsWith(':gone') && !k.endsWith(':stats') && !k.endsWith(':fleet') && k !== `${prefix}marker`);

  beforeAll(() => {
    admin = newClient();
  });
  afterAll(async () => {
    await Promise.all(open.map((t) => t.close({ timeoutMs: 500 }).catch(() => undefined)));
    for (const p of prefixes) await deletePrefix(admin, p);
    admin.disconnect();
  });

  it('1a: a user erased while another process streams a reply that recalled an erased value: nothing comes back', async () => {
    const prefix = uniquePrefix('race-1a');
    prefixes.push(prefix);
    // Capacity 1: the phone number is demoted to the logbook by the next fact, so the read recalls it
    // from there and the write would promote it back into a slot.
    const a = proc(prefix, { capacity: 1 });
    const b = proc(prefix, { capacity: 1 });
    const ref = { session: 'desk-1', user: 'u1' };
    expect((await b.write({ ...ref, text: 'My phone number is 07700 900123.' })).committed).toBe(true);
    expect((await b.write({ ...ref, text: 'My bike is a green tandem.' })).committed).toBe(true);
    const errors: string[] = [];
    b.on('error', (e) => errors.push(e.error.code));
    let release!: () => void;
    const gate = new Promise<void>((r) => (release = r));
    let recalled = '';
    const bot = b.wrap(async (_input: { session: string; user: string; text: string }, ctx) => {
      recalled = ctx.memory.items.map((i) => `${i.source}:${i.value}`).join(' | ');
      return replyAfter(gate, ['Your phone number ', 'is 07700 900123.']);
    });
    const reply = await bot({ ...ref, text: 'What is my phone number?' });
    expect(recalled).toContain('07700 900123');
    const it = reply[Symbol.asyncIterator]();
    const first = await it.next();
    expect(first.value).toBe('Your phone number ');
    // Process A erases the user while B's reply is still streaming.
    const report = await a.erase({ user: 'u1' });
    expect(report.sessions).toBe(1);
    release();
    while (!(await it.next()).done);
    await b.flush({ timeoutMs: 2000 });
    expect(await dataKeys(prefix)).toEqual([]);
    expect(errors).toContain('TIDEMARK_E_STORE_ERASED');
    const c = proc(prefix, { capacity: 1 });
    const after = await c.read({ ...ref, text: 'What is my phone number?' });
    expect(after.items).toEqual([]);
  });

  it('1b: a user erase while another process opens sessions for that user leaves none of the writes accepted before it', async () => {
    const prefix = uniquePrefix('race-1b');
    prefixes.push(prefix);
    const a = proc(prefix);
    const hooked = new HookedStore({ redis: REDIS_URL, prefix });
    const b = createTidemark({ store: hooked, tenant: 'shop' });
    open.push(b);
    await b.write({ session: 'warm', user: 'u2', text: 'My lesson is on Friday.' });
    await a.read({ session: 'warm', user: 'u2', text: 'When is my lesson?' }); // A is connected
    // B is busy: each commit waits 0-40 ms (seeded), so its writes reach Redis before, during and
    // after A's erase.
    const seed = 1402;
    console.log(`1b interleaving seed ${seed}`);
    const rand = rng(seed);
    hooked.delayMs = () => Math.floor(rand() * 40);
    const N = 30;
    // Every write is accepted (called) before the erase is called; they race it to the store.
    const writes = Array.from({ length: N }, (_, i) =>
      b.write({ session: `new-${i}`, user: 'u2', text: `My locker number is ${100 + i}.` }).then(
        (r) => (r.committed ? 'stored' : 'queued'),
        (e: { code?: string }) => e.code ?? 'error',
      ),
    );
    const erased = await a.erase({ user: 'u2' });
    const outcomes = await Promise.all(writes);
    // None slipped through: whatever landed before the erase read the set was erased, whatever came
    // after was refused.
    expect(outcomes.filter((o) => o !== 'stored' && o !== 'TIDEMARK_E_STORE_ERASED')).toEqual([]);
    expect(await dataKeys(prefix)).toEqual([]);
    expect(await a.erase({ user: 'u2' })).toEqual({ sessions: 0, slots: 0, logbookEntries: 0, events: 0 });
    expect(erased.sessions).toBeGreaterThanOrEqual(1);
  });

  it('1c: a write waiting in another process\'s outbox during an erase is never written after it', async () => {
    const prefix = uniquePrefix('race-1c');
    prefixes.push(prefix);
    const proxy = new FaultProxy({ host: target.hostname, port: Number(target.port || 6379) });
    await proxy.start();
    try {
      const a = proc(prefix);
      const b = proc(prefix, { outbox: { retryMs: 20, maxRetryMs: 40 } }, proxy.url);
      const changes: string[] = [];
      b.on('outbox', (e) => changes.push(e.change));
      expect((await b.write({ session: 'desk-2', text: 'My name is Ola.' })).committed).toBe(true);
      proxy.mode = 'refuse';
      proxy.cutAll();
      const queued = await b.write({ session: 'desk-2', text: 'My phone number is 07700 900456.' });
      expect(queued.committed).toBe(false);
      await a.erase({ session: 'desk-2' });
      proxy.mode = 'pass';
      await b.flush({ timeoutMs: 5000 });
      expect(b.outboxDepth).toBe(0);
      expect(changes).toContain('erased');
      expect(changes).not.toContain('drained');
      expect(await dataKeys(prefix)).toEqual([]);
    } finally {
      await proxy.stop();
    }
  });

  it('2: a commit resent after its reply was lost and 20 other commits is recognised, not applied again', async () => {
    const prefix = uniquePrefix('race-2');
    prefixes.push(prefix);
    const store = redisSlotStore({ redis: REDIS_URL, prefix });
    try {
      const ref = { tenant: 'shop', session: 'once' };
      const first = commitOf({ ops: [{ index: 0, slot: slot(1, { value: 'red' }) }], commitId: 'write-red' });
      expect(await store.commit(ref, first)).toMatchObject({ ok: true, version: 1 });
      for (let v = 1; v <= 20; v++) {
        expect(await store.commit(ref, commitOf({ expectedVersion: v, ops: [{ index: 0, slot: slot(1, { value: `v${v}` }) }], commitId: `later-${v}` }))).toMatchObject({ ok: true });
      }
      // The resend, re-planned on the current version as the outbox would: still recognised.
      const again = await store.commit(ref, { ...first, expectedVersion: 21 });
      expect(again).toEqual({ ok: true, version: 21 });
      const snap = await store.load(ref);
      expect(snap?.version).toBe(21);
      expect(snap?.table.get(0)?.value).toBe('v20');
    } finally {
      await store.close();
    }
  });

  it('2: a write whose reply was cut is applied once, however many writes came between it and its retry', async () => {
    const prefix = uniquePrefix('race-2b');
    prefixes.push(prefix);
    const proxy = new FaultProxy({ host: target.hostname, port: Number(target.port || 6379) });
    await proxy.start();
    try {
      const a = proc(prefix);
      const hooked = new HookedStore({ redis: proxy.url, prefix });
      const b = createTidemark({ store: hooked, tenant: 'shop', outbox: { retryMs: 10_000, maxRetryMs: 10_000 } });
      open.push(b);
      await b.write({ session: 'fit', text: 'My saddle height is 70 cm.', turn: 'b0' });
      // The commit reaches Redis and is applied; its reply never comes back.
      hooked.before = async () => void (proxy.mode = 'drop-replies');
      const lost = await b.write({ session: 'fit', text: 'My saddle height is 72 cm.', turn: 'b1' });
      expect(lost.committed).toBe(false);
      expect(proxy.cuts).toBeGreaterThan(0);
      proxy.mode = 'pass';
      for (let i = 0; i < 20; i++) await a.write({ session: 'fit', text: `My lesson ${i} is on Friday.`, turn: `a${i}` });
      await a.write({ session: 'fit', text: 'My saddle height is 75 cm.', turn: 'a-last' });
      await b.flush({ timeoutMs: 5000 });
      expect(b.outboxDepth).toBe(0);
      const view = await a.inspect('fit', 'shop', { logbookLimit: 1000 });
      const turns = view.logbook.filter((e) => e.kind === 'turn').map((e) => e.provenance[0]);
      expect(turns.filter((t) => t === 'b1')).toHaveLength(1);
      expect(view.turns).toBe(23);
      expect(view.slots.map((s) => s.value)).toContain('75 cm');
      expect(view.slots.map((s) => s.value)).not.toContain('72 cm');
    } finally {
      await proxy.stop();
    }
  });

  it('3: a queued write that meets a conflict while draining is planned again, not dropped', async () => {
    const { a, b, hooked } = racers('race-3', 20);
    const changes: string[] = [];
    b.on('outbox', (e) => changes.push(e.change));
    await b.write({ session: 'q', text: 'My name is Ola.' });
    // The first commit of the next write loses to process A (retries: 0), so the write is queued ...
    hooked.before = async () => void (await a.write({ session: 'q', text: 'My lesson is on Monday.' }));
    const r = await b.write({ session: 'q', text: 'My phone number is 07700 900789.' });
    expect(r.committed).toBe(false);
    // ... and its first drain loses again: it stays queued and lands on a later pass.
    hooked.before = async () => void (await a.write({ session: 'q', text: 'My lesson is on Tuesday.' }));
    await b.flush({ timeoutMs: 5000 });
    expect(changes).toEqual(['queued', 'retry', 'drained']);
    const view = await a.inspect('q', 'shop', { logbookLimit: 100 });
    expect(view.logbook.map((e) => e.value)).toContain('My phone number is 07700 900789.');
  });

  it('3: under wrap() a conflict on a normal write is queued and stored, not dropped', async () => {
    const { a, b, hooked } = racers('race-3w', 20);
    await b.write({ session: 'w', text: 'My name is Ola.' });
    hooked.before = async () => void (await a.write({ session: 'w', text: 'My lesson is on Monday.' }));
    const bot = b.wrap(async () => 'Noted.');
    expect(await bot({ session: 'w', text: 'My phone number is 07700 900321.' })).toBe('Noted.');
    await b.flush({ timeoutMs: 5000 });
    const view = await a.inspect('w', 'shop', { logbookLimit: 100 });
    expect(view.logbook.map((e) => e.value)).toContain('My phone number is 07700 900321.');
  });

  // The four defects the test-suite audit found with probes (each must stay fixed).
  it('4a: a conflict storm during an outbox retry: the write is planned again every pass and reported drained once, when stored', async () => {
    const { a, b, hooked } = racers('race-4a', 5);
    const changes: string[] = [];
    b.on('outbox', (e) => changes.push(e.change));
    await b.write({ session: 'storm', text: 'My name is Ola.' });
    // Process A gets in first before each of B's next six commits: the write and five drain passes.
    let losses = 6;
    const arm = (): void => {
      hooked.before = async () => {
        await a.write({ session: 'storm', text: `My lesson is on day ${losses}.` });
        if (--losses > 0) arm();
      };
    };
    arm();
    const r = await b.write({ session: 'storm', text: 'My phone number is 07700 900888.' });
    expect(r.committed).toBe(false);
    await b.flush({ timeoutMs: 10_000 });
    expect(losses).toBe(0);
    expect(changes).toEqual(['queued', 'retry', 'retry', 'retry', 'retry', 'retry', 'drained']);
    const view = await a.inspect('storm', 'shop', { logbookLimit: 100 });
    expect(view.logbook.filter((e) => e.value === 'My phone number is 07700 900888.')).toHaveLength(1);
  });

  it('4b: an erase while the outbox is committing that session: the commit is refused, nothing lands after the erase', async () => {
    const { prefix, a, b, hooked } = racers('race-4b', 5);
    const changes: string[] = [];
    b.on('outbox', (e) => changes.push(e.change));
    await b.write({ session: 'mid', user: 'u-mid', text: 'My name is Ola.' });
    hooked.before = async () => void (await a.write({ session: 'mid', user: 'u-mid', text: 'My lesson is on Monday.' }));
    expect((await b.write({ session: 'mid', user: 'u-mid', text: 'My phone number is 07700 900777.' })).committed).toBe(false);
    // The drain's commit starts; the user is erased by process A before it reaches Redis.
    hooked.before = async () => void (await a.erase({ user: 'u-mid' }));
    await b.flush({ timeoutMs: 5000 });
    expect(b.outboxDepth).toBe(0);
    expect(changes).toEqual(['queued', 'erased']);
    expect(await dataKeys(prefix)).toEqual([]);
  });

  it('4c: readTimeoutMs bounds the logbook search: a stalled search leaves the turn degraded, it does not hold it', async () => {
    const prefix = uniquePrefix('race-4c');
    prefixes.push(prefix);
    const hooked = new HookedStore({ redis: REDIS_URL, prefix });
    const tm = createTidemark({ store: hooked, tenant: 'shop', readTimeoutMs: 100 });
    open.push(tm);
    await tm.write({ session: 'slow', text: 'My bike is a green tandem.' });
    let release!: () => void;
    hooked.searchStall = new Promise<void>((r) => (release = r));
    const order: string[] = [];
    // The search stays stalled until the read has answered: the read cannot have waited for it.
    const ctx = await tm.read({ session: 'slow', text: 'What bike do I have?' });
    order.push('read answered');
    release();
    order.push('search released');
    expect(order).toEqual(['read answered', 'search released']);
    expect(ctx.degraded).toBe(true);
    hooked.searchStall = undefined;
    expect((await tm.read({ session: 'slow', text: 'What bike do I have?' })).degraded).toBe(false);
  });
});
