// Child of lifecycle.test.ts: a write that fails once (queued in the outbox), whose retry then waits
// on an unref'd timer (a store stuck in a backoff), then a top-level `await flush({ timeoutMs })`. Node must reach the line after it
// (exit 0) rather than end with an unsettled top-level await (exit 13).
import { createTidemark } from '../../src/index.js';
import { InProcessStore } from '../../src/store/in-process.js';

class StuckStore extends InProcessStore {
  private calls = 0;
  override commit(): ReturnType<InProcessStore['commit']> {
    if (this.calls++ === 0) return Promise.reject(new Error('connection reset (test)'));
    return new Promise(() => setTimeout(() => undefined, 60_000).unref());
  }
}

const tm = createTidemark({ store: new StuckStore(), outbox: { retryMs: 60_000, maxRetryMs: 60_000 } });
await tm.write({ session: 's', text: 'My name is Ola.' });
const r = await tm.flush({ timeoutMs: 300 });
process.stdout.write(`flushed: outboxDepth ${r.outboxDepth}\n`);
process.exit(0);
