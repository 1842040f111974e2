// Embedding latency per text: the transformers.js adapter on the tiny test model (built into a temp
// folder) one text per call, in batches, and as concurrent single calls, beside the built-in hashing
// embedder, in one run. The tiny model is one Gather, so its figures are the adapter's and library's
// overhead (tokenise, run, pool); a real encoder adds its own compute on top.
//
//   npm run bench -- embed [--json] [--texts N] [--batch N] [--dim N]

import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { transformersEmbedder } from '../adapters/transformers/index.js';
import { hashingEmbedder } from '../src/embed/hashing.js';
import { buildTinyModel } from './lib/tiny-model.js';

interface Figures {
  p50: number;
  p99: number;
  samples: number;
}

/** Nearest-rank percentile of sorted samples. */
function percentile(sorted: readonly number[], q: number): number {
  const i = Math.min(sorted.length - 1, Math.max(0, Math.ceil(q * sorted.length) - 1));
  return sorted[i]!;
}

function figures(usPerText: number[]): Figures {
  const s = [...usPerText].sort((a, b) => a - b);
  const round = (x: number): number => Math.round(x * 10) / 10;
  return { p50: round(percentile(s, 0.5)), p99: round(percentile(s, 0.99)), samples: s.length };
}

function intFlag(argv: string[], name: string, fallback: number, min: number, max: number): number {
  const i = argv.indexOf(name);
  if (i < 0) return fallback;
  const v = Number(argv[i + 1]);
  if (!Number.isInteger(v) || v < min || v > max) throw new RangeError(`${name} must be an integer in [${min}, ${max}], got ${argv[i + 1]}`);
  return v;
}

// Invented help-desk sentences, combined so that every text is distinct (no cache or de-dup help).
const SUBJECTS = ['my bike', 'the rear brake', 'my daughter', 'the fern', 'our spanish lesson', 'the chain', 'tom', 'maya'];
const VERBS = ['needs', 'is booked for', 'likes', 'moved to', 'was fixed on', 'should wait until'];
const OBJECTS = ['tuesday', 'a new tyre', 'friday at 10', 'more water', 'the hillcrest shop', 'verb drills', 'a service'];

function makeTexts(n: number): string[] {
  const out: string[] = [];
  for (let i = 0; out.length < n; i++) {
    const s = SUBJECTS[i % SUBJECTS.length]!;
    const v = VERBS[Math.floor(i / SUBJECTS.length) % VERBS.length]!;
    const o = OBJECTS[Math.floor(i / (SUBJECTS.length * VERBS.length)) % OBJECTS.length]!;
    out.push(`${s} ${v} ${o} (note ${i})`);
  }
  return out;
}

export default async function main(argv: string[]): Promise<void> {
  const json = argv.includes('--json');
  const nTexts = intFlag(argv, '--texts', 256, 8, 100_000);
  const batch = intFlag(argv, '--batch', 32, 2, 4096);
  const dim = intFlag(argv, '--dim', 384, 8, 4096);
  const log = (line: string): void => {
    if (!json) console.log(line);
  };

  const dir = await mkdtemp(join(tmpdir(), 'tidemark-bench-embed-'));
  try {
    const tiny = await buildTinyModel(dir, { dim });
    const model = transformersEmbedder({ model: tiny.folder, maxBatch: batch });
    await model.warmup();
    const hashing = hashingEmbedder({ dim });
    const texts = makeTexts(nTexts);
    const warm = makeTexts(nTexts + 64).slice(nTexts);

    // Warm both paths (JIT, allocator) on texts not used for timing.
    for (const t of warm) await model.embed([t]);
    hashing.embedSync(warm);

    const singleModel: number[] = [];
    for (const t of texts) {
      const t0 = process.hrtime.bigint();
      await model.embed([t]);
      singleModel.push(Number(process.hrtime.bigint() - t0) / 1e3);
    }
    const batchedModel: number[] = [];
    const concurrentModel: number[] = [];
    let concurrentCalls = 0;
    for (let i = 0; i + batch <= texts.length; i += batch) {
      const chunk = texts.slice(i, i + batch);
      const t0 = process.hrtime.bigint();
      await model.embed(chunk);
      batchedModel.push(Number(process.hrtime.bigint() - t0) / 1e3 / batch);
      // The same texts as concurrent one-text calls, as concurrent turns would make them.
      const callsBefore = model.stats().modelCalls;
      const t1 = process.hrtime.bigint();
      await Promise.all(chunk.map((t) => model.embed([t])));
      concurrentModel.push(Number(process.hrtime.bigint() - t1) / 1e3 / batch);
      concurrentCalls += model.stats().modelCalls - callsBefore;
    }
    const groups = Math.floor(texts.length / batch);
    const modelCallsPerGroup = concurrentCalls / groups;

    const singleHash: number[] = [];
    for (const t of texts) {
      const t0 = process.hrtime.bigint();
      hashing.embedSync([t]);
      singleHash.push(Number(process.hrtime.bigint() - t0) / 1e3);
    }
    const batchedHash: number[] = [];
    for (let i = 0; i + batch <= texts.length; i += batch) {
      const t0 = process.hrtime.bigint();
      hashing.embedSync(texts.slice(i, i + batch));
      batchedHash.push(Number(process.hrtime.bigint() - t0) / 1e3 / batch);
    }
    await model.close();

    const tinySingle = figures(singleModel);
    const tinyBatched = figures(batchedModel);
    const hashSingle = figures(singleHash);
    const result = {
      bench: 'embed',
      unit: 'us per text',
      texts: nTexts,
      batch,
      dim,
      library: model.stats().library,
      tinyModel: {
        single: tinySingle,
        batched: tinyBatched,
        concurrentSingles: figures(concurrentModel),
        modelCallsPerConcurrentGroup: modelCallsPerGroup,
      },
      hashing: { single: hashSingle, batched: figures(batchedHash) },
      ratios: {
        tinySingleOverBatchedP50: Math.round((tinySingle.p50 / tinyBatched.p50) * 100) / 100,
        tinySingleOverHashingSingleP50: Math.round((tinySingle.p50 / hashSingle.p50) * 100) / 100,
      },
      node: process.version,
    };

    log(`embedding latency, µs per text (${nTexts} distinct texts, batch ${batch}, dim ${dim}, ${result.library})`);
    log('                              p50        p99');
    const row = (name: string, f: Figures): void => log(`${name.padEnd(28)}${String(f.p50).padStart(8)}${String(f.p99).padStart(11)}`);
    row('tiny model, single', result.tinyModel.single);
    row(`tiny model, batch of ${batch}`, result.tinyModel.batched);
    row(`tiny model, ${batch} concurrent`, result.tinyModel.concurrentSingles);
    row('hashing, single', result.hashing.single);
    row(`hashing, batch of ${batch}`, result.hashing.batched);
    log(`concurrent single calls -> ${modelCallsPerGroup} model call(s) per group of ${batch}`);
    log(`tiny single / tiny batched (p50): ${result.ratios.tinySingleOverBatchedP50}x; tiny single / hashing single (p50): ${result.ratios.tinySingleOverHashingSingleP50}x`);
    log('the tiny model is one Gather: these are pipeline overheads, not a real encoder\'s compute');
    if (json) console.log(JSON.stringify(result));
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
}
