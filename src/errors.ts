// Every error tidemark throws or emits: one base class with a stable `code`, a few subclasses by
// origin. Codes are part of the public API; the README's error table is kept in step by a test.

/** Stable error codes. Never renumber or reuse one; add new codes at the end of their group. */
export const ErrorCodes = {
  /** Turn text is not a string or is empty after trimming. */
  INPUT_TEXT: 'TIDEMARK_E_INPUT_TEXT',
  /** Turn text is longer than `maxTextBytes` and `truncate` is off. */
  INPUT_TOO_LARGE: 'TIDEMARK_E_INPUT_TOO_LARGE',
  /** Session, tenant or user id is missing or outside the documented pattern. */
  INPUT_ID: 'TIDEMARK_E_INPUT_ID',
  /** A turn field other than text or ids is malformed (role, at, pin index...). */
  INPUT_FIELD: 'TIDEMARK_E_INPUT_FIELD',
  /** An option is missing, of the wrong type or out of range. */
  CONFIG: 'TIDEMARK_E_CONFIG',
  /** The embedder returned NaN/Infinity, the wrong count, or a zero vector. */
  EMBED_INVALID: 'TIDEMARK_E_EMBED_INVALID',
  /** The embedder's dimension differs from the one the session was stored with. */
  EMBED_DIM: 'TIDEMARK_E_EMBED_DIM',
  /** A model (for a model-backed embedder) could not be found or loaded. */
  EMBED_MODEL: 'TIDEMARK_E_EMBED_MODEL',
  /** The store could not be reached or failed a command. */
  STORE_UNAVAILABLE: 'TIDEMARK_E_STORE_UNAVAILABLE',
  /** Another writer committed first and retries ran out. */
  STORE_CONFLICT: 'TIDEMARK_E_STORE_CONFLICT',
  /** A stored payload failed its checksum or format check; it was not trusted. */
  STORE_CORRUPT: 'TIDEMARK_E_STORE_CORRUPT',
  /** The bounded outbox of pending writes is full; the newest write (the one being queued) was refused. */
  STORE_OUTBOX_FULL: 'TIDEMARK_E_STORE_OUTBOX_FULL',
  /** A request to an HTTP endpoint was malformed (body, JSON, method). */
  HTTP_BAD_REQUEST: 'TIDEMARK_E_HTTP_BAD_REQUEST',
  /** An admin endpoint was called without the configured token. */
  HTTP_UNAUTHORIZED: 'TIDEMARK_E_HTTP_UNAUTHORIZED',
  /** A transcript or probe file line could not be parsed. */
  REPLAY_FORMAT: 'TIDEMARK_E_REPLAY_FORMAT',
  /** The write was accepted before an erase of its session or user and was not stored (by design). */
  STORE_ERASED: 'TIDEMARK_E_STORE_ERASED',
  /** The instance was closed: reads and writes are refused. */
  CLOSED: 'TIDEMARK_E_CLOSED',
  /** A write waited in the outbox longer than `outbox.maxAgeMs` and was given up (reported, not stored). */
  STORE_OUTBOX_EXPIRED: 'TIDEMARK_E_STORE_OUTBOX_EXPIRED',
} as const;

export type ErrorCode = (typeof ErrorCodes)[keyof typeof ErrorCodes];

export interface TidemarkErrorOptions {
  cause?: unknown;
  /** Structured details (field name, value received, expected); never message text of a turn. */
  details?: Record<string, unknown>;
}

/** Base class of every error tidemark raises. `code` is stable; `message` says what to do. */
export class TidemarkError extends Error {
  readonly code: ErrorCode;
  readonly details: Record<string, unknown>;

  constructor(code: ErrorCode, message: string, options: TidemarkErrorOptions = {}) {
    super(message, options.cause === undefined ? undefined : { cause: options.cause });
    this.name = new.target.name;
    this.code = code;
    this.details = options.details ?? {};
  }

  toJSON(): { code: ErrorCode; message: string; details: Record<string, unknown> } {
    return { code: this.code, message: this.message, details: this.details };
  }
}

/** Bad input from the caller: a turn, an id, a request. Nothing was written. */
export class InputError extends TidemarkError {}

/** An option out of range or of the wrong type, found at construction. */
export class ConfigError extends TidemarkError {
  constructor(message: string, options?: TidemarkErrorOptions) {
    super(ErrorCodes.CONFIG, message, options);
  }
}

/** The store failed, conflicted, or held a payload that could not be trusted. */
export class StoreError extends TidemarkError {}

/** The embedder returned something unusable or could not load its model. */
export class EmbedderError extends TidemarkError {}

/** True when `err` is a TidemarkError (also across duplicated module copies). */
export function isTidemarkError(err: unknown): err is TidemarkError {
  return (
    err instanceof TidemarkError ||
    (typeof err === 'object' && err !== null && typeof (err as { code?: unknown }).code === 'string' &&
      String((err as { code: string }).code).startsWith('TIDEMARK_E_'))
  );
}

/** Describes a value for an error message without echoing long or personal text. */
export function describeValue(value: unknown): string {
  if (value === undefined) return 'undefined';
  if (value === null) return 'null';
  if (typeof value === 'string') return value.length > 40 ? `a string of ${value.length} chars` : JSON.stringify(value);
  if (typeof value === 'number' || typeof value === 'boolean') return String(value);
  if (Array.isArray(value)) return `an array of ${value.length}`;
  const t = typeof value;
  return `${/^[aeiou]/.test(t) ? 'an' : 'a'} ${t}`;
}
