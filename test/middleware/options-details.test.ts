// Every option and every turn field at its edges: just inside and just outside each documented range,
// the wrong type, and the error naming the field. And each option given is the option used.

import { describe, expect, it } from 'vitest';
import { ConfigError, ErrorCodes, InputError } from '../../src/errors.js';
import { TIDEMARK_DEFAULTS, resolveOptions, retentionOf } from '../../src/middleware/options.js';
import { MAX_AT_AHEAD_MS, truncateUtf8, validateTurn } from '../../src/middleware/validate.js';
import type { TidemarkOptions } from '../../src/middleware/options.js';

/** `{ a: { b: v } }` for the path 'a.b'. */
function at(path: string, v: unknown): TidemarkOptions {
  const [head, tail] = path.split('.') as [string, string | undefined];
  return (tail === undefined ? { [head]: v } : { [head]: { [tail]: v } }) as TidemarkOptions;
}

function refusal(options: TidemarkOptions): ConfigError {
  try {
    resolveOptions(options);
  } catch (e) {
    return e as ConfigError;
  }
  throw new Error(`accepted ${JSON.stringify(options)}`);
}

const INTEGERS: Array<[string, number, number]> = [
  ['maxTextBytes', 1, 16 * 1024 * 1024],
  ['readTimeoutMs', 1, 600_000],
  ['commitRetries', 0, 1000],
  ['outbox.max', 0, 10_000_000],
  ['outbox.retryMs', 1, 3_600_000],
  ['outbox.concurrency', 1, 1024],
  ['outbox.maxAgeMs', 1000, 30 * 86_400_000],
  ['embedCacheSize', 0, 10_000_000],
  ['prompt.tokenBudget', 0, 1_000_000],
  ['logbook.maxAgeMs', 0, Number.MAX_SAFE_INTEGER],
  ['logbook.maxEntries', 0, 100_000_000],
  ['retention.sweepMs', 0, 86_400_000],
  ['retention.sweepBudget', 1, 1_000_000],
];

