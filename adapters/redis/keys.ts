// Redis key names of the store. Every key of one session carries the hash tag `{tenant:session}`, so a
// commit's Lua script touches a single hash slot on Redis Cluster; a user's session set has its own tag.
// Ids are escaped so that the mapping from (tenant, session) to keys is one-to-one.

/**
 * Percent-escapes `%`, `{` and `}` (and `:` in tenants): a brace would move Redis's hash tag, and a
 * colon in a tenant would let tenant `a:b` + session `c` collide with tenant `a` + session `b:c`.
 */
export function escapeId(id: string, colon: boolean): string {
  let out = '';
  for (const ch of id) {
    if (ch === '%') out += '%25';
    else if (ch === '{') out += '%7B';
    else if (ch === '}') out += '%7D';
    else if (colon && ch === ':') out += '%3A';
    else out += ch;
  }
  return out;
}

export function unescapeId(s: string): string {
  return s.replace(/%(25|7B|7D|3A)/g, (_m, hex: string) => String.fromCharCode(parseInt(hex, 16)));
}

/** Escapes glob metacharacters for SCAN MATCH (Redis `stringmatchlen` syntax). */
export function escapeGlob(s: string): string {
  return s.replace(/[*?[\]\\^]/g, (c) => `\\${c}`);
}

/** The keys of one session, in the order the Lua scripts expect them. */
export interface SessionKeys {
  /** Hash: v (version), ep (epoch), c (clock), n (turns), cap, dim, u (user), as/au (logbook epochs of the session and user scopes), rc (recent commit ids). */
  meta: string;
  /** Hash: slot index -> slot payload. */
  slots: string;
  /** Stream of events, field `e` = JSON. */
  events: string;
  /** Hash: entry id -> logbook entry payload, of the session scope, for logs written before blocks (read, trimmed, erased; no longer written). */
  arch: string;
  /** Hash: as `arch`, for the entries this session put in its user's scope. */
  uarch: string;
  /**
   * Lists of the session's and its user-scope logbook entries in arrival order: blocks of records
   * (codec.ts, logbook blocks); logs written before blocks begin with `atMs:id` elements whose payloads
   * are in arch / uarch. Readers fetch only the new tail.
   */
  alog: string;
  ualog: string;
  /** All of the above (the session's data), for EXPIRE/DEL/SCAN checks. */
  all: string[];
  /**
   * String: time (ms, server clock) of the session's latest erase. Outlives the erase by the store's
   * `fenceTtlSeconds`; holds a number only.
   */
  gone: string;
  /** Sorted set: commit ids applied, scored by the server time they were applied at. */
  cids: string;
  /** Hash: slot payloads that failed their check, kept aside (`index@seconds` -> payload). */
  quarantine: string;
  /** Sorted set: slot index -> the slot's creation time (ms), so the retention sweep finds expired slots in O(expired). */
  born: string;
  /** The data keys, then gone, cids and born: the KEYS of the commit script (erase adds quarantine). */
  script: string[];
}

export class KeySpace {
  constructor(readonly prefix: string) {}

  /** The hash-tagged base of a session's keys, e.g. `tidemark:{acme:s1}`. */
  sessionBase(tenant: string, session: string): string {
    return `${this.prefix}{${escapeId(tenant, true)}:${escapeId(session, false)}}`;
  }

  session(tenant: string, session: string): SessionKeys {
    return this.sessionOfBase(this.sessionBase(tenant, session));
  }

  /** The keys of a session from its base (as `sessionBase` makes it). */
  sessionOfBase(b: string): SessionKeys {
    const meta = `${b}:meta`, slots = `${b}:slots`, events = `${b}:events`, arch = `${b}:arch`, uarch = `${b}:uarch`, alog = `${b}:alog`, ualog = `${b}:ualog`;
    const all = [meta, slots, events, arch, uarch, alog, ualog];
    const gone = `${b}:gone`;
    const cids = `${b}:cids`;
    const born = `${b}:born`;
    // Written out, not `{ ...k, all, … }`: fields after a leading spread take a slow path in V8 (see `payload` in the middleware).
    return { meta, slots, events, arch, uarch, alog, ualog, all: [...all, born], gone, cids, quarantine: `${b}:quarantine`, born, script: [...all, gone, cids, born] };
  }

  /** Set of the session ids a user has written to. Suffix `:sessions` never ends a session key. */
  userSessions(tenant: string, user: string): string {
    return `${this.prefix}{${escapeId(tenant, true)}:u:${escapeId(user, false)}}:sessions`;
  }

  /** Time (ms) of the user's latest erase; same hash tag as the user's session set. */
  userGone(tenant: string, user: string): string {
    return `${this.prefix}{${escapeId(tenant, true)}:u:${escapeId(user, false)}}:gone`;
  }

  /**
   * Sorted set of the user's logbook entries over all their sessions (`session id` scored by the
   * entry's time; no text), so `logbook.maxEntries` holds per user, not per session; same hash tag as
   * the user's session set.
   */
  userEntries(tenant: string, user: string): string {
    return `${this.prefix}{${escapeId(tenant, true)}:u:${escapeId(user, false)}}:entries`;
  }

  /** SCAN MATCH pattern for the meta keys of one tenant. */
  metaPattern(tenant: string): string {
    return `${escapeGlob(this.prefix)}{${escapeGlob(escapeId(tenant, true))}:*}:meta`;
  }

  /** The session id of a meta key of `tenant`, or null when the key is not one. */
  sessionOfMeta(tenant: string, key: string): string | null {
    const head = `${this.prefix}{${escapeId(tenant, true)}:`;
    if (!key.startsWith(head) || !key.endsWith('}:meta')) return null;
    const inner = key.slice(head.length, -'}:meta'.length);
    if (inner.includes('{') || inner.includes('}')) return null;
    return unescapeId(inner);
  }

  /** SCAN MATCH pattern for every key of a session (used by tests and erase checks). */
  sessionPattern(tenant: string, session: string): string {
    return `${escapeGlob(this.sessionBase(tenant, session))}:*`;
  }
}
