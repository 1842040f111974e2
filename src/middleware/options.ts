// The options of createTidemark(): one typed object, every field documented with its default, all
// defaults in one constant, resolved and validated once at construction (the caller's object is
// never changed).

import type { DeprecatedTidemarkOptions } from '../deprecated-fields.js';
import type { Embedder } from '../embed/embedder.js';
import { ConfigError, describeValue } from '../errors.js';
import type { Extractor } from '../memory/extract.js';
import type { MemoryParamsInput } from '../memory/params.js';
import { PROMPT_DEFAULTS, type PromptOptions } from '../memory/prompt.js';
import type { RetentionPolicy, Store } from '../store/store.js';
import type { Role } from '../types.js';
import { checkId } from './validate.js';

export interface OutboxOptions {
  /** Pending writes held at most; past it new writes are refused with an `outbox` overflow event. @default 10000 */
  max?: number;
  /** First retry delay in ms; doubles per failed attempt up to `maxRetryMs`. @default 250 */
  retryMs?: number;
  /** @default 10000 */
  maxRetryMs?: number;
  /** Sessions drained at once after an outage (each session's writes stay in order). @default 16 */
  concurrency?: number;
  /**
   * A queued write older than this (ms) is given up with a `STORE_OUTBOX_EXPIRED` error and an `outbox`
   * `expired` event. Stores recognise a resent write and refuse one fenced before an erase only for a
   * while (the Redis store's `fenceTtlSeconds`, 7 days): keep this below it. @default 86400000 (1 day)
   */
  maxAgeMs?: number;
}

/** The long-term tier: which turns it keeps and for how long. */
export interface LogbookOptions {
  /**
   * Roles whose turns are kept, every one of them, whatever the write gate says (the gate decides
   * only what enters working memory). @default ['user', 'assistant']
   */
  roles?: Role[];
  /** Entries older than this (ms, by the turn's time) are deleted. 0 keeps them until erased or the store's idle expiry. @default 0 */
  maxAgeMs?: number;
  /** Entries kept per scope (a user, or a session without one); past it the oldest go. 0 = no cap. @default 100000 */
  maxEntries?: number;
  /**
   * Keep each turn's embedding for a dense list in reads: `auto` does when the embedder is semantic
   * (a trained model); the built-in hashing embedder only restates the words BM25 already scores, so
   * it does not. @default 'auto'
   */
  vectors?: 'auto' | boolean;
}

/** Deleting what retention no longer allows, on a timer (see README, Personal data). */
export interface RetentionOptions {
  /**
   * How often (ms) the sweep deletes slots past `write.maxAgeMs` and logbook entries past
   * `logbook.maxAgeMs` from the store, whether or not their session writes again (and, on a single
   * Redis, counts again sessions that expired by TTL). 0 turns the timer off: expiry then happens at
   * a session's next commit and on `sweep()`. The timer does not keep the process alive. @default 60000
   */
  sweepMs?: number;
  /** Sessions one sweep pass visits at most; a tick runs up to 16 passes. @default 1000 */
  sweepBudget?: number;
}

