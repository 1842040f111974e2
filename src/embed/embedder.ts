// The Embedder extension point: text in, unit-length vectors out. The core never cares how.

/** Turns texts into vectors of a fixed dimension. */
export interface Embedder {
  /**
   * Identifies the model and its settings (e.g. `hash-384`, `transformers:Xenova/all-MiniLM-L6-v2`);
   * used to key the embedding cache, so two embedders that differ in output must differ in id.
   */
  readonly id: string;
  /** Length of every vector returned. */
  readonly dim: number;
  /**
   * True when the vectors carry meaning beyond the words they share (a trained model): reads then add
   * a dense list to the lexical one, and the logbook keeps turn vectors when `logbook.vectors` is
   * `'auto'`. Unset means false.
   */
  readonly semantic?: boolean;
  /**
   * Embeds a batch. Must return one vector per input, in order, each of length `dim`. Vectors should
   * be L2-normalised; the core normalises again and rejects NaN/Infinity or all-zero vectors with
   * `TIDEMARK_E_EMBED_INVALID`.
   */
  embed(texts: readonly string[]): Promise<Float32Array[]>;
  /** Optional synchronous path, used by the core when present to skip a microtask per turn. */
  embedSync?(texts: readonly string[]): Float32Array[];
  /** Optional: load weights ahead of the first turn. */
  warmup?(): Promise<void>;
  /** Optional: release model resources. */
  close?(): Promise<void>;
}
