// Text helpers shared by the lexical scorer, the extractor and the built-in embedder: one tokenizer,
// one stopword list, one stemmer and one fast string hash, so every part of tidemark sees the same words.

import { stemmer as porterStem } from 'stemmer';

/** Lower case, every run of non-letters and non-digits one space: for "the same words" comparisons. */
export const normalizeText = (s: string): string => s.toLowerCase().replace(/[^\p{L}\p{N}]+/gu, ' ').trim();

/** Lower-cased word tokens: letters and digits (any script), apostrophes inside words dropped. */
export function tokenize(text: string): string[] {
  const out: string[] = [];
  const re = /[\p{L}\p{N}]+(?:['’][\p{L}]+)*/gu;
  for (const m of text.toLowerCase().matchAll(re)) {
    let w = m[0];
    // Possessive and contracted endings carry no topic: "bike's" -> "bike", "i'm" -> "i".
    const q = w.search(/['’]/);
    if (q > 0) w = w.slice(0, q);
    out.push(w);
  }
  return out;
}

/**
 * Function words that carry no topic. A short list on purpose (common practice for BM25 over short
 * texts): "my" and "is" would otherwise make every first-person fact look alike.
 */
export const STOPWORDS: ReadonlySet<string> = new Set(
  ('a an the and or but if then so of to in on at by for with from as is are was were be been being am ' +
    'i me my mine we us our you your yours he him his she her it its they them their this that these those ' +
    'do does did doing have has had having will would shall should can could may might must ' +
    'what which who whom whose when where why how there here not no yes ok okay just also very really ' +
    'about into over than too up down out off again please thanks thank hi hello hey oh well').split(' '),
);

/** Content words of a text: tokens minus stopwords. */
export function contentWords(text: string): string[] {
  return tokenize(text).filter((w) => !STOPWORDS.has(w));
}

/**
 * 32-bit FNV-1a over UTF-16 code units (Fowler–Noll–Vo; the variant and constants of the FNV draft,
 * draft-eastlake-fnv). Fast, no allocation, good spread for feature hashing.
 */
export function fnv1a(s: string, seed = 0x811c9dc5): number {
  let h = seed >>> 0;
  for (let i = 0; i < s.length; i++) {
    h ^= s.charCodeAt(i);
    h = Math.imul(h, 0x01000193);
  }
  return h >>> 0;
}

/** A 64-bit hex digest from two FNV-1a passes with different seeds: a cache key that holds no text. */
export function textDigest(s: string): string {
  return fnv1a(s).toString(16).padStart(8, '0') + fnv1a(s, 0x9747b28c).toString(16).padStart(8, '0');
}

// ------------------------------------------------------------------ analysed terms

/**
 * Stems of recent words, so a hot conversation does not pay the stemmer per token twice (bounded;
 * cleared when full, which costs a few recomputations and keeps no text around for long).
 */
const stems = new Map<string, string>();
const STEM_CACHE = 50_000;

/**
 * The Porter stem of a lower-cased word (Porter 1980, "An algorithm for suffix stripping", via the
 * `stemmer` package), so "painting", "painted" and "paints" meet at "paint" on both sides of a search.
 * Numbers and very short words are kept as they are.
 */
export function stem(word: string): string {
  if (word.length <= 3 || !/^\p{L}+$/u.test(word)) return word;
  let s = stems.get(word);
  if (s === undefined) {
    s = porterStem(word);
    if (stems.size >= STEM_CACHE) stems.clear();
    stems.set(word, s);
  }
  return s;
}

/** Index and query terms of a text: its content words, stemmed (all words stemmed when it has none). */
export function analyze(text: string): string[] {
  return analyzeTokens(tokenize(text));
}

/** `analyze` of a text already tokenised (`tokenize`), so a turn's text is split once. */
export function analyzeTokens(words: readonly string[]): string[] {
  const out: string[] = [];
  for (const w of words) if (!STOPWORDS.has(w)) out.push(stem(w));
  if (out.length === 0) for (const w of words) out.push(stem(w));
  return out;
}
