// The baselines replay runs beside tidemark, so a recall figure never stands alone. `bm25` is the
// plainest strong one: Okapi BM25 (k1 1.2, b 0.75) over every turn of the kept roles, on the
// project's tokenizer and stopwords, no stemming, nothing else. `flat` keeps every turn too and ranks
// by beta * cosine + gamma * BM25 normalised per query (the same embedder as tidemark); `window:N`
// does the same over the last N turns of each session. None has gates, decay or capacity.

import type { Embedder } from '../src/embed/embedder.js';
import { ConfigError, describeValue } from '../src/errors.js';
import { queryTerms } from '../src/memory/attention.js';
import { bm25Scores, docStats, type DocStats } from '../src/memory/bm25.js';
import { contentWords } from '../src/memory/text.js';
import type { Role } from '../src/types.js';

export type BaselineSpec = { kind: 'window'; size: number } | { kind: 'flat' } | { kind: 'bm25' };

/** `bm25`, `flat` or `window:N` (N >= 1). */
export function parseBaseline(spec: string): BaselineSpec {
  if (spec === 'flat') return { kind: 'flat' };
  if (spec === 'bm25') return { kind: 'bm25' };
  const m = /^window:(\d+)$/.exec(spec);
  if (m && Number(m[1]) >= 1) return { kind: 'window', size: Number(m[1]) };
  throw new ConfigError(`baseline must be "bm25", "flat" or "window:N" (N >= 1), got ${describeValue(spec)}`, { details: { option: 'baseline', value: spec } });
}

export const baselineName = (s: BaselineSpec): string => (s.kind === 'window' ? `window:${s.size}` : s.kind);

export interface BaselineOptions {
  embedder: Embedder;
  /** Weight of the cosine. @default 10 (tidemark's read.beta) */
  beta?: number;
  /** Weight of the normalised BM25 score. @default 4 (tidemark's read.gamma) */
  gamma?: number;
  /** Roles of the turns kept: the ones tidemark keeps in its logbook. @default ['user', 'assistant'] */
  roles?: readonly Role[];
}

interface Doc {
  turn: string;
  vec: Float32Array;
  stats: DocStats;
}

export interface BaselineQuery {
  /** Turn ids, best first, at most k. */
  retrieved: string[];
  /** Microseconds spent, query embedding included. */
  us: number;
}

const EMPTY = new Float32Array(0);

/** One baseline over all sessions of a replay. */
export class TurnBaseline {
  readonly name: string;
  private readonly sessions = new Map<string, Doc[]>();
  private readonly beta: number;
  private readonly gamma: number;
  private readonly roles: ReadonlySet<Role>;
  private readonly limit: number;

  constructor(readonly spec: BaselineSpec, private readonly o: BaselineOptions) {
    this.name = baselineName(spec);
    this.beta = o.beta ?? 10;
    this.gamma = o.gamma ?? 4;
    this.roles = new Set(o.roles ?? ['user', 'assistant']);
    this.limit = spec.kind === 'window' ? spec.size : Infinity;
  }

  /** Keeps a turn (if its role is kept); the window drops its oldest turn past N. */
  async add(turn: { session: string; turn: string; role: Role; text: string }, vec?: Float32Array): Promise<void> {
    if (!this.roles.has(turn.role)) return;
    const v = this.spec.kind === 'bm25' ? EMPTY : vec ?? (await this.o.embedder.embed([turn.text]))[0]!;
    let docs = this.sessions.get(turn.session);
    if (!docs) this.sessions.set(turn.session, (docs = []));
    docs.push({ turn: turn.turn, vec: v, stats: docStats(contentWords(turn.text)) });
    if (docs.length > this.limit) docs.shift();
  }

  /** Ranks the session's kept turns for a query and returns the best k turn ids. */
  async query(session: string, text: string, k: number, qvec?: Float32Array): Promise<BaselineQuery> {
    const t0 = performance.now();
    const docs = this.sessions.get(session) ?? [];
    if (docs.length === 0) return { retrieved: [], us: (performance.now() - t0) * 1000 };
    const lex = new Float64Array(docs.length);
    bm25Scores(queryTerms(text), docs.map((d) => d.stats), lex);
    if (this.spec.kind === 'bm25') {
      // Plain BM25: documents with no query term are not ranked at all.
      const order = docs.map((_, i) => i).filter((i) => lex[i]! > 0).sort((a, b) => lex[b]! - lex[a]! || b - a);
      return { retrieved: order.slice(0, k).map((i) => docs[i]!.turn), us: (performance.now() - t0) * 1000 };
    }
    const q = qvec ?? (await this.o.embedder.embed([text]))[0]!;
    let maxLex = 0;
    for (const v of lex) if (v > maxLex) maxLex = v;
    const score = new Float64Array(docs.length);
    const dim = q.length;
    for (let i = 0; i < docs.length; i++) {
      const v = docs[i]!.vec;
      let d = 0;
      for (let j = 0; j < dim; j++) d += q[j]! * v[j]!;
      score[i] = this.beta * d + this.gamma * (maxLex > 0 ? lex[i]! / maxLex : 0);
    }
    // Best first; ties go to the newer turn, as a recency prior would.
    const order = docs.map((_, i) => i).sort((a, b) => score[b]! - score[a]! || b - a);
    return { retrieved: order.slice(0, k).map((i) => docs[i]!.turn), us: (performance.now() - t0) * 1000 };
  }

  /** Turns held over all sessions. */
  itemsKept(): number {
    let n = 0;
    for (const d of this.sessions.values()) n += d.length;
    return n;
  }
}
