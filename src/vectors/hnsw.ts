// Approximate nearest-neighbour search for large logbooks: a Hierarchical Navigable Small World graph
// (Malkov & Yashunin 2018, "Efficient and robust approximate nearest neighbor search using HNSW graphs")
// through hnswlib-node, an optional peer dependency loaded only when an index is actually built.

import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import type { VectorIndex, VectorMatch } from './vector-index.js';
import { ConfigError, describeValue } from '../errors.js';

type HnswModule = typeof import('hnswlib-node');
type HnswIndex = import('hnswlib-node').HierarchicalNSW;

export interface HnswVectorIndexOptions {
  /**
   * Links each node keeps per graph layer (2·M on the bottom layer). Higher M raises recall at a given
   * `ef` and copes with higher intrinsic dimension, at the cost of memory (about 8·M bytes a node on
   * the bottom layer) and slower inserts. The HNSW paper finds 5–48 useful (from memory).
   * @default 16
   */
  M?: number;
  /**
   * Candidate list size while inserting. Higher builds a better graph (higher recall for the same
   * search `ef`) and makes every insert and rebuild slower; it does not change the search cost. 64
   * rather than hnswlib's 200 keeps a 100K build to a few minutes on 2 cores (bench/vectors.ts).
   * @default 64
   */
  efConstruction?: number;
  /**
   * Candidate list size while searching (hnswlib uses at least `k`). Higher raises recall and search
   * time roughly in proportion. hnswlib does not save it with an index, so it is re-applied after every
   * load, resize and rebuild. 48 is the smallest value that kept recall@10 near 0.98 at 100K
   * embedding-like (low-rank) vectors with search p50 under 1 ms (bench/vectors.ts); uniform random
   * vectors need ef in the thousands for the same recall.
   * @default 48
   */
  ef?: number;
  /** Entries the index is first allocated for; capacity doubles (`resizeIndex`) before it fills. @default 1024 */
  initialCapacity?: number;
  /**
   * Rebuild the graph from the live vectors once deleted entries exceed this share of the entries it
   * holds. Deleted nodes still cost memory and search time (they are walked, never returned), so a
   * lower share keeps searches lean and rebuilds more often; a rebuild costs a full insert of the live set.
   * @default 0.25
   */
  rebuildDeletedShare?: number;
  /** Seed of hnswlib's level generator, so a build is reproducible. @default 100 */
  randomSeed?: number;
}

export const HNSW_VECTOR_INDEX_DEFAULTS: Required<HnswVectorIndexOptions> = {
  M: 16,
  efConstruction: 64,
  ef: 48,
  initialCapacity: 1024,
  rebuildDeletedShare: 0.25,
  randomSeed: 100,
};

const requireHere = createRequire(import.meta.url);
let loaded: { module: HnswModule } | { error: unknown } | undefined;

function loadHnswlib(): { module: HnswModule } | { error: unknown } {
  if (!loaded) {
    try {
      loaded = { module: requireHere('hnswlib-node') as HnswModule };
    } catch (error) {
      loaded = { error };
    }
  }
  return loaded;
}

/** True when hnswlib-node is installed and its native addon loads. */
export function hnswAvailable(): boolean {
  return 'module' in loadHnswlib();
}

function requireHnswlib(): HnswModule {
  const r = loadHnswlib();
  if ('module' in r) return r.module;
  throw new ConfigError(
    'HNSW index: hnswlib-node could not be loaded; install it with `npm install hnswlib-node@3` ' +
      '(it builds a native addon), or use ExactVectorIndex / createVectorIndex(), which stays on exact search without it',
    { cause: r.error, details: { dependency: 'hnswlib-node' } },
  );
}

function checkInt(name: string, value: unknown, min: number, max: number): void {
  if (typeof value !== 'number' || !Number.isInteger(value) || value < min || value > max) {
    throw new ConfigError(`HNSW index: ${name} must be an integer in [${min}, ${max}], got ${describeValue(value)}`, {
      details: { option: name, value, expected: `integer in [${min}, ${max}]` },
    });
  }
}

/** Resolves and validates HNSW options; shared with the adaptive index so errors surface at construction. */
export function resolveHnswOptions(options: HnswVectorIndexOptions = {}): Required<HnswVectorIndexOptions> {
  const o = { ...HNSW_VECTOR_INDEX_DEFAULTS, ...options };
  checkInt('M', o.M, 2, 100);
  checkInt('efConstruction', o.efConstruction, 1, 10_000);
  checkInt('ef', o.ef, 1, 10_000);
  checkInt('initialCapacity', o.initialCapacity, 1, 2 ** 31 - 1);
  checkInt('randomSeed', o.randomSeed, 0, 2 ** 32 - 1);
  const share = o.rebuildDeletedShare;
  if (typeof share !== 'number' || !(share > 0 && share <= 1)) {
    throw new ConfigError(`HNSW index: rebuildDeletedShare must be a number in (0, 1], got ${describeValue(share)}`, {
      details: { option: 'rebuildDeletedShare', value: share, expected: 'number in (0, 1]' },
    });
  }
  return o;
}

