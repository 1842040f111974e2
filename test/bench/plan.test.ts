// The sizing arithmetic of `bench plan`, with expected values worked out by hand from the model its
// header states (sessions held = daily users × sessions per week / 7 × expiry days, each at full length).
import { spawnSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { bytesAt, parseMix, plan, type Measured, type PlanInputs } from '../../bench/plan.js';

const measured: Measured = {
  turns_per_s_per_process: { value: 500, from: 'load.json turns_per_s' },
  commands_per_turn: { value: 17, from: 'load.json redis_per_turn.commands' },
  net_bytes_per_turn: { value: 2000, from: 'load.json redis_per_turn' },
  bytes_by_length: [{ exchanges: 10, bytes: 13_000 }, { exchanges: 2000, bytes: 1_000_000 }, { exchanges: 5000, bytes: 2_500_000 }],
  bytes_source: 'memory.json',
};

const inputs: PlanInputs = {
  daily_users: 400_000, sessions_per_user_per_week: 6, expiry_days: 30, turns_per_session: [{ turns: 2000, share: 1 }],
  peak_turns_per_s: 1500, target_utilisation: 0.6, replicas: 1, headroom: 0.3, masters: 3,
};

describe('bench plan', () => {
  it('sizes the issue-style launch by hand-checked arithmetic', () => {
    const p = plan(inputs, measured);
    // 1500 / (500 × 0.6) = 5 processes exactly.
    expect(p.processes).toBe(5);
    // 400,000 × 6 / 7 × 30 = 10,285,714.29 sessions; × 1,000,000 B × 1.3 = 1.3371e13 B.
    expect(p.redis_bytes.sessions_held).toBe(10_285_714);
    expect(p.redis_bytes.bytes_per_session).toBe(1_000_000);
    expect(p.redis_bytes.total).toBe(Math.round(((400_000 * 6) / 7) * 30 * 1e6 * 1.3));
    expect(p.redis_bytes.per_master).toBe(Math.round((((400_000 * 6) / 7) * 30 * 1e6 * 1.3) / 3));
    expect(p.redis_bytes.total_with_replicas).toBe(Math.round(((400_000 * 6) / 7) * 30 * 1e6 * 1.3 * 2));
    expect(p.redis_ops_per_s).toEqual({ total: 25_500, per_master: 8_500 });
    expect(p.network_bytes_per_s).toBe(3_000_000);
    expect(p.inputs).toEqual(inputs);
    expect(Object.keys(p.from).sort()).toEqual(['network_bytes_per_s', 'processes', 'redis_bytes', 'redis_ops_per_s']);
    expect(p.from.redis_ops_per_s).toContain('load.json redis_per_turn.commands');
  });

  it('rounds processes up and never plans a fraction of one', () => {
    expect(plan({ ...inputs, peak_turns_per_s: 1501 }, measured).processes).toBe(6);
  });

  it('interpolates bytes per session between measured lengths and extends past the last by its slope', () => {
    // 13,000 + (1,000,000 − 13,000) × (1005 − 10) / (2000 − 10) = 13,000 + 987,000 / 2 = 506,500.
    expect(bytesAt(measured.bytes_by_length, 1005)).toBeCloseTo(506_500, 6);
    // Slope 2000 → 5000 is 500 B per exchange: 2,500,000 + 1000 × 500.
    expect(bytesAt(measured.bytes_by_length, 6000)).toBeCloseTo(3_000_000, 6);
    expect(bytesAt(measured.bytes_by_length, 2000)).toBe(1_000_000);
  });

  it('weights a turn mix by its shares', () => {
    const p = plan({ ...inputs, turns_per_session: parseMix('10:0.5,2000:0.5') }, measured);
    expect(p.redis_bytes.bytes_per_session).toBe(506_500);
  });

  it('refuses shares that do not sum to 1 and a utilisation outside (0, 1]', () => {
    expect(() => plan({ ...inputs, turns_per_session: parseMix('10:0.5,2000:0.4') }, measured)).toThrow(/sum to 1/);
    expect(() => plan({ ...inputs, target_utilisation: 0 }, measured)).toThrow(/utilisation/);
    expect(() => parseMix('10:x')).toThrow(/turns-mix/);
  });
});

describe('npm run bench -- NAME --help', () => {
  it("prints the benchmark's usage from the comment that opens its file, and runs nothing", () => {
    const r = spawnSync(process.execPath, ['--import', 'tsx', 'bench/run.ts', 'plan', '--help'], { encoding: 'utf8' });
    expect(r.status).toBe(0);
    expect(r.stdout.split('\n')[0]).toMatch(/^`npm run bench -- plan --daily-users N/);
    // The plan itself would have failed for want of its required inputs.
    expect(r.stderr).not.toContain('RangeError');
    expect(r.stdout).not.toMatch(/^\/\//m);
  });
});
