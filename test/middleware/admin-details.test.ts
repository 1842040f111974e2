// Pin, inspect, migrate and erase in their details: an invalid id is refused naming its field, a
// store failure names the step that failed, an erase of one session does not wait for another's
// write, and migrate rewrites every slot index of the session once.

import { describe, expect, it } from 'vitest';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { InProcessStore } from '../../src/store/in-process.js';
import type { CommitRequest } from '../../src/store/store.js';
import { ControlledStore, gate } from './helpers.js';

const BAD = 'not an id!';

describe('ids', () => {
  it('an invalid tenant, session or user is refused naming its field', async () => {
    const tm = createTidemark({ store: new InProcessStore() });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    const refused = async (p: Promise<unknown>): Promise<string> => (await p.then(() => '', (e: Error) => e.message)).split(' ')[0]!;
    expect(await refused(tm.pin(BAD, 0))).toBe('session');
    expect(await refused(tm.pin('s', 0, true, BAD))).toBe('tenant');
    expect(await refused(tm.inspect(BAD))).toBe('session');
    expect(await refused(tm.inspect('s', BAD))).toBe('tenant');
    expect(await refused(tm.inspect('s', 'default', { user: BAD }))).toBe('user');
    expect(await refused(tm.migrate(BAD))).toBe('session');
    expect(await refused(tm.migrate('s', BAD))).toBe('tenant');
    await tm.close();
  });
});

/** An in-process store whose named steps throw a plain error. */
class FailingStore extends InProcessStore {
  fail = new Set<'load' | 'listLogbook' | 'readEvents' | 'commit'>();
  private check(step: 'load' | 'listLogbook' | 'readEvents' | 'commit'): void {
    if (this.fail.has(step)) throw new Error('disk gone');
  }
  override async load(...a: Parameters<InProcessStore['load']>) { this.check('load'); return super.load(...a); }
  override async listLogbook(...a: Parameters<InProcessStore['listLogbook']>) { this.check('listLogbook'); return super.listLogbook(...a); }
  override async readEvents(...a: Parameters<InProcessStore['readEvents']>) { this.check('readEvents'); return super.readEvents(...a); }
  override async commit(...a: Parameters<InProcessStore['commit']>) { this.check('commit'); return super.commit(...a); }
}

describe('store failures', () => {
  it('name the step that failed', async () => {
    const store = new FailingStore();
    const tm = createTidemark({ store });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    const message = (p: Promise<unknown>): Promise<string> => p.then(() => 'resolved', (e: Error) => e.message);
    const cases: Array<[FailingStore['fail'] extends Set<infer K> ? K : never, () => Promise<unknown>, string]> = [
      ['load', () => tm.inspect('s'), 'load'],
      ['listLogbook', () => tm.inspect('s'), 'logbook'],
      ['readEvents', () => tm.inspect('s'), 'events'],
      ['load', () => tm.pin('s', 0), 'load'],
      ['commit', () => tm.pin('s', 0), 'commit'],
      ['load', () => tm.migrate('s'), 'load'],
    ];
    for (const [step, call, named] of cases) {
      store.fail = new Set([step]);
      expect([step, await message(call())]).toEqual([step, `store memory failed (${named}): disk gone`]);
    }
    store.fail = new Set();
    await tm.close();
  });
});

describe('erase', () => {
  it('of one session does not wait for a write in flight of another', async () => {
    const store = new ControlledStore();
    const tm = createTidemark({ store });
    await tm.write({ session: 'a', text: 'My name is Dana.' });
    const held = gate();
    store.commitGate = (session) => (session === 'b' ? held.promise : undefined);
    const other = tm.write({ session: 'b', text: 'My bike is red.' });
    // Opened only after the erase is done: an erase that waited for b would never finish.
    await tm.erase({ session: 'a' });
    held.open();
    await other;
    expect((await tm.inspect('a')).slots).toEqual([]);
    expect((await tm.inspect('b')).slots).toHaveLength(1);
    await tm.close();
  });
});

describe('migrate', () => {
  it('commits one op for every slot index, the used ones re-keyed and the rest cleared', async () => {
    const commits: CommitRequest[] = [];
    class Recording extends InProcessStore {
      override async commit(...a: Parameters<InProcessStore['commit']>) {
        commits.push(a[1]);
        return super.commit(...a);
      }
    }
    const tm = createTidemark({ store: new Recording(), capacity: 4 });
    await tm.write({ session: 's', text: 'My name is Dana.' });
    await tm.write({ session: 's', text: 'My bike is a green Corvane Tourer.' });
    commits.length = 0;
    expect(await tm.migrate('s')).toEqual({ slots: 2 });
    expect(commits).toHaveLength(1);
    const ops = commits[0]!.ops;
    expect(ops.map((o) => [o.index, o.slot === null])).toEqual([[0, false], [1, false], [2, true], [3, true]]);
    await tm.close();
  });
});
