// wrap(handler) with streaming replies: chunks pass through unchanged (strings, AsyncIterable,
// ReadableStream of strings or bytes), slow stores do not hold back the first chunk, aborts write the
// user turn only (unless onAbort: 'all'), a throwing handler keeps its error, and a failing store
// gives a degraded but complete reply whose write waits in the outbox until flush().

import { afterEach, describe, expect, it, vi } from 'vitest';
import type { MemoryContext } from '../../src/types.js';
import { Tidemark, createTidemark, type TidemarkOptions, type WrapContext } from '../../src/middleware/tidemark.js';
import { ControlledStore, collect, gate, slowChunks, streamOf } from './helpers.js';

const open: Tidemark[] = [];
function make(options: TidemarkOptions = {}): Tidemark {
  const tm = createTidemark({ hashKey: 'test-key', ...options });
  open.push(tm);
  return tm;
}
afterEach(async () => {
  await Promise.all(open.splice(0).map((t) => t.close({ timeoutMs: 200 })));
});

const values = async (tm: Tidemark, session: string): Promise<string[]> => (await tm.inspect(session)).slots.map((s) => s.value);

describe('passthrough', () => {
  it('a string reply comes back as is, the handler sees memory, and both turns are written after it', async () => {
    const tm = make();
    const seen: MemoryContext[] = [];
    const bot = tm.wrap(async (input, ctx) => {
      seen.push(ctx.memory);
      return `Thanks, ${input.text.length} chars`;
    });
    expect(await bot({ session: 's', text: 'My name is Dana' })).toBe('Thanks, 15 chars');
    expect(await bot({ session: 's', text: 'What is my name?' })).toBe('Thanks, 16 chars');
    await tm.flush();
    expect(seen[0]!.items).toEqual([]);
    expect(seen[1]!.items[0]!.value).toBe('Dana');
    expect(seen[1]!.degraded).toBe(false);
    expect((await tm.inspect('s')).turns).toBe(4); // user, reply, user, reply
  });

  it('an AsyncIterable reply is forwarded chunk for chunk', async () => {
    const tm = make();
    const chunks = ['Your ', 'bike ', 'is ', 'ready', '.'];
    const bot = tm.wrap(async () => slowChunks(chunks, 1));
    const out = await collect(await bot({ session: 's', text: 'Is my bike ready?' }));
    expect(out).toEqual(chunks);
  });

  it('a ReadableStream of strings is forwarded chunk for chunk', async () => {
    const tm = make();
    const chunks = ['See ', 'you ', 'Friday'];
    const bot = tm.wrap(async () => streamOf(chunks));
    const reply = await bot({ session: 's', text: 'My name is Dana' });
    expect(reply).toBeInstanceOf(ReadableStream);
    expect(await collect(reply)).toEqual(chunks);
  });

  it('a ReadableStream of bytes is forwarded byte for byte and decoded across split characters for the write', async () => {
    const tm = make({ writeReplies: true });
    const bytes = new TextEncoder().encode('My workshop is Café Zoë.');
    // Split inside the two-byte "é" and inside "ë".
    const cut1 = bytes.indexOf(0xc3) + 1;
    const cut2 = bytes.lastIndexOf(0xc3) + 1;
    const chunks = [bytes.subarray(0, cut1), bytes.subarray(cut1, cut2), bytes.subarray(cut2)];
    const bot = tm.wrap(async () => streamOf(chunks));
    const out = await collect(await bot({ session: 's', text: 'Where should I bring it?' }));
    expect(out).toHaveLength(3);
    out.forEach((c, i) => expect(c).toBe(chunks[i])); // the same objects, untouched
    await tm.flush();
    expect(await values(tm, 's')).toContain('Café Zoë');
  });
});

