// Reading the replay files: transcripts and probes in JSON Lines (formats in the README's
// "Evaluate memory on your own logs"). Each line is
// checked on its own; a bad line becomes an issue with its line number (TIDEMARK_E_REPLAY_FORMAT),
// skipped by default or fatal in strict mode. Messages name the field, never the line's text.

import { readFile } from 'node:fs/promises';
import { ErrorCodes, InputError, describeValue } from '../src/errors.js';
import type { Role } from '../src/types.js';

/** One transcript line. */
export interface TranscriptTurn {
  session: string;
  turn: string;
  role: Role;
  text: string;
  at?: string;
  speaker?: string;
  /** 1-based line number in its file. */
  line: number;
}

/** One probe line. */
export interface Probe {
  id: string;
  session: string;
  query: string;
  /** Source turns a good read returns (may be empty when the probe checks values only). */
  expect: string[];
  after?: string;
  /** Probe kind for per-kind figures: the `kind` field, else `category`, else the id's prefix before ':'. */
  kind?: string;
  /**
   * What the recalled value must contain (case-insensitive substrings; `/source/flags` for a pattern):
   * one match among the items counts.
   */
  expectText?: string[];
  /** Stale or wrong values that must not rank above the expected one (same syntax). */
  rejectText?: string[];
  line: number;
}

/** A line that could not be used. */
export interface FormatIssue {
  file: string;
  line: number;
  message: string;
}

export interface ParseOptions {
  /** Throw on the first bad line instead of skipping it. @default false */
  strict?: boolean;
  /** Name used in messages. @default 'transcript' or 'probes' */
  file?: string;
}

export interface Parsed<T> {
  items: T[];
  issues: FormatIssue[];
}

/** A replay file line that is not valid; `details` holds the file and line number. */
export class ReplayFormatError extends InputError {
  constructor(issue: FormatIssue) {
    super(ErrorCodes.REPLAY_FORMAT, `${issue.file} line ${issue.line}: ${issue.message}`, { details: { file: issue.file, line: issue.line } });
  }
}

const ROLES: ReadonlySet<string> = new Set(['user', 'assistant', 'system']);
const SESSION_ID = /^[A-Za-z0-9._:@-]{1,128}$/;

type Check<T> = (o: Record<string, unknown>, line: number) => T | string;

function parseLines<T>(text: string, file: string, strict: boolean, check: Check<T>): Parsed<T> {
  const items: T[] = [];
  const issues: FormatIssue[] = [];
  const lines = text.split(/\r?\n/);
  for (let n = 0; n < lines.length; n++) {
    const raw = lines[n]!.trim();
    if (raw.length === 0) continue;
    let message: string | null = null;
    let value: unknown;
    try {
      value = JSON.parse(raw);
    } catch {
      message = 'not valid JSON';
    }
    if (message === null) {
      if (typeof value !== 'object' || value === null || Array.isArray(value)) message = `expected a JSON object, got ${describeValue(value)}`;
      else {
        const r = check(value as Record<string, unknown>, n + 1);
        if (typeof r === 'string') message = r;
        else items.push(r);
      }
    }
    if (message !== null) {
      const issue = { file, line: n + 1, message };
      if (strict) throw new ReplayFormatError(issue);
      issues.push(issue);
    }
  }
  return { items, issues };
}

const str = (v: unknown): v is string => typeof v === 'string';

/** Checks one transcript line: `{ session, turn, role, text, at?, speaker? }`. */
export const checkTurn: Check<TranscriptTurn> = (o, line) => {
  if (!str(o.session) || !SESSION_ID.test(o.session)) return `field "session" must be 1-128 chars of letters, digits and . _ : @ -, got ${describeValue(o.session)}`;
  if (!str(o.turn) || o.turn.length === 0 || o.turn.length > 128) return `field "turn" must be a string of 1-128 chars, got ${describeValue(o.turn)}`;
  if (!str(o.role) || !ROLES.has(o.role)) return `field "role" must be "user", "assistant" or "system", got ${describeValue(o.role)}`;
  if (!str(o.text) || o.text.trim().length === 0) return `field "text" must be a non-empty string, got ${str(o.text) ? 'an empty string' : describeValue(o.text)}`;
  if (o.at !== undefined && (!str(o.at) || !Number.isFinite(Date.parse(o.at)))) return `field "at" must be an ISO-8601 date string, got ${describeValue(o.at)}`;
  if (o.speaker !== undefined && !str(o.speaker)) return `field "speaker" must be a string, got ${describeValue(o.speaker)}`;
  const t: TranscriptTurn = { session: o.session, turn: o.turn, role: o.role as Role, text: o.text, line };
  if (str(o.at)) t.at = o.at;
  if (str(o.speaker)) t.speaker = o.speaker;
  return t;
};

