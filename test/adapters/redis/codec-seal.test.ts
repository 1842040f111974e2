// Sealed logbook blocks with the preset dictionary, and the seal of a log's tail at rest (sealTail):
// round trips of arbitrary records (fast-check), a block sealed before dictionaries still decodes, the
// dictionary is pinned (it is part of the stored format), and a merge keeps every live record in order.

import * as zlib from 'node:zlib';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { buildBlocks, crc32, decodeRecord, encodeRecord, sealBlock, SEALED_MARK, sealTail, splitBlock, type RawRecord } from '../../../adapters/redis/codec.js';
import { SEAL_DICTIONARIES, SEAL_DICTIONARY } from '../../../adapters/redis/dictionary.js';
import { turnEntryId } from '../../../src/middleware/write.js';
import type { LogbookEntry } from '../../../src/types.js';

const home = { tenant: 't', session: 's1' };
const T0 = 1_764_700_000_000;

/** A plain turn as the middleware writes it (the record a block holds for most entries). */
function turn(seq: number, value: string, atMs = T0 + 15_000 * seq): LogbookEntry {
  return {
    id: turnEntryId(home.session, `t${seq}`), kind: 'turn', tenant: home.tenant, session: home.session, value, keyText: '',
    provenance: [`t${seq}`], atMs, createdMs: atMs, clock: seq, seq, role: seq % 2 ? 'user' : 'assistant',
  };
}

const recordOf = (e: LogbookEntry): { at: number; body: Buffer } => encodeRecord(e, undefined, 'int8', home, turnEntryId);
/** A block's live records as [time, body] (what readers decode; a merge moves the base, so not the deltas). */
const live = (block: Buffer): Array<[number, string]> => splitBlock(block, 'test').records.map((r: RawRecord) => [r.at, r.body.toString('hex')]);

const records = fc.array(
  fc.record({ value: fc.string({ maxLength: 30 }), gap: fc.integer({ min: -5_000, max: 600_000 }) }),
  { minLength: 1, maxLength: 128 },
).map((list) => {
  let at = T0;
  return list.map(({ value, gap }, i) => recordOf(turn(i + 1, value, (at = Math.max(0, at + gap)))));
});

describe('sealed blocks with a preset dictionary', () => {
  it('round-trip arbitrary records: same times, same bytes, in order', () => {
    fc.assert(
      fc.property(records, (recs) => {
        for (const open of buildBlocks(recs)) {
          const sealed = sealBlock(open, 'test');
          expect(sealed[0]).toBe(SEALED_MARK);
          expect(live(sealed)).toEqual(live(open));
        }
      }),
    );
  });

  it('a block sealed before dictionaries (raw deflate after the times) still decodes', () => {
    // Written by the 0.2 writer before this layout: four turns, sealed without a dictionary.
    const old = Buffer.from(
      'AQQAMTc2NDcwMDAwMDAwMDoAsOoB4NQDkL8F09QucmBUcU7MU/BUSMrPz1YoyUhVKM8vyi7OyC9QSMsvUggpTS1OSay0l/O76cQkGZlarAMTUkgsUTA0gKjWE54q6cDM516Umliio1CSkZiXXawomuzrxCIQmV+qkFiUqlCempOcn5uqBwA=',
      'base64',
    );
    const texts = ['Can I book the workshop for Tuesday?', 'Yes, Tuesday at 10 works.', 'Great, thanks!', 'You are welcome.'];
    const got = splitBlock(old, 'test').records.map((r) => decodeRecord(r.body, r.at, 'test', home, turnEntryId));
    expect(got).toEqual(texts.map((v, i) => turn(i + 1, v, T0 + 15_000 * i)));
    // The same records sealed now are the dictionary layout, shorter, and read the same.
    const now = sealBlock(buildBlocks(got.map(recordOf))[0]!, 'test');
    expect(now.length).toBeLessThan(old.length);
    expect(live(now)).toEqual(live(old));
    // At rest, an open tail after it is merged into it: the result is the dictionary layout, every record kept.
    const [tail] = buildBlocks([recordOf(turn(5, 'Can I bring it in on Monday instead?')), recordOf(turn(6, 'Yes, Monday works.'))]);
    const merged = sealTail(old, tail!, 'test');
    expect(merged).toMatchObject({ merged: true });
    expect(live(merged!.block)).toEqual([...live(old), ...live(tail!)]);
  });

  it('names its dictionary; an unknown one is corrupt, not guessed', () => {
    const [open] = buildBlocks([recordOf(turn(1, 'Is there anything else I can help you with?'))]);
    const sealed = sealBlock(open!, 'test');
    const at = sealed.indexOf(':') + 1 + 1; // base ':' then one record time (a zero delta)
    expect([sealed[at], sealed[at + 1]]).toEqual([0x06, SEAL_DICTIONARY]);
    const unknown = Buffer.from(sealed);
    unknown[at + 1] = 99;
    expect(() => splitBlock(unknown, 'test')).toThrow(/unknown dictionary 99/);
  });

  it('the dictionary is pinned: blocks in Redis were sealed with exactly these bytes', () => {
    const d = SEAL_DICTIONARIES.get(1)!;
    expect([d.length, crc32(d)]).toEqual([3353, 0xd7d242ab]);
  });

  it('a short session\'s block compresses better with the dictionary than without', () => {
    const texts = ['Hi, can I change my booking to Friday?', 'Sure, I can help with that. What time would you like?', 'At 2 pm, please.', 'Okay, I\'ve updated it. Is there anything else I can help you with?', 'No, that\'s all. Thanks!', 'You\'re welcome! Have a nice day.'];
    const [open] = buildBlocks(texts.map((v, i) => recordOf(turn(i + 1, v))));
    const withDictionary = sealBlock(open!, 'test');
    const times = withDictionary.indexOf(':') + 1 + texts.length;
    const bodies = Buffer.concat(splitBlock(open!, 'test').records.map((r) => Buffer.concat([Buffer.from([r.body.length]), r.body])));
    const without = times + zlib.deflateRawSync(bodies, { level: 9 }).length;
    expect(withDictionary.length).toBeLessThan(without - 40);
  });
});

