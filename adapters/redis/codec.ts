// Over ~400 lines on purpose: the two payload kinds and both format versions share one byte layout, read side by side.
// Binary payloads of the Redis store: one slot record or one logbook entry per hash field. Each payload
// opens with a format version byte, a kind byte and a CRC32 of the rest, so a truncated, tampered or
// foreign value is reported as corrupt instead of being decoded into wrong memories. Over 400 lines
// on purpose: every stored layout and its reader, old ones included, sit side by side in one file. Format 2 (0.2)
// adds owners, reply flags, ambiguous-update links and logbook turn entries; format 1 payloads written
// by 0.1 still decode. Logbook entries are now written compact (kind 4): whole-millisecond times and
// integer clocks as varints, and no id, tenant or session when they are the hash field and the key
// the entry is stored under (the reader passes them back); kind 3 entries written before still decode.

import * as zlib from 'node:zlib';
import { ErrorCodes, StoreError } from '../../src/errors.js';
import { SEAL_DICTIONARIES, SEAL_DICTIONARY } from './dictionary.js';
import type { DemotionReason, LogbookEntry, LogbookKind, MentionedDate, Role, SlotRecord } from '../../src/types.js';

/** Bumped when the layout below changes; a reader refuses versions it does not know. */
export const PAYLOAD_FORMAT = 2;
/** The 0.1 layout, still read. */
const PAYLOAD_FORMAT_1 = 1;
export const KIND_SLOT = 1;
/** A 0.1 archive item (read only). */
export const KIND_DEMOTED_V1 = 2;
export const KIND_LOGBOOK = 3;
/** A logbook entry in the compact layout (see encodeLogbook). */
export const KIND_LOGBOOK_COMPACT = 4;
const HEADER = 6; // format(1) kind(1) crc32(4)

export type KeyFormat = 'int8' | 'float32';
const KEY_FLOAT32 = 0;
const KEY_INT8 = 1;
/**
 * int8 with only the non-zero components, as (index delta varint, int8) pairs: the same values as
 * KEY_INT8, chosen when shorter (a hashing embedder's key touches a few dozen of its dimensions).
 */
const KEY_INT8_SPARSE = 2;

const DEMOTION_REASONS: readonly DemotionReason[] = ['superseded', 'capacity', 'decayed', 'expired'];
const LOGBOOK_KINDS: readonly LogbookKind[] = ['turn', 'superseded', 'capacity', 'decayed', 'expired'];
const ROLES: readonly Role[] = ['user', 'assistant', 'system'];
const GRAINS: readonly MentionedDate['grain'][] = ['day', 'week', 'month', 'year'];

// CRC-32 (IEEE 802.3 polynomial, reflected 0xEDB88320) — the same checksum as zlib/PNG. Node has
// `zlib.crc32` from 20.15 and 22.2; older Node 20 releases fall back to the table version below.
const nativeCrc32 = (zlib as { crc32?: (data: Uint8Array) => number }).crc32;
let crcTable: Uint32Array | undefined;
export function crc32(data: Uint8Array): number {
  if (typeof nativeCrc32 === 'function') return nativeCrc32(data) >>> 0;
  if (!crcTable) {
    crcTable = new Uint32Array(256);
    for (let n = 0; n < 256; n++) {
      let c = n;
      for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
      crcTable[n] = c >>> 0;
    }
  }
  let crc = 0xffffffff;
  for (let i = 0; i < data.length; i++) crc = crcTable[(crc ^ data[i]!) & 0xff]! ^ (crc >>> 8);
  return (crc ^ 0xffffffff) >>> 0;
}

/** Growable little-endian byte writer. */
class Writer {
  buf: Buffer;
  pos = HEADER;
  constructor(size: number) {
    this.buf = Buffer.allocUnsafe(Math.max(size, 64));
  }
  private need(n: number): void {
    if (this.pos + n <= this.buf.length) return;
    const next = Buffer.allocUnsafe(Math.max(this.buf.length * 2, this.pos + n));
    this.buf.copy(next, 0, 0, this.pos);
    this.buf = next;
  }
  u8(v: number): void {
    this.need(1);
    this.buf[this.pos++] = v;
  }
  /** Unsigned LEB128 (common practice for compact lengths). */
  varint(v: number): void {
    this.need(5);
    while (v >= 0x80) {
      this.buf[this.pos++] = (v & 0x7f) | 0x80;
      v >>>= 7;
    }
    this.buf[this.pos++] = v;
  }
  /** Unsigned LEB128 for integers up to 2^53 (millisecond times need 41 bits; `>>>` stops at 32). */
  uvar(v: number): void {
    this.need(8);
    while (v >= 0x80) {
      this.buf[this.pos++] = (v % 0x80) | 0x80;
      v = Math.floor(v / 0x80);
    }
    this.buf[this.pos++] = v;
  }
  f64(v: number): void {
    this.need(8);
    this.buf.writeDoubleLE(v, this.pos);
    this.pos += 8;
  }
  f32(v: number): void {
    this.need(4);
    this.buf.writeFloatLE(v, this.pos);
    this.pos += 4;
  }
  str(s: string): void {
    const n = Buffer.byteLength(s, 'utf8');
    this.varint(n);
    this.need(n);
    this.buf.write(s, this.pos, n, 'utf8');
    this.pos += n;
  }
  /** Writes the key in the chosen format; returns the vector a reader will decode. */
  key(v: Float32Array, format: KeyFormat): Float32Array {
    this.varint(v.length);
    if (format === 'float32') {
      this.u8(KEY_FLOAT32);
      this.need(v.length * 4);
      for (let j = 0; j < v.length; j++) this.buf.writeFloatLE(v[j]!, this.pos + 4 * j);
      this.pos += v.length * 4;
      return Float32Array.from(v);
    }
    // Symmetric per-vector int8 quantisation (scale = max|x| / 127), common practice for embedding
    // storage; the reader re-normalises, so the worst component error is about scale / 2.
    let max = 0;
    for (let j = 0; j < v.length; j++) max = Math.max(max, Math.abs(v[j]!));
    const scale = Math.fround(max / 127);
    const q = new Int8Array(v.length);
    let nnz = 0;
    let sparseBytes = 5;
    for (let j = 0, last = 0; j < v.length; j++) {
      q[j] = scale === 0 ? 0 : Math.max(-127, Math.min(127, Math.round(v[j]! / scale)));
      if (q[j] !== 0) {
        nnz++;
        sparseBytes += (j - last < 0x80 ? 1 : 2) + 1;
        last = j;
      }
    }
    if (sparseBytes < v.length) {
      this.u8(KEY_INT8_SPARSE);
      this.f32(scale);
      this.varint(nnz);
      for (let j = 0, last = 0; j < v.length; j++) {
        if (q[j] === 0) continue;
        this.varint(j - last);
        this.u8(q[j]! & 0xff);
        last = j;
      }
      return dequantise(q, scale);
    }
    this.u8(KEY_INT8);
    this.f32(scale);
    this.need(v.length);
    for (let j = 0; j < v.length; j++) this.buf[this.pos + j] = q[j]! & 0xff;
    this.pos += v.length;
    return dequantise(q, scale);
  }
  /** A time or clock: a varint when it is a safe non-negative integer, else a float64 (the caller sets a flag). */
  num(v: number, asVarint: boolean): void {
    if (asVarint) this.uvar(v);
    else this.f64(v);
  }
  finish(kind: number): Buffer {
    const out = this.buf.subarray(0, this.pos);
    out[0] = PAYLOAD_FORMAT;
    out[1] = kind;
    out.writeUInt32LE(crc32(out.subarray(HEADER)), 2);
    return out;
  }
}

