// Reply passthrough: forward each chunk the moment it arrives and keep a text copy for the memory
// write, without buffering the reply. We collect inside the forwarding loop rather than with
// ReadableStream.tee(), whose slower branch queues every chunk without limit while the other runs ahead
// (Node 20's web streams).

/** How a reply ended. */
export type ReplyEnd = 'done' | 'aborted' | 'error';

/** What a wrapped handler may return. */
export type Reply = string | AsyncIterable<string> | ReadableStream<string | Uint8Array>;

export function isAsyncIterable(x: unknown): x is AsyncIterable<unknown> {
  return typeof x === 'object' && x !== null && typeof (x as AsyncIterable<unknown>)[Symbol.asyncIterator] === 'function';
}

export function isReadableStream(x: unknown): x is ReadableStream<unknown> {
  return typeof x === 'object' && x !== null && typeof (x as ReadableStream).getReader === 'function';
}

const ABORTED: unique symbol = Symbol('aborted');

const chunkText = (decoder: TextDecoder, chunk: unknown): string =>
  typeof chunk === 'string' ? chunk : chunk instanceof Uint8Array ? decoder.decode(chunk, { stream: true }) : String(chunk);

/**
 * Forwards an async iterable. `onEnd` runs exactly once, after the last chunk, on error, or when
 * the consumer stops early or `signal` aborts (both count as `aborted`).
 */
export async function* passIterable<T>(src: AsyncIterable<T>, signal: AbortSignal | undefined, onEnd: (text: string, end: ReplyEnd) => void): AsyncGenerator<T, void, undefined> {
  const decoder = new TextDecoder();
  const it = src[Symbol.asyncIterator]();
  let text = '';
  let end: ReplyEnd = 'aborted';
  // Race each pull against the signal, so an abort while the source is stalled (a model still
  // thinking) ends the reply at once instead of at the source's next chunk.
  let onAbort: (() => void) | undefined;
  const aborted = signal
    ? new Promise<typeof ABORTED>((resolve) => {
        onAbort = () => resolve(ABORTED);
        if (signal.aborted) onAbort();
        else signal.addEventListener('abort', onAbort, { once: true });
      })
    : undefined;
  let pending = false;
  try {
    for (;;) {
      if (signal?.aborted) break;
      pending = true;
      const r = aborted ? await Promise.race([it.next(), aborted]) : await it.next();
      if (r === ABORTED) break;
      pending = false;
      if (r.done) {
        end = 'done';
        break;
      }
      text += chunkText(decoder, r.value);
      yield r.value;
    }
  } catch (err) {
    end = 'error';
    throw err;
  } finally {
    if (onAbort) signal?.removeEventListener('abort', onAbort);
    if (end !== 'done') {
      // An async generator queues return() behind a pull still in flight: do not wait for it then.
      const closing = Promise.resolve()
        .then(() => it.return?.())
        .catch(() => {
          // The source's own cleanup failed; the reply has already ended either way.
        });
      if (!pending) await closing;
    }
    onEnd(text, end);
  }
}

/** Forwards a ReadableStream chunk by chunk (pull-driven, so backpressure reaches the source). */
export function passReadable<T extends string | Uint8Array>(src: ReadableStream<T>, signal: AbortSignal | undefined, onEnd: (text: string, end: ReplyEnd) => void): ReadableStream<T> {
  const decoder = new TextDecoder();
  const reader = src.getReader();
  let text = '';
  let ended = false;
  const finish = (end: ReplyEnd): void => {
    if (ended) return;
    ended = true;
    onEnd(text, end);
  };
  let onAbort: (() => void) | undefined;
  return new ReadableStream<T>({
    start(controller) {
      if (!signal) return;
      onAbort = () => {
        finish('aborted');
        reader.cancel(signal.reason).catch(() => {});
        try {
          controller.close();
        } catch {
          // Already closed or errored.
        }
      };
      if (signal.aborted) onAbort();
      else signal.addEventListener('abort', onAbort, { once: true });
    },
    async pull(controller) {
      try {
        const r = await reader.read();
        if (ended) return;
        if (r.done) {
          finish('done');
          controller.close();
        } else {
          text += chunkText(decoder, r.value);
          controller.enqueue(r.value);
        }
      } catch (err) {
        finish('error');
        controller.error(err);
      } finally {
        if (ended && onAbort) signal?.removeEventListener('abort', onAbort);
      }
    },
    async cancel(reason) {
      finish('aborted');
      await reader.cancel(reason);
    },
  });
}