/** What `saveSync` writes beside the graph file: the label -> id table hnswlib cannot hold. */
interface SavedIds {
  format: 'tidemark-hnsw-ids';
  version: 1;
  dim: number;
  /** Item id by hnswlib label; null for a deleted label. */
  ids: (string | null)[];
}

const idsFile = (file: string): string => `${file}.ids.json`;

export class HnswVectorIndex implements VectorIndex {
  readonly dim: number;
  private readonly o: Required<HnswVectorIndexOptions>;
  private readonly lib: HnswModule;
  private index!: HnswIndex;
  /** Vectors by label, row-major; kept so the graph can be rebuilt without its deleted nodes. */
  private vectors!: Float32Array;
  private idByLabel: (string | undefined)[] = [];
  private labelById = new Map<string, number>();
  /** Labels handed out so far; hnswlib's element count (deleted ones included). */
  private used = 0;
  private deleted = 0;
  private rebuildCount = 0;
  /** Search ef in force; starts at `options.ef`, changed by `setEf`. */
  private efSearch: number;

  constructor(dim: number, options: HnswVectorIndexOptions = {}) {
    checkInt('dim', dim, 1, 65_536);
    this.o = resolveHnswOptions(options);
    this.efSearch = this.o.ef;
    this.lib = requireHnswlib();
    this.dim = dim;
    this.reset(this.o.initialCapacity);
  }

  get size(): number {
    return this.labelById.size;
  }

  /** Current search `ef` as hnswlib reports it (checks that it survived loads and resizes). */
  get ef(): number {
    return this.index.getEf();
  }

  /** Changes the search `ef` from now on (kept across resizes and rebuilds). */
  setEf(ef: number): void {
    checkInt('ef', ef, 1, 10_000);
    this.efSearch = ef;
    this.index.setEf(ef);
  }

  /** Entries the graph can hold before the next resize. */
  get capacity(): number {
    return this.index.getMaxElements();
  }

  /** Deleted entries still in the graph (cleared by a rebuild). */
  get deletedCount(): number {
    return this.deleted;
  }

  /** How many times the graph was rebuilt to shed deleted entries. */
  get rebuilds(): number {
    return this.rebuildCount;
  }

  has(id: string): boolean {
    return this.labelById.has(id);
  }

  add(id: string, vector: Float32Array): void {
    if (vector.length !== this.dim) throw new RangeError(`vector has ${vector.length} dims, the index holds ${this.dim}`);
    const existing = this.labelById.get(id);
    const label = existing ?? this.used;
    // hnswlib throws when adding past maxElements, so grow first.
    if (label >= this.index.getMaxElements()) this.grow(this.index.getMaxElements() * 2);
    // The native call goes first so a failure leaves the maps as they were. An existing label is
    // updated in place by hnswlib (its links are repaired).
    this.index.addPoint(Array.from(vector), label);
    this.vectors.set(vector, label * this.dim);
    if (existing === undefined) {
      this.used++;
      this.idByLabel[label] = id;
      this.labelById.set(id, label);
    }
  }

  remove(id: string): boolean {
    const label = this.labelById.get(id);
    if (label === undefined) return false;
    this.index.markDelete(label);
    this.labelById.delete(id);
    this.idByLabel[label] = undefined;
    this.deleted++;
    if (this.labelById.size === 0) this.reset(this.o.initialCapacity);
    else if (this.deleted > this.o.rebuildDeletedShare * this.used) this.rebuild();
    return true;
  }

  search(query: Float32Array, k: number): VectorMatch[] {
    if (query.length !== this.dim) throw new RangeError(`query has ${query.length} dims, the index holds ${this.dim}`);
    if (k <= 0 || this.labelById.size === 0) return [];
    // hnswlib already leaves marked-deleted labels out of its results; the extra places are a guard so a
    // label we no longer map can never cost the caller a result.
    const extra = this.deleted > 0 ? Math.min(this.deleted, k) : 0;
    const want = Math.min(k + extra, this.used);
    const { distances, neighbors } = this.index.searchKnn(Array.from(query), want);
    const out: VectorMatch[] = [];
    for (let i = 0; i < neighbors.length && out.length < k; i++) {
      const id = this.idByLabel[neighbors[i]!];
      // Inner-product space: distance = 1 - dot, and dot = cosine for unit vectors.
      if (id !== undefined) out.push({ id, cosine: 1 - distances[i]! });
    }
    return out;
  }