function dequantise(q: Int8Array, scale: number): Float32Array {
  const v = new Float32Array(q.length);
  let s = 0;
  for (let j = 0; j < q.length; j++) {
    v[j] = q[j]! * scale;
    s += v[j]! * v[j]!;
  }
  if (s > 0) {
    const inv = 1 / Math.sqrt(s);
    for (let j = 0; j < q.length; j++) v[j] = v[j]! * inv;
  }
  return v;
}

/** Bounds-checked reader; every overrun is a corrupt payload. */
class Reader {
  pos = HEADER;
  constructor(readonly buf: Buffer, readonly what: string, readonly format = PAYLOAD_FORMAT) {}
  fail(reason: string): never {
    throw corrupt(this.what, reason);
  }
  private need(n: number): void {
    if (this.pos + n > this.buf.length) this.fail('truncated');
  }
  u8(): number {
    this.need(1);
    return this.buf[this.pos++]!;
  }
  varint(): number {
    let v = 0;
    for (let shift = 0; shift < 56; shift += 7) {
      const b = this.u8();
      v += (b & 0x7f) * 2 ** shift;
      if ((b & 0x80) === 0) return v;
    }
    return this.fail('bad length');
  }
  f64(): number {
    this.need(8);
    const v = this.buf.readDoubleLE(this.pos);
    this.pos += 8;
    return v;
  }
  f32(): number {
    this.need(4);
    const v = this.buf.readFloatLE(this.pos);
    this.pos += 4;
    return v;
  }
  str(): string {
    const n = this.varint();
    this.need(n);
    const s = this.buf.toString('utf8', this.pos, this.pos + n);
    this.pos += n;
    return s;
  }
  key(): Float32Array {
    const dim = this.varint();
    const format = this.u8();
    if (format === KEY_FLOAT32) {
      this.need(dim * 4);
      const v = new Float32Array(dim);
      for (let j = 0; j < dim; j++) v[j] = this.buf.readFloatLE(this.pos + 4 * j);
      this.pos += dim * 4;
      return v;
    }
    if (format === KEY_INT8_SPARSE) {
      const scale = this.f32();
      const q = new Int8Array(dim);
      for (let i = 0, n = this.varint(), j = 0; i < n; i++) {
        j += this.varint();
        if (j >= dim || (i > 0 && q[j] !== 0)) this.fail('bad sparse key');
        q[j] = (this.u8() << 24) >> 24;
      }
      return dequantise(q, scale);
    }
    if (format !== KEY_INT8) this.fail(`unknown key format ${format}`);
    const scale = this.f32();
    this.need(dim);
    const q = new Int8Array(this.buf.buffer.slice(this.buf.byteOffset + this.pos, this.buf.byteOffset + this.pos + dim));
    this.pos += dim;
    return dequantise(q, scale);
  }
  end(): void {
    if (this.pos !== this.buf.length) this.fail('trailing bytes');
  }
}

export function corrupt(what: string, reason: string): StoreError {
  return new StoreError(
    ErrorCodes.STORE_CORRUPT,
    `redis store: ${what} failed its format check (${reason}); it was not used — erase the session or restore it from a backup`,
    { details: { what, reason } },
  );
}

function open(buf: Buffer, kind: number, what: string, kinds: readonly number[] = [kind]): Reader {
  if (buf.length < HEADER) throw corrupt(what, 'too short');
  if (buf[0] !== PAYLOAD_FORMAT && buf[0] !== PAYLOAD_FORMAT_1) throw corrupt(what, `format version ${buf[0]}, expected ${PAYLOAD_FORMAT}`);
  if (!kinds.includes(buf[1]!)) throw corrupt(what, `kind ${buf[1]}, expected ${kind}`);
  if (buf.readUInt32LE(2) !== crc32(buf.subarray(HEADER))) throw corrupt(what, 'checksum mismatch');
  return new Reader(buf, what, buf[0]!);
}

