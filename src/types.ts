// Public data types shared by the core, the stores and the adapters. Plain data only: no behaviour,
// no I/O. Anything here is part of the public API and documented in the README.

/** Who spoke a turn. */
export type Role = 'user' | 'assistant' | 'system';

/** Why a slot left working memory. `erased` items are deleted, never kept in the logbook. */
export type EvictReason = 'capacity' | 'decayed' | 'expired' | 'erased';

/** Why a value was demoted to the logbook: it was replaced by a newer value, or evicted. */
export type DemotionReason = 'superseded' | 'capacity' | 'decayed' | 'expired';

/**
 * Outcome of one read: the top item is relevant (by the calibrated hit threshold) and is a slot
 * (`slot`) or a logbook entry (`logbook`), or nothing relevant was found (`miss`).
 */
export type ReadResult = 'slot' | 'logbook' | 'miss';

/** Outcome of one candidate write. */
export type WriteOutcome = 'allocated' | 'overwritten' | 'reinforced' | 'gated_out';

/** One message as the caller hands it in. */
export interface TurnInput {
  /** Conversation id chosen by the bot. Pattern: 1–128 chars of `[A-Za-z0-9._:@-]`. */
  session: string;
  /** Message text (up to `maxTextBytes` UTF-8 bytes). */
  text: string;
  /** @default 'user' */
  role?: Role;
  /** Turn id used as provenance; generated (`t1`, `t2`, … per session) when absent. */
  turn?: string;
  /** When the message was sent (ISO-8601, epoch ms or Date); defaults to now. */
  at?: string | number | Date;
  /** Free-form speaker label (kept as provenance detail only). */
  speaker?: string;
  /** Stable user id; when given, the logbook is shared by all sessions of that user. */
  user?: string;
  /** Tenant id; overrides the instance's tenant. */
  tenant?: string;
}

/** Identifies one session's state in a store. */
export interface SessionRef {
  tenant: string;
  session: string;
  /** Present when the session belongs to a known user (logbook per user). */
  user?: string;
}

/** Where logbook entries are kept and searched: one user (across sessions) or one session. */
export type LogbookScope = { tenant: string; user: string } | { tenant: string; session: string };

/**
 * One slot as a record (array-of-structs form), used to move a slot between the core and a store.
 * Inside the core a session's slots live in a struct-of-arrays `SlotTable`.
 */
export interface SlotRecord {
  /** Id of this value revision; a new id on every overwrite. */
  id: string;
  /** Unit-length key vector (embedding of `keyText`). */
  key: Float32Array;
  /** The topic the slot is addressed by, e.g. "my bike". */
  keyText: string;
  /** What a read recalls, e.g. "a green Corvane". */
  value: string;
  /** Turn ids the value came from, newest first (an update's own turn leads). */
  provenance: string[];
  /** Strength in (0, 1] as of `stamp`; decays from there with `halfLife`. */
  strength: number;
  /** Half-life in clock units (turns, or seconds when `decayUnit: 'seconds'`). */
  halfLife: number;
  /** Clock value at which `strength` was set. */
  stamp: number;
  /** Clock value when the slot was first allocated (kept across overwrites). */
  created: number;
  /** Wall-clock ms when the slot was first allocated. */
  createdMs: number;
  /** Wall-clock ms of the last write or reinforcement. */
  updatedMs: number;
  /** How many reads have used this slot. */
  reads: number;
  /** Pinned slots never decay out and are never chosen for eviction. */
  pinned: boolean;
  /** Id of the revision this one replaced, if any. */
  previous?: string;
  /** Whose fact it is: the speaker who stated it, when turns name their speakers. */
  owner?: string;
  /** Written from a bot's own reply (an assistant turn naming no speaker); such a slot never overwrites the user's. */
  reply?: boolean;
  /**
   * Whom the fact is about when not the speaker ("My brother rides a Vantor Trail": `brother`). Such a
   * fact never overwrites the speaker's own, and ranks lower for questions that do not name them.
   */
  subject?: string;
  /**
   * An update that could not be tied to one fact: the revision ids of the values it may replace. They
   * stay in working memory; a read ranks this slot just above each of them (newest first).
   */
  maybeReplaces?: string[];
}

/**
 * Why an entry is in the logbook: a turn as it was said (`turn`), or a slot value that left working
 * memory — replaced by a newer value (`superseded`), or evicted (`capacity`, `decayed`, `expired`).
 */
export type LogbookKind = 'turn' | DemotionReason;

/** A resolved date a turn mentions (see `resolveDates`). */
export interface MentionedDate {
  /** The expression as written ("last Saturday"). */
  text: string;
  /** `YYYY-MM-DD`, the first day of the period for coarser grains. */
  day: string;
  grain: 'day' | 'week' | 'month' | 'year';
}

/**
 * One entry of the long-term tier, the logbook: every kept turn with its provenance, speaker and
 * time, and every value that left working memory. Entries live per user (when the turn carries a
 * user id) or per session, under the retention policy; erasure removes them all.
 */