/** A string or a list of strings (the `expectText` / `rejectText` forms), checked; null when malformed. */
function textList(v: unknown, allowEmpty = false): string[] | null {
  if (str(v)) return v.length > 0 ? [v] : null;
  if (Array.isArray(v) && (allowEmpty || v.length > 0) && v.every((x) => str(x) && x.length > 0)) return v as string[];
  return null;
}

/** The RegExp of a `/source/flags` pattern (always case-insensitive); null when `s` is a plain string. Throws when it does not compile. */
export function patternOf(s: string): RegExp | null {
  const m = /^\/(.+)\/([a-z]*)$/s.exec(s);
  if (!m) return null;
  return new RegExp(m[1]!, m[2]!.includes('i') ? m[2]! : `${m[2]}i`);
}

/**
 * Checks one probe line: `{ id?, session, query, expect?: [turn ids], after?, kind?, category?,
 * expectText?, rejectText? }`; a probe needs `expect` or `expectText`.
 */
export const checkProbe: Check<Probe> = (o, line) => {
  if (!str(o.session) || !SESSION_ID.test(o.session)) return `field "session" must be 1-128 chars of letters, digits and . _ : @ -, got ${describeValue(o.session)}`;
  if (!str(o.query) || o.query.trim().length === 0) return `field "query" must be a non-empty string, got ${describeValue(o.query)}`;
  const expectText = o.expectText === undefined ? undefined : textList(o.expectText);
  if (expectText === null) return `field "expectText" must be a non-empty string or array of non-empty strings, got ${describeValue(o.expectText)}`;
  const rejectText = o.rejectText === undefined ? undefined : textList(o.rejectText, true);
  if (rejectText === null) return `field "rejectText" must be a non-empty string or an array of non-empty strings, got ${describeValue(o.rejectText)}`;
  for (const t of [...(expectText ?? []), ...(rejectText ?? [])]) {
    try {
      patternOf(t);
    } catch {
      return `pattern ${describeValue(t)} in expectText/rejectText does not compile`;
    }
  }
  const expectOk = Array.isArray(o.expect) && o.expect.every((e) => str(e) && e.length > 0) && (o.expect.length > 0 || expectText !== undefined);
  if (o.expect === undefined ? expectText === undefined : !expectOk) {
    return `field "expect" must be a non-empty array of turn ids (or may be left out when "expectText" is given), got ${describeValue(o.expect)}`;
  }
  if (o.id !== undefined && !str(o.id)) return `field "id" must be a string, got ${describeValue(o.id)}`;
  if (o.after !== undefined && (!str(o.after) || o.after.length === 0)) return `field "after" must be a turn id, got ${describeValue(o.after)}`;
  if (o.kind !== undefined && (!str(o.kind) || o.kind.length === 0)) return `field "kind" must be a non-empty string, got ${describeValue(o.kind)}`;
  if (o.category !== undefined && !(str(o.category) && o.category.length > 0) && !(typeof o.category === 'number' && Number.isFinite(o.category))) {
    return `field "category" must be a string or a number, got ${describeValue(o.category)}`;
  }
  const p: Probe = { id: str(o.id) ? o.id : `line:${line}`, session: o.session, query: o.query, expect: [...new Set((o.expect as string[] | undefined) ?? [])], line };
  if (str(o.after)) p.after = o.after;
  const kind = str(o.kind) ? o.kind : o.category !== undefined ? String(o.category) : undefined;
  if (kind !== undefined) p.kind = kind;
  if (expectText) p.expectText = expectText;
  if (rejectText && rejectText.length > 0) p.rejectText = rejectText;
  return p;
};

/** Parses transcript text. Duplicate turn ids within a session are issues too (provenance must be unambiguous). */
export function parseTranscript(text: string, options: ParseOptions = {}): Parsed<TranscriptTurn> {
  const file = options.file ?? 'transcript';
  const strict = options.strict === true;
  const seen = new Map<string, Set<string>>();
  return parseLines(text, file, strict, (o, line) => {
    const t = checkTurn(o, line);
    if (typeof t === 'string') return t;
    let ids = seen.get(t.session);
    if (!ids) seen.set(t.session, (ids = new Set()));
    if (ids.has(t.turn)) return `turn id ${describeValue(t.turn)} appears twice in one session`;
    ids.add(t.turn);
    return t;
  });
}

/** Parses probe text. */
export function parseProbes(text: string, options: ParseOptions = {}): Parsed<Probe> {
  return parseLines(text, options.file ?? 'probes', options.strict === true, checkProbe);
}

/** Reads a file, turning a missing file into a coded error that names it. */
export async function readText(path: string, what: string): Promise<string> {
  try {
    return await readFile(path, 'utf8');
  } catch (err) {
    throw new InputError(ErrorCodes.REPLAY_FORMAT, `cannot read the ${what} file ${path}: ${(err as Error).message}`, { cause: err, details: { file: path } });
  }
}

/** Serialises records as JSON Lines. */
export function toJsonl(records: readonly object[]): string {
  return records.map((r) => JSON.stringify(r)).join('\n') + (records.length > 0 ? '\n' : '');
}