const SLOT_PINNED = 1;
const SLOT_PREVIOUS = 2;
const SLOT_OWNER = 4;
const SLOT_REPLY = 8;
const SLOT_MAYBE = 16;
const SLOT_SUBJECT = 32;

/** Encodes a slot; `key` is the vector a reader will get back (quantised when int8). */
export function encodeSlot(rec: SlotRecord, format: KeyFormat): { payload: Buffer; key: Float32Array } {
  const w = new Writer(HEADER + 64 + rec.key.length * (format === 'int8' ? 1 : 4) + 4 * (rec.keyText.length + rec.value.length) + 64);
  const maybe = rec.maybeReplaces ?? [];
  w.u8(
    (rec.pinned ? SLOT_PINNED : 0) | (rec.previous !== undefined ? SLOT_PREVIOUS : 0) | (rec.owner !== undefined ? SLOT_OWNER : 0) |
      (rec.reply ? SLOT_REPLY : 0) | (maybe.length > 0 ? SLOT_MAYBE : 0) | (rec.subject !== undefined ? SLOT_SUBJECT : 0),
  );
  w.f64(rec.strength);
  w.f64(rec.halfLife);
  w.f64(rec.stamp);
  w.f64(rec.created);
  w.f64(rec.createdMs);
  w.f64(rec.updatedMs);
  w.varint(rec.reads);
  w.str(rec.id);
  w.str(rec.keyText);
  w.str(rec.value);
  if (rec.previous !== undefined) w.str(rec.previous);
  if (rec.owner !== undefined) w.str(rec.owner);
  if (rec.subject !== undefined) w.str(rec.subject);
  if (maybe.length > 0) {
    w.varint(maybe.length);
    for (const m of maybe) w.str(m);
  }
  w.varint(rec.provenance.length);
  for (const p of rec.provenance) w.str(p);
  const key = w.key(rec.key, format);
  return { payload: w.finish(KIND_SLOT), key };
}

export function decodeSlot(buf: Buffer, what: string): SlotRecord {
  const r = open(buf, KIND_SLOT, what);
  const flags = r.u8();
  const strength = r.f64();
  const halfLife = r.f64();
  const stamp = r.f64();
  const created = r.f64();
  const createdMs = r.f64();
  const updatedMs = r.f64();
  const reads = r.varint();
  const id = r.str();
  const keyText = r.str();
  const value = r.str();
  const previous = flags & SLOT_PREVIOUS ? r.str() : undefined;
  const v2 = r.format >= 2;
  const owner = v2 && flags & SLOT_OWNER ? r.str() : undefined;
  const subject = v2 && flags & SLOT_SUBJECT ? r.str() : undefined;
  const maybe: string[] = [];
  if (v2 && flags & SLOT_MAYBE) for (let i = 0, m = r.varint(); i < m; i++) maybe.push(r.str());
  const n = r.varint();
  const provenance: string[] = [];
  for (let i = 0; i < n; i++) provenance.push(r.str());
  const key = r.key();
  r.end();
  const rec: SlotRecord = {
    id, key, keyText, value, provenance, strength, halfLife, stamp, created, createdMs, updatedMs, reads,
    pinned: (flags & SLOT_PINNED) !== 0,
  };
  if (previous !== undefined) rec.previous = previous;
  if (owner !== undefined) rec.owner = owner;
  if (subject !== undefined) rec.subject = subject;
  if (v2 && flags & SLOT_REPLY) rec.reply = true;
  if (maybe.length > 0) rec.maybeReplaces = maybe;
  return rec;
}

const LB_USER = 1;
const LB_SUCCESSOR = 2;
const LB_SPEAKER = 4;
const LB_OWNER = 8;
const LB_KEY = 16;
const LB_DATES = 32;
const LB_ROLE = 64;
const LB_DEMOTED = 128;

// Second flag byte of the compact layout.
const LB2_TENANT = 1;
const LB2_SESSION = 2;
const LB2_AT_F64 = 4;
const LB2_CREATED = 8;
const LB2_CREATED_F64 = 16;
const LB2_CLOCK_F64 = 32;
const LB2_NO_ID = 64;

/** Where an entry is stored: its tenant, session and id are not written when they are these. */
export interface LogbookHome {
  tenant: string;
  session: string;
  /** The hash field the entry is stored under (its id), when the reader knows it. */
  id?: string;
}

/** Written as a varint: a safe non-negative integer (not -0, which a varint would turn into 0). */
const wholeMs = (v: number): boolean => Number.isSafeInteger(v) && v >= 0 && !Object.is(v, -0);

/**
 * Encodes a logbook entry; `user` is the scope it was committed in (overrides `entry.user`). Compact
 * layout: two flag bytes, kind, times and clock as varints when whole (float64 otherwise), seq, then
 * id, tenant and session only when they differ from `home`. A turn entry stored under its id costs its
 * text plus about 24 bytes (header 6, flags, times 7, seq, role, provenance); a vector is kept only when the entry carries one
 * (demoted slot values, and turns when the logbook keeps turn vectors).
 */
