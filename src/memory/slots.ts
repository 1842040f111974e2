// A session's working memory as a struct of arrays: all keys in one Float32Array (row i = slot i),
// strengths, half-lives and clocks in typed arrays, text and provenance in plain arrays. A read is
// one pass over capacity x dim floats; no per-slot objects on the hot path.

import type { SlotRecord } from '../types.js';

const USED = 1;
const PINNED = 2;

export class SlotTable {
  readonly capacity: number;
  readonly dim: number;
  /** capacity * dim floats; row i is slot i's unit key vector (zeros when free). */
  readonly keys: Float32Array;
  /** Strength as of `stamp[i]`. */
  readonly strength: Float64Array;
  readonly halfLife: Float64Array;
  readonly stamp: Float64Array;
  readonly created: Float64Array;
  readonly createdMs: Float64Array;
  readonly updatedMs: Float64Array;
  readonly reads: Uint32Array;
  /** Bit 0: used; bit 1: pinned. */
  readonly flags: Uint8Array;
  readonly ids: string[];
  readonly keyText: string[];
  readonly value: string[];
  readonly provenance: string[][];
  readonly previous: (string | undefined)[];
  readonly owner: (string | undefined)[];
  readonly subject: (string | undefined)[];
  /** Bit set per slot: written from a bot's reply. */
  readonly reply: Uint8Array;
  readonly maybeReplaces: (string[] | undefined)[];

  constructor(capacity: number, dim: number) {
    this.capacity = capacity;
    this.dim = dim;
    this.keys = new Float32Array(capacity * dim);
    this.strength = new Float64Array(capacity);
    this.halfLife = new Float64Array(capacity);
    this.stamp = new Float64Array(capacity);
    this.created = new Float64Array(capacity);
    this.createdMs = new Float64Array(capacity);
    this.updatedMs = new Float64Array(capacity);
    this.reads = new Uint32Array(capacity);
    this.flags = new Uint8Array(capacity);
    this.ids = new Array<string>(capacity).fill('');
    this.keyText = new Array<string>(capacity).fill('');
    this.value = new Array<string>(capacity).fill('');
    this.provenance = Array.from({ length: capacity }, () => []);
    this.previous = new Array<string | undefined>(capacity).fill(undefined);
    this.owner = new Array<string | undefined>(capacity).fill(undefined);
    this.subject = new Array<string | undefined>(capacity).fill(undefined);
    this.reply = new Uint8Array(capacity);
    this.maybeReplaces = new Array<string[] | undefined>(capacity).fill(undefined);
  }

  isUsed(i: number): boolean {
    return (this.flags[i]! & USED) !== 0;
  }

  isPinned(i: number): boolean {
    return (this.flags[i]! & PINNED) !== 0;
  }

  /** Number of used slots. */
  count(): number {
    let n = 0;
    for (let i = 0; i < this.capacity; i++) if (this.flags[i]! & USED) n++;
    return n;
  }

  /** Index of the first free slot, or -1. */
  firstFree(): number {
    for (let i = 0; i < this.capacity; i++) if ((this.flags[i]! & USED) === 0) return i;
    return -1;
  }

  /** Key row of slot i, as a view (no copy). */
  keyRow(i: number): Float32Array {
    return this.keys.subarray(i * this.dim, (i + 1) * this.dim);
  }

  /** Writes a record into slot i. The key is copied. */
  set(i: number, rec: SlotRecord): void {
    if (rec.key.length !== this.dim) {
      throw new RangeError(`slot key has ${rec.key.length} dims, table holds ${this.dim}`);
    }
    this.keys.set(rec.key, i * this.dim);
    this.strength[i] = rec.strength;
    this.halfLife[i] = rec.halfLife;
    this.stamp[i] = rec.stamp;
    this.created[i] = rec.created;
    this.createdMs[i] = rec.createdMs;
    this.updatedMs[i] = rec.updatedMs;
    this.reads[i] = rec.reads;
    this.flags[i] = USED | (rec.pinned ? PINNED : 0);
    this.ids[i] = rec.id;
    this.keyText[i] = rec.keyText;
    this.value[i] = rec.value;
    this.provenance[i] = rec.provenance.slice();
    this.previous[i] = rec.previous;
    this.owner[i] = rec.owner;
    this.subject[i] = rec.subject;
    this.reply[i] = rec.reply ? 1 : 0;
    this.maybeReplaces[i] = rec.maybeReplaces && rec.maybeReplaces.length > 0 ? rec.maybeReplaces.slice() : undefined;
  }

  /** Frees slot i and zeroes its key so no stale vector remains. */
  clear(i: number): void {
    this.keys.fill(0, i * this.dim, (i + 1) * this.dim);
    this.strength[i] = 0;
    this.halfLife[i] = 0;
    this.stamp[i] = 0;
    this.created[i] = 0;
    this.createdMs[i] = 0;
    this.updatedMs[i] = 0;
    this.reads[i] = 0;
    this.flags[i] = 0;
    this.ids[i] = '';
    this.keyText[i] = '';
    this.value[i] = '';
    this.provenance[i] = [];
    this.previous[i] = undefined;
    this.owner[i] = undefined;
    this.subject[i] = undefined;
    this.reply[i] = 0;
    this.maybeReplaces[i] = undefined;
  }

  /** Slot i as a record (the key copied), or null when free. */
  get(i: number): SlotRecord | null {
    if (!this.isUsed(i)) return null;
    const rec: SlotRecord = {
      id: this.ids[i]!,
      key: this.keys.slice(i * this.dim, (i + 1) * this.dim),
      keyText: this.keyText[i]!,
      value: this.value[i]!,
      provenance: this.provenance[i]!.slice(),
      strength: this.strength[i]!,
      halfLife: this.halfLife[i]!,
      stamp: this.stamp[i]!,
      created: this.created[i]!,
      createdMs: this.createdMs[i]!,
      updatedMs: this.updatedMs[i]!,
      reads: this.reads[i]!,
      pinned: this.isPinned(i),
    };
    if (this.previous[i] !== undefined) rec.previous = this.previous[i];
    if (this.owner[i] !== undefined) rec.owner = this.owner[i];
    if (this.subject[i] !== undefined) rec.subject = this.subject[i];
    if (this.reply[i] === 1) rec.reply = true;
    if (this.maybeReplaces[i] !== undefined) rec.maybeReplaces = this.maybeReplaces[i]!.slice();
    return rec;
  }

  /** A deep copy, optionally with another capacity (slots beyond it are dropped: the caller evicts first). */
  clone(capacity = this.capacity): SlotTable {
    const t = new SlotTable(capacity, this.dim);
    const n = Math.min(capacity, this.capacity);
    for (let i = 0; i < n; i++) {
      const rec = this.get(i);
      if (rec) t.set(i, rec);
    }
    return t;
  }
}

// One empty table per shape, shared: planning a new session's first write only reads it.
const empties = new Map<string, SlotTable>();

/**
 * An empty table of this shape to plan against, shared and never to be written (a store allocates the
 * session's own table when it commits). Spares a capacity x dim allocation per new session.
 */
export function emptyTable(capacity: number, dim: number): SlotTable {
  const key = `${capacity}x${dim}`;
  let t = empties.get(key);
  if (!t) {
    if (empties.size >= 16) empties.clear();
    empties.set(key, (t = new SlotTable(capacity, dim)));
  }
  return t;
}
