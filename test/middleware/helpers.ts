// Test doubles for the middleware suites: a Store wrapper that delays or fails on demand (around a
// real InProcessStore, so the data path is the real one), and reply helpers.

import { InProcessStore } from '../../src/store/in-process.js';
import type { Store } from '../../src/store/store.js';

export const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));

/** An InProcessStore behind switches: delays for load/commit/search, failures for load/commit, and timings. */
export class ControlledStore implements Store {
  readonly name = 'controlled';
  readonly inner: InProcessStore;
  searchDelayMs = 0;
  loadDelayMs = 0;
  commitDelayMs = 0;
  /** While set, load / commit of a session wait for it (opened by the test: ordering without timers). */
  loadGate: Promise<void> | undefined;
  commitGate: ((session: string) => Promise<void> | undefined) | undefined;
  failLoad = false;
  failCommit = false;
  loads = 0;
  commits = 0;
  /** performance.now() when each successful commit finished. */
  readonly commitDone: number[] = [];

  constructor(inner = new InProcessStore()) {
    this.inner = inner;
  }

  async load(...a: Parameters<Store['load']>): ReturnType<Store['load']> {
    this.loads++;
    if (this.loadDelayMs > 0) await sleep(this.loadDelayMs);
    if (this.loadGate) await this.loadGate;
    if (this.failLoad) throw new Error('connection refused (test)');
    return this.inner.load(...a);
  }

  async commit(...a: Parameters<Store['commit']>): ReturnType<Store['commit']> {
    this.commits++;
    if (this.commitDelayMs > 0) await sleep(this.commitDelayMs);
    const held = this.commitGate?.(a[0].session);
    if (held) await held;
    if (this.failCommit) throw new Error('connection reset (test)');
    const r = await this.inner.commit(...a);
    this.commitDone.push(performance.now());
    return r;
  }

  async searchLogbook(...a: Parameters<Store['searchLogbook']>): ReturnType<Store['searchLogbook']> {
    if (this.searchDelayMs > 0) await sleep(this.searchDelayMs);
    return this.inner.searchLogbook(...a);
  }
  listLogbook(...a: Parameters<Store['listLogbook']>): ReturnType<Store['listLogbook']> {
    return this.inner.listLogbook(...a);
  }
  deleteLogbook(...a: Parameters<Store['deleteLogbook']>): ReturnType<Store['deleteLogbook']> {
    return this.inner.deleteLogbook(...a);
  }
  readEvents(...a: Parameters<Store['readEvents']>): ReturnType<Store['readEvents']> {
    return this.inner.readEvents(...a);
  }
  erase(...a: Parameters<Store['erase']>): ReturnType<Store['erase']> {
    return this.inner.erase(...a);
  }
  listSessions(...a: Parameters<Store['listSessions']>): ReturnType<Store['listSessions']> {
    return this.inner.listSessions(...a);
  }
  close(): Promise<void> {
    return this.inner.close();
  }
}

/** Answers the first `conflicts` commits as if another writer had won (a version conflict), counting each attempt. */
export class ConflictingStore extends ControlledStore {
  conflicts = 0;
  override async commit(...a: Parameters<Store['commit']>): ReturnType<Store['commit']> {
    if (this.conflicts > 0) {
      this.conflicts--;
      this.commits++;
      return { ok: false, conflict: true, version: 0 };
    }
    return super.commit(...a);
  }
}

/** A promise the test opens by hand. */
export function gate(): { promise: Promise<void>; open: () => void } {
  let open!: () => void;
  const promise = new Promise<void>((r) => (open = r));
  return { promise, open };
}

/** An async iterable that yields `chunks`, waiting `gapMs` before each one. */
export async function* slowChunks<T>(chunks: readonly T[], gapMs: number): AsyncGenerator<T> {
  for (const c of chunks) {
    if (gapMs > 0) await sleep(gapMs);
    yield c;
  }
}

/** A ReadableStream of `chunks`, one per pull, waiting `gapMs` before each. */
export function streamOf<T>(chunks: readonly T[], gapMs = 0): ReadableStream<T> {
  let i = 0;
  return new ReadableStream<T>({
    async pull(controller) {
      if (gapMs > 0) await sleep(gapMs);
      if (i < chunks.length) controller.enqueue(chunks[i++]!);
      else controller.close();
    },
  });
}

export async function collect<T>(src: AsyncIterable<T> | ReadableStream<T>): Promise<T[]> {
  const out: T[] = [];
  if (src instanceof ReadableStream) {
    const reader = src.getReader();
    for (;;) {
      const r = await reader.read();
      if (r.done) break;
      out.push(r.value);
    }
    return out;
  }
  for await (const c of src) out.push(c);
  return out;
}
