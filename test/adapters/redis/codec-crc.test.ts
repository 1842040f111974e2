// The codec's own CRC-32 table, used where Node has no zlib.crc32 (Node 20 before 20.15): here zlib is
// replaced by a copy without crc32, so the table path runs, and its values are checked against the
// real zlib.crc32 and the CRC-32 check value.

import { describe, expect, it, vi } from 'vitest';

const real = await vi.importActual<typeof import('node:zlib')>('node:zlib');
vi.mock('node:zlib', async (importOriginal) => ({ ...(await importOriginal<typeof import('node:zlib')>()), crc32: undefined }));

describe('crc32 without zlib.crc32', () => {
  it('gives the check value and the same sums as zlib on data of every length up to 300 bytes', async () => {
    const { crc32, decodeSlot, encodeSlot } = await import('../../../adapters/redis/codec.js');
    // "123456789" → 0xCBF43926: the check value of CRC-32/ISO-HDLC in the CRC RevEng catalogue (from memory).
    expect(crc32(Buffer.from('123456789'))).toBe(0xcbf43926);
    expect(crc32(new Uint8Array(0))).toBe(0);
    const native = (real as { crc32?: (d: Uint8Array) => number }).crc32;
    expect(native).toBeTypeOf('function');
    let seed = 7;
    for (let n = 1; n <= 300; n++) {
      const data = Uint8Array.from({ length: n }, () => (seed = (seed * 48271) % 2147483647) % 256);
      expect(crc32(data), `length ${n}`).toBe(native!(data) >>> 0);
    }
    // Payloads written and read with the table path round-trip.
    const key = new Float32Array([0.6, 0.8]);
    const rec = { id: 'r1', key, keyText: 'my fern', value: 'a maidenhair', provenance: ['t1'], strength: 1, halfLife: 20, stamp: 1, created: 1, createdMs: 0, updatedMs: 0, reads: 0, pinned: false };
    expect(decodeSlot(encodeSlot(rec, 'float32').payload, 'test').value).toBe('a maidenhair');
  });
});
