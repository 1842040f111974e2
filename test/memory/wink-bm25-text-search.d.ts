// Types for wink-bm25-text-search 3.1.2 (it ships none): the part of its API the BM25 check uses,
// as read from its source (src/wink-bm25-text-search.js).
declare module 'wink-bm25-text-search' {
  export interface WinkBm25 {
    defineConfig(cfg: { fldWeights: Record<string, number>; bm25Params?: { k1?: number; b?: number; k?: number } }): boolean;
    definePrepTasks(tasks: Array<(input: string) => unknown>, field?: string): number;
    addDoc(doc: Record<string, string>, id: string | number): number;
    consolidate(fp?: number): boolean;
    /** [id, score] pairs, best first. */
    search(text: string, limit?: number): Array<[string, number]>;
  }
  export default function bm25(): WinkBm25;
}
