// The arithmetic of `npm run mutate:sample` (scripts/mutate-sample.mjs), apart so that it is tested on
// its own (test/scripts/mutate-sample-lib.test.ts): the draw, node keys and ranges, rooms, and the
// ratio estimate with its interval.

/** Partial Fisher–Yates: the first n of a uniform shuffle. */
export function draw(items, n, random) {
  const pool = [...items];
  const k = Math.min(n, pool.length);
  for (let i = 0; i < k; i++) {
    const j = i + Math.floor(random() * (pool.length - i));
    [pool[i], pool[j]] = [pool[j], pool[i]];
  }
  return pool.slice(0, k);
}

/** A syntax node: its file and span (positions from 0, as the instrumenter gives them). */
export const nodeKey = (fileName, { start, end }) => `${fileName}|${start.line}:${start.column}-${end.line}:${end.column}`;
/** One mutant of a node. */
export const keyOf = (fileName, location, m) => `${nodeKey(fileName, location)}|${m.mutatorName}|${m.replacement}`;

// Stryker's ranges: lines from 1, columns from 0; the instrumenter's locations: both from 0.
export const rangeOf = (m) =>
  `${m.fileName}:${m.location.start.line + 1}:${m.location.start.column}-${m.location.end.line + 1}:${m.location.end.column}`;

export const inside = (outer, inner) => {
  const before = (a, b) => a.line < b.line || (a.line === b.line && a.column <= b.column);
  return before(outer.start, inner.start) && before(inner.end, outer.end);
};

/** Ratio estimate Σd/Σm over clusters (d detected of m scored mutants each) and its 95 % interval. */
export function ratioInterval(clusters, z = 1.96) {
  const n = clusters.length;
  const D = clusters.reduce((a, c) => a + c.detected, 0);
  const M = clusters.reduce((a, c) => a + c.total, 0);
  if (n < 2 || M === 0) return { score: M === 0 ? 0 : D / M, lo: 0, hi: 1 };
  const r = D / M;
  const mean = M / n;
  const s2 = clusters.reduce((a, c) => a + (c.detected - r * c.total) ** 2, 0) / (n - 1);
  const half = z * Math.sqrt(s2 / n) / mean;
  return { score: r, lo: Math.max(0, r - half), hi: Math.min(1, r + half) };
}

export const roomOf = (file) => (file.split('/').length > 2 ? file.split('/').slice(0, 2).join('/') : 'src (top level)');
