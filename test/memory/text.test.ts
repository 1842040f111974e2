// The shared text helpers at their edges: normalising, tokenising apostrophes, the stopword list,
// the Porter stems (Porter 1980, "An algorithm for suffix stripping": the paper's own examples) and
// the analysed terms of a text made only of function words.

import { describe, expect, it } from 'vitest';
import { STOPWORDS, analyze, analyzeTokens, contentWords, fnv1a, normalizeText, stem, textDigest, tokenize } from '../../src/memory/text.js';

describe('normalizeText', () => {
  it('lower-cases and folds every run of punctuation and spacing into one space, trimmed', () => {
    expect(normalizeText('  When is   my BOOKING?!  ')).toBe('when is my booking');
    expect(normalizeText('Fern -- repotted, (twice)...')).toBe('fern repotted twice');
    expect(normalizeText('Zoë paid €20 for 東京-maps')).toBe('zoë paid 20 for 東京 maps');
    expect(normalizeText('?!')).toBe('');
  });
});

describe('tokenize', () => {
  it('cuts a word at its apostrophe, straight or curly, and keeps words joined only by letters', () => {
    expect(tokenize('The fern’s pot isn\'t cracked')).toEqual(['the', 'fern', 'pot', 'isn', 'cracked']);
    expect(tokenize("rock'n'roll o'clock")).toEqual(['rock', 'o']);
    // An apostrophe before a digit or at a word's edge is not part of the word.
    expect(tokenize("'94 bikes' 'frame'")).toEqual(['94', 'bikes', 'frame']);
    expect(tokenize('')).toEqual([]);
    expect(tokenize('3pm, 10k')).toEqual(['3pm', '10k']);
  });
});

describe('stopwords and content words', () => {
  it('holds the function words and none of the topic words a fact needs', () => {
    for (const w of ['a', 'the', 'my', 'is', 'am', 'i', 'you', 'what', 'when', 'not', 'please', 'thanks', 'well', 'oh']) expect(STOPWORDS.has(w)).toBe(true);
    for (const w of ['bike', 'name', 'friday', 'fern', 'booking', 'phone', '', 'stryker']) expect(STOPWORDS.has(w)).toBe(false);
  });

  it('contentWords drops them and keeps order and repeats', () => {
    expect(contentWords('Oh hi, my fern and my other fern are on the sill')).toEqual(['fern', 'other', 'fern', 'sill']);
    expect(contentWords('is it?')).toEqual([]);
  });
});

describe('stem', () => {
  // Outside check: examples from Porter (1980), steps 1a-5 (from memory).
  it('gives the Porter stems of longer words', () => {
    expect(stem('caresses')).toBe('caress');
    expect(stem('ponies')).toBe('poni');
    expect(stem('relational')).toBe('relat');
    expect(stem('painting')).toBe('paint');
    expect(stem('painted')).toBe('paint');
    expect(stem('paints')).toBe('paint');
  });

  it('keeps words of three letters or fewer, and anything that is not all letters, as they are', () => {
    expect(stem('bus')).toBe('bus'); // the stemmer would give "bu"
    expect(stem('runs')).toBe('run');
    expect(stem('10ks')).toBe('10ks');
    expect(stem('3pm')).toBe('3pm');
    expect(stem('ranked2')).toBe('ranked2');
    expect(stem('2ranked')).toBe('2ranked');
    expect(stem('mp3players')).toBe('mp3players'); // letters first, but not only letters
  });

  it('gives the same stem on every call (the cache holds what the stemmer gave)', () => {
    const words = Array.from({ length: 300 }, (_, i) => `booking${'s'.repeat(i % 3)}x${String.fromCharCode(97 + (i % 26))}`);
    const first = words.map(stem);
    expect(words.map(stem)).toEqual(first);
    expect(stem('bookings')).toBe('book');
    expect(stem('bookings')).toBe('book');
  });
});

describe('analyze', () => {
  it('stems the content words of a text', () => {
    expect(analyze('My ferns are repotted and painted')).toEqual(['fern', 'repot', 'paint']);
    expect(analyzeTokens(['my', 'bookings'])).toEqual(['book']);
  });

  it('falls back to every word, stemmed, when the text is only function words', () => {
    expect(analyze('What is it?')).toEqual(['what', 'is', 'it']);
    expect(analyzeTokens(['where', 'should'])).toEqual(['where', 'should']);
    expect(analyzeTokens(['thanks'])).toEqual(['thank']);
    expect(analyze('')).toEqual([]);
  });
});

describe('fnv1a and textDigest', () => {
  it('takes a seed, and the digest is the two seeded hashes in 8-digit hex each', () => {
    expect(fnv1a('a', 0)).toBe(Math.imul(0x61, 0x01000193) >>> 0);
    expect(fnv1a('', 0x9747b28c)).toBe(0x9747b28c);
    // A hash whose hex is short is padded, so the digest always has 16 digits.
    expect(textDigest('')).toBe('811c9dc5' + '9747b28c');
    expect(textDigest('a')).toBe('e40c292c' + fnv1a('a', 0x9747b28c).toString(16).padStart(8, '0'));
    const short = Array.from({ length: 5000 }, (_, i) => `k${i}`).find((s) => fnv1a(s) < 0x10000000)!;
    expect(textDigest(short).slice(0, 8)).toBe('0' + fnv1a(short).toString(16).padStart(7, '0'));
    const short2 = Array.from({ length: 5000 }, (_, i) => `k${i}`).find((x) => fnv1a(x, 0x9747b28c) < 0x10000000)!;
    expect(textDigest(short2)).toHaveLength(16);
    expect(textDigest(short2).slice(8)).toBe('0' + fnv1a(short2, 0x9747b28c).toString(16).padStart(7, '0'));
  });
});
