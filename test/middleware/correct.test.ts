// A user corrects memory: forget one fact or edit it, and the old value is gone from every tier —
// working memory, the logbook's earlier revisions and the turns that said it — against the
// in-process store and the real Redis (where a SCAN of every key under the test's prefix proves the
// old value's bytes are gone). Also: WriteReport.detail, and the per-turn history option of wrap.

import { inspect } from 'node:util';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Redis } from 'ioredis';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { redisSlotStore } from '../../adapters/redis/index.js';
import { createTidemark, type Tidemark, type TidemarkOptions } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import type { Store } from '../../src/store/store.js';
import { ErrorCodes } from '../../src/errors.js';
import { turnEntryId } from '../../src/middleware/write.js';
import { REDIS_URL, deletePrefix, newClient, probeRedis, scanKeys, uniquePrefix } from '../adapters/redis/helpers.js';

const down = await probeRedis();

/** Every byte stored under a prefix, whatever the key type. */
async function allBytes(client: Redis, prefix: string): Promise<Buffer> {
  const parts: Buffer[] = [];
  for (const key of await scanKeys(client, `${prefix}*`)) {
    const type = await client.type(key);
    if (type === 'hash') {
      for (const [field, value] of Object.entries(await client.hgetallBuffer(key))) parts.push(Buffer.from(field), value);
    }
    else if (type === 'string') parts.push((await client.getBuffer(key)) ?? Buffer.alloc(0));
    else if (type === 'list') parts.push(...(await client.lrangeBuffer(key, 0, -1)));
    else if (type === 'set') parts.push(...(await client.smembersBuffer(key)));
    else if (type === 'zset') parts.push(...(await client.zrangeBuffer(key, 0, -1)));
    else if (type === 'stream') parts.push(Buffer.from(JSON.stringify(await client.xrange(key, '-', '+'))));
    else throw new Error(`key ${key} has type ${type}, which this check does not read`);
  }
  return Buffer.concat(parts);
}

interface Backend {
  name: string;
  store(): Store;
  /** Everything the backend holds, as bytes (Redis: every key's dump; in-process: the store's objects, fully printed). */
  bytes(): Promise<Buffer>;
  cleanup(): Promise<void>;
}

function inProcess(): Backend {
  const store = new InProcessStore();
  return {
    name: 'in-process',
    store: () => store,
    bytes: async () => Buffer.from(inspect(store, { depth: Infinity, maxArrayLength: Infinity, maxStringLength: Infinity, breakLength: Infinity }), 'latin1'),
    cleanup: async () => {},
  };
}

function redisBackend(): Backend {
  const prefix = uniquePrefix('correct');
  let admin: Redis | null = null;
  return {
    name: 'redis',
    store: () => redisSlotStore({ redis: REDIS_URL, prefix }),
    bytes: async () => {
      if (!admin) {
        admin = newClient();
        await new Promise((ok) => admin!.once('ready', ok));
      }
      return allBytes(admin, prefix);
    },
    cleanup: async () => {
      if (!admin) {
        admin = newClient();
        await new Promise((ok) => admin!.once('ready', ok));
      }
      await deletePrefix(admin, prefix);
      admin.disconnect();
    },
  };
}

const backends: Array<[string, () => Backend, string | null]> = [
  ['in-process', inProcess, null],
  ['redis', redisBackend, down],
];

