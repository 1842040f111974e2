// What a logbook search takes and returns: its settings (the read options that concern the logbook),
// the analysed query, and the hits with the scores behind their rank. Plain data.

import { READ_DEFAULTS, type ReadParams } from '../memory/params.js';
import type { LogbookEntry } from '../types.js';

/** How one search scores entries: the read options that concern the logbook (see ReadParams). */
export type LogbookSearchParams = Pick<
  ReadParams,
  'k1' | 'b' | 'neighbourWeight' | 'speakerBoost' | 'nameWeight' | 'dateWeight' | 'temporalBoost' | 'replyWeight' | 'questionWeight'
> & {
  /** Entries returned by the lexical ranking at most (read.logbookLimit). */
  limit: number;
};

/** The logbook search settings of a read's parameters. */
export function searchParamsOf(p: ReadParams): LogbookSearchParams {
  return {
    k1: p.k1, b: p.b, neighbourWeight: p.neighbourWeight, speakerBoost: p.speakerBoost, nameWeight: p.nameWeight,
    dateWeight: p.dateWeight, temporalBoost: p.temporalBoost, replyWeight: p.replyWeight, questionWeight: p.questionWeight, limit: p.logbookLimit,
  };
}

export const LOGBOOK_SEARCH_DEFAULTS: LogbookSearchParams = searchParamsOf(READ_DEFAULTS);

/** A query, analysed once by the caller (the same analysis scores slots). */
export interface LogbookQuery {
  /** Analysed terms (see `analyze`), with repeats. */
  terms: readonly string[];
  /** Raw lower-cased tokens, to recognise speakers' names. */
  tokens: readonly string[];
  /** Resolved-date terms of the query (see `dateTerms`). */
  dateTerms: readonly string[];
  /** The query asks when something happened. */
  temporal: boolean;
  /** Unit query vector, for the dense list. */
  vector?: Float32Array;
  /** Dense candidates wanted (0 for none). */
  denseK?: number;
}

/** One entry a search found. */
export interface LogbookHit {
  entry: LogbookEntry;
  /** Final lexical score: own BM25 plus the neighbours' share, times the speaker and date boosts. */
  score: number;
  /** The entry's own BM25 score (boosts excluded). */
  lexical: number;
  /** The part of `score` that came from neighbouring turns (before boosts). */
  context: number;
  /** Own BM25 over the query's maximum, in [0, ~1.5]: how much of the query the entry covers. */
  coverage: number;
  /** Cosine to the query vector, when the dense list was searched and holds the entry (else NaN). */
  cosine: number;
  /** Rank in the lexical list (1-based; 0 when only the dense list found it). */
  lexicalRank: number;
  /** Rank in the dense list (1-based; 0 when absent). */
  denseRank: number;
  /** Said by a person the query names. */
  speakerMatch: boolean;
  /**
   * For a superseded value, and for a turn that stated a superseded value the query matched: the
   * revision id of the current value (the successor chain followed through the logbook). A read never
   * ranks this hit above it.
   */
  supersededBy?: string;
}

/** What a search found, and the statistics to score other texts (slots) on the same scale. */
export interface LogbookSearchResult {
  hits: LogbookHit[];
  /** Entries in the index. */
  size: number;
  /** Average analysed length of the entries. */
  avgLength: number;
  /** Inverse document frequency per distinct query term (0 for unseen terms). */
  idf: Map<string, number>;
  /** Document frequency per distinct query term (live entries holding it). */
  df: Map<string, number>;
  /** Weight of each distinct query term (name and date terms are weighted differently). */
  weight: Map<string, number>;
  /** The query's maximum BM25: sum of weight × idf; coverage is a score over this. */
  maxScore: number;
  /** Speakers of this scope the query names, lower-cased. */
  speakers: string[];
  /** Final successors of superseded hits that are logbook entries themselves (evicted since). */
  successors: Map<string, LogbookEntry>;
}
