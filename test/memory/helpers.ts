// Test helpers for the memory math: slot records and tables built from hand-made vectors.

import type { Candidate } from '../../src/memory/extract.js';
import { DEFAULT_GATE_WEIGHTS, type GateWeights } from '../../src/memory/gate.js';
import { SlotTable } from '../../src/memory/slots.js';
import { READ_DEFAULTS, WRITE_DEFAULTS, type ReadParams, type WriteParams } from '../../src/memory/params.js';
import { planWrite, type KeyedCandidate, type WritePlan, type WritePlanInput } from '../../src/memory/write.js';
import type { SlotRecord } from '../../src/types.js';

/** A unit vector from components (normalised here, so [3, 4] gives [0.6, 0.8]). */
export function vec(...xs: number[]): Float32Array {
  const v = Float32Array.from(xs);
  const n = Math.hypot(...xs);
  for (let j = 0; j < v.length; j++) v[j] = v[j]! / n;
  return v;
}

/** The j-th basis vector of a dimension. */
export function basis(dim: number, j: number): Float32Array {
  const v = new Float32Array(dim);
  v[j] = 1;
  return v;
}

export function rec(id: string, key: Float32Array, over: Partial<SlotRecord> = {}): SlotRecord {
  return {
    id,
    key,
    keyText: `key ${id}`,
    value: `value ${id}`,
    provenance: [`t-${id}`],
    strength: 1,
    halfLife: 10,
    stamp: 0,
    created: 0,
    createdMs: 0,
    updatedMs: 0,
    reads: 0,
    pinned: false,
    ...over,
  };
}

/** A table with `records[i]` in slot i (null leaves slot i free). */
export function table(capacity: number, dim: number, records: Array<SlotRecord | null>): SlotTable {
  const t = new SlotTable(capacity, dim);
  records.forEach((r, i) => {
    if (r) t.set(i, r);
  });
  return t;
}

export const readParams = (over: Partial<ReadParams> = {}): ReadParams => ({ ...READ_DEFAULTS, ...over });
export const writeParams = (over: Partial<WriteParams> = {}): WriteParams => ({ ...WRITE_DEFAULTS, ...over });

/** Plain softmax of z / tau, written the textbook way (no masking, no typed arrays). */
export function softmaxRef(z: number[], tau = 1): number[] {
  const m = Math.max(...z);
  const e = z.map((x) => Math.exp((x - m) / tau));
  const s = e.reduce((a, b) => a + b, 0);
  return e.map((x) => x / s);
}

/** Gate weights that ignore every feature: the gate is sigma(bias) for any candidate. */
export function flatGate(bias: number): GateWeights {
  const w = { ...DEFAULT_GATE_WEIGHTS };
  for (const k of Object.keys(w) as Array<keyof GateWeights>) w[k] = 0;
  w.bias = bias;
  return w;
}

/** The logistic function. */
export const sigma = (x: number): number => 1 / (1 + Math.exp(-x));

/** A user's candidate "my topic is a value" with the given key vector, from turn `turn`. */
export function keyed(key: Float32Array, over: Partial<Candidate> = {}, turn = 't9'): KeyedCandidate {
  return { candidate: { key: 'my topic', value: 'a value', text: 'my topic is a value', pattern: 'my-x-is-y', ...over }, key, turn, role: 'user' };
}

/**
 * One turn's write plan against `t` at clock 0, 1000 ms, tenant "shop", session "s1", with the gate
 * flat at sigma(2) over a threshold of 0.5 (every candidate passes) and ids new1, new2, ...
 */
export function planTurn(t: SlotTable, candidates: KeyedCandidate[], over: Partial<WritePlanInput> = {}, params: Partial<WriteParams> = {}): WritePlan {
  let n = 0;
  return planWrite({
    table: t,
    now: 0,
    nowMs: 1000,
    params: writeParams({ gateWeights: flatGate(2), gateThreshold: 0.5, ...params }),
    tenant: 'shop',
    session: 's1',
    candidates,
    reinforce: [],
    newId: () => `new${++n}`,
    ...over,
  });
}
