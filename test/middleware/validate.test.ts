// Boundary validation: ids, text size and UTF-8 truncation, turn fields.

import { describe, expect, it } from 'vitest';
import { ID_PATTERN, checkId, checkText, truncateUtf8, validateTurn } from '../../src/middleware/validate.js';

const defaults = { tenant: 'default', maxTextBytes: 16, truncate: false, now: 1234 };

describe('checkId', () => {
  it('accepts 1-128 chars of letters, digits and . _ : @ -', () => {
    for (const id of ['s1', 'a.b_c:d@e-f', 'x'.repeat(128)]) expect(checkId('session', id)).toBe(id);
  });

  it('rejects anything else with TIDEMARK_E_INPUT_ID naming the field', () => {
    for (const id of ['', 'x'.repeat(129), 'has space', 'a/b', '{tag}', 'é', 42, null, undefined]) {
      expect(() => checkId('session', id)).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_INPUT_ID', details: { field: 'session', pattern: ID_PATTERN.source } }));
    }
    expect(() => checkId('user', 'a b')).toThrow(/^user must be/);
  });
});

describe('truncateUtf8', () => {
  it('cuts at most maxBytes bytes without splitting a character', () => {
    expect(truncateUtf8('abcdef', 4)).toBe('abcd');
    expect(truncateUtf8('abc', 10)).toBe('abc');
    // "é" is 2 bytes, "東" 3, "🚲" 4 (a surrogate pair in UTF-16).
    expect(truncateUtf8('aé', 2)).toBe('a');
    expect(truncateUtf8('東京', 5)).toBe('東');
    expect(truncateUtf8('🚲🚲', 7)).toBe('🚲');
    expect(truncateUtf8('🚲', 3)).toBe('');
    for (let n = 0; n <= 12; n++) {
      const out = truncateUtf8('a東🚲é京', n);
      expect(Buffer.byteLength(out)).toBeLessThanOrEqual(n);
      expect(out).not.toContain('\uFFFD');
      expect('a東🚲é京'.startsWith(out)).toBe(true);
    }
  });
});

describe('checkText', () => {
  it('rejects non-strings and blank text with TIDEMARK_E_INPUT_TEXT', () => {
    for (const t of [undefined, null, 3, {}, ['a'], '', '   \n\t']) {
      expect(() => checkText(t, 100, false)).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_INPUT_TEXT' }));
    }
  });

  it('rejects oversize text with TIDEMARK_E_INPUT_TOO_LARGE, or truncates it when asked', () => {
    expect(() => checkText('x'.repeat(17), 16, false)).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_INPUT_TOO_LARGE', details: { field: 'text', bytes: 17, maxBytes: 16 } }));
    expect(() => checkText('東'.repeat(6), 16, false)).toThrow(/18 bytes, over the limit of 16/); // bytes, not chars
    expect(checkText('東'.repeat(6), 16, true)).toBe('東'.repeat(5));
    expect(checkText('x'.repeat(16), 16, false)).toBe('x'.repeat(16));
  });
});

describe('validateTurn', () => {
  it('fills defaults: tenant, role user, at = now', () => {
    expect(validateTurn({ session: 's1', text: 'hi' }, defaults)).toEqual({ tenant: 'default', session: 's1', text: 'hi', role: 'user', atMs: 1234 });
  });

  it('takes the role it is given over the input\'s (a read\'s turn is the user\'s), and only then', () => {
    expect(validateTurn({ session: 's', text: 'x', role: 'assistant' }, { ...defaults, role: 'user' }).role).toBe('user');
    expect(validateTurn({ session: 's', text: 'x', role: 'bot' as never }, { ...defaults, role: 'user' }).role).toBe('user');
    expect(validateTurn({ session: 's', text: 'x', role: 'assistant' }, defaults).role).toBe('assistant');
  });

  it('parses at as ISO-8601, epoch ms or Date', () => {
    expect(validateTurn({ session: 's', text: 'x', at: '2024-05-01T00:00:00Z' }, { ...defaults, now: Date.UTC(2026, 0, 1) }).atMs).toBe(Date.UTC(2024, 4, 1));
    expect(validateTurn({ session: 's', text: 'x', at: 5 }, defaults).atMs).toBe(5);
    expect(validateTurn({ session: 's', text: 'x', at: new Date(7) }, defaults).atMs).toBe(7);
  });

  it('rejects a bad role, at, turn id or a non-object with TIDEMARK_E_INPUT_FIELD', () => {
    const field = expect.objectContaining({ code: 'TIDEMARK_E_INPUT_FIELD' });
    expect(() => validateTurn({ session: 's', text: 'x', role: 'bot' as never }, defaults)).toThrow(field);
    expect(() => validateTurn({ session: 's', text: 'x', at: 'yesterday' }, defaults)).toThrow(field);
    expect(() => validateTurn({ session: 's', text: 'x', turn: '' }, defaults)).toThrow(field);
    expect(() => validateTurn('text', defaults)).toThrow(field);
    expect(() => validateTurn(null, defaults)).toThrow(field);
  });

  it('checks tenant, session and user ids', () => {
    const id = expect.objectContaining({ code: 'TIDEMARK_E_INPUT_ID' });
    expect(() => validateTurn({ session: 'bad id', text: 'x' }, defaults)).toThrow(id);
    expect(() => validateTurn({ session: 's', text: 'x', tenant: '' }, defaults)).toThrow(id);
    expect(() => validateTurn({ session: 's', text: 'x', user: 'a/b' }, defaults)).toThrow(id);
  });
});

describe('guards found by probing', () => {
  const now = Date.parse('2026-06-01T12:00:00Z');
  const d = { ...defaults, maxTextBytes: 1024, now };

  it('refuses an `at` more than a day ahead (a seconds/ms mix-up or a broken clock) and before 1970', () => {
    expect(validateTurn({ session: 's', text: 'hi', at: now + 3600_000 }, d).atMs).toBe(now + 3600_000);
    for (const at of [now + 2 * 86_400_000, 8.64e15, -1]) {
      expect(() => validateTurn({ session: 's', text: 'hi', at }, d)).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_INPUT_FIELD', details: { field: 'at' } }));
    }
    // Old transcripts replayed with their own times stay fine.
    expect(validateTurn({ session: 's', text: 'hi', at: '2019-03-01T09:00:00Z' }, d).atMs).toBe(Date.parse('2019-03-01T09:00:00Z'));
  });

  it('a speaker that is not a string is a coded error, not a raw TypeError', () => {
    for (const speaker of [Object.create(null), 42, { name: 'x' }]) {
      expect(() => validateTurn({ session: 's', text: 'hi', speaker }, d)).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_INPUT_FIELD', details: { field: 'speaker' } }));
    }
  });

  it('text of only zero-width and format characters is empty', () => {
    for (const text of ['\u200b', '\u200b\u200c\u200d', ' \u2060 \ufeff ', '\u00ad']) {
      expect(() => checkText(text, 1024, false)).toThrow(expect.objectContaining({ code: 'TIDEMARK_E_INPUT_TEXT' }));
    }
    expect(checkText('a\u200bb', 1024, false)).toBe('a\u200bb');
  });
});