export interface TidemarkOptions extends MemoryParamsInput, DeprecatedTidemarkOptions {
  /** Where sessions live. @default new InProcessStore() */
  store?: Store;
  /** @default new HashingEmbedder({ dim: 384 }) */
  embedder?: Embedder;
  /** @default new RuleExtractor() */
  extractor?: Extractor;
  /** Tenant of turns that name none. @default 'default' */
  tenant?: string;
  /** Prompt block settings. */
  prompt?: Partial<PromptOptions>;
  /** Largest turn text in UTF-8 bytes. @default 32768 */
  maxTextBytes?: number;
  /** Cut oversized text instead of rejecting it. @default false */
  truncate?: boolean;
  /**
   * Extract working-memory candidates from assistant turns too: `'named'` when the turn names its
   * speaker (a conversation between people, where either side states facts), `true` always (a bot's
   * commitments such as "booked you for Friday at 9"; they never overwrite what the user said), `false`
   * never. Every turn of the kept roles is in the logbook either way. @default 'named'
   */
  writeReplies?: boolean | 'named';
  /** The long-term tier. */
  logbook?: LogbookOptions;
  /** The retention sweep. */
  retention?: RetentionOptions;
  /** What an aborted reply writes: the user turn, nothing, or the user turn and the partial reply. @default 'user' */
  onAbort?: 'user' | 'none' | 'all';
  /** A read that takes longer (store, logbook search, or waiting for the session's previous write) runs degraded. @default 1000 */
  readTimeoutMs?: number;
  /** Reload-and-redo attempts after a version conflict (with randomised backoff). @default 16 */
  commitRetries?: number;
  outbox?: OutboxOptions;
  /** Embeddings cached (LRU entries). @default 10000 */
  embedCacheSize?: number;
  /**
   * Move values that left working memory back into a slot when a turn uses them, and out of the
   * logbook. @default true
   */
  promote?: boolean;
  /**
   * A recalled slot counts as used by a turn when the reply repeats at least this share of its
   * value's words (it is then reinforced). Without a reply text, only the top item of a hit counts.
   * @default 0.5
   */
  useOverlap?: number;
  /**
   * How much of the value's embedding goes into a slot's stored vector: normalize(key + mix * value).
   * 0 stores the topic alone; 0.5 lets a read match a value's meaning ("degreaser") while a
   * same-topic write still addresses the slot (cosine 0.89 > the 0.8 overwrite threshold). @default 0.5
   */
  valueMix?: number;
  /**
   * Key of the keyed hash (HMAC-SHA-256) that stands for session ids in events and metrics; set the
   * same key in every process to correlate them. @default random per process
   */
  hashKey?: string;
}

export interface ResolvedOptions {
  tenant: string;
  maxTextBytes: number;
  truncate: boolean;
  writeReplies: boolean | 'named';
  logbook: Required<LogbookOptions>;
  retention: Required<RetentionOptions>;
  onAbort: 'user' | 'none' | 'all';
  readTimeoutMs: number;
  commitRetries: number;
  outbox: Required<OutboxOptions>;
  embedCacheSize: number;
  useOverlap: number;
  valueMix: number;
  promote: boolean;
  prompt: PromptOptions;
}

export const TIDEMARK_DEFAULTS: Omit<ResolvedOptions, 'prompt'> = {
  tenant: 'default',
  maxTextBytes: 32 * 1024,
  truncate: false,
  writeReplies: 'named',
  logbook: { roles: ['user', 'assistant'], maxAgeMs: 0, maxEntries: 100_000, vectors: 'auto' },
  retention: { sweepMs: 60_000, sweepBudget: 1000 },
  onAbort: 'user',
  readTimeoutMs: 1000,
  commitRetries: 16,
  outbox: { max: 10_000, retryMs: 250, maxRetryMs: 10_000, concurrency: 16, maxAgeMs: 86_400_000 },
  embedCacheSize: 10_000,
  useOverlap: 0.5,
  valueMix: 0.5,
  promote: true,
};

function intOpt(name: string, v: unknown, min: number, max: number): void {
  if (typeof v !== 'number' || !Number.isInteger(v) || v < min || v > max) {
    throw new ConfigError(`option ${name} must be an integer in [${min}, ${max}], got ${describeValue(v)}`, { details: { option: name, value: v } });
  }
}

function fraction(name: string, v: unknown): void {
  if (typeof v !== 'number' || !(v >= 0 && v <= 1)) {
    throw new ConfigError(`option ${name} must be a number in [0, 1], got ${describeValue(v)}`, { details: { option: name, value: v } });
  }
}

function pick<T extends object, K extends keyof T>(o: T, keys: K[]): Partial<Pick<T, K>> {
  const out: Partial<Pick<T, K>> = {};
  for (const k of keys) if (o[k] !== undefined) out[k] = o[k];
  return out;
}

const ROLES: readonly Role[] = ['user', 'assistant', 'system'];