export function encodeLogbook(e: LogbookEntry, user: string | undefined, format: KeyFormat, home?: LogbookHome): Buffer {
  const w = new Writer(HEADER + 64 + (e.key ? e.key.length * (format === 'int8' ? 1 : 4) : 0) + 4 * (e.keyText.length + e.value.length) + 64);
  const demoted = e.kind !== 'turn';
  const dates = e.dates ?? [];
  w.u8(
    (user !== undefined ? LB_USER : 0) | (e.successor !== undefined ? LB_SUCCESSOR : 0) | (e.speaker !== undefined ? LB_SPEAKER : 0) |
      (e.owner !== undefined ? LB_OWNER : 0) | (e.key ? LB_KEY : 0) | (dates.length > 0 ? LB_DATES : 0) | (e.role ? LB_ROLE : 0) | (demoted ? LB_DEMOTED : 0),
  );
  const atVar = wholeMs(e.atMs);
  const created = !Object.is(e.createdMs, e.atMs);
  const createdVar = wholeMs(e.createdMs);
  const clockVar = wholeMs(e.clock);
  const tenant = home?.tenant !== e.tenant;
  const session = home?.session !== e.session;
  const noId = home?.id === e.id;
  w.u8(
    (noId ? LB2_NO_ID : 0) | (tenant ? LB2_TENANT : 0) | (session ? LB2_SESSION : 0) | (atVar ? 0 : LB2_AT_F64) | (created ? LB2_CREATED : 0) |
      (created && !createdVar ? LB2_CREATED_F64 : 0) | (clockVar ? 0 : LB2_CLOCK_F64),
  );
  w.u8(LOGBOOK_KINDS.indexOf(e.kind));
  w.num(e.atMs, atVar);
  if (created) w.num(e.createdMs, createdVar);
  w.num(e.clock, clockVar);
  w.varint(e.seq);
  if (demoted) {
    w.f64(e.strength ?? 0);
    w.f64(e.halfLife ?? 0);
  }
  if (!noId) w.str(e.id);
  if (tenant) w.str(e.tenant);
  if (session) w.str(e.session);
  if (user !== undefined) w.str(user);
  w.str(e.keyText);
  w.str(e.value);
  if (e.successor !== undefined) w.str(e.successor);
  if (e.speaker !== undefined) w.str(e.speaker);
  if (e.owner !== undefined) w.str(e.owner);
  if (e.role) w.u8(ROLES.indexOf(e.role));
  w.varint(e.provenance.length);
  for (const p of e.provenance) w.str(p);
  if (dates.length > 0) {
    w.varint(dates.length);
    for (const d of dates) {
      w.str(d.text);
      w.str(d.day);
      w.u8(GRAINS.indexOf(d.grain));
    }
  }
  if (e.key) w.key(e.key, format);
  return w.finish(KIND_LOGBOOK_COMPACT);
}

/**
 * Decodes a logbook entry (compact, or the kind 3 layout written before), or a 0.1 archive item as
 * the demoted entry it now is. `home` is where it was stored: a compact entry leaves out a tenant and
 * session equal to it, so one read without `home` is corrupt.
 */
export function decodeLogbook(buf: Buffer, what: string, home?: LogbookHome): LogbookEntry {
  const r = open(buf, KIND_LOGBOOK, what, [KIND_LOGBOOK, KIND_DEMOTED_V1, KIND_LOGBOOK_COMPACT]);
  if (buf[1] === KIND_DEMOTED_V1) return decodeDemotedV1(r);
  const compact = buf[1] === KIND_LOGBOOK_COMPACT;
  const flags = r.u8();
  const flags2 = compact ? r.u8() : LB2_TENANT | LB2_SESSION | LB2_AT_F64 | LB2_CREATED | LB2_CREATED_F64 | LB2_CLOCK_F64;
  const kind = LOGBOOK_KINDS[r.u8()];
  if (kind === undefined) r.fail('unknown logbook kind');
  const atMs = flags2 & LB2_AT_F64 ? r.f64() : r.varint();
  const createdMs = flags2 & LB2_CREATED ? (flags2 & LB2_CREATED_F64 ? r.f64() : r.varint()) : atMs;
  const clock = flags2 & LB2_CLOCK_F64 ? r.f64() : r.varint();
  const seq = r.varint();
  const demoted = (flags & LB_DEMOTED) !== 0;
  const strength = demoted ? r.f64() : undefined;
  const halfLife = demoted ? r.f64() : undefined;
  if (flags2 & LB2_NO_ID && home?.id === undefined) r.fail('compact entry read without its id');
  const id = flags2 & LB2_NO_ID ? home!.id! : r.str();
  if ((!(flags2 & LB2_TENANT) || !(flags2 & LB2_SESSION)) && !home) r.fail('compact entry read without its session');
  const tenant = flags2 & LB2_TENANT ? r.str() : home!.tenant;
  const session = flags2 & LB2_SESSION ? r.str() : home!.session;
  const user = flags & LB_USER ? r.str() : undefined;
  const keyText = r.str();
  const value = r.str();
  const successor = flags & LB_SUCCESSOR ? r.str() : undefined;
  const speaker = flags & LB_SPEAKER ? r.str() : undefined;
  const owner = flags & LB_OWNER ? r.str() : undefined;
  let role: Role | undefined;
  if (flags & LB_ROLE) {
    role = ROLES[r.u8()];
    if (role === undefined) r.fail('unknown role');
  }
  const n = r.varint();
  const provenance: string[] = [];
  for (let i = 0; i < n; i++) provenance.push(r.str());
  const dates = readDates(r, flags);
  const key = flags & LB_KEY ? r.key() : undefined;
  r.end();
  const e: LogbookEntry = { id, kind: kind!, tenant, session, value, keyText, provenance, atMs, createdMs, clock, seq };
  return withOptional(e, { user, role, speaker, owner, dates, key, strength, halfLife, successor });
}

const ARCH_USER = 1;
const ARCH_SUCCESSOR = 2;

/** A 0.1 archive item: an evicted or superseded slot value. */
function decodeDemotedV1(r: Reader): LogbookEntry {
  const flags = r.u8();
  const reason = DEMOTION_REASONS[r.u8()];
  if (reason === undefined) r.fail('unknown demotion reason');
  const strength = r.f64();
  const halfLife = r.f64();
  const clock = r.f64();
  const createdMs = r.f64();
  const demotedMs = r.f64();
  const id = r.str();
  const tenant = r.str();
  const session = r.str();
  const user = flags & ARCH_USER ? r.str() : undefined;
  const keyText = r.str();
  const value = r.str();
  const successor = flags & ARCH_SUCCESSOR ? r.str() : undefined;
  const n = r.varint();
  const provenance: string[] = [];
  for (let i = 0; i < n; i++) provenance.push(r.str());
  const key = r.key();
  r.end();
  const e: LogbookEntry = { id, kind: reason!, tenant, session, key, keyText, value, provenance, strength, halfLife, clock, createdMs, atMs: demotedMs, seq: 0 };
  if (user !== undefined) e.user = user;
  if (successor !== undefined) e.successor = successor;
  return e;
}