for (const [label, make, skip] of backends) {
  describe.skipIf(skip !== null)(`correcting memory (${label}${skip ? `, skipped: ${skip}` : ''})`, () => {
    let backend: Backend;
    const open: Tidemark[] = [];
    const tidemark = (options: TidemarkOptions = {}): Tidemark => {
      const tm = createTidemark({ store: backend.store(), hashKey: 'correct', ...options });
      open.push(tm);
      return tm;
    };
    beforeAll(() => {
      backend = make();
    });
    afterAll(async () => {
      for (const tm of open) await tm.close();
      await backend.cleanup();
    });

    /** Everything a user could still get back about a session: slots, logbook entries, a read. */
    async function visible(tm: Tidemark, session: string, question: string): Promise<string> {
      const view = await tm.inspect(session);
      const ctx = await tm.read({ session, text: question, history: true });
      return JSON.stringify({ slots: view.slots, logbook: view.logbook, items: ctx.items.map((x) => x.value), prompt: ctx.prompt });
    }

    it('forget by slot removes the value, its earlier revision and the turns that said them; other facts stay', async () => {
      const tm = tidemark();
      const s = `forget-slot-${label}`;
      await tm.write({ session: s, turn: 'a1', text: 'My bike is a green Corvane Audax.' });
      await tm.write({ session: s, turn: 'a2', text: 'My name is Dana.' });
      await tm.write({ session: s, turn: 'a3', text: 'Actually my bike is now a red Ferrow Roamer.' });
      const before = await tm.inspect(s);
      const bike = before.slots.find((x) => x.key === 'my bike')!;
      expect(bike.value).toBe('a red Ferrow Roamer');
      expect(before.logbook.some((e) => e.kind === 'superseded' && e.value === 'a green Corvane Audax')).toBe(true);

      const report = await tm.forget({ session: s, slot: bike.index });

      expect(report.slots).toEqual([bike.id]);
      expect(report.logbook.sort()).toEqual(
        [turnEntryId(s, 'a1'), turnEntryId(s, 'a3'), before.logbook.find((e) => e.kind === 'superseded')!.id].sort(),
      );
      const after = await visible(tm, s, 'Which bike do I ride? What was my old bike?');
      expect(after).not.toContain('Ferrow');
      expect(after).not.toContain('Corvane');
      const view = await tm.inspect(s);
      expect(view.slots.map((x) => [x.key, x.value])).toEqual([['my name', 'Dana']]);
      expect(view.logbook.map((e) => e.id)).toEqual([turnEntryId(s, 'a2')]);
      // Lower-cased and cut to a stem, so a term index or a stemmed copy would show too.
      const raw = (await backend.bytes()).toString('latin1').toLowerCase();
      expect(raw).toContain('dana'); // the check can see values
      expect(raw).not.toContain('ferrow');
      expect(raw).not.toContain('corvan');
    });

    it('forget by item id (what a read returned) works for a slot and for a logbook turn', async () => {
      const tm = tidemark();
      const s = `forget-item-${label}`;
      await tm.write({ session: s, turn: 'b1', text: 'My lock is a Brackwen D-lock.' });
      await tm.write({ session: s, turn: 'b2', text: 'I ride along the canal on Sundays.' });
      const ctx = await tm.read({ session: s, text: 'what lock do I have' });
      const lock = ctx.items.find((x) => x.source === 'slot' && x.value.includes('Brackwen'))!;
      expect((await tm.forget({ session: s, item: lock.id })).slots).toEqual([lock.id]);
      expect(await visible(tm, s, 'what lock do I have')).not.toContain('Brackwen');

      const canal = (await tm.read({ session: s, text: 'where do I ride on Sundays' })).items.find((x) => x.source === 'logbook' && x.kind === 'turn')!;
      expect(canal.id).toBe(turnEntryId(s, 'b2'));
      expect(await tm.forget({ session: s, item: canal.id })).toEqual({ slots: [], logbook: [canal.id] });
      expect((await tm.inspect(s)).logbook.map((e) => e.id)).not.toContain(canal.id);
    });

    it('edit replaces the value everywhere and records who edited it in the provenance', async () => {
      const tm = tidemark();
      const s = `edit-${label}`;
      await tm.write({ session: s, turn: 'c1', text: 'My bike is a green Corvane Audax.' });
      const slot = (await tm.inspect(s)).slots[0]!;
      const before = Date.now();
      const report = await tm.edit({ session: s, slot: slot.index, value: 'a blue Velloni Tourer', by: 'support-agent' });
      expect(report.slots).toEqual([slot.id]);
      expect(report.logbook).toEqual([turnEntryId(s, 'c1')]);
      expect(report.id).toMatch(/^[0-9a-f]{16}$/);
      expect(report.id).not.toBe(slot.id);
      const [, by, ms] = report.provenance![0]!.split(':');
      expect(by).toBe('support-agent');
      expect(Number(ms)).toBeGreaterThanOrEqual(before);

      const view = await tm.inspect(s);
      expect(view.slots.map((x) => ({ key: x.key, value: x.value, id: x.id, provenance: x.provenance }))).toEqual([
        { key: 'my bike', value: 'a blue Velloni Tourer', id: report.id, provenance: report.provenance },
      ]);
      expect(await visible(tm, s, 'Which bike do I ride?')).not.toContain('Corvane');
      const ctx = await tm.read({ session: s, text: 'Which bike do I ride?' });
      expect(ctx.items[0]).toMatchObject({ source: 'slot', id: report.id, value: 'a blue Velloni Tourer' });
      expect((await backend.bytes()).toString('latin1').toLowerCase()).not.toContain('corvan');
    });

    it('refuses unclear targets with coded input errors', async () => {
      const tm = tidemark();
      const s = `errors-${label}`;
      await tm.write({ session: s, text: 'My name is Dana.' });
      await expect(tm.forget({ session: s, slot: 7 })).rejects.toMatchObject({ code: ErrorCodes.INPUT_FIELD, message: 'slot 7 of this session is empty' });
      await expect(tm.forget({ session: s, item: 'no-such-id' })).rejects.toMatchObject({ code: ErrorCodes.INPUT_FIELD, details: { field: 'item' } });
      await expect(tm.forget({ session: s, slot: 0, item: 'x' } as never)).rejects.toMatchObject({ code: ErrorCodes.INPUT_FIELD });
      await expect(tm.forget({ session: s } as never)).rejects.toMatchObject({ code: ErrorCodes.INPUT_FIELD });
      await expect(tm.edit({ session: s, slot: 0, value: '  ' })).rejects.toMatchObject({ code: ErrorCodes.INPUT_TEXT, details: { field: 'value' } });
      await expect(tm.edit({ session: s, slot: 0, value: 'Dara', by: 'has space' })).rejects.toMatchObject({ code: ErrorCodes.INPUT_ID });
      expect((await tm.inspect(s)).slots.map((x) => x.value)).toEqual(['Dana']);
    });
  });
}

