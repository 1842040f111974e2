// Public data types shared by the core, the stores and the adapters. Plain data only: no behaviour,
// no I/O. Anything here is part of the public API and documented in the README.

/** Who spoke a turn. */
export type Role = 'user' | 'assistant' | 'system';

/** Why a slot left working memory. `erased` items are deleted, never archived. */
export type EvictReason = 'capacity' | 'decayed' | 'expired' | 'erased';

/** Why an item is in the archive: it was replaced by a newer value, or evicted. */
export type ArchiveReason = 'superseded' | 'capacity' | 'decayed' | 'expired';

/** Outcome of one read: a working-memory slot matched, only the archive matched, or nothing did. */
export type ReadResult = 'hit' | 'archive_hit' | 'miss';

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
  /** Stable user id; when given, the archive is shared by all sessions of that user. */
  user?: string;
  /** Tenant id; overrides the instance's tenant. */
  tenant?: string;
}

/** Identifies one session's state in a store. */
export interface SessionRef {
  tenant: string;
  session: string;
  /** Present when the session belongs to a known user (archive per user). */
  user?: string;
}

/** Where archive items are kept and searched: one user (across sessions) or one session. */
export type ArchiveScope = { tenant: string; user: string } | { tenant: string; session: string };

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
  /** What a read recalls, e.g. "a green Brompton". */
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
}

/** An item of the long-term archive: an evicted or superseded slot value. */
export interface ArchiveItem {
  /** The slot revision id it carried while in working memory. */
  id: string;
  tenant: string;
  session: string;
  user?: string;
  key: Float32Array;
  keyText: string;
  value: string;
  provenance: string[];
  reason: ArchiveReason;
  /** Strength when it left working memory. */
  strength: number;
  halfLife: number;
  /** Session clock when it left working memory. */
  clock: number;
  createdMs: number;
  archivedMs: number;
  /** For `superseded` items: the revision id that replaced this value. */
  successor?: string;
}

/** One nearest-neighbour result from an archive search. */
export interface ArchiveHit {
  item: ArchiveItem;
  cosine: number;
}

/** An entry of a session's event stream in the store. Never holds message text. */
export interface StoredEvent {
  type: 'allocate' | 'overwrite' | 'reinforce' | 'evict' | 'pin' | 'unpin';
  slot: number;
  id: string;
  clock: number;
  atMs: number;
  reason?: EvictReason | ArchiveReason;
}

/** One item a read returns. */
export interface RecallItem {
  /** Where it came from. */
  source: 'slot' | 'archive';
  /** Slot index (slot items) or undefined. */
  slot?: number;
  /** Revision id of the value. */
  id: string;
  key: string;
  value: string;
  provenance: string[];
  /** Attention weight in (0, 1]; slot items' weights come from one softmax. */
  weight: number;
  /** Pre-softmax score z = beta*cos + gamma*lexical + delta*ln(strength). */
  score: number;
  cosine: number;
  /** BM25 score normalised by the best BM25 score of this read, in [0, 1]. */
  lexical: number;
  /** Strength at read time. */
  strength: number;
  /** Archive items only: why it was archived and what replaced it. */
  reason?: ArchiveReason;
  successor?: string;
}

/** Everything a read did, for logs (no text), debugging and dashboards. */
export interface ReadTrace {
  result: ReadResult;
  /** Number of slots scanned. */
  scanned: number;
  /** Best cosine among slots (or -1 when empty). */
  topCosine: number;
  /** Largest attention weight. */
  topWeight: number;
  /** Shannon entropy (nats) of the slot attention weights. */
  entropy: number;
  /** Hops performed. */
  hops: number;
  /** Whether the archive was searched, and how many items it returned. */
  archiveSearched: boolean;
  archiveHits: number;
  /** Per-item detail, in rank order (same order as `items`). */
  items: Array<Pick<RecallItem, 'source' | 'slot' | 'id' | 'cosine' | 'lexical' | 'strength' | 'weight' | 'score' | 'provenance'>>;
  /** Microseconds spent in the read, embedding included. */
  durationUs: number;
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
