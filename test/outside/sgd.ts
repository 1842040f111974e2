// Converts Schema-Guided Dialogue files (Rastogi et al. 2020, DSTC8; see ../shared/data/sgd/SOURCE.md)
// into replay input: one session per dialogue, and one `latest:` probe per slot whose value the user
// changed (two user turns inform the slot with different state values), asked with the schema's own
// description of the slot and expecting the user turn that stated the final value. Reads the files at
// test time; none of their text is copied into the repo.

import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { Probe, TranscriptTurn } from '../../cli/jsonl.js';

interface SgdFrame {
  service: string;
  actions?: Array<{ act: string; slot: string; values: string[] }>;
  state?: { slot_values: Record<string, string[]> };
}
interface SgdTurn {
  speaker: 'USER' | 'SYSTEM';
  utterance: string;
  frames: SgdFrame[];
}
export interface SgdDialogue {
  dialogue_id: string;
  services: string[];
  turns: SgdTurn[];
}
interface SgdService {
  service_name: string;
  slots: Array<{ name: string; description: string }>;
}

export const SGD_FILES = ['dialogues_001.json', 'dialogues_002.json', 'dialogues_003.json'];

/** Whether the dataset is at `dir`. */
export const sgdPresent = (dir: string): boolean => existsSync(join(dir, 'schema.json')) && SGD_FILES.every((f) => existsSync(join(dir, f)));

/**
 * The user turn that stated a slot's final value: the first USER turn of the last run of equal
 * values, when an earlier run held a different value (so the user changed it). Null otherwise.
 */
export function finalValueTurn(history: ReadonlyArray<{ turn: string; value: string }>): string | null {
  if (history.length === 0) return null;
  const final = history[history.length - 1]!.value;
  let i = history.length - 1;
  while (i > 0 && history[i - 1]!.value === final) i--;
  return i > 0 ? history[i]!.turn : null;
}

/** Converts dialogues to transcript turns and probes. */
export function sgdToReplay(dialogues: readonly SgdDialogue[], schema: readonly SgdService[]): { turns: TranscriptTurn[]; probes: Probe[] } {
  const describe = new Map<string, string>();
  for (const s of schema) for (const slot of s.slots) describe.set(`${s.service_name}/${slot.name}`, slot.description);
  const turns: TranscriptTurn[] = [];
  const probes: Probe[] = [];
  for (const d of dialogues) {
    const session = `sgd-${d.dialogue_id}`;
    const history = new Map<string, Array<{ turn: string; value: string; forms: string[] }>>();
    d.turns.forEach((t, i) => {
      const turn = `t${i + 1}`;
      turns.push({ session, turn, role: t.speaker === 'USER' ? 'user' : 'assistant', text: t.utterance, line: turns.length + 1 });
      if (t.speaker !== 'USER') return;
      for (const f of t.frames) {
        // Only turns where the user states the slot (an INFORM act on it) count: a state change that
        // comes from accepting the system's offer ("sure, that works") is not the user stating a value.
        const informed = new Set((f.actions ?? []).filter((a) => a.act === 'INFORM').map((a) => a.slot));
        for (const [slot, values] of Object.entries(f.state?.slot_values ?? {})) {
          if (!informed.has(slot)) continue;
          const key = `${f.service}/${slot}`;
          let h = history.get(key);
          if (!h) history.set(key, (h = []));
          h.push({ turn, value: [...values].sort().join('\u0000'), forms: [...values] });
        }
      }
    });
    for (const [key, h] of history) {
      // Runs of equal values: keep the first turn of each run.
      const runs = h.filter((x, i) => i === 0 || h[i - 1]!.value !== x.value);
      const expect = finalValueTurn(runs);
      const query = describe.get(key);
      if (!expect || !query) continue;
      // The value check: the latest value, in any of the forms the annotation lists for it.
      const forms = runs[runs.length - 1]!.forms.filter((v) => v.trim().length > 0);
      probes.push({ id: `latest:${d.dialogue_id}:${key}`, session, query, expect: [expect], ...(forms.length > 0 ? { expectText: forms } : {}), line: probes.length + 1 });
    }
  }
  return { turns, probes };
}

/** Loads and converts the three files from `dir`. */
export function loadSgd(dir: string): { turns: TranscriptTurn[]; probes: Probe[]; dialogues: number } {
  const schema = JSON.parse(readFileSync(join(dir, 'schema.json'), 'utf8')) as SgdService[];
  const dialogues = SGD_FILES.flatMap((f) => JSON.parse(readFileSync(join(dir, f), 'utf8')) as SgdDialogue[]);
  return { ...sgdToReplay(dialogues, schema), dialogues: dialogues.length };
}
