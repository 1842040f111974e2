// Results files: a unique name per run in the ignored runs/ folder, the committed folder written only
// with --save and never overwritten, what the run was measured on recorded; `bench compare` ratios,
// noise bands from repeats and its exit code; Redis INFO parsed and differenced on a real Redis.

import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { Redis } from 'ioredis';
import compareMain, { compare, figuresOf, noiseOf } from '../../bench/compare.js';
import { deltaOf, snapshot, snapshotOf } from '../../bench/lib/redis-info.js';
import { timeStamp, writeResult } from '../../bench/lib/results.js';
import { probeRedis } from '../adapters/redis/helpers.js';

// Each test writes into a folder of its own, so no test sees another's files in any order.
const dirs: string[] = [];
const freshDir = (): string => {
  const d = mkdtempSync(join(tmpdir(), 'tidemark-results-'));
  dirs.push(d);
  return d;
};
afterAll(() => {
  for (const d of dirs) rmSync(d, { recursive: true, force: true });
});

describe('results files', () => {
  const date = new Date('2026-03-04T05:06:07.089Z');

  it('names each run by UTC date-time and a short id, so two runs in the same second never share a file', () => {
    const dir = freshDir();
    const a = writeResult('load-redis', { turns_per_s: 1 }, '<svg/>', ['load'], { dir, date });
    const b = writeResult('load-redis', { turns_per_s: 2 }, '<svg/>', ['load'], { dir, date });
    expect(timeStamp(date)).toBe('2026-03-04T05-06-07Z');
    expect(a.json).toMatch(/runs\/load-redis-2026-03-04T05-06-07Z-[0-9a-f]{6}\.json$/);
    expect(b.json).not.toBe(a.json);
    expect(readdirSync(join(dir, 'runs')).filter((f) => f.endsWith('.json'))).toHaveLength(2);
  });

  it('writes to the committed folder only with --save, and records commit, versions, machine and load', () => {
    const dir = freshDir();
    const before = readdirSync(dir).filter((f) => f.endsWith('.json'));
    expect(before).toEqual([]);
    writeResult('memory-redis', { points: [] }, '<svg/>', ['memory'], { dir, date, redis: ['7.0.15'] });
    expect(readdirSync(dir).filter((f) => f.endsWith('.json'))).toEqual(before);
    const saved = writeResult('memory-redis', { points: [] }, '<svg/>', ['memory', '--save'], { dir, date, redis: ['7.0.15'] });
    const committed = readdirSync(dir).filter((f) => f.endsWith('.json'));
    expect(committed).toHaveLength(1);
    expect(saved.json.endsWith(`/${committed[0]}`)).toBe(true);
    const doc = JSON.parse(readFileSync(join(dir, committed[0]!), 'utf8'));
    expect(saved.json).not.toContain('/runs/');
    expect(doc.command).toBe('npm run bench -- memory --save');
    expect(doc.meta.git_commit).toMatch(/^[0-9a-f]{12}$/);
    expect(doc.meta.package_version).toBe(JSON.parse(readFileSync('package.json', 'utf8')).version);
    expect(doc.meta.node).toBe(process.version);
    expect(doc.meta.redis).toEqual(['7.0.15']);
    expect(doc.meta.machine.cpus).toBeGreaterThan(0);
    expect(doc.meta.load).toHaveLength(3);
  });
});