describe('sealTail: the tail of a log at rest', () => {
  it('merges the open tail into the block before it when they fit one; every live record kept, in order', () => {
    fc.assert(
      fc.property(records, fc.nat(), fc.integer({ min: 0, max: 20 }), fc.boolean(), (recs, c, dead, prevSealed) => {
        fc.pre(recs.length >= 2);
        const cut = 1 + (c % (recs.length - 1));
        const [prev0, more] = buildBlocks(recs.slice(0, cut));
        const [tail, moreTail] = buildBlocks(recs.slice(cut));
        fc.pre(more === undefined && moreTail === undefined);
        let prev = prev0!;
        if (prevSealed) {
          // Retention moved the dead count on: those records are gone already and must not come back.
          prev = Buffer.from(sealBlock(prev0!, 'test'));
          prev[2] = Math.min(dead, cut);
        }
        const want = [...live(prev), ...live(tail!)];
        const form = sealTail(prev, tail!, 'test');
        // The log after the seal (as SEAL_TAIL leaves it): unchanged, the tail replaced, or both replaced.
        const after = form === null ? want : form.merged ? live(form.block) : [...live(prev), ...live(form.block)];
        expect(after).toEqual(want);
        expect(form === null || form.block[0] === SEALED_MARK).toBe(true);
        // Merged only when the live records fit one block, and only when that saves bytes.
        const fits = buildBlocks([...splitBlock(prev, 'test').records, ...splitBlock(tail!, 'test').records]).length === 1;
        expect(form?.merged === true && !(fits && form.block.length < prev.length + tail!.length)).toBe(false);
      }),
    );
  });

  it('seals a tail alone when the block before it is full, and leaves a tail that is sealed already', () => {
    const two = buildBlocks(Array.from({ length: 140 }, (_, i) => recordOf(turn(i + 1, `Could you tell me more about option ${i}?`))));
    expect(two).toHaveLength(2);
    const alone = sealTail(sealBlock(two[0]!, 'test'), two[1]!, 'test');
    expect(alone).toMatchObject({ merged: false });
    expect(alone!.block.length).toBeLessThan(two[1]!.length);
    expect(live(alone!.block)).toEqual(live(two[1]!));
    expect(sealTail(two[0]!, sealBlock(two[1]!, 'test'), 'test')).toBeNull();
  });

  it('merges a short session\'s second burst into its sealed first block: one block of all the turns', () => {
    const recs = Array.from({ length: 30 }, (_, i) => recordOf(turn(i + 1, `Thanks, that works for me at ${i} pm.`)));
    const first = sealBlock(buildBlocks(recs.slice(0, 20))[0]!, 'test');
    const [tail] = buildBlocks(recs.slice(20));
    const form = sealTail(first, tail!, 'test');
    expect(form).toMatchObject({ merged: true });
    expect(splitBlock(form!.block, 'test').records.map((r) => decodeRecord(r.body, r.at, 'test', home, turnEntryId).seq)).toEqual(Array.from({ length: 30 }, (_, i) => i + 1));
  });
});
