// Types of scripts/mutate-sample-lib.mjs for the tests that import it.
export interface Position { line: number; column: number }
export interface Span { start: Position; end: Position }
export interface Cluster { detected: number; total: number }
export function draw<T>(items: readonly T[], n: number, random: () => number): T[];
export const nodeKey: (fileName: string, span: Span) => string;
export const keyOf: (fileName: string, location: Span, m: { mutatorName: string; replacement: string }) => string;
export const rangeOf: (m: { fileName: string; location: Span }) => string;
export const inside: (outer: Span, inner: Span) => boolean;
export function ratioInterval(clusters: readonly Cluster[], z?: number): { score: number; lo: number; hi: number };
export const roomOf: (file: string) => string;
