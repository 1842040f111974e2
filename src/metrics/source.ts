// The one thing metrics, retention and the dashboard collector need from a tidemark instance: a typed
// `on`/`off` over the event map. A tidemark instance satisfies it, and so does any eventemitter3 emitter
// typed with `TidemarkEvents` (which is how the tests feed synthetic events).

import type { TidemarkEvents } from '../middleware/events.js';

/**
 * Listener parameters are loose on purpose: eventemitter3's typed `on` and a hand-written
 * `on<E>(event: E, fn: TidemarkEvents[E])` do not unify as generic signatures, and both must fit.
 * `subscribe` below is where the typing is enforced.
 */
export interface TidemarkEventSource {
  // eslint-disable-next-line @typescript-eslint/no-explicit-any
  on(event: keyof TidemarkEvents, fn: (...args: any[]) => void): unknown;
  // eslint-disable-next-line @typescript-eslint/no-explicit-any
  off(event: keyof TidemarkEvents, fn: (...args: any[]) => void): unknown;
}

/** Subscribes every listener of `listeners`; returns the function that removes them again. */
export function subscribe(source: TidemarkEventSource, listeners: Partial<TidemarkEvents>): () => void {
  const names = Object.keys(listeners) as Array<keyof TidemarkEvents>;
  for (const name of names) source.on(name, listeners[name]!);
  return () => {
    for (const name of names) source.off(name, listeners[name]!);
  };
}