describe('bench compare', () => {
  const a = { name: 'load-redis', turns_per_s: 1000, turn_us: { p99: 50 }, errors: 0, runs: [{ turns_per_s: 950 }, { turns_per_s: 1000 }, { turns_per_s: 1050 }], meta: { git_commit: 'x' } };
  const b = { name: 'load-redis', turns_per_s: 1250, turn_us: { p99: 52 }, errors: 0, runs: [{ turns_per_s: 1200 }, { turns_per_s: 1250 }, { turns_per_s: 1300 }] };

  it('finds numeric figures, leaving out run metadata and long series', () => {
    expect([...figuresOf(a).keys()]).toEqual(['turns_per_s', 'turn_us.p99', 'errors']);
  });

  it('takes the noise band from the repeats: (max − min) / median', () => {
    expect(noiseOf(a, 'turns_per_s')).toBeCloseTo(0.1, 12);
    expect(noiseOf(b, 'turns_per_s')).toBeCloseTo(0.08, 12);
    expect(noiseOf(a, 'turn_us.p99')).toBeUndefined();
  });

  it('flags a ratio past 1 ± (threshold + noise) and skips figures that are 0 in A', () => {
    const rows = compare(a, b, 0.1);
    expect(rows.map((r) => [r.figure, r.ratio, r.noise, r.flagged])).toEqual([
      ['turns_per_s', 1.25, 0.1, true],
      ['turn_us.p99', 1.04, null, false],
    ]);
    // A wider threshold absorbs it: 0.25 <= 0.2 + 0.1.
    expect(compare(a, b, 0.2)[0]!.flagged).toBe(false);
  });

  it('exits non-zero past the threshold and zero within it', async () => {
    const dir = freshDir();
    const fa = join(dir, 'a.json');
    const fb = join(dir, 'b.json');
    writeFileSync(fa, JSON.stringify(a));
    writeFileSync(fb, JSON.stringify(b));
    const log = console.log;
    console.log = () => undefined;
    try {
      process.exitCode = 0;
      await compareMain([fa, fb, '--threshold', '0.1']);
      expect(process.exitCode).toBe(1);
      process.exitCode = 0;
      await compareMain([fa, fb, '--threshold', '0.2']);
      expect(process.exitCode).toBe(0);
    } finally {
      console.log = log;
      process.exitCode = 0;
    }
  });
});

describe('Redis INFO', () => {
  it('reads calls by command, CPU, bytes and memory from INFO text', () => {
    const text = '# Server\r\nredis_version:7.0.15\r\n# Stats\r\ntotal_net_input_bytes:100\r\ntotal_net_output_bytes:40\r\ntotal_commands_processed:7\r\n# CPU\r\nused_cpu_sys:1.500000\r\nused_cpu_user:0.250000\r\n# Memory\r\nused_memory:2048\r\n# Commandstats\r\ncmdstat_get:calls=3,usec=30,usec_per_call=10.00\r\ncmdstat_evalsha:calls=4,usec=80,usec_per_call=20.00\r\n';
    const s = snapshotOf('n1', text);
    expect(s).toEqual({ node: 'n1', version: '7.0.15', cpu_us: 1_750_000, net_in: 100, net_out: 40, commands: 7, used_memory: 2048, by_command: { get: 3, evalsha: 4 } });
    const later = { ...s, commands: 17, net_in: 300, by_command: { get: 13, evalsha: 4 } };
    const [d] = deltaOf([s], [later], 5);
    expect(d!.by_command).toEqual({ get: 10 });
    expect(d!.per_turn).toEqual({ commands: 2, cpu_us: 0, net_in_bytes: 40, net_out_bytes: 0 });
  });
});

const down = await probeRedis();
describe.skipIf(down !== null)(`Redis INFO on a real Redis${down ? ` (skipped: ${down})` : ''}`, () => {
  it('counts at least the commands this test sent', async () => {
    const c = new Redis(process.env.REDIS_URL ?? 'redis://127.0.0.1:6379');
    const key = `tidemark-test:info-${process.pid}-${Date.now()}`;
    try {
      const before = await snapshot(c);
      for (let i = 0; i < 25; i++) await c.set(key, String(i));
      const [d] = deltaOf(before, await snapshot(c), 25);
      // Other work may share this Redis: at least our 25 SETs, never fewer.
      expect(d!.by_command.set).toBeGreaterThanOrEqual(25);
      expect(d!.net_in_bytes).toBeGreaterThan(25 * key.length);
      expect(before[0]!.version).toMatch(/^\d+\.\d+\.\d+$/);
    } finally {
      await c.del(key);
      c.disconnect();
    }
  });
});
