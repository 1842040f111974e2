// The logbook's retention policy applied to one scope's index: entries past the maximum age go, then
// the oldest past the maximum count. Shared by the stores that keep a LogbookIndex in process.

import type { LogbookIndex } from '../logbook/index.js';
import type { RetentionDropped, RetentionPolicy } from './store.js';

/** Deletes what the policy no longer allows, as of `nowMs`; returns how many went for each reason. */
export function applyRetention(index: LogbookIndex, policy: RetentionPolicy, nowMs: number): RetentionDropped {
  const dropped: RetentionDropped = { age: 0, count: 0 };
  if (policy.maxAgeMs > 0) dropped.age = dropBefore(index, nowMs - policy.maxAgeMs);
  if (policy.maxEntries > 0) {
    while (index.size > policy.maxEntries) {
      const e = index.oldest();
      if (!e) break;
      index.remove(e.id);
      dropped.count++;
    }
  }
  return dropped;
}

/**
 * Deletes the entries older than `cutoffMs` (by `atMs`) from the front of the index; returns how many.
 * Entries arrive in time order, so the expired ones are at the front; it stops at the first one kept.
 */
export function dropBefore(index: LogbookIndex, cutoffMs: number): number {
  let n = 0;
  for (let e = index.oldest(); e && e.atMs < cutoffMs; e = index.oldest()) {
    index.remove(e.id);
    n++;
  }
  return n;
}
