// The vector index extension point: a nearest-neighbour index over logbook entries' key vectors, keyed
// by entry id. Stores own the entries; a VectorIndex only finds ids near a query vector.

/** One search result: an entry id and its cosine similarity to the query. */
export interface VectorMatch {
  id: string;
  cosine: number;
}

/** A vector index over unit-length vectors of one dimension. */
export interface VectorIndex {
  /** Vector dimension this index holds. */
  readonly dim: number;
  /** Number of live (not deleted) entries. */
  readonly size: number;
  /** Adds or replaces the vector for `id`. The vector must be unit length. */
  add(id: string, vector: Float32Array): void;
  /** Removes `id`; returns false when it was not present. */
  remove(id: string): boolean;
  /** Returns `true` when `id` is present. */
  has(id: string): boolean;
  /** Up to `k` nearest live entries by cosine, best first. */
  search(query: Float32Array, k: number): VectorMatch[];
  /** Drops every entry. */
  clear(): void;
}