// ------------------------------------------------------------------ logbook blocks (kind 5 records)
//
// A logbook slice keeps its entries in blocks: one list element holds up to BLOCK_RECORDS consecutive
// entries, so Redis pays its per-element cost once per block instead of per entry (a hash field of
// its own cost about 100 bytes more than a short turn's text). The commit script appends a record to the
// open block at the tail of the list, or starts a new block; it writes the record's time as a delta from
// the block's base, so the client never needs to know the block it lands in.
//
//   block  = 0x00 count(u8) base-ms(decimal ASCII) ':' record*
//   record = varint(L) zigzag-varint(atMs - base) body        (L = bytes after varint(L))
//   body   = check(u16, low half of the CRC32 of atMs as uvar + the rest of the body) flags(u8) flags2(u8)
//            kindrole(u8) seq(varint) [clock] [createdMs] [strength f64, halfLife f64] [id] [tenant]
//            [session] [user] [keyText] value [successor] [speaker] [owner] [provenance] [dates] [key]
// Left out when the reader can work them out: the id of a turn (a digest of session and turn id), a
// turn's provenance (`t<seq>`), a clock equal to seq, createdMs equal to atMs, the tenant, session and
// user of the slice, an empty keyText. The Lua side reads only the block header and the records'
// lengths and times (retention); it never looks inside a body.

/** First byte of a block element; a 0.2 log element (`atMs:id`) or a 0.1 bare id never starts with it. */
export const BLOCK_MARK = 0;
/** First byte of a sealed block: the same records, bodies compressed (see sealBlock). */
export const SEALED_MARK = 1;
/** Records per block, and the size past which the script starts a new block. */
export const BLOCK_RECORDS = 128;
export const BLOCK_BYTES = 4000;

const R_ID = 1;
const R_PROV = 2;
const R_CLOCK = 4;
const R_CLOCK_F64 = 8;
const R_CREATED = 16;
const R_CREATED_F64 = 32;
const R_TENANT = 64;
const R_SESSION = 128;
// In the kindrole byte: kind (bits 0-2), role + 1 (bits 3-4, 0 = none), then:
const KR_USER = 32;
const KR_NO_USER = 64;
const KR_KEYTEXT = 128;
// flags (first byte) reuses LB_* except LB_USER / LB_ROLE, which kindrole carries:
const R_AT_F64 = LB_USER;
/**
 * A plain turn (the common record): flags2 and kindrole are left out — kind turn, role user (or assistant
 * with R_PLAIN_ASSISTANT), id, provenance, clock, createdMs, tenant, session and user all worked out,
 * keyText empty. Only R_AT_F64, LB_SPEAKER and LB_DATES may join it.
 */
const R_PLAIN = LB_ROLE;
const R_PLAIN_ASSISTANT = LB_SUCCESSOR;

/** Where a slice is stored; a record leaves out what equals it. `derive` names the turn id digest. */
export interface RecordHome extends LogbookHome {
  user?: string;
}

/** The id a turn entry gets from its session and turn id (passed in, so the codec stays free of the middleware). */
export type TurnIdOf = (session: string, turn: string) => string;

function atBytes(atMs: number): Buffer {
  const w = new Writer(16);
  w.pos = 0;
  if (wholeMs(atMs)) w.uvar(atMs);
  else w.f64(atMs);
  return w.buf.subarray(0, w.pos);
}

function check16(atMs: number, rest: Uint8Array): number {
  return crc32(Buffer.concat([atBytes(atMs), rest])) & 0xffff;
}

/**
 * Encodes one logbook entry as a block record body. `at` is the whole-ms time the script files it
 * under (its delta from the block base; retention by age reads it); a time that is not a whole
 * non-negative ms is written in the body as well.
 */
