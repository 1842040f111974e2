// Reading a Prometheus text exposition in tests, through an independent parser (npm:
// parse-prometheus-text-format 1.1.1, ported from the Prometheus Python client's parser), so the tests
// do not trust prom-client's own output.

import parsePrometheusTextFormat, { type ParsedFamily } from 'parse-prometheus-text-format';

export { parsePrometheusTextFormat, type ParsedFamily };

/** The family `name`, or undefined when the exposition has none. */
export function findFamily(parsed: ParsedFamily[], name: string): ParsedFamily | undefined {
  return parsed.find((x) => x.name === name);
}

/** The family `name`; throws, listing the families there are, when it is missing. */
export function family(parsed: ParsedFamily[], name: string): ParsedFamily {
  const f = findFamily(parsed, name);
  if (!f) throw new Error(`no metric family ${name} in ${parsed.map((x) => x.name).join(', ')}`);
  return f;
}

interface Sample {
  value?: string;
  count?: string;
  sum?: string;
  buckets?: Record<string, string>;
}

/** The first sample of `name` whose labels include `labels`. */
export function sample(parsed: ParsedFamily[], name: string, labels: Record<string, string> = {}): Sample {
  const s = family(parsed, name).metrics.find((m) => Object.entries(labels).every(([k, v]) => m.labels?.[k] === v));
  if (!s) throw new Error(`no sample ${name}${JSON.stringify(labels)}`);
  return s as Sample;
}

/** A counter's or gauge's value; a histogram's count. */
export function value(parsed: ParsedFamily[], name: string, labels: Record<string, string> = {}): number {
  const s = sample(parsed, name, labels);
  return Number(s.value ?? s.count);
}

/** Count, sum and cumulative bucket counts of an unlabelled histogram. */
export function hist(parsed: ParsedFamily[], name: string): { count: number; sum: number; buckets: Record<string, number> } {
  const s = sample(parsed, name);
  return { count: Number(s.count), sum: Number(s.sum), buckets: Object.fromEntries(Object.entries(s.buckets ?? {}).map(([k, v]) => [k, Number(v)])) };
}

/** Count and sum of a labelled histogram series, from the raw text (the parser drops a histogram's labels). */
export function labelledHist(text: string, name: string, label: string): { count: number; sum: number } {
  const read = (suffix: string): number => {
    const line = text.split('\n').find((l) => l.startsWith(`${name}_${suffix}{${label}}`));
    if (line === undefined) throw new Error(`no ${name}_${suffix}{${label}}`);
    return Number(line.slice(line.lastIndexOf(' ') + 1));
  };
  return { count: read('count'), sum: read('sum') };
}
