// Reading the replay files: transcripts and probes in JSON Lines (DESIGN.md section 6). Each line is
// checked on its own; a bad line becomes an issue with its line number (TIDEMARK_E_REPLAY_FORMAT),
// skipped by default or fatal in strict mode. Messages name the field, never the line's text.

import { readFile } from 'node:fs/promises';
import { ErrorCodes, InputError, describeValue } from '../errors.js';
import type { Role } from '../types.js';

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
  expect: string[];
  after?: string;
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

/** Checks one probe line: `{ id?, session, query, expect: [turn ids], after? }`. */
export const checkProbe: Check<Probe> = (o, line) => {
  if (!str(o.session) || !SESSION_ID.test(o.session)) return `field "session" must be 1-128 chars of letters, digits and . _ : @ -, got ${describeValue(o.session)}`;
  if (!str(o.query) || o.query.trim().length === 0) return `field "query" must be a non-empty string, got ${describeValue(o.query)}`;
  if (!Array.isArray(o.expect) || o.expect.length === 0 || !o.expect.every((e) => str(e) && e.length > 0)) {
    return `field "expect" must be a non-empty array of turn ids, got ${describeValue(o.expect)}`;
  }
  if (o.id !== undefined && !str(o.id)) return `field "id" must be a string, got ${describeValue(o.id)}`;
  if (o.after !== undefined && (!str(o.after) || o.after.length === 0)) return `field "after" must be a turn id, got ${describeValue(o.after)}`;
  const p: Probe = { id: str(o.id) ? o.id : `line:${line}`, session: o.session, query: o.query, expect: [...new Set(o.expect as string[])], line };
  if (str(o.after)) p.after = o.after;
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
