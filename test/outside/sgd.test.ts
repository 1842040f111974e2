// Outside check on open data: Schema-Guided Dialogue (Rastogi et al. 2020, "Towards Scalable
// Multi-domain Conversational Agents: The Schema-Guided Dialogue Dataset", DSTC8 test split, files
// in ../shared/data/sgd). For every slot the user changed, the probe is the schema's description of
// the slot and the expected turn is the user turn that stated the final value: an update must
// outrank what it replaced. Beside it, in the same run, plain BM25 and `flat` over every turn of both
// roles, which find the turns about the slot but cannot tell the later value from the earlier one.

import { resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { runReplay } from '../../cli/replay.js';
import { finalValueTurn, loadSgd, sgdPresent } from './sgd.js';

const repoRoot = resolve(fileURLToPath(new URL('../..', import.meta.url)));
const dir = resolve(repoRoot, '../shared/data/sgd');
const present = sgdPresent(dir);
const ci = process.env.CI === 'true';

/**
 * Margins on latest-value@3 over the 64 probes: 0.3 over plain BM25 (19 probes; measured 0.70 against
 * 0.27) and 0.2 over `flat` (13 probes; measured against 0.31). The replay is deterministic, so the
 * margin guards against a change that loses the update's precedence, not against noise.
 */
const MARGIN_BM25 = 0.3;
const MARGIN_FLAT = 0.2;

describe('finalValueTurn', () => {
  it('is the first turn of the last run after a different value', () => {
    expect(finalValueTurn([{ turn: 't1', value: 'a' }, { turn: 't3', value: 'b' }])).toBe('t3');
    expect(finalValueTurn([{ turn: 't1', value: 'a' }, { turn: 't3', value: 'b' }, { turn: 't5', value: 'a' }])).toBe('t5');
    expect(finalValueTurn([{ turn: 't1', value: 'a' }])).toBeNull();
  });
});

describe('SGD: latest value after an update', () => {
  // Environment-dependent: under CI (CI=true) the outside check must run, so a missing dataset is a
  // failure there; elsewhere a missing ../shared only skips the check, with the reason printed.
  it.runIf(ci)('the dataset is present under CI', () => {
    expect(present, `CI=true but the SGD files are missing at ${dir}`).toBe(true);
  });
  if (!present && !ci) console.warn(`SGD check skipped: ../shared/data/sgd not found beside the repo (${dir}); see ../shared/data/sgd/SOURCE.md`);

  // Skipped only outside CI when ../shared is absent (reason printed above).
  it.skipIf(!present)('tidemark beats plain BM25 and flat on latest-value@3, both keeping every turn', async () => {
    const { turns, probes, dialogues } = loadSgd(dir);
    expect(dialogues).toBe(384);
    // 64 slots in these files are changed by a user INFORM with a different value (deterministic).
    expect(probes.length).toBe(64);
    const r = await runReplay({ turns, probes, k: 3, baselines: ['bm25', 'flat'] });
    const tm = r.summary.by_kind.latest!.recall_at_k;
    const bm25 = r.baselines.bm25!.by_kind.latest!.recall_at_k;
    const flat = r.baselines.flat!.by_kind.latest!.recall_at_k;
    console.log(
      `SGD latest-value@3 over ${r.summary.probes} probes, ${r.summary.turns} turns: tidemark ${tm.toFixed(3)}, bm25 ${bm25.toFixed(3)}, flat ${flat.toFixed(3)} ` +
        `(@1: ${r.summary.by_kind.latest!.recall_at_1.toFixed(3)} vs ${r.baselines.bm25!.by_kind.latest!.recall_at_1.toFixed(3)}); hit precision ${r.summary.hit_precision}`,
    );
    expect(tm - bm25).toBeGreaterThanOrEqual(MARGIN_BM25);
    expect(tm - flat).toBeGreaterThanOrEqual(MARGIN_FLAT);
    // Every turn of both roles is kept; the slots hold the updates.
    expect(r.summary.tiers.logbook.entries.turn).toBe(r.summary.turns);
    expect(r.summary.writes.overwritten).toBeGreaterThan(0);
  }, 120_000);
});