  clear(): void {
    this.reset(this.o.initialCapacity);
  }

  /**
   * Writes the graph to `file` (hnswlib's format) and the id table to `file.ids.json`. Saving skips the
   * rebuild on restart; the search `ef` is not part of hnswlib's file and comes from the options on load.
   */
  saveSync(file: string): void {
    this.index.writeIndexSync(file);
    const doc: SavedIds = {
      format: 'tidemark-hnsw-ids',
      version: 1,
      dim: this.dim,
      ids: this.idByLabel.slice(0, this.used).map((id) => id ?? null),
    };
    writeFileSync(idsFile(file), JSON.stringify(doc));
  }

  /** Loads what `saveSync` wrote; `ef` (and the other options) come from `options`, not the file. */
  static loadSync(file: string, dim: number, options: HnswVectorIndexOptions = {}): HnswVectorIndex {
    const a = new HnswVectorIndex(dim, options);
    if (!existsSync(idsFile(file))) {
      throw new ConfigError(`HNSW index: ${idsFile(file)} is missing; save with HnswVectorIndex.saveSync()`, {
        details: { option: 'file' },
      });
    }
    const doc = JSON.parse(readFileSync(idsFile(file), 'utf8')) as SavedIds;
    if (doc.format !== 'tidemark-hnsw-ids' || doc.version !== 1 || doc.dim !== dim || !Array.isArray(doc.ids)) {
      throw new ConfigError(`HNSW index: ${idsFile(file)} is not an id table for dim ${dim}`, {
        details: { option: 'file', dim: doc.dim },
      });
    }
    a.index = new a.lib.HierarchicalNSW('ip', dim);
    a.index.readIndexSync(file);
    // hnswlib starts a loaded index at its built-in ef (10), whatever it was saved with.
    a.index.setEf(a.efSearch);
    a.used = doc.ids.length;
    a.vectors = new Float32Array(Math.max(a.index.getMaxElements(), 1) * dim);
    a.idByLabel = [];
    a.labelById.clear();
    a.deleted = 0;
    doc.ids.forEach((id, label) => {
      if (id === null) {
        a.deleted++;
        return;
      }
      a.idByLabel[label] = id;
      a.labelById.set(id, label);
      a.vectors.set(a.index.getPoint(label), label * dim);
    });
    return a;
  }

  private reset(capacity: number): void {
    this.index = this.newIndex(capacity);
    this.vectors = new Float32Array(capacity * this.dim);
    this.idByLabel = [];
    this.labelById.clear();
    this.used = 0;
    this.deleted = 0;
  }

  private newIndex(capacity: number): HnswIndex {
    // Inner product on unit vectors is cosine without hnswlib's per-call normalisation, and matches
    // ExactVectorIndex's dot product to float32 rounding.
    const index = new this.lib.HierarchicalNSW('ip', this.dim);
    index.initIndex({ maxElements: capacity, m: this.o.M, efConstruction: this.o.efConstruction, randomSeed: this.o.randomSeed });
    index.setEf(this.efSearch);
    return index;
  }

  private grow(capacity: number): void {
    this.index.resizeIndex(capacity);
    // Re-applied as after a load: ef must never silently fall back to hnswlib's default.
    this.index.setEf(this.efSearch);
    const grown = new Float32Array(capacity * this.dim);
    grown.set(this.vectors.subarray(0, this.used * this.dim));
    this.vectors = grown;
  }

  /** Builds a fresh graph from the live vectors, relabelled densely, dropping the deleted nodes. */
  private rebuild(): void {
    const live = this.labelById.size;
    let capacity = this.o.initialCapacity;
    while (capacity < live * 2) capacity *= 2;
    const index = this.newIndex(capacity);
    const vectors = new Float32Array(capacity * this.dim);
    const idByLabel: string[] = [];
    const labelById = new Map<string, number>();
    const dim = this.dim;
    for (let old = 0; old < this.used; old++) {
      const id = this.idByLabel[old];
      if (id === undefined) continue;
      const label = idByLabel.length;
      const row = this.vectors.subarray(old * dim, (old + 1) * dim);
      vectors.set(row, label * dim);
      index.addPoint(Array.from(row), label);
      idByLabel.push(id);
      labelById.set(id, label);
    }
    this.index = index;
    this.vectors = vectors;
    this.idByLabel = idByLabel;
    this.labelById = labelById;
    this.used = idByLabel.length;
    this.deleted = 0;
    this.rebuildCount++;
  }
}