export interface LogbookEntry {
  /** Unique within its scope. For a demoted slot value: the revision id it had in working memory. */
  id: string;
  kind: LogbookKind;
  tenant: string;
  session: string;
  user?: string;
  /** What a read recalls: the turn's text, or the slot's value. */
  value: string;
  /** The slot's topic for demoted values; empty for turns. */
  keyText: string;
  /** Source turn ids, newest first: `[turn]` for a turn entry. */
  provenance: string[];
  /** Who said it (turn entries). */
  role?: Role;
  speaker?: string;
  /** Whose fact it is: the speaker a slot value belonged to (demoted values with a speaker). */
  owner?: string;
  /** When it was said (turns) or when it left working memory (demoted values), epoch ms. */
  atMs: number;
  /** When it was first said (the slot's creation for demoted values), epoch ms. */
  createdMs: number;
  /** Session clock (turns or seconds) at the write. */
  clock: number;
  /** Order of the turn within its session (1, 2, ...); the neighbours of a turn are the turns at seq ± 1. */
  seq: number;
  /** Dates the text mentions, resolved against `atMs` (turn entries). */
  dates?: MentionedDate[];
  /**
   * Unit vector: the slot key of a demoted value; for a turn, its text's embedding when the
   * logbook keeps turn vectors (see `logbook.vectors`).
   */
  key?: Float32Array;
  /** Strength and half-life when it left working memory (demoted values). */
  strength?: number;
  halfLife?: number;
  /** For `superseded` values: the revision id that replaced this one. */
  successor?: string;
}

/** One nearest-neighbour result from a search of the logbook's vector index. */
export interface LogbookVectorHit {
  item: LogbookEntry;
  cosine: number;
}

/** An entry of a session's event stream in the store. Never holds message text. */
export interface StoredEvent {
  type: 'allocate' | 'overwrite' | 'reinforce' | 'evict' | 'pin' | 'unpin';
  slot: number;
  id: string;
  clock: number;
  atMs: number;
  reason?: EvictReason | DemotionReason;
}

/** One item a read returns. */
export interface RecallItem {
  /** Which tier it came from: working memory or the logbook. */
  source: 'slot' | 'logbook';
  /** `slot`, or the logbook entry's kind (`turn`, `superseded`, `capacity`, `decayed`, `expired`). */
  kind: 'slot' | LogbookKind;
  /** Slot index (slot items). */
  slot?: number;
  /** Revision id of a slot value, or the logbook entry's id. */
  id: string;
  /** The slot's topic (empty for turns). */
  key: string;
  /** What is recalled: the slot's value, or the turn's text. */
  value: string;
  provenance: string[];
  /** Who said it (turns), whose fact it is (slots and demoted values), when known. */
  speaker?: string;
  role?: Role;
  /** When it was said (turns), epoch ms. */
  atMs?: number;
  /** Dates the turn mentions, resolved. */
  dates?: MentionedDate[];
  /** Share of this read's total score, in (0, 1]; items' weights sum to 1. */
  weight: number;
  /** Score in the merged ranking (see `trace`). */
  score: number;
  /** Cosine to the query (NaN when not computed). */
  cosine: number;
  /** Own BM25 score of the item for the query. */
  lexical: number;
  /**
   * Own BM25 over the sum of the query terms' IDF: how much of the query the item covers. It passes 1
   * when a short text holds the query's words (a BM25 term weight reaches (k1 + 1) × IDF).
   */
  coverage: number;
  /** Strength at read time (slots; 0 for logbook entries). */
  strength: number;
  /** Why it stands where it does: by score, lifted above a value it replaced, or as an ambiguous update. */
  placed: 'score' | 'successor' | 'ambiguous';
  /** Superseded values: what replaced it. */
  successor?: string;
  /** Ambiguous updates: the revision ids of the values it may replace. */
  maybeReplaces?: string[];
  /** @deprecated since 0.2: the logbook kind of a demoted value; use `kind`. */
  reason?: DemotionReason;
}

/** Everything a read did, for logs (no text), debugging and dashboards. */
export interface ReadTrace {
  result: ReadResult;
  /** Slots scanned. */
  scanned: number;
  /** Logbook entries in the scope searched. */
  logbookSize: number;
  /** Best cosine among slots (or -1 when empty). */
  topCosine: number;
  /** Largest slot attention weight. */
  topWeight: number;
  /** Shannon entropy (nats) of the slot attention weights. */
  entropy: number;
  /** Slot attention hops performed. */
  hops: number;
  /** Coverage of the top item; a hit when it reaches `read.hitCoverage`. */
  topCoverage: number;
  /** Speakers of the scope the query names (how many). */
  speakersNamed: number;
  /** The query asks when something happened. */
  temporal: boolean;
  /** Whether a dense list took part in the ranking. */
  dense: boolean;
  /** Per-item detail, in rank order (same order as `items`). */
  items: Array<
    Pick<RecallItem, 'source' | 'kind' | 'slot' | 'id' | 'cosine' | 'lexical' | 'coverage' | 'strength' | 'weight' | 'score' | 'placed' | 'provenance'> & {
      /** Share of the score from neighbouring turns. */
      context: number;
      lexicalRank: number;
      denseRank: number;
      speakerMatch: boolean;
    }
  >;
  /** Microseconds spent in the read, embedding included. */
  durationUs: number;
  /** Microseconds of that in the logbook search. */
  searchUs: number;
}

/** What a wrapped handler receives as `ctx.memory`. */
export interface MemoryContext {
  items: RecallItem[];
  /** A ready-to-paste text block of the items, within the token budget. */
  prompt: string;
  trace: ReadTrace;
  /** True when memory could not be read; the handler runs with empty memory. */
  degraded: boolean;
}
