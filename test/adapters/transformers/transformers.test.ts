// The transformers.js embedder on a real ONNX model built at test time (bench/lib/tiny-model.ts), loaded
// through the adapter's own code path with remote download off: shape, pooling, batching, the cache,
// and the errors a user sees when the model is not on disk.

import { existsSync } from 'node:fs';
import { mkdtemp, rm, unlink } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join, relative } from 'node:path';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { TRANSFORMERS_EMBEDDER_DEFAULTS, transformersEmbedder } from '../../../adapters/transformers/index.js';
import { buildTinyModel, expectedEmbedding, type TinyModel } from '../../../bench/lib/tiny-model.js';
import { EmbeddingCache, embedCached } from '../../../src/embed/cache.js';
import { ConfigError, EmbedderError, ErrorCodes } from '../../../src/errors.js';

const hfInstalled = existsSync(new URL('../../../node_modules/@huggingface/transformers/package.json', import.meta.url));
const expectedLibrary = hfInstalled ? '@huggingface/transformers' : '@xenova/transformers';

let dir: string;
let tiny: TinyModel;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'tidemark-tiny-model-'));
  tiny = await buildTinyModel(dir, { dim: 32, seed: 7 });
});

afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

function norm(v: Float32Array): number {
  let s = 0;
  for (let j = 0; j < v.length; j++) s += v[j]! * v[j]!;
  return Math.sqrt(s);
}

function cosine(a: Float32Array, b: Float32Array): number {
  let s = 0;
  for (let j = 0; j < a.length; j++) s += a[j]! * b[j]!;
  return s / (norm(a) * norm(b));
}

function maxAbsDiff(a: ArrayLike<number>, b: ArrayLike<number>): number {
  expect(a.length).toBe(b.length);
  let m = 0;
  for (let j = 0; j < a.length; j++) m = Math.max(m, Math.abs(a[j]! - b[j]!));
  return m;
}

async function rejection(p: Promise<unknown>): Promise<EmbedderError> {
  const err = await p.then(
    () => undefined,
    (e: unknown) => e,
  );
  expect(err).toBeInstanceOf(EmbedderError);
  return err as EmbedderError;
}

