// Error codes are stable public API: unique, TIDEMARK_E_*, listed exactly in the README's error
// table, and carried (with the cause) by every subclass.

import { existsSync, readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
  ConfigError,
  EmbedderError,
  ErrorCodes,
  InputError,
  StoreError,
  TidemarkError,
  describeValue,
  isTidemarkError,
} from '../src/errors.js';

const codes = Object.values(ErrorCodes);

describe('ErrorCodes', () => {
  it('are unique and all TIDEMARK_E_* in upper snake case', () => {
    expect(new Set(codes).size).toBe(codes.length);
    for (const c of codes) expect(c).toMatch(/^TIDEMARK_E_[A-Z][A-Z0-9_]*$/);
  });

  it('each key names its code (INPUT_TEXT -> TIDEMARK_E_INPUT_TEXT)', () => {
    for (const [k, c] of Object.entries(ErrorCodes)) expect(c).toBe(`TIDEMARK_E_${k}`);
  });

  it("match the README's error table exactly", () => {
    const readme = new URL('../README.md', import.meta.url);
    expect(existsSync(readme), 'README.md is missing: it must hold an error table with one row per code').toBe(true);
    // Table rows whose first cell is a code, with or without backticks: | `TIDEMARK_E_X` | ... |
    const rows = [...readFileSync(readme, 'utf8').matchAll(/^\|\s*`?(TIDEMARK_E_[A-Z0-9_]+)`?\s*\|/gm)].map((m) => m[1]!);
    expect(rows.length, 'no error table rows like "| TIDEMARK_E_INPUT_TEXT | ... |" in README.md').toBeGreaterThan(0);
    expect(new Set(rows).size, 'a code is listed twice in the README error table').toBe(rows.length);
    expect([...rows].sort()).toEqual([...codes].sort());
  });
});

describe('error classes', () => {
  const cause = new Error('socket closed');

  it('subclasses carry code, cause, details and their own name', () => {
    const cases: Array<[TidemarkError, string, string]> = [
      [new InputError(ErrorCodes.INPUT_TEXT, 'bad text', { cause, details: { field: 'text' } }), 'InputError', 'TIDEMARK_E_INPUT_TEXT'],
      [new ConfigError('bad option', { cause, details: { field: 'text' } }), 'ConfigError', 'TIDEMARK_E_CONFIG'],
      [new StoreError(ErrorCodes.STORE_UNAVAILABLE, 'down', { cause, details: { field: 'text' } }), 'StoreError', 'TIDEMARK_E_STORE_UNAVAILABLE'],
      [new EmbedderError(ErrorCodes.EMBED_DIM, 'dims', { cause, details: { field: 'text' } }), 'EmbedderError', 'TIDEMARK_E_EMBED_DIM'],
    ];
    for (const [err, name, code] of cases) {
      expect(err).toBeInstanceOf(TidemarkError);
      expect(err).toBeInstanceOf(Error);
      expect(err.name).toBe(name);
      expect(err.code).toBe(code);
      expect(err.cause).toBe(cause);
      expect(err.details).toEqual({ field: 'text' });
      expect(err.toJSON()).toEqual({ code, message: err.message, details: { field: 'text' } });
      expect(isTidemarkError(err)).toBe(true);
    }
  });

  it('without a cause has no cause property and empty details', () => {
    const e = new ConfigError('x');
    expect('cause' in e).toBe(false);
    expect(e.details).toEqual({});
  });

  it('isTidemarkError also recognises a coded error from a duplicated module copy, and nothing else', () => {
    expect(isTidemarkError({ code: 'TIDEMARK_E_CONFIG', message: 'x' })).toBe(true);
    expect(isTidemarkError(new Error('x'))).toBe(false);
    expect(isTidemarkError({ code: 'ECONNREFUSED' })).toBe(false);
    expect(isTidemarkError(null)).toBe(false);
  });

  it('describeValue names a value without echoing long text', () => {
    expect(describeValue(undefined)).toBe('undefined');
    expect(describeValue(null)).toBe('null');
    expect(describeValue('short')).toBe('"short"');
    expect(describeValue('x'.repeat(41))).toBe('a string of 41 chars');
    expect(describeValue(3)).toBe('3');
    expect(describeValue([1, 2])).toBe('an array of 2');
    expect(describeValue({ secret: 'peanut oil' })).not.toContain('peanut');
  });
});
