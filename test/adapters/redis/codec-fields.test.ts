// Every field of every stored layout survives a round trip: slot records and logbook entries with each
// optional field present or absent (owner, subject, reply, ambiguous-update links, successor, speaker,
// user, dates, keys dense and sparse, in both key formats), through single payloads and through open
// and sealed blocks (fast-check, fixed seeds printed below). And a slot payload that is short, foreign,
// damaged or padded is refused as corrupt, never decoded into a wrong memory.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import {
  buildBlocks,
  crc32,
  decodeLogbook,
  decodeRecord,
  decodeSlot,
  encodeLogbook,
  encodeRecord,
  encodeSlot,
  sealBlock,
  splitBlock,
  type KeyFormat,
} from '../../../adapters/redis/codec.js';
import { ErrorCodes } from '../../../src/errors.js';
import { turnEntryId } from '../../../src/middleware/write.js';
import type { LogbookEntry, SlotRecord } from '../../../src/types.js';

const SEEDS = { slots: 6161, logbook: 6262, blocks: 6363 };
const DIM = 48;

/** A unit vector: dense (every component) or sparse (a few components, as the hashing embedder gives). */
const unitKey = fc
  .tuple(fc.boolean(), fc.array(fc.integer({ min: -1000, max: 1000 }), { minLength: DIM, maxLength: DIM }), fc.uniqueArray(fc.nat(DIM - 1), { minLength: 1, maxLength: 5 }))
  .map(([sparse, dense, at]) => {
    const v = new Float32Array(DIM);
    if (sparse) for (const [i, j] of at.entries()) v[j] = i % 2 === 0 ? 1 + i : -(1 + i);
    else for (let j = 0; j < DIM; j++) v[j] = dense[j]!;
    if (v.every((x) => x === 0)) v[at[0]!] = 1;
    let s = 0;
    for (const x of v) s += x * x;
    return v.map((x) => x / Math.sqrt(s));
  });
const text = fc.string({ maxLength: 30 });
const time = fc.oneof(fc.integer({ min: 0, max: 2 ** 45 }), fc.double({ min: -1e6, max: 1e13, noNaN: true }));
const optional = <T>(a: fc.Arbitrary<T>): fc.Arbitrary<T | undefined> => fc.option(a, { nil: undefined });

const BASE_SLOT: SlotRecord = {
  id: 'r1', key: new Float32Array(DIM), keyText: 'my fern', value: 'a maidenhair', provenance: ['t1'], strength: 1, halfLife: 20, stamp: 1, created: 1, createdMs: 0, updatedMs: 0, reads: 0, pinned: false,
};
/** The key a reader gets back for `k` in `format` (quantised for int8), from the slot writer itself. */
const stored = (k: Float32Array, format: KeyFormat): Float32Array => encodeSlot({ ...BASE_SLOT, key: k }, format).key;

const slot: fc.Arbitrary<SlotRecord> = fc
  .record({
    id: fc.string({ minLength: 1, maxLength: 20 }),
    key: unitKey,
    keyText: text,
    value: fc.string({ maxLength: 120 }),
    provenance: fc.array(fc.string({ maxLength: 8 }), { maxLength: 4 }),
    strength: fc.double({ min: 0, max: 1, noNaN: true }),
    halfLife: fc.double({ min: 0.5, max: 20_000, noNaN: true }),
    stamp: time,
    created: time,
    createdMs: time,
    updatedMs: time,
    reads: fc.nat({ max: 1_000_000 }),
    pinned: fc.boolean(),
    previous: optional(fc.string({ maxLength: 20 })),
    owner: optional(text),
    reply: fc.boolean(),
    subject: optional(text),
    maybeReplaces: fc.array(fc.string({ maxLength: 12 }), { maxLength: 3 }),
  })
  .map(({ previous, owner, reply, subject, maybeReplaces, ...base }) => {
    const rec: SlotRecord = { ...base };
    if (previous !== undefined) rec.previous = previous;
    if (owner !== undefined) rec.owner = owner;
    if (reply) rec.reply = true;
    if (subject !== undefined) rec.subject = subject;
    if (maybeReplaces.length > 0) rec.maybeReplaces = maybeReplaces;
    return rec;
  });

const date = fc.record({
  text: fc.string({ maxLength: 15 }),
  day: fc.date({ min: new Date('1990-01-01'), max: new Date('2090-12-31'), noInvalidDate: true }).map((d) => d.toISOString().slice(0, 10)),
  grain: fc.constantFrom('day', 'week', 'month', 'year') as fc.Arbitrary<'day' | 'week' | 'month' | 'year'>,
});

