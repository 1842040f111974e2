// Validation at the boundary: every turn, id and text is checked before anything is embedded or
// written, and bad input fails early with a coded error naming the field and what was expected.

import { ErrorCodes, InputError, describeValue } from '../errors.js';
import type { Role, TurnInput } from '../types.js';

/** Ids (session, tenant, user): 1–128 characters of letters, digits and `._:@-`. No braces, so
 * they are safe inside Redis hash tags; no spaces or slashes, so they are safe in URLs and logs. */
export const ID_PATTERN = /^[A-Za-z0-9._:@-]{1,128}$/;

/** A turn after validation. */
export interface Turn {
  tenant: string;
  session: string;
  user?: string;
  text: string;
  role: Role;
  turn?: string;
  atMs: number;
  speaker?: string;
}

export function checkId(field: string, v: unknown): string {
  if (typeof v !== 'string' || !ID_PATTERN.test(v)) {
    throw new InputError(
      ErrorCodes.INPUT_ID,
      `${field} must be 1-128 characters of letters, digits and . _ : @ -, got ${describeValue(v)}`,
      { details: { field, pattern: ID_PATTERN.source } },
    );
  }
  return v;
}

/** Cuts a string to at most `maxBytes` UTF-8 bytes without splitting a character. */
export function truncateUtf8(s: string, maxBytes: number): string {
  const buf = Buffer.from(s, 'utf8');
  if (buf.length <= maxBytes) return s;
  let end = maxBytes;
  // Step back over continuation bytes (10xxxxxx) so the cut lands on a character boundary.
  while (end > 0 && (buf[end]! & 0xc0) === 0x80) end--;
  return buf.subarray(0, end).toString('utf8');
}

export function checkText(v: unknown, maxBytes: number, truncate: boolean): string {
  if (typeof v !== 'string') {
    throw new InputError(ErrorCodes.INPUT_TEXT, `text must be a string, got ${describeValue(v)}`, { details: { field: 'text' } });
  }
  // Whitespace and invisible format characters (zero-width space, joiners, BOM...) say nothing.
  if (v.replace(/[\p{White_Space}\p{Cf}]/gu, '').length === 0) {
    throw new InputError(ErrorCodes.INPUT_TEXT, 'text must not be empty', { details: { field: 'text' } });
  }
  const bytes = Buffer.byteLength(v, 'utf8');
  if (bytes > maxBytes) {
    if (truncate) return truncateUtf8(v, maxBytes);
    throw new InputError(
      ErrorCodes.INPUT_TOO_LARGE,
      `text is ${bytes} bytes, over the limit of ${maxBytes}; raise maxTextBytes or set truncate: true`,
      { details: { field: 'text', bytes, maxBytes } },
    );
  }
  return v;
}

/**
 * How far ahead of this process's clock a turn's `at` may be. A later one is a unit mistake (seconds
 * for ms) or a broken clock: in seconds mode it would age every slot out and leave the session clock
 * in the future, so it is refused.
 */
export const MAX_AT_AHEAD_MS = 24 * 3600 * 1000;

function checkAt(v: unknown, now: number): number {
  if (v === undefined) return now;
  const ms = v instanceof Date ? v.getTime() : typeof v === 'number' ? v : typeof v === 'string' ? Date.parse(v) : NaN;
  if (!Number.isFinite(ms)) {
    throw new InputError(ErrorCodes.INPUT_FIELD, `at must be an ISO-8601 string, epoch ms or Date, got ${describeValue(v)}`, { details: { field: 'at' } });
  }
  if (ms < 0 || ms > now + MAX_AT_AHEAD_MS) {
    throw new InputError(ErrorCodes.INPUT_FIELD, `at must be a time from 1970 up to one day ahead of now (epoch ms, not seconds), got ${describeValue(v)}`, { details: { field: 'at' } });
  }
  return ms;
}

const ROLES: ReadonlySet<string> = new Set(['user', 'assistant', 'system']);

/**
 * A turn from what a caller passed. `defaults.role`, when given, is the turn's role whatever the input
 * says (a read's turn is always the user's).
 */
export function validateTurn(input: unknown, defaults: { tenant: string; maxTextBytes: number; truncate: boolean; now?: number; role?: Turn['role'] }): Turn {
  if (typeof input !== 'object' || input === null) {
    throw new InputError(ErrorCodes.INPUT_FIELD, `a turn must be an object, got ${describeValue(input)}`);
  }
  const t = input as TurnInput;
  const role = defaults.role ?? t.role ?? 'user';
  if (!ROLES.has(role)) {
    throw new InputError(ErrorCodes.INPUT_FIELD, `role must be 'user', 'assistant' or 'system', got ${describeValue(role)}`, { details: { field: 'role' } });
  }
  const out: Turn = {
    tenant: checkId('tenant', t.tenant ?? defaults.tenant),
    session: checkId('session', t.session),
    text: checkText(t.text, defaults.maxTextBytes, defaults.truncate),
    role,
    atMs: checkAt(t.at, defaults.now ?? Date.now()),
  };
  if (t.user !== undefined) out.user = checkId('user', t.user);
  if (t.turn !== undefined) {
    if (typeof t.turn !== 'string' || t.turn.length === 0 || t.turn.length > 128) {
      throw new InputError(ErrorCodes.INPUT_FIELD, `turn must be a string of 1-128 chars, got ${describeValue(t.turn)}`, { details: { field: 'turn' } });
    }
    out.turn = t.turn;
  }
  if (t.speaker !== undefined) {
    if (typeof t.speaker !== 'string') {
      throw new InputError(ErrorCodes.INPUT_FIELD, `speaker must be a string, got ${describeValue(t.speaker)}`, { details: { field: 'speaker' } });
    }
    out.speaker = t.speaker.slice(0, 128);
  }
  return out;
}