describe('a slow store does not hold back the reply', () => {
  it('a slow load is cut at readTimeoutMs: the handler runs degraded and the first chunk comes soon after', async () => {
    const store = new ControlledStore();
    // The load waits until the test opens it, after the first chunk: the chunk can only come from a
    // read cut at readTimeoutMs (no elapsed time is asserted).
    const load = gate();
    store.loadGate = load.promise;
    const tm = make({ store, readTimeoutMs: 50 });
    const degraded: string[] = [];
    tm.on('degraded', (e) => degraded.push(e.stage));
    let memory: MemoryContext | undefined;
    const bot = tm.wrap(async (_i, ctx) => {
      memory = ctx.memory;
      return slowChunks(['first ', 'second'], 0);
    });
    const it = (await bot({ session: 's', text: 'My name is Dana' }))[Symbol.asyncIterator]();
    const first = await it.next();
    expect(first.value).toBe('first ');
    expect(store.loads).toBe(1); // the load is still held
    expect(memory!.degraded).toBe(true);
    expect(degraded).toEqual(['read']);
    await it.next();
    await it.next();
    load.open();
    store.loadGate = undefined;
    await tm.flush();
    expect(await values(tm, 's')).toEqual(['Dana']);
  });

  it('a slow commit never delays the reply: the first chunk of turn N arrives before turn N commits', async () => {
    const store = new ControlledStore();
    store.commitDelayMs = 500;
    const tm = make({ store, readTimeoutMs: 100 });
    const bot = tm.wrap(async () => slowChunks(['ok ', 'noted'], 0));
    const firstChunkAt: number[] = [];
    const turnStart: number[] = [];
    for (const text of ['My name is Dana', 'My bike is a green Corvane Tourer']) {
      turnStart.push(performance.now());
      const reply = await bot({ session: 's', text });
      for await (const chunk of reply) if (chunk === 'ok ') firstChunkAt.push(performance.now());
    }
    await tm.flush();
    expect(store.commitDone).toHaveLength(2);
    // Turn N's first chunk came before turn N's commit finished...
    expect(firstChunkAt[0]!).toBeLessThan(store.commitDone[0]!);
    expect(firstChunkAt[1]!).toBeLessThan(store.commitDone[1]!);
    // ...and turn 1 did not wait for any commit at all.
    expect(firstChunkAt[0]! - turnStart[0]!).toBeLessThan(200); // the commit takes 500
    // Turn 2 may wait for turn 1's pending commit (read-your-writes), but only within readTimeoutMs.
    expect(firstChunkAt[1]! - turnStart[1]!).toBeLessThan(100 + 250);
    expect((await values(tm, 's')).sort()).toEqual(['Dana', 'a green Corvane Tourer']);
  });

  it('a string reply resolves before its commit finishes', async () => {
    const store = new ControlledStore();
    store.commitDelayMs = 200;
    const tm = make({ store });
    const bot = tm.wrap(async () => 'done');
    expect(await bot({ session: 's', text: 'My name is Dana' })).toBe('done');
    const repliedAt = performance.now();
    await tm.flush();
    expect(repliedAt).toBeLessThan(store.commitDone[0]!);
  });
});

describe('abort mid-stream', () => {
  const REPLY = ['My workshop is Spokes. ', 'We open ', 'at nine ', 'tomorrow.'];

  async function abortAfterFirst(options: TidemarkOptions, kind: 'iterable' | 'stream'): Promise<{ tm: Tidemark; got: string[] }> {
    const tm = make({ writeReplies: true, ...options });
    const ac = new AbortController();
    let handlerSignal: AbortSignal | undefined;
    const bot = tm.wrap(async (_i, ctx: WrapContext) => {
      handlerSignal = ctx.signal;
      return kind === 'iterable' ? slowChunks(REPLY, 5) : streamOf(REPLY, 5);
    });
    const reply = await bot({ session: 's', text: 'I am allergic to chain wax.' }, { signal: ac.signal });
    expect(handlerSignal).toBe(ac.signal);
    const got: string[] = [];
    if (reply instanceof ReadableStream) {
      const reader = reply.getReader();
      got.push((await reader.read()).value!);
      ac.abort();
      for (let r = await reader.read(); !r.done; r = await reader.read()) got.push(r.value);
    } else {
      for await (const c of reply) {
        got.push(c);
        ac.abort();
      }
    }
    await tm.flush();
    return { tm, got };
  }

  for (const kind of ['iterable', 'stream'] as const) {
    it(`(${kind}) writes the user turn and not the partial reply`, async () => {
      const { tm, got } = await abortAfterFirst({}, kind);
      expect(got).toEqual([REPLY[0]]);
      const v = await tm.inspect('s');
      expect(v.turns).toBe(1);
      expect(v.slots.map((s) => s.value)).toEqual(['chain wax']);
    });

    it(`(${kind}) with onAbort: 'all' also writes the partial reply`, async () => {
      const { tm } = await abortAfterFirst({ onAbort: 'all' }, kind);
      const v = await tm.inspect('s');
      expect(v.turns).toBe(2);
      expect(v.slots.map((s) => s.value).sort()).toEqual(['Spokes', 'chain wax']);
    });

    it(`(${kind}) with onAbort: 'none' writes nothing`, async () => {
      const { tm } = await abortAfterFirst({ onAbort: 'none' }, kind);
      expect((await tm.inspect('s')).version).toBe(0);
    });
  }
});

