// The compact logbook entry layout: exact size of a typical turn entry (worked out by hand below), a
// round trip of arbitrary entries (fast-check, fixed seed), entries written in the kind 3 layout still
// decode, and a compact entry read without its session is refused as corrupt.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { buildBlocks, decodeLogbook, decodeRecord, encodeLogbook, encodeRecord, joinBlock, KIND_LOGBOOK, KIND_LOGBOOK_COMPACT, sealBlock, SEALED_MARK, splitBlock } from '../../../adapters/redis/codec.js';
import { turnEntryId } from '../../../src/middleware/write.js';
import type { LogbookEntry } from '../../../src/types.js';

const home = { tenant: 'nursery', session: 'chat-17' };
const turn: LogbookEntry = {
  id: 'T17cdf28cec4ed52f', kind: 'turn', tenant: 'nursery', session: 'chat-17', value: 'Do ferns like shade?', keyText: '',
  provenance: ['t3'], role: 'user', atMs: 1_796_235_602_130, createdMs: 1_796_235_602_130, clock: 3, seq: 3,
};

describe('compact logbook entries', () => {
  it('costs a turn its text plus 42 bytes (24 stored under its id), against 74 in the kind 3 layout', () => {
    const buf = encodeLogbook(turn, undefined, 'int8', home);
    expect(buf[1]).toBe(KIND_LOGBOOK_COMPACT);
    // header 6 + flags 2 + kind 1 + atMs varint 6 (41 bits) + clock 1 + seq 1 + id 1+17 + keyText 1
    // + value 1+20 + role 1 + provenance count 1 + 't3' 1+2 = 62 = 20 + 42.
    expect(buf.length).toBe(62);
    expect(decodeLogbook(buf, 'test', home)).toEqual(turn);
    // The same entry without a home writes tenant and session: 1+7 and 1+7 more.
    expect(encodeLogbook(turn, undefined, 'int8').length).toBe(62 + 16);
    // Stored under its id (the hash field), the id is left out too: 1+17 fewer.
    const stored = encodeLogbook(turn, undefined, 'int8', { ...home, id: turn.id });
    expect(stored.length).toBe(62 - 18);
    expect(decodeLogbook(stored, 'test', { ...home, id: turn.id })).toEqual(turn);
    expect(() => decodeLogbook(stored, 'test', home)).toThrow(/without its id/);
  });

  it('round-trips arbitrary entries, with and without the home they are stored under (seed 4242)', () => {
    console.log('codec round-trip seed 4242');
    const time = fc.oneof(fc.integer({ min: 0, max: 2 ** 45 }), fc.double({ min: -1e6, max: 1e13, noNaN: true }));
    const entry = fc.record({
      id: fc.string({ minLength: 1, maxLength: 20 }),
      kind: fc.constantFrom('turn', 'superseded', 'capacity', 'decayed', 'expired') as fc.Arbitrary<LogbookEntry['kind']>,
      tenant: fc.constantFrom('nursery', 'workshop'),
      session: fc.constantFrom('chat-17', 'chat-18'),
      value: fc.string({ maxLength: 200 }),
      keyText: fc.string({ maxLength: 20 }),
      provenance: fc.array(fc.string({ maxLength: 8 }), { maxLength: 3 }),
      atMs: time,
      createdMs: time,
      clock: time,
      seq: fc.integer({ min: 0, max: 1_000_000 }),
    });
    fc.assert(
      fc.property(entry, fc.boolean(), (e0, same) => {
        const e: LogbookEntry = { ...e0 };
        if (e.kind !== 'turn') {
          e.strength = 0.5;
          e.halfLife = 30;
        }
        const h = same ? { tenant: e.tenant, session: e.session, id: e.id } : home;
        expect(decodeLogbook(encodeLogbook(e, undefined, 'float32', h), 'test', h)).toEqual(e);
      }),
      { seed: 4242, numRuns: 300 },
    );
  });

  it('still decodes the kind 3 layout written before', () => {
    // A kind 3 payload built by hand: flags 64 (role), kind 0, atMs/createdMs/clock as float64, seq,
    // id, tenant, session, keyText, value, role, provenance.
    const body = Buffer.concat([
      Buffer.from([64, 0]), f64(turn.atMs), f64(turn.createdMs), f64(turn.clock), Buffer.from([3]),
      str(turn.id), str('nursery'), str('chat-17'), str(''), str(turn.value), Buffer.from([0, 1]), str('t3'),
    ]);
    const head = Buffer.alloc(6);
    head[0] = 2;
    head[1] = KIND_LOGBOOK;
    head.writeUInt32LE(crc(body), 2);
    expect(decodeLogbook(Buffer.concat([head, body]), 'test')).toEqual(turn);
    // header 6 + flags 1 + kind 1 + three float64 24 + seq 1 + id 18 + tenant 8 + session 8 + keyText 1
    // + value 21 + role 1 + provenance 4 = 94 = 20 + 74.
    expect(head.length + body.length).toBe(94);
  });

  it('refuses a compact entry read without its session', () => {
    const buf = encodeLogbook(turn, undefined, 'int8', home);
    expect(() => decodeLogbook(buf, 'test')).toThrow(/without its session/);
  });
});