const entry: fc.Arbitrary<LogbookEntry> = fc
  .record({
    id: fc.string({ minLength: 1, maxLength: 20 }),
    kind: fc.constantFrom('turn', 'superseded', 'capacity', 'decayed', 'expired') as fc.Arbitrary<LogbookEntry['kind']>,
    tenant: fc.constantFrom('nursery', 'workshop'),
    session: fc.constantFrom('chat-17', 'chat-18'),
    value: fc.string({ maxLength: 120 }),
    keyText: text,
    provenance: fc.array(fc.string({ maxLength: 8 }), { maxLength: 3 }),
    atMs: time,
    createdMs: time,
    clock: time,
    seq: fc.integer({ min: 0, max: 1_000_000 }),
    role: optional(fc.constantFrom('user', 'assistant', 'system') as fc.Arbitrary<NonNullable<LogbookEntry['role']>>),
    speaker: optional(text),
    owner: optional(text),
    successor: optional(fc.string({ maxLength: 20 })),
    dates: fc.array(date, { maxLength: 3 }),
    key: optional(unitKey),
    strength: fc.double({ min: 0, max: 1, noNaN: true }),
    halfLife: fc.double({ min: 0.5, max: 20_000, noNaN: true }),
  })
  .map(({ role, speaker, owner, successor, dates, key, strength, halfLife, ...base }) => {
    const e: LogbookEntry = { ...base };
    if (role !== undefined) e.role = role;
    if (speaker !== undefined) e.speaker = speaker;
    if (owner !== undefined) e.owner = owner;
    if (successor !== undefined) e.successor = successor;
    if (dates.length > 0) e.dates = dates;
    if (key !== undefined) e.key = key;
    if (e.kind !== 'turn') {
      e.strength = strength;
      e.halfLife = halfLife;
    }
    return e;
  });

/** What a reader gets back for `e` stored in `format`: the same entry with its key as stored. */
const expected = (e: LogbookEntry, format: KeyFormat, user?: string): LogbookEntry => {
  const out: LogbookEntry = { ...e };
  if (e.key) out.key = stored(e.key, format);
  if (user !== undefined) out.user = user;
  return out;
};

describe('slot records', () => {
  it(`round-trip every field, keys as stored in either format (seed ${SEEDS.slots})`, () => {
    console.log(`codec slot round-trip seed ${SEEDS.slots}`);
    fc.assert(
      fc.property(slot, fc.constantFrom<KeyFormat>('int8', 'float32'), (rec, format) => {
        const { payload, key } = encodeSlot(rec, format);
        expect(decodeSlot(payload, 'test')).toEqual({ ...rec, key });
        // float32 keeps the key bit for bit; int8 keeps its direction (the reader re-normalises).
        if (format === 'float32') expect(key).toEqual(rec.key);
        let dot = 0;
        for (let j = 0; j < DIM; j++) dot += key[j]! * rec.key[j]!;
        expect(dot).toBeGreaterThan(0.99);
      }),
      { seed: SEEDS.slots, numRuns: 300 },
    );
  });

  it('refuses a payload that is short, of another format or kind, damaged, or padded', () => {
    const rec: SlotRecord = { ...BASE_SLOT, key: stored(new Float32Array(DIM).fill(1 / Math.sqrt(DIM)), 'float32'), owner: 'Ilse', subject: 'sister', reply: true, maybeReplaces: ['r0'], previous: 'r0' };
    const { payload } = encodeSlot(rec, 'int8');
    const refused = (buf: Buffer, reason: RegExp): void => {
      let err: unknown;
      try {
        decodeSlot(buf, 'slot 3 of a test session');
      } catch (e) {
        err = e;
      }
      expect(err).toMatchObject({ code: ErrorCodes.STORE_CORRUPT, details: { what: 'slot 3 of a test session' } });
      expect((err as { details: { reason: string } }).details.reason).toMatch(reason);
    };
    refused(payload.subarray(0, 5), /^too short$/);
    /** The payload with its checksum made right again, so only the change itself is judged. */
    const resealed = (buf: Buffer): Buffer => {
      const out = Buffer.from(buf);
      out.writeUInt32LE(crc32(out.subarray(6)), 2);
      return out;
    };
    const version = Buffer.from(payload);
    version[0] = 3;
    refused(version, /^format version 3, expected 2$/);
    const kind = Buffer.from(payload);
    kind[1] = 4;
    refused(kind, /^kind 4, expected 1$/);
    for (let i = 2; i < payload.length; i++) {
      const bad = Buffer.from(payload);
      bad[i] ^= 0x01;
      refused(bad, /checksum mismatch/);
    }
    refused(resealed(Buffer.concat([payload, Buffer.from([0])])), /./);
    refused(resealed(payload.subarray(0, payload.length - 1)), /./);
    // Intact, it decodes to what was written.
    expect(decodeSlot(payload, 'test')).toEqual({ ...rec, key: encodeSlot(rec, 'int8').key });
  });

  it('refuses a sparse key whose index runs past the vector or repeats, and an unknown key format', () => {
    // Two non-zero components (at 3 and 10 of 48): written sparse, so the payload ends with
    // dim(48) format(2) scale(f32) count(2) delta(3) q delta(7) q.
    const key = new Float32Array(DIM);
    key[3] = 0.6;
    key[10] = -0.8;
    const { payload, key: kept } = encodeSlot({ ...BASE_SLOT, key }, 'int8');
    const n = payload.length;
    expect([...payload.subarray(n - 10, n - 9)]).toEqual([2]);
    expect([payload[n - 5], payload[n - 4], payload[n - 2]]).toEqual([2, 3, 7]);
    const edited = (at: number, byte: number): Buffer => {
      const out = Buffer.from(payload);
      out[at] = byte;
      out.writeUInt32LE(crc32(out.subarray(6)), 2);
      return out;
    };
    const reason = (buf: Buffer): string | undefined => {
      try {
        decodeSlot(buf, 'test');
        return undefined;
      } catch (e) {
        return (e as { details?: { reason?: string } }).details?.reason;
      }
    };
    expect(reason(payload)).toBeUndefined();
    // The second index moved to the last component (3 + 44 = 47) is still a key; one further is not.
    const last = decodeSlot(edited(n - 2, 44), 'test').key;
    expect(last[47]).toBeCloseTo(kept[10]!, 6);
    expect(last[10]).toBe(0);
    expect(reason(edited(n - 2, 45))).toMatch(/bad sparse key/);
    // A repeated index (delta 0) is damage, not a second value for the same component.
    expect(reason(edited(n - 2, 0))).toMatch(/bad sparse key/);
    // The first index may be 0.
    expect(decodeSlot(edited(n - 4, 0), 'test').key[0]).toBeCloseTo(kept[3]!, 6);
    expect(reason(edited(n - 10, 9))).toMatch(/unknown key format 9/);
    // A key of one component: its only index at 48, one past the end, is damage too.
    const one = new Float32Array(DIM);
    one[3] = 1;
    const single = Buffer.from(encodeSlot({ ...BASE_SLOT, key: one }, 'int8').payload);
    expect([single[single.length - 3], single[single.length - 2]]).toEqual([1, 3]);
    single[single.length - 2] = 48;
    single.writeUInt32LE(crc32(single.subarray(6)), 2);
    expect(reason(single)).toMatch(/bad sparse key/);
  });

  it('reads a slot written by 0.1 (format 1), which had no owner, subject, reply or links', () => {
    const rec: SlotRecord = { ...BASE_SLOT, key: stored(new Float32Array(DIM).fill(1 / Math.sqrt(DIM)), 'float32'), previous: 'r0', pinned: true };
    const { payload } = encodeSlot(rec, 'float32');
    const v1 = Buffer.from(payload);
    v1[0] = 1;
    v1.writeUInt32LE(crc32(v1.subarray(6)), 2);
    expect(decodeSlot(v1, 'test')).toEqual(rec);
  });
});

