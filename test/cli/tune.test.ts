import { spawnSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { parseProbes, parseTranscript } from '../../cli/jsonl.js';
import { checkGrid, gridPoints, paretoFrontier, pickPoint, runTune, tuneSvg, withParam, type TunePoint } from '../../cli/tune.js';
import { TINY_PROBES, TINY_TRANSCRIPT } from './fixtures.js';

const pt = (capacity: number, recall: number, us: number): TunePoint => ({ settings: { capacity }, capacity, recall_at_k: recall, by_kind: {}, slots_per_session: capacity, read_us_p50: us, turns_per_s: 1 });

describe('paretoFrontier', () => {
  it('keeps the points no other point beats on both axes, by increasing x', () => {
    // x: slots; y: recall. (32, 0.7) is dominated by (16, 0.8); (128, 0.9) ties (64, 0.9) with more x.
    const xs = [16, 32, 64, 128, 8];
    const ys = [0.8, 0.7, 0.9, 0.9, 0.5];
    expect(paretoFrontier(xs, ys)).toEqual([4, 0, 2]);
  });
  it('keeps the higher recall of two points at the same x', () => {
    expect(paretoFrontier([10, 10, 20], [0.4, 0.6, 0.5])).toEqual([1]);
  });
});

describe('pickPoint', () => {
  it('takes the fewest slots in use within 0.01 of the best recall, then the lowest cost', () => {
    const pts = [pt(128, 0.91, 50), pt(64, 0.905, 40), pt(32, 0.85, 30), pt(64, 0.905, 35)];
    expect(pickPoint(pts)).toBe(3);
    expect(pickPoint(pts, 0.1)).toBe(2);
  });
});

describe('grids', () => {
  it('axes mode: the base point plus one change at a time; full mode: every combination', () => {
    const axes = { capacity: [16, 32], 'read.gamma': [2, 8] };
    expect(gridPoints({ mode: 'axes', axes })).toEqual([{}, { capacity: 16 }, { capacity: 32 }, { 'read.gamma': 2 }, { 'read.gamma': 8 }]);
    expect(gridPoints({ mode: 'full', axes })).toHaveLength(4);
  });
  it('sets dotted paths on a copy', () => {
    const base = { read: { k: 3 } };
    expect(withParam(base, 'read.gamma', 8)).toEqual({ read: { k: 3, gamma: 8 } });
    expect(base).toEqual({ read: { k: 3 } });
    expect(withParam(base, 'capacity', 16)).toEqual({ read: { k: 3 }, capacity: 16 });
  });
  it('rejects unknown paths and non-numeric values, naming them', () => {
    expect(() => checkGrid({ axes: { 'read.nope': [1] } })).toThrow(/unknown parameter "read.nope"/);
    expect(() => checkGrid({ axes: { capacity: ['a'] } })).toThrow(/grid.axes.capacity must be a non-empty array of numbers/);
    expect(() => checkGrid({ mode: 'all', axes: {} })).toThrow(/grid.mode/);
    expect(checkGrid({ axes: { capacity: [8] } })).toEqual({ mode: 'axes', axes: { capacity: [8] } });
  });
});

describe('runTune', () => {
  it('finds that more slots buy recall on the tiny transcript and plots every point', async () => {
    const turns = parseTranscript(TINY_TRANSCRIPT).items;
    const probes = parseProbes(TINY_PROBES).items;
    // Reading working memory alone, what leaves the slots is out of reach, so capacity shows in recall.
    const r = await runTune({ turns, probes, k: 3, config: { read: { tiers: 'slots' } }, grid: { mode: 'axes', axes: { capacity: [1, 2, 8, 64] } } });
    expect(r.points.map((p) => p.capacity)).toEqual([64, 1, 2, 8]);
    expect(r.points.map((p) => p.slots_per_session)).toEqual([2, 1, 1.5, 2]);
    const recall = r.points.map((p) => p.recall_at_k);
    // One slot keeps only the newest fact of s1; eight hold them all, as 64 do.
    expect(recall[1]!).toBeLessThan(recall[3]!);
    expect(recall[3]).toBe(recall[0]);
    expect(r.frontier.slots[0]).toBe(1);
    // 8 and 64 slots hold the same 2 slots per session at the same recall: either may be picked.
    expect(r.points[r.pick]!.slots_per_session).toBe(2);
    expect(r.advice).toMatch(/^pick (base|capacity=8) /);
    const svg = tuneSvg(r);
    expect(svg.startsWith('<svg xmlns="http://www.w3.org/2000/svg"')).toBe(true);
    expect(svg.match(/<circle /g)).toHaveLength(2 * r.points.length);
  });
});

describe('the command name', () => {
  const run = (...args: string[]) =>
    spawnSync(process.execPath, ['--import', 'tsx', 'cli/main.ts', ...args, 'no-such-transcript.jsonl', '--probes', 'no-such-probes.jsonl'], { encoding: 'utf8' });

  it('`tune` runs the grid; `sweep`, its 0.1 name, runs the same and says it was renamed', () => {
    const tune = run('tune');
    const old = run('sweep');
    // Both reach the grid runner, which reports the missing transcript with its code.
    expect(tune.stderr).toContain('tidemark tune: TIDEMARK_E_REPLAY_FORMAT');
    expect(old.stderr).toContain('tidemark tune: TIDEMARK_E_REPLAY_FORMAT');
    expect(tune.stderr).not.toContain('renamed');
    expect(old.stderr).toContain("`sweep` was renamed `tune`");
    expect([tune.status, old.status]).toEqual([2, 2]);
  });
});