describe('abort while the producer is stalled', () => {
  it('ends the reply at once, forwards nothing more, and writes only the user turn', async () => {
    const tm = make({ writeReplies: true });
    const ac = new AbortController();
    const thinking = gate();
    let stalledNow = false;
    let sourceClosed = false;
    const bot = tm.wrap(async () =>
      (async function* () {
        try {
          yield 'Let me check. ';
          stalledNow = true;
          await thinking.promise; // the model is thinking, until the test lets it go on
          yield 'My workshop is Spokes. ';
        } finally {
          sourceClosed = true;
        }
      })(),
    );
    const reply = await bot({ session: 's', text: 'I am allergic to chain wax.' }, { signal: ac.signal });
    // Abort while the consumer waits for the second chunk and the producer is stalled: that wait can
    // only end because the abort ended it (the producer stays stalled until after).
    const it = reply[Symbol.asyncIterator]();
    const got = [(await it.next()).value];
    const pending = it.next();
    await vi.waitFor(() => expect(stalledNow).toBe(true));
    ac.abort();
    expect((await pending).done).toBe(true);
    expect(got).toEqual(['Let me check. ']);
    expect(sourceClosed).toBe(false);
    await tm.flush();
    const v = await tm.inspect('s');
    expect(v.turns).toBe(1);
    expect(v.slots.map((x) => x.value)).toEqual(['chain wax']);
    thinking.open();
    await vi.waitFor(() => expect(sourceClosed).toBe(true)); // told to stop once its pending chunk settles
  });
  it('(stream) ends a ReadableStream reply at once too', async () => {
    const tm = make({ writeReplies: true });
    const ac = new AbortController();
    const stalled = gate();
    let pulls = 0;
    const source = new ReadableStream<string>({
      async pull(c) {
        pulls++;
        if (pulls > 1) await stalled.promise;
        c.enqueue(pulls === 1 ? 'Let me check. ' : 'My workshop is Spokes. ');
        if (pulls > 1) c.close();
      },
    }, { highWaterMark: 0 });
    const reply = await tm.wrap(async () => source)({ session: 's', text: 'I am allergic to chain wax.' }, { signal: ac.signal });
    const reader = reply.getReader();
    const got = [(await reader.read()).value];
    const pending = reader.read();
    await vi.waitFor(() => expect(pulls).toBe(2)); // the second pull is stalled
    ac.abort(); // only the abort can end the wait
    expect((await pending).done).toBe(true);
    expect(got).toEqual(['Let me check. ']);
    stalled.open();
    await tm.flush();
    expect((await tm.inspect('s')).slots.map((x) => x.value)).toEqual(['chain wax']);
  });
});