function f64(v: number): Buffer {
  const b = Buffer.alloc(8);
  b.writeDoubleLE(v);
  return b;
}
function str(s: string): Buffer {
  const b = Buffer.from(s, 'utf8');
  return Buffer.concat([Buffer.from([b.length]), b]);
}
// CRC-32 (IEEE), the table method, written out here so the test does not trust the codec's own.
function crc(data: Uint8Array): number {
  let c = 0xffffffff;
  for (const byte of data) {
    c ^= byte;
    for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
  }
  return (c ^ 0xffffffff) >>> 0;
}

describe('logbook blocks (kind 5 records)', () => {
  const plain: LogbookEntry = { ...turn, id: turnEntryId('chat-17', 't3') };

  it('costs a plain turn its text plus 8 bytes in a block (2 + 6), against 42 as a compact entry', () => {
    const rec = encodeRecord(plain, undefined, 'int8', home, turnEntryId);
    // check 2 + flags 1 + seq 1 + value 1+20 = 25 = 20 + 5.
    expect(rec.body.length).toBe(25);
    expect(rec.at).toBe(plain.atMs);
    const [blk] = buildBlocks([rec]);
    // block header: mark 1 + count 1 + base 13 digits + ':' 1; record: length 1 + delta 1 + body.
    expect(blk!.length).toBe(16 + 2 + 25);
    const split = splitBlock(blk!, 'test');
    expect(split.records).toHaveLength(1);
    expect(decodeRecord(split.records[0]!.body, split.records[0]!.at, 'test', home, turnEntryId)).toEqual(plain);
    // The assistant's reply is plain too; a turn whose id is not the digest of its turn id writes the id.
    const reply = { ...plain, role: 'assistant' as const };
    expect(decodeRecord(encodeRecord(reply, undefined, 'int8', home, turnEntryId).body, plain.atMs, 'test', home, turnEntryId)).toEqual(reply);
    expect(encodeRecord(turn, undefined, 'int8', home, turnEntryId).body.length).toBe(25 + 2 + 18);
  });

  it('round-trips arbitrary entries through blocks, in order, with deltas either side of the base (seed 5151)', () => {
    console.log('block round-trip seed 5151');
    const time = fc.oneof(fc.integer({ min: 0, max: 2 ** 45 }), fc.double({ min: -1e6, max: 1e13, noNaN: true }));
    const entry = fc.record({
      id: fc.string({ minLength: 1, maxLength: 20 }),
      kind: fc.constantFrom('turn', 'superseded', 'capacity', 'decayed', 'expired') as fc.Arbitrary<LogbookEntry['kind']>,
      tenant: fc.constantFrom('nursery', 'workshop'),
      session: fc.constantFrom('chat-17', 'chat-18'),
      value: fc.string({ maxLength: 200 }),
      keyText: fc.string({ maxLength: 20 }),
      provenance: fc.array(fc.string({ maxLength: 8 }), { maxLength: 3 }),
      atMs: time,
      createdMs: time,
      clock: time,
      seq: fc.integer({ min: 0, max: 1_000_000 }),
      role: fc.constantFrom(undefined, 'user', 'assistant', 'system') as fc.Arbitrary<LogbookEntry['role']>,
      derived: fc.boolean(),
      speaker: fc.option(fc.string({ maxLength: 10 }), { nil: undefined }),
      user: fc.constantFrom(undefined, 'u-1', 'u-2'),
    });
    fc.assert(
      fc.property(fc.array(entry, { minLength: 1, maxLength: 150 }), fc.constantFrom(undefined, 'u-1'), (list, homeUser) => {
        const h = { ...home, ...(homeUser !== undefined ? { user: homeUser } : {}) };
        const entries = list.map(({ derived, role, speaker, user, ...e0 }) => {
          const e: LogbookEntry = { ...e0 };
          if (derived) {
            // A turn as the middleware writes it: every derivable field derivable.
            e.kind = 'turn';
            e.provenance = [`t${e.seq}`];
            e.id = turnEntryId(e.session, `t${e.seq}`);
            e.clock = e.seq;
            e.createdMs = e.atMs;
            e.keyText = '';
          }
          if (role) e.role = role;
          if (speaker !== undefined) e.speaker = speaker;
          if (user !== undefined) e.user = user;
          if (e.kind !== 'turn') {
            e.strength = 0.5;
            e.halfLife = 30;
          }
          return e;
        });
        const recs = entries.map((e) => encodeRecord(e, e.user, 'float32', h, turnEntryId));
        const back = buildBlocks(recs).flatMap((b) => splitBlock(b, 'test').records.map((r) => decodeRecord(r.body, r.at, 'test', h, turnEntryId)));
        expect(back).toEqual(entries);
      }),
      { seed: 5151, numRuns: 150 },
    );
  });

  it('a changed byte anywhere in a record body, or a wrong time, is corrupt', () => {
    const rec = encodeRecord(plain, undefined, 'int8', home, turnEntryId);
    for (let i = 0; i < rec.body.length; i++) {
      const bad = Buffer.from(rec.body);
      bad[i] ^= 0x10;
      expect(() => decodeRecord(bad, plain.atMs, 'test', home, turnEntryId), `byte ${i}`).toThrow();
    }
    expect(() => decodeRecord(rec.body, plain.atMs + 1, 'test', home, turnEntryId)).toThrow(/checksum/);
    const [blk] = buildBlocks([rec, rec]);
    expect(() => splitBlock(blk!.subarray(0, blk!.length - 1), 'test')).toThrow(/truncated/);
    const wrongCount = Buffer.from(blk!);
    wrongCount[1] = 3;
    expect(() => splitBlock(wrongCount, 'test')).toThrow(/says 3 records/);
  });

  it('joinBlock keeps the records chosen, their times unchanged against the same base', () => {
    const recs = [0, 1500, -20, 90_000].map((d, i) => encodeRecord({ ...plain, seq: i + 1, clock: i + 1, provenance: [`t${i + 1}`], id: turnEntryId('chat-17', `t${i + 1}`), atMs: plain.atMs + d, createdMs: plain.atMs + d }, undefined, 'int8', home, turnEntryId));
    const [blk] = buildBlocks(recs);
    const split = splitBlock(blk!, 'test');
    const kept = joinBlock(split.header, [split.records[1]!, split.records[3]!]);
    expect(splitBlock(kept, 'test').records.map((r) => decodeRecord(r.body, r.at, 'test', home, turnEntryId).seq)).toEqual([2, 4]);
    expect(splitBlock(kept, 'test').records.map((r) => r.at)).toEqual([plain.atMs + 1500, plain.atMs + 90_000]);
  });
});