export function encodeRecord(e: LogbookEntry, user: string | undefined, format: KeyFormat, home: RecordHome, turnId: TurnIdOf): { at: number; body: Buffer } {
  const w = new Writer(64 + (e.key ? e.key.length * (format === 'int8' ? 1 : 4) : 0) + 4 * (e.keyText.length + e.value.length + 16));
  w.pos = 0;
  w.u8(0);
  w.u8(0);
  const demoted = e.kind !== 'turn';
  const dates = e.dates ?? [];
  const atF64 = !wholeMs(e.atMs);
  const seqProv = e.provenance.length === 1 && e.provenance[0] === `t${e.seq}`;
  const idDerived = e.kind === 'turn' && e.provenance.length >= 1 && e.session === home.session && e.id === turnId(home.session, e.provenance[0]!);
  const clockSeq = Object.is(e.clock, e.seq);
  const clockVar = wholeMs(e.clock);
  const created = !Object.is(e.createdMs, e.atMs);
  const createdVar = wholeMs(e.createdMs);
  const plain = e.kind === 'turn' && (e.role === 'user' || e.role === 'assistant') && idDerived && seqProv && clockSeq && !created &&
    e.tenant === home.tenant && e.session === home.session && user === home.user && e.keyText === '' && e.successor === undefined && e.owner === undefined && !e.key;
  if (plain) {
    w.u8(R_PLAIN | (e.role === 'assistant' ? R_PLAIN_ASSISTANT : 0) | (atF64 ? R_AT_F64 : 0) | (e.speaker !== undefined ? LB_SPEAKER : 0) | (dates.length > 0 ? LB_DATES : 0));
    w.varint(e.seq);
    if (atF64) w.f64(e.atMs);
    w.str(e.value);
    if (e.speaker !== undefined) w.str(e.speaker);
    writeDates(w, dates);
    return sealRecord(w, e, atF64);
  }
  w.u8(
    (atF64 ? R_AT_F64 : 0) | (e.successor !== undefined ? LB_SUCCESSOR : 0) | (e.speaker !== undefined ? LB_SPEAKER : 0) |
      (e.owner !== undefined ? LB_OWNER : 0) | (e.key ? LB_KEY : 0) | (dates.length > 0 ? LB_DATES : 0) | (demoted ? LB_DEMOTED : 0),
  );
  w.u8(
    (idDerived ? 0 : R_ID) | (seqProv ? 0 : R_PROV) | (clockSeq ? 0 : R_CLOCK) | (!clockSeq && !clockVar ? R_CLOCK_F64 : 0) |
      (created ? R_CREATED : 0) | (created && !createdVar ? R_CREATED_F64 : 0) | (e.tenant !== home.tenant ? R_TENANT : 0) | (e.session !== home.session ? R_SESSION : 0),
  );
  const kind = LOGBOOK_KINDS.indexOf(e.kind);
  const role = e.role ? ROLES.indexOf(e.role) + 1 : 0;
  const userOther = user !== home.user;
  w.u8(kind | (role << 3) | (userOther && user !== undefined ? KR_USER : 0) | (userOther && user === undefined ? KR_NO_USER : 0) | (e.keyText !== '' ? KR_KEYTEXT : 0));
  w.varint(e.seq);
  if (atF64) w.f64(e.atMs);
  if (!clockSeq) w.num(e.clock, clockVar);
  if (created) w.num(e.createdMs, createdVar);
  if (demoted) {
    w.f64(e.strength ?? 0);
    w.f64(e.halfLife ?? 0);
  }
  if (!idDerived) w.str(e.id);
  if (e.tenant !== home.tenant) w.str(e.tenant);
  if (e.session !== home.session) w.str(e.session);
  if (userOther && user !== undefined) w.str(user);
  if (e.keyText !== '') w.str(e.keyText);
  w.str(e.value);
  if (e.successor !== undefined) w.str(e.successor);
  if (e.speaker !== undefined) w.str(e.speaker);
  if (e.owner !== undefined) w.str(e.owner);
  if (!seqProv) {
    w.varint(e.provenance.length);
    for (const p of e.provenance) w.str(p);
  }
  writeDates(w, dates);
  if (e.key) w.key(e.key, format);
  return sealRecord(w, e, atF64);
}

function writeDates(w: Writer, dates: readonly MentionedDate[]): void {
  if (dates.length === 0) return;
  w.varint(dates.length);
  for (const d of dates) {
    w.str(d.text);
    w.str(d.day);
    w.u8(GRAINS.indexOf(d.grain));
  }
}

function readDates(r: Reader, flags: number): MentionedDate[] {
  const dates: MentionedDate[] = [];
  if (flags & LB_DATES) {
    for (let i = 0, m = r.varint(); i < m; i++) {
      const text = r.str();
      const day = r.str();
      const grain = GRAINS[r.u8()];
      if (grain === undefined) r.fail('unknown date grain');
      dates.push({ text, day, grain });
    }
  }
  return dates;
}

function sealRecord(w: Writer, e: LogbookEntry, atF64: boolean): { at: number; body: Buffer } {
  const body = Buffer.from(w.buf.subarray(0, w.pos));
  const at = atF64 ? Math.max(0, Math.floor(Number.isFinite(e.atMs) ? e.atMs : 0)) : e.atMs;
  body.writeUInt16LE(check16(e.atMs, body.subarray(2)), 0);
  return { at, body };
}

/** One record of a block as stored: its bytes (prefix included), the time the script filed it under, its body. */
export interface RawRecord {
  raw: Buffer;
  at: number;
  body: Buffer;
}

/**
 * Splits a block element (open or sealed) into its live records (bounds-checked; a bad block is
 * corrupt). `header` and each record's `raw` are in the open layout, so joinBlock can rebuild an open
 * block from any of them.
 */
export function splitBlock(buf: Buffer, what: string): { base: number; header: Buffer; records: RawRecord[] } {
  if (buf.length >= 5 && buf[0] === SEALED_MARK) return splitSealed(buf, what);
  if (buf.length < 4 || buf[0] !== BLOCK_MARK) throw corrupt(what, 'not a logbook block');
  const count = buf[1]!;
  const colon = buf.indexOf(0x3a, 2);
  if (colon < 0) throw corrupt(what, 'block without a base time');
  const base = baseOf(buf, 2, colon, what);
  const r = new Reader(buf, what);
  r.pos = colon + 1;
  const records: RawRecord[] = [];
  while (r.pos < buf.length) {
    const start = r.pos;
    const len = r.varint();
    const bodyEnd = r.pos + len;
    if (bodyEnd > buf.length) r.fail('truncated record');
    const z = r.varint();
    if (r.pos > bodyEnd) r.fail('truncated record');
    records.push({ raw: buf.subarray(start, bodyEnd), at: base + unzig(z), body: buf.subarray(r.pos, bodyEnd) });
    r.pos = bodyEnd;
  }
  if (records.length !== count) throw corrupt(what, `block says ${count} records, holds ${records.length}`);
  return { base, header: buf.subarray(0, colon + 1), records };
}

const unzig = (z: number): number => (z % 2 === 0 ? z / 2 : -(z + 1) / 2);
const zig = (d: number): number => (d >= 0 ? 2 * d : -2 * d - 1);

function baseOf(buf: Buffer, from: number, colon: number, what: string): number {
  const text = buf.toString('latin1', from, colon);
  const base = Number(text);
  if (!/^\d+$/.test(text) || !Number.isSafeInteger(base)) throw corrupt(what, 'bad block base time');
  return base;
}