describe('handler failures', () => {
  it('a throwing handler rejects with its own error and the user turn is still written', async () => {
    const tm = make();
    const boom = new Error('model overloaded');
    const bot = tm.wrap(async () => {
      throw boom;
    });
    await expect(bot({ session: 's', text: 'My name is Dana' })).rejects.toBe(boom);
    await tm.flush();
    const v = await tm.inspect('s');
    expect(v.turns).toBe(1);
    expect(v.slots.map((s) => s.value)).toEqual(['Dana']);
  });

  it('a stream that fails mid-way passes its error on and the user turn is still written', async () => {
    const tm = make({ writeReplies: true });
    const boom = new Error('upstream reset');
    const bot = tm.wrap(async () =>
      (async function* () {
        yield 'My workshop is Spokes. ';
        throw boom;
      })(),
    );
    const got: string[] = [];
    await expect(
      (async () => {
        for await (const c of await bot({ session: 's', text: 'My name is Dana' })) got.push(c);
      })(),
    ).rejects.toBe(boom);
    expect(got).toEqual(['My workshop is Spokes. ']);
    await tm.flush();
    expect(await values(tm, 's')).toEqual(['Dana']);
  });
});

describe('a failing store', () => {
  it('gives a degraded but complete reply, an error event, and the write waits in the outbox until flush()', async () => {
    const store = new ControlledStore();
    const tm = make({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    const errors: Array<[string, string]> = [];
    const outbox: string[] = [];
    const degraded: string[] = [];
    tm.on('error', (e) => errors.push([e.stage, e.error.code]));
    tm.on('outbox', (e) => outbox.push(`${e.change}:${e.depth}`));
    tm.on('degraded', (e) => degraded.push(e.stage));
    store.failLoad = true;
    store.failCommit = true;
    let memory: MemoryContext | undefined;
    const bot = tm.wrap(async (_i, ctx) => {
      memory = ctx.memory;
      return slowChunks(['Hello ', 'Dana', '!'], 0);
    });
    const out = await collect(await bot({ session: 's', text: 'My name is Dana' }));
    expect(out).toEqual(['Hello ', 'Dana', '!']);
    expect(memory!).toMatchObject({ degraded: true, items: [], prompt: '' });
    expect(await tm.flush({ timeoutMs: 100 })).toEqual({ outboxDepth: 1 });
    expect(errors).toContainEqual(['read', 'TIDEMARK_E_STORE_UNAVAILABLE']);
    expect(errors).toContainEqual(['write', 'TIDEMARK_E_STORE_UNAVAILABLE']);
    expect(degraded).toEqual(['read', 'write']);
    expect(outbox).toEqual(['queued:1']);
    expect(tm.outboxDepth).toBe(1);
    // The store comes back: flush() commits the queued write.
    store.failLoad = false;
    store.failCommit = false;
    expect(await tm.flush()).toEqual({ outboxDepth: 0 });
    expect(outbox).toEqual(['queued:1', 'drained:0']);
    const v = await tm.inspect('s');
    expect(v.turns).toBe(2);
    expect(v.slots.map((s) => s.value)).toEqual(['Dana']);
  });

  it('write() reports committed: false while queued, and later writes of that session queue behind it in order', async () => {
    const store = new ControlledStore();
    const tm = make({ store, outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
    store.failCommit = true;
    const r1 = await tm.write({ session: 's', text: 'Can I book a service for Tuesday?' });
    expect(r1).toMatchObject({ committed: false });
    store.failCommit = false;
    const r2 = await tm.write({ session: 's', text: 'Actually, can we move it to Friday instead?' });
    expect(r2.committed).toBe(false); // behind the first one, never ahead of it
    expect(tm.outboxDepth).toBe(2);
    await tm.flush();
    expect(tm.outboxDepth).toBe(0);
    expect(await values(tm, 's')).toEqual(['book a service for Friday']);
  });

  it('a full outbox refuses the write with TIDEMARK_E_STORE_OUTBOX_FULL and an overflow event', async () => {
    const store = new ControlledStore();
    store.failCommit = true;
    const tm = make({ store, outbox: { max: 1, retryMs: 60_000, maxRetryMs: 60_000 } });
    const changes: string[] = [];
    tm.on('outbox', (e) => changes.push(e.change));
    await tm.write({ session: 'a', text: 'My name is Dana' });
    await expect(tm.write({ session: 'b', text: 'My name is Rowan' })).rejects.toMatchObject({ code: 'TIDEMARK_E_STORE_OUTBOX_FULL' });
    expect(changes).toEqual(['queued', 'overflow']);
    store.failCommit = false;
  });
});