describe('int8 keys with few non-zero components', () => {
  it('are written sparse (index delta, value) when shorter, and decode to exactly the dense int8 vector', () => {
    const dim = 384;
    const sparse = new Float32Array(dim);
    for (let i = 0; i < 30; i++) sparse[(i * 97) % dim] = ((i % 7) - 3 || 1) / 10;
    let n = 0;
    for (const x of sparse) n += x * x;
    for (let j = 0; j < dim; j++) sparse[j] = sparse[j]! / Math.sqrt(n);
    const entry: LogbookEntry = { ...turn, kind: 'capacity', key: sparse, strength: 0.4, halfLife: 30 };
    const small = encodeLogbook(entry, undefined, 'int8', home);
    const back = decodeLogbook(small, 'test', home).key!;
    // Every component within the int8 error of the original, and the zeros exactly zero.
    for (let j = 0; j < dim; j++) {
      expect(Math.abs(back[j]! - sparse[j]!)).toBeLessThan(0.005);
      if (sparse[j] === 0) expect(back[j]).toBe(0);
    }
    // 30 pairs: index deltas (97 apart, or wrapping, one byte or two) and values, against 384 bytes dense.
    const dense = encodeLogbook({ ...entry, key: Float32Array.from({ length: dim }, (_, j) => (j % 2 ? 1 : -1) / Math.sqrt(dim)) }, undefined, 'int8', home);
    expect(dense.length - small.length).toBeGreaterThan(384 - 100);
    // A record written with a dense key still decodes (the reader takes both).
    expect(decodeLogbook(dense, 'test', home).key!.length).toBe(dim);
  });
});