describe('resolveOptions', () => {
  it.each(INTEGERS)('takes %s from %d to %d, integers only, and names it when refused', (name, min, max) => {
    // outbox.maxRetryMs must be at least outbox.retryMs: raise it with retryMs so only retryMs is judged.
    const with_ = (v: number): TidemarkOptions => (name === 'outbox.retryMs' ? { outbox: { retryMs: v, maxRetryMs: 3_600_000 } } : at(name, v));
    for (const ok of [min, max]) {
      const o = resolveOptions(with_(ok));
      const [head, tail] = name.split('.') as [keyof typeof o, string | undefined];
      expect(tail === undefined ? o[head] : (o[head] as unknown as Record<string, unknown>)[tail]).toBe(ok);
    }
    const bad = [min - 1, min + 0.5, String(min), Number.NaN];
    if (max < Number.MAX_SAFE_INTEGER) bad.push(max + 1);
    for (const v of bad) {
      const err = refusal(with_(v as number));
      expect(err).toBeInstanceOf(ConfigError);
      expect(err).toMatchObject({ code: ErrorCodes.CONFIG, details: { option: name, value: v } });
      expect(err.message).toContain(`option ${name} must be an integer in [${min}, ${max}]`);
    }
  });

  it('takes outbox.maxRetryMs from outbox.retryMs up', () => {
    expect(resolveOptions({ outbox: { retryMs: 500, maxRetryMs: 500 } }).outbox.maxRetryMs).toBe(500);
    expect(refusal({ outbox: { retryMs: 500, maxRetryMs: 499 } })).toMatchObject({ details: { option: 'outbox.maxRetryMs' } });
    expect(refusal({ outbox: { maxRetryMs: 3_600_001 } })).toMatchObject({ details: { option: 'outbox.maxRetryMs' } });
  });

  it.each(['valueMix', 'useOverlap'])('takes %s in [0, 1] and refuses anything else, naming it', (name) => {
    for (const ok of [0, 1, 0.25]) expect(resolveOptions(at(name, ok))[name as 'valueMix']).toBe(ok);
    for (const v of [-0.01, 1.01, Number.NaN, '0.5']) {
      const err = refusal(at(name, v));
      expect(err).toMatchObject({ code: ErrorCodes.CONFIG, details: { option: name, value: v } });
      expect(err.message).toContain(`option ${name} must be a number in [0, 1]`);
    }
  });

  it('checks the logbook roles, the vector switch, onAbort, writeReplies and the two booleans, naming each', () => {
    const named = (options: TidemarkOptions, option: string, message: RegExp): void => {
      const err = refusal(options);
      expect(err).toMatchObject({ code: ErrorCodes.CONFIG, details: { option } });
      expect(err.message).toMatch(message);
    };
    named({ logbook: { roles: 'user' as never } }, 'logbook.roles', /logbook\.roles must be an array of 'user', 'assistant', 'system', got/);
    named({ logbook: { roles: ['user', 'robot' as never] } }, 'logbook.roles', /got an array of 2$/);
    expect(resolveOptions({ logbook: { roles: ['system'] } }).logbook.roles).toEqual(['system']);
    expect(resolveOptions({ logbook: { roles: [] } }).logbook.roles).toEqual([]);
    named({ logbook: { vectors: 'yes' as never } }, 'logbook.vectors', /logbook\.vectors must be 'auto', true or false, got "yes"/);
    for (const v of ['auto', true, false] as const) expect(resolveOptions({ logbook: { vectors: v } }).logbook.vectors).toBe(v);
    named({ onAbort: 'some' as never }, 'onAbort', /onAbort must be 'user', 'none' or 'all', got "some"/);
    for (const v of ['user', 'none', 'all'] as const) expect(resolveOptions({ onAbort: v }).onAbort).toBe(v);
    named({ writeReplies: 'always' as never }, 'writeReplies', /writeReplies must be true, false or 'named', got "always"/);
    for (const v of ['named', true, false] as const) expect(resolveOptions({ writeReplies: v }).writeReplies).toBe(v);
    for (const b of ['truncate', 'promote'] as const) {
      named({ [b]: 'yes' } as never, b, new RegExp(`option ${b} must be a boolean, got "yes"`));
      expect(resolveOptions({ [b]: true })[b]).toBe(true);
      expect(resolveOptions({ [b]: false })[b]).toBe(false);
    }
    expect(() => resolveOptions({ tenant: 'bad tenant' })).toThrow(InputError);
  });

  it('uses every option given, keeps the defaults for the rest, and sets the retention policy from the logbook', () => {
    const given: TidemarkOptions = {
      tenant: 'nursery', maxTextBytes: 4096, truncate: true, writeReplies: false, onAbort: 'all', readTimeoutMs: 250, commitRetries: 3,
      embedCacheSize: 7, useOverlap: 0.1, valueMix: 0.9, promote: false, retention: { sweepMs: 5_000, sweepBudget: 9 }, logbook: { maxAgeMs: 86_400_000, maxEntries: 50 },
    };
    const o = resolveOptions(given);
    expect(o).toMatchObject({ ...given, logbook: { ...TIDEMARK_DEFAULTS.logbook, maxAgeMs: 86_400_000, maxEntries: 50 }, outbox: TIDEMARK_DEFAULTS.outbox });
    expect(retentionOf(o)).toEqual({ maxAgeMs: 86_400_000, maxEntries: 50 });
    // An option given as undefined keeps its default.
    expect(resolveOptions({ commitRetries: undefined, retention: { sweepMs: undefined } }).commitRetries).toBe(TIDEMARK_DEFAULTS.commitRetries);
    expect(resolveOptions({ retention: { sweepMs: undefined } }).retention.sweepMs).toBe(TIDEMARK_DEFAULTS.retention.sweepMs);
  });
});

