// Outside check of the attention read against TensorFlow.js (@tensorflow/tfjs-core 4.22 on its CPU
// backend): softmax with temperature (tf.softmax), top-k (tf.topk) and the attention readout, the
// weighted sum of value vectors (tf.matMul), as used by the multi-hop query update.

import { describe, expect, it } from 'vitest';
import * as tf from '@tensorflow/tfjs-core';
import '@tensorflow/tfjs-backend-cpu';
import { attend, nextQuery } from '../../src/memory/attention.js';
import { readParams, rec, table, vec } from './helpers.js';

// tfjs-core ships no kernels: the CPU backend (@tensorflow/tfjs-backend-cpu, a dev dependency)
// registers them on import. A missing backend is a failure, not a skip.
await tf.setBackend('cpu');

/** Eight slots in dimension 6 with deterministic pseudo-random keys and strengths. */
function fixture() {
  const dim = 6;
  const cap = 8;
  let seed = 7;
  const rnd = (): number => {
    seed = (Math.imul(seed, 1103515245) + 12345) >>> 0;
    return seed / 2 ** 32 - 0.5;
  };
  const words = ['corvane', 'tuesday', 'friday', 'chain', 'wax', 'saddle', 'brake', 'gears'];
  const recs = words.map((w, i) =>
    rec(`r${i}`, vec(...Array.from({ length: dim }, rnd)), { keyText: `my ${w}`, value: `${w} note ${i}`, strength: 0.2 + 0.1 * i }),
  );
  return { t: table(cap, dim, recs), q: vec(...Array.from({ length: dim }, rnd)), dim, cap };
}

describe('attention against tfjs-core (CPU backend)', () => {
  const p = readParams({ beta: 5, gamma: 2, delta: 0.5, temperature: 0.7, k: 3, minWeight: 0, maxMass: 1, minCosine: -1, hitCosine: -1 });

  it('softmax(z / tau) matches tf.softmax', () => {
    const { t, q } = fixture();
    const r = attend(t, 3, q, ['corvane', 'brake'], p);
    const z = [...r.score].slice(0, 8);
    const theirs = tf.softmax(tf.div(tf.tensor1d(z, 'float32'), p.temperature)).dataSync();
    for (let i = 0; i < 8; i++) expect(r.weight[i]).toBeCloseTo(theirs[i]!, 6);
  });

  it('the selected items are tf.topk of the weights', () => {
    const { t, q } = fixture();
    const r = attend(t, 3, q, ['wax'], p);
    const { indices } = tf.topk(tf.tensor1d([...r.weight], 'float32'), p.k);
    expect(r.selected).toEqual([...indices.dataSync()]);
  });

  it('the readout q + sum_i a_i v_i, normalised, matches tf.matMul', () => {
    const { t, q, dim } = fixture();
    const r = attend(t, 3, q, [], { ...p, k: 8 });
    const values = Array.from({ length: 8 }, (_, i) => vec(...Array.from({ length: dim }, (_, j) => Math.sin(i * 7 + j) + 1.5)));
    const ours = nextQuery(q, r, (i) => values[i]!);
    const w = tf.tensor2d([...r.weight].slice(0, 8), [1, 8], 'float32');
    const V = tf.tensor2d(values.flatMap((v) => [...v]), [8, dim], 'float32');
    const sum = tf.add(tf.tensor2d([...q], [1, dim]), tf.matMul(w, V));
    const theirs = tf.div(sum, tf.norm(sum)).dataSync();
    for (let j = 0; j < dim; j++) expect(ours[j]).toBeCloseTo(theirs[j]!, 5);
  });
});