describe('crc32', () => {
  it('gives the CRC-32 check value and agrees with zlib on random data', async () => {
    // "123456789" → 0xCBF43926: the check value of CRC-32/ISO-HDLC in the CRC RevEng catalogue (from memory).
    expect(crc32(Buffer.from('123456789'))).toBe(0xcbf43926);
    const zlib = await import('node:zlib');
    const native = (zlib as { crc32?: (d: Uint8Array) => number }).crc32;
    let seed = 99;
    const rand = (): number => (seed = (seed * 48271) % 2147483647) % 256;
    for (const n of [0, 1, 7, 64, 1000]) {
      const data = Uint8Array.from({ length: n }, rand);
      const got = crc32(data);
      expect(got).toBeGreaterThanOrEqual(0);
      if (native) expect(got).toBe(native(data) >>> 0);
    }
  });
});

describe('logbook entries', () => {
  it(`round-trip every field as single payloads, with or without their home and user (seed ${SEEDS.logbook})`, () => {
    console.log(`codec logbook round-trip seed ${SEEDS.logbook}`);
    fc.assert(
      fc.property(entry, fc.constantFrom<KeyFormat>('int8', 'float32'), fc.boolean(), fc.constantFrom(undefined, 'u-1'), (e, format, same, user) => {
        const h = same ? { tenant: e.tenant, session: e.session, id: e.id } : { tenant: 'nursery', session: 'chat-17' };
        expect(decodeLogbook(encodeLogbook(e, user, format, h), 'test', h)).toEqual(expected(e, format, user));
      }),
      { seed: SEEDS.logbook, numRuns: 400 },
    );
  });

  it(`round-trip every field through open and sealed blocks (seed ${SEEDS.blocks})`, () => {
    console.log(`codec block round-trip seed ${SEEDS.blocks}`);
    fc.assert(
      fc.property(fc.array(entry, { minLength: 1, maxLength: 40 }), fc.constantFrom<KeyFormat>('int8', 'float32'), fc.constantFrom(undefined, 'u-1'), (list, format, user) => {
        const h = { tenant: 'nursery', session: 'chat-17', ...(user !== undefined ? { user } : {}) };
        const recs = list.map((e) => encodeRecord(e, user, format, h, turnEntryId));
        const want = list.map((e) => expected(e, format, user));
        const blocks = buildBlocks(recs);
        const back = (bs: Buffer[]): LogbookEntry[] => bs.flatMap((b) => splitBlock(b, 'test').records.map((r) => decodeRecord(r.body, r.at, 'test', h, turnEntryId)));
        expect(back(blocks)).toEqual(want);
        expect(back(blocks.map((b) => sealBlock(b, 'test')))).toEqual(want);
      }),
      { seed: SEEDS.blocks, numRuns: 120 },
    );
  });
});
