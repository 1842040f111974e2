// Outside checks: HNSW recall@10 against exact search. The HNSW paper (Malkov & Yashunin 2018,
// "Efficient and robust approximate nearest neighbor search using Hierarchical Navigable Small World
// graphs") reports recall above 0.9 at moderate ef — from memory; the figures measured here are what count.

import { existsSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { beforeAll, describe, expect, it } from 'vitest';
import type { VectorMatch } from '../../src/vectors/vector-index.js';
import { ExactVectorIndex } from '../../src/vectors/exact.js';
import { HnswVectorIndex } from '../../src/vectors/hnsw.js';
import { HashingEmbedder } from '../../src/embed/hashing.js';
import { recallAtK, unitVectors } from './vectors.js';

const DIM = 384;
const K = 10;

describe('HNSW recall@10 on 20,000 random unit vectors of dimension 384', () => {
  // Uniform random vectors are the hardest case for a graph index: no cluster structure, and in 384
  // dimensions every cosine sits near 0 ± 0.05, so the 10 true neighbours are barely closer than the
  // rest. Recall there is bought with ef, not M: measured on this machine (M 16, efConstruction 64),
  // ef 800 gave 0.90 and ef 1200 0.95, so the check runs at ef 2000. efConstruction 64 keeps the
  // single 20k build near 20 s on 2 cores (0.5–1 ms an insert).
  const N = 20_000;
  const Q = 100;
  const items = unitVectors(N, DIM, 2018);
  const queries = unitVectors(Q, DIM, 384);
  let approx: VectorMatch[][] = [];
  let exact: VectorMatch[][] = [];

  beforeAll(() => {
    const h = new HnswVectorIndex(DIM, { M: 16, efConstruction: 64, ef: 2000, initialCapacity: N });
    const e = new ExactVectorIndex(DIM, N);
    items.forEach((v, i) => (h.add(`r${i}`, v), e.add(`r${i}`, v)));
    expect(h.size).toBe(N);
    approx = queries.map((q) => h.search(q, K));
    exact = queries.map((q) => e.search(q, K));
  }, 180_000);

  it('reaches at least 0.95 against the exact scan', () => {
    expect(approx.every((r) => r.length === K)).toBe(true);
    const recall = recallAtK(approx, exact, K);
    console.log(`recall@10, 20k random unit vectors, ef 2000: ${recall.toFixed(4)}`);
    expect(recall).toBeGreaterThanOrEqual(0.95);
  });
});

// Schema-Guided Dialogue (Rastogi et al., AAAI 2020), test split files 001-003: real utterances embedded
// by the built-in hashing embedder, with the vector index's default HNSW options.
const sgdDir = fileURLToPath(new URL('../../../shared/data/sgd/', import.meta.url));
const sgdFiles = ['dialogues_001.json', 'dialogues_002.json', 'dialogues_003.json'];
const sgdPresent = sgdFiles.every((f) => existsSync(sgdDir + f));
// Under CI the dataset is required (the test then fails when it is missing); elsewhere it may be absent.
const skipSgd = !sgdPresent && process.env.CI !== 'true';

describe('HNSW recall@10 on the built-in embedder\'s vectors of the SGD utterances', () => {
  it.skipIf(skipSgd)(
    `reaches at least 0.95 with the default options${skipSgd ? ' (skipped: ../shared/data/sgd is not present and CI is not set)' : ''}`,
    () => {
      const texts: string[] = [];
      for (const f of sgdFiles) {
        const dialogues = JSON.parse(readFileSync(sgdDir + f, 'utf8')) as { turns: { utterance: string }[] }[];
        for (const d of dialogues) for (const t of d.turns) texts.push(t.utterance);
      }
      expect(texts.length).toBeGreaterThan(3000);
      const vectors = new HashingEmbedder({ dim: DIM }).embedSync(texts);
      // Every tenth utterance is a query and stays out of the index, as a new turn would.
      const h = new HnswVectorIndex(DIM);
      const e = new ExactVectorIndex(DIM);
      const queries: Float32Array[] = [];
      vectors.forEach((v, i) => {
        if (i % 10 === 0) queries.push(v);
        else (h.add(`u${i}`, v), e.add(`u${i}`, v));
      });
      const recall = recallAtK(queries.map((q) => h.search(q, K)), queries.map((q) => e.search(q, K)), K);
      console.log(`recall@10, ${h.size} SGD utterances, ${queries.length} queries, default options: ${recall.toFixed(4)}`);
      expect(recall).toBeGreaterThanOrEqual(0.95);
    },
    60_000,
  );
});
