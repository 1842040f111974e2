// The built-in offline embedder: feature hashing ("the hashing trick", Weinberger et al. 2009,
// "Feature Hashing for Large Scale Multitask Learning") of words, word bigrams and character
// trigrams, with sublinear term frequency (1 + ln tf, Manning et al., "Introduction to Information
// Retrieval" §6.4.1) and a signed hash so collisions cancel in expectation. Needs no download.

import { ConfigError } from '../errors.js';
import { STOPWORDS, fnv1a, tokenize } from '../memory/text.js';
import type { Embedder } from './embedder.js';

export interface HashingEmbedderOptions {
  /** Output dimension. @default 384 */
  dim?: number;
  /** Weight of whole-word features. @default 1 */
  wordWeight?: number;
  /** Weight of adjacent content-word bigrams. @default 0.5 */
  bigramWeight?: number;
  /** Weight of character trigrams of content words (spelling variants, plurals). @default 0.25 */
  charWeight?: number;
}

export const HASHING_EMBEDDER_DEFAULTS: Required<HashingEmbedderOptions> = {
  dim: 384,
  wordWeight: 1,
  bigramWeight: 0.5,
  charWeight: 0.25,
};

export class HashingEmbedder implements Embedder {
  readonly id: string;
  /** Hashed words and n-grams restate what BM25 already scores: no dense list from these. */
  readonly semantic = false;
  readonly dim: number;
  private readonly o: Required<HashingEmbedderOptions>;

  constructor(options: HashingEmbedderOptions = {}) {
    const o = { ...HASHING_EMBEDDER_DEFAULTS, ...options };
    if (!Number.isInteger(o.dim) || o.dim < 8 || o.dim > 8192) {
      throw new ConfigError(`hashing embedder: dim must be an integer in [8, 8192], got ${String(o.dim)}`, {
        details: { option: 'dim', value: o.dim },
      });
    }
    this.o = o;
    this.dim = o.dim;
    this.id = `hash-${o.dim}-w${o.wordWeight}-b${o.bigramWeight}-c${o.charWeight}`;
  }

  embed(texts: readonly string[]): Promise<Float32Array[]> {
    return Promise.resolve(this.embedSync(texts));
  }

  embedSync(texts: readonly string[]): Float32Array[] {
    return texts.map((t) => this.embedOne(t));
  }

  embedOne(text: string): Float32Array {
    const counts = new Map<string, number>();
    const add = (f: string, w: number): void => {
      counts.set(f, (counts.get(f) ?? 0) + w);
    };
    const words = tokenize(text);
    let content = words.filter((w) => !STOPWORDS.has(w));
    // A text of stopwords only ("what is it?") still needs a direction.
    if (content.length === 0) content = words;
    for (let i = 0; i < content.length; i++) {
      const w = content[i]!;
      add('w:' + w, 1);
      if (i > 0) add('b:' + content[i - 1] + ' ' + w, 1);
      const padded = `<${w}>`;
      for (let j = 0; j + 3 <= padded.length; j++) add('c:' + padded.slice(j, j + 3), 1);
    }
    const v = new Float32Array(this.dim);
    for (const [f, tf] of counts) {
      const kind = f.charCodeAt(0);
      const weight = kind === 119 /* w */ ? this.o.wordWeight : kind === 98 /* b */ ? this.o.bigramWeight : this.o.charWeight;
      const h = fnv1a(f);
      const sign = (h & 0x80000000) !== 0 ? -1 : 1;
      v[h % this.dim] += sign * weight * (1 + Math.log(tf));
    }
    let s = 0;
    for (let j = 0; j < v.length; j++) s += v[j]! * v[j]!;
    if (s === 0) {
      // Empty text: a fixed unit vector so callers never see a zero vector.
      v[0] = 1;
      return v;
    }
    const inv = 1 / Math.sqrt(s);
    for (let j = 0; j < v.length; j++) v[j] = v[j]! * inv;
    return v;
  }
}

/** The built-in embedder (see HashingEmbedderOptions). */
export function hashingEmbedder(options?: HashingEmbedderOptions): HashingEmbedder {
  return new HashingEmbedder(options);
}