describe('sealed blocks', () => {
  it('hold the same records compressed; dead records are skipped; damage is corrupt', () => {
    const recs = Array.from({ length: 64 }, (_, i) =>
      encodeRecord({ ...turn, id: turnEntryId('chat-17', `t${i + 1}`), provenance: [`t${i + 1}`], seq: i + 1, clock: i + 1, value: `Do ferns like shade in pot ${i}?`, atMs: turn.atMs + i * 700, createdMs: turn.atMs + i * 700 }, undefined, 'int8', home, turnEntryId),
    );
    const [open] = buildBlocks(recs);
    const sealed = sealBlock(open!, 'test');
    expect(sealed[0]).toBe(SEALED_MARK);
    expect(sealed.length).toBeLessThan(open!.length * 0.6);
    const a = splitBlock(open!, 'test');
    const b = splitBlock(sealed, 'test');
    expect(b.records.map((r) => [r.at, r.raw.toString('hex')])).toEqual(a.records.map((r) => [r.at, r.raw.toString('hex')]));
    // The script trims a sealed block by moving its dead count (byte 2): readers skip those records.
    const trimmed = Buffer.from(sealed);
    trimmed[2] = 10;
    expect(splitBlock(trimmed, 'test').records.map((r) => decodeRecord(r.body, r.at, 'test', home, turnEntryId).seq)).toEqual(Array.from({ length: a.records.length - 10 }, (_, i) => i + 11));
    // An open block rebuilt from a sealed one's records (deleteLogbook) is the open layout again.
    const rebuilt = joinBlock(b.header, b.records.slice(1));
    expect(splitBlock(rebuilt, 'test').records.map((r) => r.raw.toString('hex'))).toEqual(a.records.slice(1).map((r) => r.raw.toString('hex')));
    const damaged = Buffer.from(sealed);
    damaged[damaged.length - 5] ^= 0xff;
    expect(() => splitBlock(damaged, 'test').records.map((r) => decodeRecord(r.body, r.at, 'test', home, turnEntryId))).toThrow();
  });
});
