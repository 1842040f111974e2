// The compact logbook entry layout: exact size of a typical turn entry (worked out by hand below), a
// round trip of arbitrary entries (fast-check, fixed seed), entries written in the kind 3 layout still
// decode, and a compact entry read without its session is refused as corrupt.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { decodeLogbook, encodeLogbook, KIND_LOGBOOK, KIND_LOGBOOK_COMPACT } from '../../../adapters/redis/codec.js';
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