describe('forget and the in-process snapshot file', () => {
  it('rewrites the file at once, so the value is gone from disk before the next snapshot', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'tidemark-forget-'));
    const file = join(dir, 'memory.json');
    // snapshotIntervalMs 0: the file is written only on save() or close(), so only the forget can have written it.
    const store = new InProcessStore({ snapshotPath: file, snapshotIntervalMs: 0 });
    const tm = createTidemark({ store, hashKey: 'snap' });
    await tm.write({ session: 'snap', turn: 'g1', text: 'My bike is a green Corvane Audax.' });
    store.save();
    expect(readFileSync(file, 'utf8').toLowerCase()).toContain('corvan');
    await tm.forget({ session: 'snap', slot: 0 });
    expect(readFileSync(file, 'utf8').toLowerCase()).not.toContain('corvan');
    await tm.close();
    rmSync(dir, { recursive: true, force: true });
  });
});

describe('WriteReport.detail', () => {
  it('lists what was stored and overwritten by id and key, with no text unless asked', async () => {
    const tm = createTidemark({ hashKey: 'detail' });
    const first = await tm.write({ session: 'd1', turn: 'd1', text: 'My bike is a green Corvane Audax.' });
    expect(first.detail!.stored).toEqual([{ id: expect.stringMatching(/^[0-9a-f]{16}$/), slot: 0, key: 'my bike', outcome: 'allocated', turn: 'd1' }]);
    expect(first.detail!.overwritten).toEqual([]);
    expect(JSON.stringify(first)).not.toContain('Corvane');
    const firstId = first.detail!.stored[0]!.id;

    const second = await tm.write({ session: 'd1', turn: 'd2', text: 'Actually my bike is now a red Ferrow Roamer.' }, { text: true });
    const newId = second.detail!.stored[0]!.id;
    expect(second.detail!.stored).toEqual([{ id: newId, slot: 0, key: 'my bike', outcome: 'overwritten', turn: 'd2', value: 'a red Ferrow Roamer' }]);
    expect(second.detail!.overwritten).toEqual([{ id: firstId, by: newId, slot: 0, key: 'my bike' }]);
    expect(newId).not.toBe(firstId);
    await tm.close();
  });

  it('lists evicted slots as dropped, and leaves out a key that is the whole statement', async () => {
    const tm = createTidemark({ hashKey: 'detail', capacity: 1 });
    const a = await tm.write({ session: 'd2', turn: 'e1', text: 'My name is Dana.' });
    const b = await tm.write({ session: 'd2', turn: 'e2', text: 'My bike is a green Corvane Audax.' });
    expect(b.detail!.dropped).toEqual([{ kind: 'evicted', id: a.detail!.stored[0]!.id, slot: 0, key: 'my name', reason: 'capacity', logged: true }]);
    const c = await tm.write({ session: 'd3', turn: 'e3', text: 'The canal path floods every March near the old mill.' });
    for (const x of [...c.detail!.stored, ...c.detail!.dropped]) expect(x.key === '' || !'The canal path floods every March near the old mill.'.includes(x.key)).toBe(true);
    expect(JSON.stringify(c)).not.toContain('floods');
    await tm.close();
  });

  it('lists a candidate the gate turned away as dropped (key, turn, score), and values only with text: true', async () => {
    const tm = createTidemark({ hashKey: 'detail', write: { gateThreshold: 1 } });
    const r = await tm.write({ session: 'd4', turn: 'g1', text: 'My bike is a green Corvane Audax.' });
    expect(r.gatedOut).toBe(1);
    expect(r.detail).toEqual({ stored: [], overwritten: [], dropped: [{ kind: 'gated_out', key: 'my bike', turn: 'g1', gate: expect.any(Number) }] });
    expect((r.detail!.dropped[0] as { gate: number }).gate).toBeLessThan(1);
    expect(JSON.stringify(r)).not.toContain('Corvane');
    const t = await tm.write({ session: 'd4', turn: 'g2', text: 'My bike is a green Corvane Audax.' }, { text: true });
    expect(t.detail!.dropped).toEqual([{ kind: 'gated_out', key: 'my bike', turn: 'g2', gate: expect.any(Number), value: 'a green Corvane Audax' }]);
    await tm.close();

    const small = createTidemark({ hashKey: 'detail', capacity: 1 });
    const a = await small.write({ session: 'd5', turn: 'h1', text: 'My name is Dana.' });
    const b = await small.write({ session: 'd5', turn: 'h2', text: 'My bike is a green Corvane Audax.' }, { text: true });
    expect(b.detail!.dropped).toEqual([{ kind: 'evicted', id: a.detail!.stored[0]!.id, slot: 0, key: 'my name', reason: 'capacity', logged: true, value: 'Dana' }]);
    await small.close();
  });
});

