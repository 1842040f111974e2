// The Archive extension point: a nearest-neighbour index over archived items' key vectors, keyed by
// item id. Stores own the items; an Archive only finds ids near a query vector.

/** One search result: an item id and its cosine similarity to the query. */
export interface ArchiveMatch {
  id: string;
  cosine: number;
}

/** A vector index over unit-length vectors of one dimension. */
export interface Archive {
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
  search(query: Float32Array, k: number): ArchiveMatch[];
  /** Drops every entry. */
  clear(): void;
}