describe('transformersEmbedder on a tiny BERT-shaped model', () => {
  it('keeps remote download off by default', () => {
    expect(TRANSFORMERS_EMBEDDER_DEFAULTS.allowRemote).toBe(false);
    expect(TRANSFORMERS_EMBEDDER_DEFAULTS.quantized).toBe(true);
  });

  it('knows dim from config.json before loading, and loads the model by folder path', async () => {
    const e = transformersEmbedder({ model: tiny.folder });
    expect(e.dim).toBe(32);
    expect(e.stats().library).toBeUndefined();
    await e.warmup();
    expect(e.stats()).toEqual({ modelCalls: 1, textsEmbedded: 1, library: expectedLibrary });
    const [v] = await e.embed(['my bike needs a service']);
    expect(v).toBeInstanceOf(Float32Array);
    expect(v!.length).toBe(32);
    expect(e.id).toBe(`transformers:${tiny.folder}:q8:mean`);
    await e.close();
  });

  it('loads a model by id from localModelPath, also given relative to the working directory', async () => {
    const e = transformersEmbedder({ model: tiny.name, localModelPath: relative(process.cwd(), tiny.root) });
    expect(e.dim).toBe(32);
    const [v] = await e.embed(['bike']);
    expect(v!.length).toBe(32);
    await e.close();
  });

  it('returns the mean-pooled, L2-normalised token vectors', async () => {
    // Reference: mean pooling over [CLS] + tokens + [SEP] then L2 normalisation (Sentence-BERT, Reimers &
    // Gurevych 2019), computed in float64 from the model's embedding table. "bikes" splits into "bike" +
    // "##s" by WordPiece greedy longest-match-first (BERT, Devlin et al. 2019).
    const e = transformersEmbedder({ model: tiny.folder });
    const [a, b, c] = await e.embed(['Bike chain', 'my bikes', 'the fern?']);
    expect(maxAbsDiff(a!, expectedEmbedding(tiny, ['bike', 'chain']))).toBeLessThan(1e-6);
    expect(maxAbsDiff(b!, expectedEmbedding(tiny, ['my', 'bike', '##s']))).toBeLessThan(1e-6);
    expect(maxAbsDiff(c!, expectedEmbedding(tiny, ['the', 'fern', '?']))).toBeLessThan(1e-6);
    await e.close();
  });

  it('agrees with the library’s own pooling: \'mean\', normalize: true', async () => {
    // Reference: transformers.js's feature-extraction pipeline pooling the same model itself.
    const lib = (await import(expectedLibrary)) as {
      env: { localModelPath: string; allowRemoteModels: boolean };
      pipeline(task: string, model: string, o: object): Promise<(t: string[], o: object) => Promise<{ dims: number[]; data: Float32Array }>>;
    };
    const saved = { localModelPath: lib.env.localModelPath, allowRemoteModels: lib.env.allowRemoteModels };
    lib.env.localModelPath = tiny.root;
    lib.env.allowRemoteModels = false;
    const texts = ['my daughter goes to hillcrest school', 'hi', 'booking on tuesday at 10', 'zzz qqq'];
    let reference: { dims: number[]; data: Float32Array };
    try {
      const pipe = await lib.pipeline('feature-extraction', tiny.name, hfInstalled ? { dtype: 'q8', local_files_only: true } : { quantized: true, local_files_only: true });
      reference = await pipe(texts, { pooling: 'mean', normalize: true });
    } finally {
      Object.assign(lib.env, saved);
    }
    expect(reference.dims).toEqual([4, 32]);
    const e = transformersEmbedder({ model: tiny.folder });
    const ours = await e.embed(texts);
    for (let i = 0; i < texts.length; i++) expect(maxAbsDiff(ours[i]!, reference.data.subarray(i * 32, (i + 1) * 32))).toBeLessThan(1e-6);
    await e.close();
  });

  it('returns unit-length, finite vectors for any text', async () => {
    const e = transformersEmbedder({ model: tiny.folder });
    await fc.assert(
      fc.asyncProperty(fc.array(fc.string({ maxLength: 60 }), { minLength: 1, maxLength: 6 }), async (texts) => {
        const vs = await e.embed(texts);
        expect(vs.length).toBe(texts.length);
        for (const v of vs) {
          expect(v.length).toBe(32);
          expect(v.every((x) => Number.isFinite(x))).toBe(true);
          expect(Math.abs(norm(v) - 1)).toBeLessThan(1e-5);
        }
      }),
      { numRuns: 25 },
    );
    await e.close();
  });

  it('gives the same vectors batched (padded) as one text at a time', async () => {
    const e = transformersEmbedder({ model: tiny.folder });
    const texts = ['hi', 'my daughter goes to hillcrest school', 'booking on tuesday at 10', 'spanish verb lesson', ''];
    const batched = await e.embed(texts);
    for (let i = 0; i < texts.length; i++) {
      const [single] = await e.embed([texts[i]!]);
      expect(maxAbsDiff(batched[i]!, single!)).toBeLessThan(1e-5);
    }
    await e.close();
  });

  it('collects concurrent embed() calls made in the same tick into one model call', async () => {
    const e = transformersEmbedder({ model: tiny.folder });
    await e.warmup();
    const before = e.stats();
    const texts = ['brake', 'wheel', 'tyre', 'water the fern', 'maya'];
    const results = await Promise.all(texts.map((t) => e.embed([t])));
    expect(e.stats().modelCalls - before.modelCalls).toBe(1);
    expect(e.stats().textsEmbedded - before.textsEmbedded).toBe(5);
    const together = await e.embed(texts);
    for (let i = 0; i < texts.length; i++) expect(maxAbsDiff(results[i]![0]!, together[i]!)).toBeLessThan(1e-5);
    await e.close();
  });

  it('collects calls within batchWindowMs, splits at maxBatch, and embeds a repeated text once', async () => {
    const e = transformersEmbedder({ model: tiny.folder, maxBatch: 2, batchWindowMs: 20 });
    await e.warmup();
    const before = e.stats();
    const first = e.embed(['plant', 'soil']);
    await new Promise((r) => setTimeout(r, 5));
    const second = e.embed(['pot', 'plant', 'water']);
    const [a, b] = await Promise.all([first, second]);
    // 4 distinct texts in one window -> two calls of maxBatch 2.
    expect(e.stats().modelCalls - before.modelCalls).toBe(2);
    expect(e.stats().textsEmbedded - before.textsEmbedded).toBe(4);
    expect(b![1]).toBe(a![0]);
    await e.close();
  });

  it('counts cache hits and shares entries with the core’s embedCached', async () => {
    const cache = new EmbeddingCache(100);
    const e = transformersEmbedder({ model: tiny.folder, cache });
    const first = await e.embed(['my bike', 'bike chain']);
    expect(cache.stats()).toEqual({ hits: 0, misses: 2, size: 2 });
    const calls = e.stats().modelCalls;
    const again = await e.embed(['bike chain', 'my bike']);
    expect(cache.stats()).toEqual({ hits: 2, misses: 2, size: 2 });
    expect(e.stats().modelCalls).toBe(calls);
    expect(again[0]).toBe(first[1]);
    // The core's helper finds the adapter's entries under the same keys.
    const viaCore = await embedCached(e, cache, ['my bike']);
    expect(viaCore[0]).toBe(first[0]);
    expect(cache.stats().hits).toBe(3);
    await e.close();
  });

  it('is deterministic across loads and across rebuilds of the model', async () => {
    const texts = ['tom likes french', 'friday booking'];
    const a = transformersEmbedder({ model: tiny.folder });
    const va = await a.embed(texts);
    await a.close();
    const again = await buildTinyModel(join(dir, 'rebuilt'), { dim: 32, seed: 7 });
    const b = transformersEmbedder({ model: again.folder });
    const vb = await b.embed(texts);
    await b.close();
    for (let i = 0; i < texts.length; i++) expect(Array.from(vb[i]!)).toEqual(Array.from(va[i]!));
  });

  it('gives distinct vectors to distinct texts', async () => {
    const e = transformersEmbedder({ model: tiny.folder });
    const texts = ['my bike', 'my bicycle', 'my ride', 'the fern', 'spanish lesson', 'maya', 'tom'];
    const vs = await e.embed(texts);
    for (let i = 0; i < vs.length; i++) {
      for (let j = i + 1; j < vs.length; j++) expect(cosine(vs[i]!, vs[j]!)).toBeLessThan(0.999);
    }
    await e.close();
  });

  it('honours threads and restores the library settings after loading', async () => {
    const e = transformersEmbedder({ model: tiny.folder, threads: 1 });
    const [v] = await e.embed(['bike chain']);
    expect(maxAbsDiff(v!, expectedEmbedding(tiny, ['bike', 'chain']))).toBeLessThan(1e-6);
    const lib = (await import(expectedLibrary)) as { env: { localModelPath: string; allowRemoteModels: boolean } };
    expect(lib.env.localModelPath).not.toBe(tiny.root);
    expect(lib.env.allowRemoteModels).toBe(true); // the library's own default, untouched
    await e.close();
  });

  it('rejects with TIDEMARK_E_EMBED_MODEL naming the folder when the model is missing', async () => {
    const missing = join(dir, 'no-such-model');
    const e = transformersEmbedder({ model: missing, dim: 32 });
    const err = await rejection(e.warmup());
    expect(err.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(err.message).toMatch(
      new RegExp(`^model ${missing.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')} not found in ${dir.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')} and remote download is off; put the model files there .* or set allowRemote: true$`),
    );
    expect(err.details).toEqual({ model: missing, folder: dir });

    const byId = transformersEmbedder({ model: 'Xenova/all-MiniLM-L6-v2', localModelPath: dir, dim: 384 });
    const err2 = await rejection(byId.embed(['hello']));
    expect(err2.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(err2.message.startsWith(`model Xenova/all-MiniLM-L6-v2 not found in ${dir} and remote download is off;`)).toBe(true);
  });

  it('says which weights file is missing, and loads once it is there', async () => {
    const m = await buildTinyModel(join(dir, 'partial'), { dim: 32 });
    const weights = join(m.folder, 'onnx', 'model_quantized.onnx');
    await unlink(weights);
    const e = transformersEmbedder({ model: m.folder });
    const err = await rejection(e.warmup());
    expect(err.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(err.message).toBe(
      `model ${m.folder} in ${m.folder} has no onnx/model_quantized.onnx and remote download is off; add that file or set quantized: false to use onnx/model.onnx`,
    );
    await buildTinyModel(join(dir, 'partial'), { dim: 32 });
    await e.warmup();
    expect(e.dim).toBe(32);
    await e.close();
  });

  it('checks a dim option against the model output', async () => {
    const e = transformersEmbedder({ model: tiny.folder, dim: 16 });
    expect(e.dim).toBe(16);
    const err = await rejection(e.warmup());
    expect(err.code).toBe(ErrorCodes.EMBED_INVALID);
    expect(err.message).toBe(`transformers embedder ${tiny.folder} outputs 32 dims but the dim option says 16; fix the dim option or the model files`);
    await e.close();
  });

  it('throws a ConfigError when dim is read before it can be known', () => {
    const e = transformersEmbedder({ model: 'Xenova/all-MiniLM-L6-v2' });
    expect(() => e.dim).toThrow(ConfigError);
    expect(() => e.dim).toThrow(/dim is not known yet; pass the dim option or await embedder\.warmup\(\)/);
  });

  it('validates options at construction, naming the option and the value', () => {
    expect(() => transformersEmbedder({ model: '' })).toThrow('transformers embedder: model must be a model id or a folder path, got ""');
    expect(() => transformersEmbedder({ model: tiny.folder, maxBatch: 0 })).toThrow('transformers embedder: maxBatch must be an integer in [1, 4096], got 0');
    expect(() => transformersEmbedder({ model: tiny.folder, threads: -1 })).toThrow('threads must be an integer in [0, 1024] (0 = runtime default), got -1');
    expect(() => transformersEmbedder({ model: tiny.folder, batchWindowMs: Number.NaN })).toThrow('batchWindowMs must be a number of milliseconds in [0, 1000], got NaN');
    expect(() => transformersEmbedder({ model: tiny.folder, library: 'onnx' as never })).toThrow(
      "library must be 'auto', '@huggingface/transformers' or '@xenova/transformers', got \"onnx\"",
    );
    expect(() => transformersEmbedder({ model: tiny.folder, allowRemote: 'yes' as never })).toThrow(ConfigError);
    // An option given as undefined takes its default.
    expect(transformersEmbedder({ model: tiny.folder, maxBatch: undefined }).dim).toBe(32);
  });

  it('rejects calls after close()', async () => {
    const e = transformersEmbedder({ model: tiny.folder });
    await e.warmup();
    await e.close();
    const err = await rejection(e.embed(['bike']));
    expect(err.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(err.message).toBe(`transformers embedder ${tiny.folder} is closed; create a new one`);
  });

  it('reports a library chosen explicitly but not installed, or loads with it when it is', async () => {
    const e = transformersEmbedder({ model: tiny.folder, library: '@huggingface/transformers' });
    if (hfInstalled) {
      await e.warmup();
      expect(e.stats().library).toBe('@huggingface/transformers');
    } else {
      const err = await rejection(e.warmup());
      expect(err.code).toBe(ErrorCodes.EMBED_MODEL);
      expect(err.message).toBe(
        "transformers embedder: library @huggingface/transformers is not installed; run npm install @huggingface/transformers or set library: 'auto'",
      );
    }
    await e.close();
  });
});
