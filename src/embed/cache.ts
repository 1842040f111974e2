// An LRU cache of embeddings keyed by a digest of (embedder id, text), so repeated texts — greetings,
// the same fact restated, a query embedded for read and again for write — cost one embedding. Keys are
// digests, not text, so the cache retains no message text.

import { EmbedderError, ErrorCodes } from '../errors.js';
import { normalizeInPlace } from '../memory/vector.js';
import { textDigest } from '../memory/text.js';
import type { Embedder } from './embedder.js';

export interface EmbeddingCacheStats {
  hits: number;
  misses: number;
  size: number;
}

export class EmbeddingCache {
  private readonly map = new Map<string, Float32Array>();
  private hits = 0;
  private misses = 0;

  /** @param maxEntries entries kept before the least recently used is dropped (0 disables caching). */
  constructor(readonly maxEntries = 10_000) {}

  get(key: string): Float32Array | undefined {
    const v = this.map.get(key);
    if (v === undefined) {
      this.misses++;
      return undefined;
    }
    // Re-insert to mark as most recently used (Map keeps insertion order).
    this.map.delete(key);
    this.map.set(key, v);
    this.hits++;
    return v;
  }

  set(key: string, v: Float32Array): void {
    if (this.maxEntries <= 0) return;
    this.map.delete(key);
    this.map.set(key, v);
    while (this.map.size > this.maxEntries) {
      const oldest = this.map.keys().next().value as string;
      this.map.delete(oldest);
    }
  }

  clear(): void {
    this.map.clear();
  }

  stats(): EmbeddingCacheStats {
    return { hits: this.hits, misses: this.misses, size: this.map.size };
  }
}

/** Checks one embedder output and normalises it in place; throws a coded error naming the fault. */
export function checkVector(v: unknown, dim: number, embedderId: string): Float32Array {
  if (!(v instanceof Float32Array) && !Array.isArray(v)) {
    throw new EmbedderError(ErrorCodes.EMBED_INVALID, `embedder ${embedderId} returned ${typeof v}, expected a Float32Array`);
  }
  const f = v instanceof Float32Array ? v : Float32Array.from(v as number[]);
  if (f.length !== dim) {
    throw new EmbedderError(
      ErrorCodes.EMBED_INVALID,
      `embedder ${embedderId} returned a vector of ${f.length} dims but declares dim ${dim}; fix its dim property`,
      { details: { expected: dim, received: f.length } },
    );
  }
  for (let j = 0; j < f.length; j++) {
    if (!Number.isFinite(f[j]!)) {
      throw new EmbedderError(
        ErrorCodes.EMBED_INVALID,
        `embedder ${embedderId} returned a non-finite value (${f[j]}) at index ${j}; check the model output`,
        { details: { index: j } },
      );
    }
  }
  if (normalizeInPlace(f) === 0) {
    throw new EmbedderError(ErrorCodes.EMBED_INVALID, `embedder ${embedderId} returned an all-zero vector`);
  }
  return f;
}

/**
 * Embeds texts through the cache: cached texts cost a lookup, the rest go to the embedder in one
 * batch. Every returned vector is checked and unit length. Returned vectors are shared with the
 * cache: callers must not mutate them.
 */
export async function embedCached(embedder: Embedder, cache: EmbeddingCache, texts: readonly string[]): Promise<Float32Array[]> {
  const out = new Array<Float32Array>(texts.length);
  const missIdx: number[] = [];
  const missText: string[] = [];
  const keys = texts.map((t) => textDigest(embedder.id + '\u0000' + t));
  for (let i = 0; i < texts.length; i++) {
    const hit = cache.get(keys[i]!);
    if (hit) out[i] = hit;
    else {
      missIdx.push(i);
      missText.push(texts[i]!);
    }
  }
  if (missText.length > 0) {
    const got = embedder.embedSync ? embedder.embedSync(missText) : await embedder.embed(missText);
    if (!Array.isArray(got) || got.length !== missText.length) {
      throw new EmbedderError(
        ErrorCodes.EMBED_INVALID,
        `embedder ${embedder.id} returned ${Array.isArray(got) ? got.length : typeof got} vectors for ${missText.length} texts`,
      );
    }
    for (let m = 0; m < missIdx.length; m++) {
      const v = checkVector(got[m], embedder.dim, embedder.id);
      out[missIdx[m]!] = v;
      cache.set(keys[missIdx[m]!]!, v);
    }
  }
  return out;
}