/** Merges the options over the defaults and checks every field (memory math params excepted: see params.ts). */
export function resolveOptions(options: TidemarkOptions): ResolvedOptions {
  const o: ResolvedOptions = {
    ...TIDEMARK_DEFAULTS,
    ...pick(options, ['tenant', 'maxTextBytes', 'truncate', 'writeReplies', 'onAbort', 'readTimeoutMs', 'commitRetries', 'embedCacheSize', 'useOverlap', 'valueMix', 'promote']),
    logbook: { ...TIDEMARK_DEFAULTS.logbook, ...options.logbook },
    retention: { ...TIDEMARK_DEFAULTS.retention, ...pick(options.retention ?? {}, ['sweepMs', 'sweepBudget']) },
    outbox: { ...TIDEMARK_DEFAULTS.outbox, ...options.outbox },
    prompt: { ...PROMPT_DEFAULTS, ...options.prompt },
  };
  checkId('tenant', o.tenant);
  intOpt('maxTextBytes', o.maxTextBytes, 1, 16 * 1024 * 1024);
  intOpt('readTimeoutMs', o.readTimeoutMs, 1, 600_000);
  intOpt('commitRetries', o.commitRetries, 0, 1000);
  intOpt('outbox.max', o.outbox.max, 0, 10_000_000);
  intOpt('outbox.retryMs', o.outbox.retryMs, 1, 3_600_000);
  intOpt('outbox.maxRetryMs', o.outbox.maxRetryMs, o.outbox.retryMs, 3_600_000);
  intOpt('outbox.concurrency', o.outbox.concurrency, 1, 1024);
  intOpt('outbox.maxAgeMs', o.outbox.maxAgeMs, 1000, 30 * 86_400_000);
  intOpt('embedCacheSize', o.embedCacheSize, 0, 10_000_000);
  intOpt('prompt.tokenBudget', o.prompt.tokenBudget, 0, 1_000_000);
  intOpt('logbook.maxAgeMs', o.logbook.maxAgeMs, 0, Number.MAX_SAFE_INTEGER);
  intOpt('logbook.maxEntries', o.logbook.maxEntries, 0, 100_000_000);
  intOpt('retention.sweepMs', o.retention.sweepMs, 0, 86_400_000);
  intOpt('retention.sweepBudget', o.retention.sweepBudget, 1, 1_000_000);
  fraction('valueMix', o.valueMix);
  fraction('useOverlap', o.useOverlap);
  if (!Array.isArray(o.logbook.roles) || !o.logbook.roles.every((r) => ROLES.includes(r))) {
    throw new ConfigError(`option logbook.roles must be an array of 'user', 'assistant', 'system', got ${describeValue(o.logbook.roles)}`, { details: { option: 'logbook.roles' } });
  }
  if (o.logbook.vectors !== 'auto' && typeof o.logbook.vectors !== 'boolean') {
    throw new ConfigError(`option logbook.vectors must be 'auto', true or false, got ${describeValue(o.logbook.vectors)}`, { details: { option: 'logbook.vectors' } });
  }
  if (!['user', 'none', 'all'].includes(o.onAbort)) {
    throw new ConfigError(`option onAbort must be 'user', 'none' or 'all', got ${describeValue(o.onAbort)}`, { details: { option: 'onAbort' } });
  }
  if (o.writeReplies !== 'named' && typeof o.writeReplies !== 'boolean') {
    throw new ConfigError(`option writeReplies must be true, false or 'named', got ${describeValue(o.writeReplies)}`, { details: { option: 'writeReplies' } });
  }
  for (const b of ['truncate', 'promote'] as const) {
    if (typeof o[b] !== 'boolean') throw new ConfigError(`option ${b} must be a boolean, got ${describeValue(o[b])}`, { details: { option: b } });
  }
  return o;
}

/** The retention policy the options set. */
export const retentionOf = (o: ResolvedOptions): RetentionPolicy => ({ maxAgeMs: o.logbook.maxAgeMs, maxEntries: o.logbook.maxEntries });