/**
 * The sealed form of a closed open block: 0x01, count, dead (0; retention moves it on), base, ':',
 * each record's time as a zigzag delta (the script reads them for retention by age), then the records
 * `varint(length) body` compressed together: SEAL_WITH_DICTIONARY, the dictionary's id, and raw deflate
 * with that preset dictionary (dictionary.ts). Blocks sealed before dictionaries hold the raw deflate
 * stream alone there and still read: a deflate stream never opens with SEAL_WITH_DICTIONARY's block
 * type. Short chat messages of one full block compress to about 0.4–0.6 of their size; the dictionary
 * matters most for a short session's only block (bench memory: 20 messages, 0.94 of their records
 * without it). Each body keeps its own check, so a damaged block still fails as corrupt.
 */
export function sealBlock(open: Buffer, what: string): Buffer {
  const { base, records } = splitBlock(open, what);
  const times = records.map((x) => uvarBytes(zig(x.at - base)));
  const bodies = Buffer.concat(records.flatMap((x) => [uvarBytes(x.body.length), x.body]));
  const packed = zlib.deflateRawSync(bodies, { dictionary: SEAL_DICTIONARIES.get(SEAL_DICTIONARY)! });
  return Buffer.concat([Buffer.from([SEALED_MARK, records.length, 0]), Buffer.from(`${base}:`, 'latin1'), ...times, Buffer.from([SEAL_WITH_DICTIONARY, SEAL_DICTIONARY]), packed]);
}

/**
 * First byte of a dictionary-sealed block's compressed part. Its bits 1–2 are deflate's reserved block
 * type 11 (RFC 1951, 3.2.3), so no deflate stream — a block sealed before dictionaries — starts so.
 */
const SEAL_WITH_DICTIONARY = 0x06;

/** The records' bytes of a sealed block (from its compressed part on), with or without a dictionary. */
function inflateSealed(packed: Buffer, what: string): Buffer {
  let dictionary: Buffer | undefined;
  if (packed.length > 0 && (packed[0]! & SEAL_WITH_DICTIONARY) === SEAL_WITH_DICTIONARY) {
    dictionary = SEAL_DICTIONARIES.get(packed[1] ?? -1);
    if (!dictionary) throw corrupt(what, `sealed with unknown dictionary ${packed[1]}`);
  }
  try {
    return dictionary ? zlib.inflateRawSync(packed.subarray(2), { dictionary }) : zlib.inflateRawSync(packed);
  } catch {
    throw corrupt(what, 'sealed block does not inflate');
  }
}

/**
 * The sealed form of a log's tail at rest (the writer seals it once the session has been idle): the
 * open block at the tail, merged with the block before it (`prev`, sealed or open) when their live
 * records fit one block, else alone. A short session's only block is thus compressed too, and pauses
 * do not leave a trail of small blocks. Dead records of `prev` are dropped (they were trimmed already,
 * so positions do not move). Null when `tail` is not an open block or sealing would not save bytes.
 */
export function sealTail(prev: Buffer | undefined, tail: Buffer, what: string): { block: Buffer; merged: boolean } | null {
  if (tail[0] !== BLOCK_MARK) return null;
  const last = splitBlock(tail, what).records;
  if (prev !== undefined && (prev[0] === BLOCK_MARK || prev[0] === SEALED_MARK)) {
    const joined = buildBlocks([...splitBlock(prev, what).records, ...last]);
    if (joined.length === 1) {
      const block = sealBlock(joined[0]!, what);
      return block.length < prev.length + tail.length ? { block, merged: true } : null;
    }
  }
  const block = sealBlock(tail, what);
  return block.length < tail.length ? { block, merged: false } : null;
}

function splitSealed(buf: Buffer, what: string): { base: number; header: Buffer; records: RawRecord[] } {
  const count = buf[1]!;
  const dead = buf[2]!;
  if (dead > count) throw corrupt(what, 'sealed block with more dead records than records');
  const colon = buf.indexOf(0x3a, 3);
  if (colon < 0) throw corrupt(what, 'block without a base time');
  const base = baseOf(buf, 3, colon, what);
  const r = new Reader(buf, what);
  r.pos = colon + 1;
  const times: number[] = [];
  for (let j = 0; j < count; j++) times.push(base + unzig(r.varint()));
  const bodies = inflateSealed(buf.subarray(r.pos), what);
  const b = new Reader(bodies, what);
  b.pos = 0;
  const records: RawRecord[] = [];
  for (let j = 0; j < count; j++) {
    const len = b.varint();
    if (b.pos + len > bodies.length) b.fail('truncated record');
    const body = bodies.subarray(b.pos, b.pos + len);
    b.pos += len;
    if (j < dead) continue;
    const z = uvarBytes(zig(times[j]! - base));
    records.push({ raw: Buffer.concat([uvarBytes(z.length + body.length), z, body]), at: times[j]!, body });
  }
  if (b.pos !== bodies.length) b.fail('trailing bytes');
  return { base, header: Buffer.concat([Buffer.from([BLOCK_MARK, count - dead]), Buffer.from(`${base}:`, 'latin1')]), records };
}

/** A block from a header and records kept (used to take records out; their deltas stay valid against the same base). */
export function joinBlock(header: Buffer, records: readonly RawRecord[]): Buffer {
  const h = Buffer.from(header);
  h[1] = records.length;
  return Buffer.concat([h, ...records.map((x) => x.raw)]);
}

