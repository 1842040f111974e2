// The fact-fidelity suite: invented conversations with a tutor, a plant nursery and a bike workshop
// (test/fidelity/scenarios.ts) replayed as `tidemark replay` does, checking recalled *values*: the right
// value among the first items with no stale or wrong value above it. A wrong overwrite is worse than a
// miss, so the hard rule is that no fact the user never retracted is ever shown as replaced.

import { describe, expect, it } from 'vitest';
import { checkProbe, checkTurn, type Probe, type TranscriptTurn } from '../../cli/jsonl.js';
import { holdsAny, runReplay } from '../../cli/replay.js';
import { createTidemark } from '../../src/middleware/tidemark.js';
import { FIDELITY_SCENARIOS, type FidelityScenario } from './scenarios.js';

const parse = (sc: FidelityScenario) => ({
  turns: sc.turns.map((t, i) => checkTurn(t as unknown as Record<string, unknown>, i + 1) as TranscriptTurn),
  probes: sc.probes.map((p, i) => checkProbe(p as unknown as Record<string, unknown>, i + 1) as Probe),
});

/** Replays a scenario through one instance, as replay does, and returns the session's logbook. */
async function replayed(sc: FidelityScenario) {
  const tm = createTidemark({ hashKey: 'fidelity' });
  const t = sc.turns;
  for (let i = 0; i < t.length; i++) {
    const batch = [t[i]!];
    let used: string[] = [];
    if (t[i]!.role === 'user') {
      const ctx = await tm.read({ session: t[i]!.session, text: t[i]!.text, at: t[i]!.at });
      if (t[i + 1]?.role === 'assistant') batch.push(t[++i]!);
      used = tm.usedBy(ctx, batch[1]?.text);
    }
    await tm.write(batch.map((b) => ({ session: b.session, turn: b.turn, role: b.role, text: b.text, at: b.at })), { reinforce: used });
  }
  const view = await tm.inspect(t[0]!.session, undefined, { logbookLimit: 100_000 });
  await tm.close();
  return view;
}

describe.each(FIDELITY_SCENARIOS.map((s) => [s.name, s] as const))('fact fidelity: %s', (_name, sc) => {
  it('no fact that was never retracted is shown as replaced', async () => {
    const view = await replayed(sc);
    const superseded = view.logbook.filter((e) => e.kind === 'superseded');
    const current = new Map<string, string>(view.slots.map((s) => [s.id, s.value]));
    for (const e of view.logbook) current.set(e.id, e.value);
    for (const p of sc.probes.filter((x) => ['not-retracted', 'kept', 'multi-fact'].includes(x.kind) && x.after === undefined)) {
      for (const e of superseded) {
        // A value stated in the probe's turn was replaced: the replacement must still say it.
        if (!p.expect.includes(e.provenance[0]!) || !holdsAny(e.value, p.expectText)) continue;
        let next = e.successor;
        for (let hop = 0; hop < 16 && next && superseded.some((x) => x.id === next); hop++) next = superseded.find((x) => x.id === next)!.successor;
        expect(holdsAny(current.get(next ?? '') ?? '', p.expectText), `${p.id}: "${e.keyText}: ${e.value}" replaced by "${current.get(next ?? '')}"`).toBe(true);
      }
    }
  });

  it('recalls the right values, ahead of stale ones, better than plain BM25 over every turn', async () => {
    const r = await runReplay({ ...parse(sc), k: 5, baselines: ['bm25'] });
    const tm = r.summary;
    const bm25 = r.baselines.bm25!;
    const fails = r.probes.filter((p) => !p.value!.ok).map((p) => p.id);
    console.log(`fidelity ${sc.name}: value@5 ${tm.value_at_k} (bm25 ${bm25.value_at_k}), value@1 ${tm.value_at_1} (bm25 ${bm25.value_at_1}); not within 5: ${fails.join(', ') || 'none'}`);
    expect(tm.value_at_k!).toBeGreaterThanOrEqual(bm25.value_at_k!);
    expect(tm.value_at_k!).toBeGreaterThanOrEqual(0.6);
    // Updates and corrections: the new value is found, and the replaced one never stands above it.
    for (const p of r.probes) {
      const probe = sc.probes.find((x) => x.id === p.id)!;
      if (probe.kind !== 'updated' && probe.kind !== 'correction') continue;
      if (p.value!.rank !== null && p.value!.rejected_rank !== null) expect(p.value!.rejected_rank, p.id).toBeGreaterThan(p.value!.rank);
    }
  }, 60_000);
});

describe('fact fidelity across the suite', () => {
  it('value@1 over every probe of the three scenarios', async () => {
    let at1 = 0;
    let n = 0;
    for (const sc of FIDELITY_SCENARIOS) {
      const r = await runReplay({ ...parse(sc), k: 5 });
      at1 += r.summary.value_at_1! * r.summary.probes;
      n += r.summary.probes;
    }
    console.log(`fidelity suite: value@1 ${(at1 / n).toFixed(3)} over ${n} probes`);
    // Measured 0.58 with the defaults; below 0.5 something lost its precedence.
    expect(at1 / n).toBeGreaterThanOrEqual(0.5);
  }, 60_000);
});