describe('validateTurn', () => {
  const NOW = 1_800_000_000_000;
  const base = { tenant: 'default', maxTextBytes: 64, truncate: false, now: NOW };
  const field = (input: unknown, defaults = base): { code?: string; field?: string; message: string } => {
    try {
      validateTurn(input, defaults);
    } catch (e) {
      const err = e as InputError;
      return { code: err.code, field: (err.details as { field?: string } | undefined)?.field, message: err.message };
    }
    throw new Error('accepted');
  };

  it('takes a turn id of 1 to 128 characters and a speaker cut to 128', () => {
    expect(validateTurn({ session: 's', text: 'Hi', turn: 'x'.repeat(128) }, base).turn).toHaveLength(128);
    expect(validateTurn({ session: 's', text: 'Hi', turn: 't' }, base).turn).toBe('t');
    for (const turn of ['', 'x'.repeat(129), 7]) {
      expect(field({ session: 's', text: 'Hi', turn })).toMatchObject({ code: ErrorCodes.INPUT_FIELD, field: 'turn', message: expect.stringMatching(/^turn must be a string of 1-128 chars, got/) });
    }
    expect(validateTurn({ session: 's', text: 'Hi', speaker: 'S'.repeat(200) }, base).speaker).toBe('S'.repeat(128));
    expect(validateTurn({ session: 's', text: 'Hi', speaker: '' }, base).speaker).toBe('');
    expect(field({ session: 's', text: 'Hi', speaker: 5 })).toMatchObject({ field: 'speaker', message: expect.stringMatching(/^speaker must be a string, got 5/) });
  });

  it('names the id field that is wrong: tenant, session or user', () => {
    expect(field({ tenant: 'a b', session: 's', text: 'Hi' })).toMatchObject({ code: ErrorCodes.INPUT_ID, field: 'tenant', message: expect.stringMatching(/^tenant must be/) });
    expect(field({ session: 'a/b', text: 'Hi' })).toMatchObject({ code: ErrorCodes.INPUT_ID, field: 'session', message: expect.stringMatching(/^session must be/) });
    expect(field({ session: 's', user: '', text: 'Hi' })).toMatchObject({ code: ErrorCodes.INPUT_ID, field: 'user', message: expect.stringMatching(/^user must be/) });
    expect(validateTurn({ session: 's', user: 'u-1', text: 'Hi' }, base).user).toBe('u-1');
    expect(validateTurn({ session: 's', text: 'Hi' }, { ...base, tenant: 'workshop' }).tenant).toBe('workshop');
  });

  it('refuses a turn that is not an object, a role outside the three, and text that is not a string or says nothing', () => {
    for (const v of [null, 'hello', 3]) expect(field(v)).toMatchObject({ code: ErrorCodes.INPUT_FIELD, message: expect.stringMatching(/^a turn must be an object, got/) });
    expect(field({ session: 's', text: 'Hi', role: 'bot' })).toMatchObject({ code: ErrorCodes.INPUT_FIELD, field: 'role', message: expect.stringMatching(/^role must be 'user', 'assistant' or 'system', got "bot"/) });
    // A read's turn is the user's whatever it says.
    expect(validateTurn({ session: 's', text: 'Hi', role: 'bot' }, { ...base, role: 'user' }).role).toBe('user');
    expect(field({ session: 's', text: 42 })).toMatchObject({ code: ErrorCodes.INPUT_TEXT, field: 'text', message: expect.stringMatching(/^text must be a string, got 42/) });
    expect(field({ session: 's', text: ' \u200b\ufeff ' })).toMatchObject({ code: ErrorCodes.INPUT_TEXT, field: 'text', message: 'text must not be empty' });
  });

  it('takes text up to maxTextBytes UTF-8 bytes; past it refuses, or cuts on a character boundary with truncate', () => {
    expect(validateTurn({ session: 's', text: 'a'.repeat(64) }, base).text).toHaveLength(64);
    expect(field({ session: 's', text: 'a'.repeat(65) })).toMatchObject({ code: ErrorCodes.INPUT_TOO_LARGE, field: 'text', message: expect.stringMatching(/^text is 65 bytes, over the limit of 64/) });
    // 'é' is 2 bytes: 32 of them are 64 bytes (kept), 33 are 66 (cut to 32).
    expect(validateTurn({ session: 's', text: 'é'.repeat(32) }, base).text).toBe('é'.repeat(32));
    expect(validateTurn({ session: 's', text: 'é'.repeat(33) }, { ...base, truncate: true }).text).toBe('é'.repeat(32));
    // A 3-byte character across the limit goes whole: 'a' + '€' × 22 is 67 bytes; 64 keeps 'a' and 21.
    expect(truncateUtf8('a' + '€'.repeat(22), 64)).toBe('a' + '€'.repeat(21));
    expect(truncateUtf8('€', 2)).toBe('');
    expect(truncateUtf8('abc', 3)).toBe('abc');
    expect(truncateUtf8('abcd', 3)).toBe('abc');
  });

  it('takes a time from 1970 to one day ahead, as ISO text, epoch ms or a Date, and names the field otherwise', () => {
    const t = (at: unknown): number => validateTurn({ session: 's', text: 'Hi', at }, base).atMs;
    expect(t(undefined)).toBe(NOW);
    expect(t(0)).toBe(0);
    expect(t(NOW + MAX_AT_AHEAD_MS)).toBe(NOW + MAX_AT_AHEAD_MS);
    expect(t('2026-03-01T10:00:00Z')).toBe(Date.UTC(2026, 2, 1, 10));
    expect(t(new Date(NOW - 5))).toBe(NOW - 5);
    expect(MAX_AT_AHEAD_MS).toBe(86_400_000);
    for (const bad of [-1, NOW + MAX_AT_AHEAD_MS + 1]) {
      expect(field({ session: 's', text: 'Hi', at: bad })).toMatchObject({ field: 'at', message: expect.stringMatching(/^at must be a time from 1970 up to one day ahead of now/) });
    }
    // An object that prints as a date is still not one, and a symbol is refused like any other value.
    for (const bad of ['next Tuesday', true, {}, Number.NaN, { toString: () => '2026-03-01T10:00:00Z' }, Symbol('at')]) {
      expect(field({ session: 's', text: 'Hi', at: bad })).toMatchObject({ code: ErrorCodes.INPUT_FIELD, field: 'at', message: expect.stringMatching(/^at must be an ISO-8601 string, epoch ms or Date, got/) });
    }
  });
});