describe('the per-turn history option of wrap', () => {
  it('ranks a replaced value by its own score when the turn asks about the past', async () => {
    const tm = createTidemark({ hashKey: 'history' });
    await tm.write({ session: 'h1', turn: 'f1', text: 'My address is 12 Marrowby Lane, Wrenhallow.' });
    await tm.write({ session: 'h1', turn: 'f2', text: 'Actually my address changed, it is now 3 Quillan Court, Fernleigh Cross.' });
    const seen: Array<{ value: string; kind: string }[]> = [];
    const reply = tm.wrap(async (_input, ctx) => {
      seen.push(ctx.memory.items.map((x) => ({ value: x.value, kind: x.kind })));
      return 'noted';
    });
    const question = { session: 'h1', text: 'What was my old address on Marrowby Lane?' };
    await reply(question);
    await reply(question, { history: true });
    await reply({ ...question, history: true });
    const rank = (items: { value: string; kind: string }[], kind: string): number => items.findIndex((x) => x.kind === kind);
    // Without the option the current value leads and the replaced one stays below it (or out).
    expect(seen[0]![0]).toEqual({ kind: 'slot', value: '3 Quillan Court, Fernleigh Cross' });
    expect(rank(seen[0]!, 'superseded') === -1 || rank(seen[0]!, 'superseded') > rank(seen[0]!, 'slot')).toBe(true);
    // With it (as a call option or on the input) the replaced value ranks by its own score: above.
    for (const items of [seen[1]!, seen[2]!]) {
      expect(rank(items, 'superseded')).toBeGreaterThanOrEqual(0);
      expect(rank(items, 'superseded')).toBeLessThan(rank(items, 'slot'));
    }
    await tm.close();
  });
});