/** Decodes one record body; `at` is the time it was filed under (the block base plus its delta). */
export function decodeRecord(body: Buffer, at: number, what: string, home: RecordHome, turnId: TurnIdOf): LogbookEntry {
  if (body.length < 5) throw corrupt(what, 'too short');
  const r = new Reader(body, what);
  r.pos = 2;
  const flags = r.u8();
  if (flags & R_PLAIN) return decodePlain(r, body, flags, at, home, turnId);
  const flags2 = r.u8();
  const kr = r.u8();
  const kind = LOGBOOK_KINDS[kr & 7];
  if (kind === undefined) r.fail('unknown logbook kind');
  const roleIx = (kr >> 3) & 3;
  const role = roleIx === 0 ? undefined : ROLES[roleIx - 1];
  if (roleIx !== 0 && role === undefined) r.fail('unknown role');
  const seq = r.varint();
  const atMs = flags & R_AT_F64 ? r.f64() : at;
  if (body.readUInt16LE(0) !== check16(atMs, body.subarray(2))) r.fail('checksum mismatch');
  const clock = flags2 & R_CLOCK ? (flags2 & R_CLOCK_F64 ? r.f64() : r.varint()) : seq;
  const createdMs = flags2 & R_CREATED ? (flags2 & R_CREATED_F64 ? r.f64() : r.varint()) : atMs;
  const demoted = (flags & LB_DEMOTED) !== 0;
  const strength = demoted ? r.f64() : undefined;
  const halfLife = demoted ? r.f64() : undefined;
  const explicitId = flags2 & R_ID ? r.str() : undefined;
  const tenant = flags2 & R_TENANT ? r.str() : home.tenant;
  const session = flags2 & R_SESSION ? r.str() : home.session;
  const user = kr & KR_USER ? r.str() : kr & KR_NO_USER ? undefined : home.user;
  const keyText = kr & KR_KEYTEXT ? r.str() : '';
  const value = r.str();
  const successor = flags & LB_SUCCESSOR ? r.str() : undefined;
  const speaker = flags & LB_SPEAKER ? r.str() : undefined;
  const owner = flags & LB_OWNER ? r.str() : undefined;
  let provenance: string[];
  if (flags2 & R_PROV) {
    provenance = [];
    for (let i = 0, n = r.varint(); i < n; i++) provenance.push(r.str());
  } else provenance = [`t${seq}`];
  const dates = readDates(r, flags);
  const key = flags & LB_KEY ? r.key() : undefined;
  r.end();
  if (explicitId === undefined && provenance.length === 0) r.fail('turn record without provenance');
  const id = explicitId ?? turnId(home.session, provenance[0]!);
  const e: LogbookEntry = { id, kind: kind!, tenant, session, value, keyText, provenance, atMs, createdMs, clock, seq };
  return withOptional(e, { user, role, speaker, owner, dates, key, strength, halfLife, successor });
}

function decodePlain(r: Reader, body: Buffer, flags: number, at: number, home: RecordHome, turnId: TurnIdOf): LogbookEntry {
  const seq = r.varint();
  const atMs = flags & R_AT_F64 ? r.f64() : at;
  if (body.readUInt16LE(0) !== check16(atMs, body.subarray(2))) r.fail('checksum mismatch');
  const value = r.str();
  const speaker = flags & LB_SPEAKER ? r.str() : undefined;
  const dates = readDates(r, flags);
  r.end();
  const turn = `t${seq}`;
  const e: LogbookEntry = {
    id: turnId(home.session, turn), kind: 'turn', tenant: home.tenant, session: home.session, value, keyText: '', provenance: [turn],
    atMs, createdMs: atMs, clock: seq, seq,
  };
  if (home.user !== undefined) e.user = home.user;
  e.role = flags & R_PLAIN_ASSISTANT ? 'assistant' : 'user';
  if (speaker !== undefined) e.speaker = speaker;
  if (dates.length > 0) e.dates = dates;
  return e;
}

/**
 * A block as the commit script would build it from these records, in order (for tests and tools: the
 * script is the writer in production). Starts a new block past BLOCK_RECORDS or BLOCK_BYTES.
 */
export function buildBlocks(records: ReadonlyArray<{ at: number; body: Buffer }>): Buffer[] {
  const out: Buffer[] = [];
  let cur: { base: number; parts: Buffer[]; n: number; size: number } | undefined;
  const flush = (): void => {
    if (cur) out.push(Buffer.concat([Buffer.from([BLOCK_MARK, cur.n]), Buffer.from(`${cur.base}:`, 'latin1'), ...cur.parts]));
  };
  for (const x of records) {
    if (cur && cur.n < BLOCK_RECORDS && cur.size < BLOCK_BYTES) {
      // appended to the open block
    } else {
      flush();
      cur = { base: x.at, parts: [], n: 0, size: 3 + String(x.at).length };
    }
    const d = x.at - cur!.base;
    const z = uvarBytes(d >= 0 ? 2 * d : -2 * d - 1);
    const rec = Buffer.concat([uvarBytes(z.length + x.body.length), z, x.body]);
    cur!.parts.push(rec);
    cur!.n++;
    cur!.size += rec.length;
  }
  flush();
  return out;
}

function uvarBytes(v: number): Buffer {
  const w = new Writer(16);
  w.pos = 0;
  w.uvar(v);
  return Buffer.from(w.buf.subarray(0, w.pos));
}

/** Sets on `e` the optional fields a record carried (absent ones stay absent, not `undefined`). */
function withOptional(
  e: LogbookEntry,
  o: Pick<LogbookEntry, 'user' | 'role' | 'speaker' | 'owner' | 'key' | 'strength' | 'halfLife' | 'successor'> & { dates: MentionedDate[] },
): LogbookEntry {
  if (o.user !== undefined) e.user = o.user;
  if (o.role) e.role = o.role;
  if (o.speaker !== undefined) e.speaker = o.speaker;
  if (o.owner !== undefined) e.owner = o.owner;
  if (o.dates.length > 0) e.dates = o.dates;
  if (o.key) e.key = o.key;
  if (o.strength !== undefined) e.strength = o.strength;
  if (o.halfLife !== undefined) e.halfLife = o.halfLife;
  if (o.successor !== undefined) e.successor = o.successor;
  return e;
}
