// The transformers embedder's own logic — option checks, batching, de-duplication, pooling, shape and
// dim checks, loading, closing — against a stand-in for transformers.js. This file never loads
// onnxruntime or a real transformers.js package, so it runs in the worker threads of Stryker's vitest
// runner, where onnxruntime-node's native addon cannot load ("Module did not self-register"). The real
// model (a tiny BERT-shaped ONNX file built at test time) is exercised by transformers.test.ts and
// demo.test.ts in the normal suite; this file checks the adapter's arithmetic and control flow.
//
// The stand-in: vitest's module mocks replace both packages (they intercept the adapter's
// `await import(spec)` with a variable specifier) and `node:module`, whose createRequire the adapter
// uses to reach the onnxruntime-node copy of @xenova/transformers 2.x. A package that is "not
// installed" throws Node's module-not-found error from its `pipeline` getter: the adapter reads
// `mod.pipeline` inside the same try as the import, and a factory's own errors come back wrapped by
// vitest, so that is where the error can reach the adapter's check unchanged.
//
// Its model knows a bike workshop's words; each token's hidden state is a hand-picked 2-vector, and
// padded positions get [100, -100], so a pooling that ignored the attention mask would show.

import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, relative } from 'node:path';
import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it, vi } from 'vitest';
import { TransformersEmbedder, TRANSFORMERS_EMBEDDER_DEFAULTS, transformersEmbedder, type TransformersEmbedderOptions } from '../../../adapters/transformers/index.js';
import {
  importLibrary,
  isFolderPath,
  isModuleNotFound,
  readHiddenSize,
  serialised,
  wrapSessionThreads,
  type FeatureExtractor,
  type LibEnv,
  type LibTensor,
  type TokenizerOutput,
} from '../../../adapters/transformers/library.js';
import { EmbeddingCache } from '../../../src/embed/cache.js';
import { ConfigError, EmbedderError, ErrorCodes, InputError, TidemarkError } from '../../../src/errors.js';
import { textDigest } from '../../../src/memory/text.js';

// Every test here takes milliseconds; a broken scheduler leaves a call unsettled, which should fail in
// seconds rather than at the suite's 30 s (Stryker would count it as a timeout and restart its runner).
vi.setConfig({ testTimeout: 5000 });


const fake = vi.hoisted(() => {
  const state = {
    /** How each package behaves on import: its API as named exports, only as a default export, not installed, or failing. */
    modes: { '@huggingface/transformers': 'missing', '@xenova/transformers': 'named' } as Record<string, string>,
    envs: {} as Record<string, { localModelPath: string; allowRemoteModels: boolean; allowLocalModels: boolean; cacheDir: string | null }>,
    /** Every pipeline() call, with the library's settings as they were during the call. */
    calls: [] as { library: string; task: string; model: string; options: Record<string, unknown>; env: object }[],
    /** What pipeline() does; set per test (beforeEach gives the workshop model). */
    load: (async () => {
      throw new Error('no fake pipeline set');
    }) as (library: string, model: string, options: Record<string, unknown>) => Promise<unknown>,
    /** onnxruntime-node as @xenova/transformers 2.x would load it, and what createRequire was asked. */
    ort: { InferenceSession: { create: undefined as unknown as (...args: unknown[]) => Promise<unknown> } },
    requires: [] as string[],
  };
  const moduleOf = (name: string): object => {
    const pipeline = (task: string, model: string, options: Record<string, unknown>): Promise<unknown> => {
      state.calls.push({ library: name, task, model, options, env: { ...state.envs[name] } });
      return state.load(name, model, options);
    };
    const check = (): void => {
      const mode = state.modes[name];
      if (mode === 'missing') {
        // Node's own wording for an ES import of a package that is not installed.
        throw Object.assign(new Error(`Cannot find package '${name}' imported from /srv/bike-bot/node_modules/tidemark/dist/adapters/transformers/library.js`), {
          code: 'ERR_MODULE_NOT_FOUND',
        });
      }
      if (mode === 'broken') throw new Error('Something went wrong installing the "sharp" module');
    };
    return {
      get pipeline() {
        check();
        return state.modes[name] === 'default' ? undefined : pipeline;
      },
      get env() {
        return state.envs[name];
      },
      // Only a package of the 'default' kind has a default export.
      get default() {
        return state.modes[name] === 'default' ? { pipeline, env: state.envs[name] } : undefined;
      },
    };
  };
  return { state, moduleOf };
});

vi.mock('@huggingface/transformers', () => fake.moduleOf('@huggingface/transformers'));
vi.mock('@xenova/transformers', () => fake.moduleOf('@xenova/transformers'));
vi.mock('node:module', async (importOriginal) => ({
  ...(await importOriginal<typeof import('node:module')>()),
  createRequire: (from: string | URL) => {
    fake.state.requires.push(`createRequire ${String(from)}`);
    const req = (id: string): unknown => {
      fake.state.requires.push(`require ${id}`);
      if (id !== 'onnxruntime-node') throw new Error(`the stand-in has no ${id}`);
      return fake.state.ort;
    };
    req.resolve = (id: string): string => {
      fake.state.requires.push(`resolve ${id}`);
      return `/srv/bike-bot/node_modules/${id}/src/transformers.js`;
    };
    return req;
  },
}));

// ---------------------------------------------------------------- the stand-in model

const PAD = [100, -100];
/** Hidden states of the workshop's words (token id = index + 1; id 0 is padding). */
const VOCAB: Record<string, number[]> = {
  bell: [5, 12],
  chain: [6, 1],
  oil: [0, 7],
  inner: [8, 3],
  tube: [0, 3],
  brake: [4, 0],
  pad: [0, 4],
  wear: [2, 8],
  'warm-up': [1, 0],
  spoke: [0, 1],
  tyre: [1, 1],
  pump: [2, 1],
  saddle: [1, 2],
  lever: [3, 1],
  blank: [0, 0],
};
const WORDS = Object.keys(VOCAB);

interface Workshop {
  extract: FeatureExtractor & { tokenizer: NonNullable<FeatureExtractor['tokenizer']>; model: NonNullable<FeatureExtractor['model']>; dispose: () => Promise<void> };
  /** The texts of each model call, in the order the model saw them. */
  batches: string[][];
  tokenizerOptions: unknown[];
  hiddenDisposed: number;
  disposed: number;
}

/**
 * A feature-extraction pipeline whose tokenizer splits on spaces and pads to the longest text, and
 * whose model gives each token its VOCAB vector (zero-padded to `width`). `around` runs before and
 * after the model call; `output` replaces the model's output (for shape errors).
 */
function workshop(options: {
  width?: number;
  around?: (texts: string[]) => Promise<void>;
  output?: (hidden: LibTensor) => Record<string, LibTensor | undefined>;
  hiddenDispose?: boolean;
} = {}): Workshop {
  const width = options.width ?? 2;
  const w: Workshop = { batches: [], tokenizerOptions: [], hiddenDisposed: 0, disposed: 0 } as unknown as Workshop;
  const textsOf = new WeakMap<object, string[]>();
  const tokenizer = (texts: string[], o: { padding: boolean; truncation: boolean }): TokenizerOutput => {
    w.tokenizerOptions.push(o);
    const words = texts.map((t) => t.split(' '));
    for (const ws of words) for (const x of ws) if (!(x in VOCAB)) throw new Error(`the workshop vocabulary has no "${x}"`);
    const seq = Math.max(0, ...words.map((ws) => ws.length));
    const ids = new BigInt64Array(texts.length * seq);
    // transformers.js gives the mask as int64 (BigInt) values, as here.
    const mask = new BigInt64Array(texts.length * seq);
    words.forEach((ws, i) => ws.forEach((x, j) => {
      ids[i * seq + j] = BigInt(WORDS.indexOf(x) + 1);
      mask[i * seq + j] = 1n;
    }));
    const out = { input_ids: { dims: [texts.length, seq], data: ids as unknown as ArrayLike<number> }, attention_mask: { dims: [texts.length, seq], data: mask as unknown as ArrayLike<number> } };
    textsOf.set(out, texts);
    return out;
  };
  const model = async (inputs: TokenizerOutput): Promise<Record<string, LibTensor | undefined>> => {
    const texts = textsOf.get(inputs)!;
    await options.around?.(texts);
    w.batches.push(texts);
    const [n, seq] = inputs.input_ids.dims as [number, number];
    const data = new Float32Array(n * seq * width);
    for (let t = 0; t < n * seq; t++) {
      const id = Number((inputs.input_ids.data as unknown as BigInt64Array)[t]);
      const v = id === 0 ? PAD : VOCAB[WORDS[id - 1]!]!;
      for (let k = 0; k < width; k++) data[t * width + k] = v[k] ?? 0;
    }
    const hidden: LibTensor = { dims: [n, seq, width], data };
    if (options.hiddenDispose !== false) hidden.dispose = () => void w.hiddenDisposed++;
    await options.around?.(texts);
    return options.output ? options.output(hidden) : { last_hidden_state: hidden };
  };
  const pooled = async (): Promise<LibTensor> => {
    throw new Error('the library’s own pooling is not used when the tokenizer and model are there');
  };
  w.extract = Object.assign(pooled, { tokenizer, model, dispose: async () => void w.disposed++ });
  return w;
}

// ---------------------------------------------------------------- helpers

function deferred<T = void>(): { promise: Promise<T>; resolve: (v: T) => void; reject: (e: unknown) => void } {
  let resolve!: (v: T) => void;
  let reject!: (e: unknown) => void;
  const promise = new Promise<T>((a, b) => {
    resolve = a;
    reject = b;
  });
  return { promise, resolve, reject };
}

/** Lets queued macrotasks (setImmediate flushes) and their promise chains run. */
async function settle(turns = 20): Promise<void> {
  for (let i = 0; i < turns; i++) await new Promise<void>((r) => setImmediate(r));
}

/**
 * Waits, a macrotask at a time, until `ready()` holds (a first load imports the mocked package through
 * vitest's module runner, which takes I/O turns), then asserts it.
 */
async function until(ready: () => boolean, turns = 2000): Promise<void> {
  for (let i = 0; i < turns && !ready(); i++) await new Promise<void>((r) => setImmediate(r));
  expect(ready()).toBe(true);
}

async function rejection(p: Promise<unknown>): Promise<TidemarkError> {
  const err = await p.then(
    () => undefined,
    (e: unknown) => e,
  );
  expect(err).toBeInstanceOf(TidemarkError);
  return err as TidemarkError;
}

function configError(options: unknown): ConfigError {
  let caught: unknown;
  try {
    transformersEmbedder(options as TransformersEmbedderOptions);
  } catch (e) {
    caught = e;
  }
  expect(caught).toBeInstanceOf(ConfigError);
  return caught as ConfigError;
}

const rows = (vs: Float32Array[]): number[][] => vs.map((v) => Array.from(v));
/** Float32 rounding: compare to 6 decimals. */
function expectRows(got: Float32Array[], want: number[][]): void {
  expect(got.length).toBe(want.length);
  got.forEach((v, i) => {
    expect(v.length).toBe(want[i]!.length);
    want[i]!.forEach((x, k) => expect(v[k]).toBeCloseTo(x, 6));
  });
}

// Mean pooling over the tokens the mask keeps, then L2 normalisation (Sentence-BERT, Reimers &
// Gurevych 2019), worked by hand for the workshop's words:
const BELL = [5 / 13, 12 / 13]; //                 [5, 12] alone; |[5, 12]| = 13
const CHAIN_OIL = [0.6, 0.8]; //                   ([6, 1] + [0, 7]) / 2 = [3, 4]; |[3, 4]| = 5
const INNER_TUBE = [0.8, 0.6]; //                  ([8, 3] + [0, 3]) / 2 = [4, 3]; |[4, 3]| = 5
const BRAKE_PAD_WEAR = [1 / Math.sqrt(5), 2 / Math.sqrt(5)]; // ([4, 0] + [0, 4] + [2, 8]) / 3 = [2, 4]; |[2, 4]| = 2√5

let dir: string;
let models: string;
let cacheDir: string;
let folder: string;
let current: Workshop;
const env0 = (): LibEnv => ({ localModelPath: models, allowRemoteModels: true, allowLocalModels: false, cacheDir: null });

function modelFolder(parent: string, name: string, files: { hiddenSize?: number; weights?: string[] }): string {
  const f = join(parent, name);
  mkdirSync(join(f, 'onnx'), { recursive: true });
  if (files.hiddenSize !== undefined) writeFileSync(join(f, 'config.json'), JSON.stringify({ model_type: 'bert', hidden_size: files.hiddenSize }));
  for (const w of files.weights ?? []) writeFileSync(join(f, 'onnx', w), '');
  return f;
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'tidemark-tx-logic-'));
  models = join(dir, 'models');
  cacheDir = join(dir, 'cache');
  folder = modelFolder(models, 'workshop', { hiddenSize: 2, weights: ['model_quantized.onnx'] });
  modelFolder(models, 'no-weights', { hiddenSize: 2 });
  modelFolder(models, 'fp32-only', { hiddenSize: 2, weights: ['model.onnx'] });
  modelFolder(models, 'wide', { hiddenSize: 3, weights: ['model_quantized.onnx'] });
  modelFolder(cacheDir, 'cached-only', { hiddenSize: 2, weights: ['model_quantized.onnx'] });
  modelFolder(join(dir, 'other-cache'), 'cached-only', { hiddenSize: 2 });
  modelFolder(models, 'no-config', { weights: ['model_quantized.onnx'] });
  modelFolder(cacheDir, 'no-config', { weights: ['model_quantized.onnx'] });
});

afterAll(() => {
  rmSync(dir, { recursive: true, force: true });
});

beforeEach(() => {
  fake.state.modes = { '@huggingface/transformers': 'missing', '@xenova/transformers': 'named' };
  fake.state.envs = { '@huggingface/transformers': env0(), '@xenova/transformers': env0() };
  fake.state.calls = [];
  fake.state.requires = [];
  current = workshop();
  fake.state.load = async () => current.extract;
});

afterEach(() => {
  vi.useRealTimers();
});

// ---------------------------------------------------------------- options

describe('options', () => {
  it('has documented defaults: local files only, quantized weights, batches of 32, no window, runtime threads, auto library', () => {
    expect(TRANSFORMERS_EMBEDDER_DEFAULTS).toEqual({
      localModelPath: undefined,
      allowRemote: false,
      cacheDir: undefined,
      quantized: true,
      dim: undefined,
      maxBatch: 32,
      batchWindowMs: 0,
      threads: 0,
      cache: undefined,
      library: 'auto',
    });
  });

  it('names each bad option, the value and what was expected', () => {
    const cases: [Partial<Record<keyof TransformersEmbedderOptions, unknown>>, string, string, string][] = [
      [{ model: '' }, 'model', 'a model id or a folder path', '""'],
      [{ model: '   ' }, 'model', 'a model id or a folder path', '"   "'],
      [{ model: 42 }, 'model', 'a model id or a folder path', '42'],
      [{ localModelPath: '' }, 'localModelPath', 'a folder path', '""'],
      [{ localModelPath: 7 }, 'localModelPath', 'a folder path', '7'],
      [{ cacheDir: '' }, 'cacheDir', 'a folder path', '""'],
      [{ cacheDir: false }, 'cacheDir', 'a folder path', 'false'],
      [{ allowRemote: 'yes' }, 'allowRemote', 'true or false', '"yes"'],
      [{ quantized: 1 }, 'quantized', 'true or false', '1'],
      [{ dim: 0 }, 'dim', 'an integer in [1, 65536]', '0'],
      [{ dim: 65_537 }, 'dim', 'an integer in [1, 65536]', '65537'],
      [{ dim: 1.5 }, 'dim', 'an integer in [1, 65536]', '1.5'],
      [{ maxBatch: 0 }, 'maxBatch', 'an integer in [1, 4096]', '0'],
      [{ maxBatch: 4097 }, 'maxBatch', 'an integer in [1, 4096]', '4097'],
      [{ maxBatch: 2.5 }, 'maxBatch', 'an integer in [1, 4096]', '2.5'],
      [{ batchWindowMs: -0.5 }, 'batchWindowMs', 'a number of milliseconds in [0, 1000]', '-0.5'],
      [{ batchWindowMs: 1000.5 }, 'batchWindowMs', 'a number of milliseconds in [0, 1000]', '1000.5'],
      [{ batchWindowMs: Number.NaN }, 'batchWindowMs', 'a number of milliseconds in [0, 1000]', 'NaN'],
      [{ batchWindowMs: '5' }, 'batchWindowMs', 'a number of milliseconds in [0, 1000]', '"5"'],
      [{ threads: -1 }, 'threads', 'an integer in [0, 1024] (0 = runtime default)', '-1'],
      [{ threads: 1025 }, 'threads', 'an integer in [0, 1024] (0 = runtime default)', '1025'],
      [{ threads: 0.5 }, 'threads', 'an integer in [0, 1024] (0 = runtime default)', '0.5'],
      [{ cache: new Map() }, 'cache', 'an EmbeddingCache', 'an object'],
      [{ library: 'onnx' }, 'library', "'auto', '@huggingface/transformers' or '@xenova/transformers'", '"onnx"'],
    ];
    for (const [bad, option, expected, got] of cases) {
      const err = configError({ model: 'Xenova/all-MiniLM-L6-v2', ...bad });
      expect(err.code).toBe(ErrorCodes.CONFIG);
      expect(err.message).toBe(`transformers embedder: ${option} must be ${expected}, got ${got}`);
      expect(err.details).toEqual({ option, value: got });
    }
  });

  it('accepts every limit itself', () => {
    const limits: Partial<TransformersEmbedderOptions>[] = [
      { dim: 1 },
      { dim: 65_536 },
      { maxBatch: 1 },
      { maxBatch: 4096 },
      { batchWindowMs: 0 },
      { batchWindowMs: 1000 },
      { threads: 0 },
      { threads: 1024 },
      { library: '@xenova/transformers' },
      { library: '@huggingface/transformers' },
      { localModelPath: 'models', cacheDir: 'cache', cache: new EmbeddingCache(4), allowRemote: true, quantized: false },
      { model: 'x' },
    ];
    for (const o of limits) expect(transformersEmbedder({ model: 'Xenova/all-MiniLM-L6-v2', ...o })).toBeInstanceOf(TransformersEmbedder);
    expect(transformersEmbedder({ model: 'm', dim: 65_536 }).dim).toBe(65_536);
    expect(transformersEmbedder({ model: 'm', dim: 1 }).dim).toBe(1);
  });

  it('wants an options object', () => {
    for (const [o, got] of [[undefined, 'undefined'], [null, 'null'], ['workshop', '"workshop"']] as const) {
      const err = configError(o);
      expect(err.message).toBe(`transformers embedder: options must be an object with a model, got ${got}`);
    }
  });

  it('gives a field set to undefined its default and leaves the caller’s object alone', async () => {
    const options = Object.freeze({ model: folder, maxBatch: undefined, library: undefined, quantized: undefined });
    const e = transformersEmbedder(options);
    expect(e.id).toBe(`transformers:${folder}:q8:mean`);
    expectRows(await e.embed(['bell']), [BELL]);
    expect(options).toEqual({ model: folder, maxBatch: undefined, library: undefined, quantized: undefined });
  });

  it('builds its id from the model and the weights, not the library', () => {
    expect(transformersEmbedder({ model: 'Xenova/all-MiniLM-L6-v2' }).id).toBe('transformers:Xenova/all-MiniLM-L6-v2:q8:mean');
    expect(transformersEmbedder({ model: 'Xenova/all-MiniLM-L6-v2', quantized: false, library: '@xenova/transformers' }).id).toBe(
      'transformers:Xenova/all-MiniLM-L6-v2:fp32:mean',
    );
    expect(transformersEmbedder({ model: 'm' }).semantic).toBe(true);
  });
});

// ---------------------------------------------------------------- dim

describe('dim', () => {
  it('comes from the dim option before config.json', () => {
    expect(transformersEmbedder({ model: folder }).dim).toBe(2);
    expect(transformersEmbedder({ model: folder, dim: 5 }).dim).toBe(5);
  });

  it('is read from config.json of a model given by id inside localModelPath, or by a relative path', () => {
    expect(transformersEmbedder({ model: 'wide', localModelPath: models }).dim).toBe(3);
    const rel = relative(process.cwd(), join(models, 'wide'));
    expect(rel.startsWith('../')).toBe(true);
    expect(transformersEmbedder({ model: rel }).dim).toBe(3);
  });

  it('is not known for a model by id without a folder, until the first output', async () => {
    const e = transformersEmbedder({ model: 'workshop' });
    let caught: unknown;
    try {
      void e.dim;
    } catch (err) {
      caught = err;
    }
    expect(caught).toBeInstanceOf(ConfigError);
    expect((caught as ConfigError).message).toBe(
      'transformers embedder workshop: dim is not known yet; pass the dim option or await embedder.warmup() before creating tidemark',
    );
    expect((caught as ConfigError).details).toEqual({ option: 'dim' });
    // The library's own localModelPath (the stand-in's: the models folder) holds the workshop model.
    await e.warmup();
    expect(e.dim).toBe(2);
    expect(current.batches).toEqual([['warm-up']]);
  });

  it('reads hidden_size only as a positive integer', () => {
    const f = join(dir, 'configs');
    mkdirSync(f, { recursive: true });
    const write = (name: string, text: string): string => {
      writeFileSync(join(f, name), text);
      return join(f, name);
    };
    expect(readHiddenSize(write('a.json', '{"hidden_size": 384}'))).toBe(384);
    expect(readHiddenSize(write('b.json', '{"hidden_size": 1}'))).toBe(1);
    expect(readHiddenSize(write('c.json', '{"hidden_size": 0}'))).toBeUndefined();
    expect(readHiddenSize(write('d.json', '{"hidden_size": -4}'))).toBeUndefined();
    expect(readHiddenSize(write('e.json', '{"hidden_size": 2.5}'))).toBeUndefined();
    expect(readHiddenSize(write('f.json', '{"hidden_size": "384"}'))).toBeUndefined();
    expect(readHiddenSize(write('g.json', '{"d_model": 512}'))).toBeUndefined();
    expect(readHiddenSize(write('h.json', '{"hidden_size": 384'))).toBeUndefined();
    expect(readHiddenSize(join(f, 'missing.json'))).toBeUndefined();
  });
});

// ---------------------------------------------------------------- small helpers of library.ts

describe('library helpers', () => {
  it('tells folder paths from model ids', () => {
    for (const p of ['/srv/models/workshop', '.', '..', './workshop', '../models/workshop']) expect(isFolderPath(p)).toBe(true);
    for (const p of ['Xenova/all-MiniLM-L6-v2', 'workshop', '.workshop', '..workshop', 'models/./workshop']) expect(isFolderPath(p)).toBe(false);
  });

  it('tells a missing package from a package that fails to import one of its own', () => {
    const name = '@xenova/transformers';
    const err = (code: string | undefined, message: string): Error => Object.assign(new Error(message), { code });
    // Node's two wordings (ES import and require), with either code.
    expect(isModuleNotFound(err('ERR_MODULE_NOT_FOUND', `Cannot find package '${name}' imported from /srv/app/x.js`), name)).toBe(true);
    expect(isModuleNotFound(err('MODULE_NOT_FOUND', `Cannot find module '${name}'\nRequire stack:`), name)).toBe(true);
    expect(isModuleNotFound(err('MODULE_NOT_FOUND', `Cannot find package '${name}' imported from /srv/app/x.js`), name)).toBe(true);
    expect(isModuleNotFound(err('ERR_MODULE_NOT_FOUND', `Cannot find module '${name}' imported from /srv/app/x.js`), name)).toBe(true);
    // Vite's stub for an optional peer dependency that is not installed: no code at all.
    expect(isModuleNotFound(err(undefined, `Could not resolve "${name}" imported by "tidemark"`), name)).toBe(true);
    // A dependency of the package is missing: its path contains the name, but the message names the other package.
    expect(isModuleNotFound(err('ERR_MODULE_NOT_FOUND', `Cannot find package 'onnxruntime-node' imported from /srv/app/node_modules/${name}/src/backends/onnx.js`), name)).toBe(false);
    expect(isModuleNotFound(err('MODULE_NOT_FOUND', `Cannot find module 'sharp' from /srv/app/node_modules/${name}/src/utils/image.js`), name)).toBe(false);
    expect(isModuleNotFound(err(undefined, 'Could not resolve "sharp"'), name)).toBe(false);
    // The right words without a module-not-found code.
    expect(isModuleNotFound(err(undefined, `Cannot find package '${name}'`), name)).toBe(false);
    expect(isModuleNotFound(err('ERR_DLOPEN_FAILED', `Cannot find module '${name}'`), name)).toBe(false);
    expect(isModuleNotFound(undefined, name)).toBe(false);
    expect(isModuleNotFound('Cannot find package', name)).toBe(false);
  });

  it('runs loads one after another, and a failed load does not stop the next', async () => {
    const events: string[] = [];
    const gate = deferred();
    const first = serialised(async () => {
      events.push('first starts');
      await gate.promise;
      events.push('first fails');
      throw new Error('no weights in the workshop folder');
    });
    const second = serialised(async () => {
      events.push('second starts');
      return 'loaded';
    });
    await settle();
    expect(events).toEqual(['first starts']);
    gate.resolve();
    await expect(first).rejects.toThrow('no weights in the workshop folder');
    await expect(second).resolves.toBe('loaded');
    expect(events).toEqual(['first starts', 'first fails', 'second starts']);
  });

  it('sets the thread count of @xenova/transformers 2.x sessions until it is undone', async () => {
    const seen: { self: unknown; args: unknown[] }[] = [];
    const original = async function (this: unknown, ...args: unknown[]): Promise<string> {
      seen.push({ self: this, args });
      return 'session';
    };
    fake.state.ort.InferenceSession.create = original;
    const session = fake.state.ort.InferenceSession;
    const undo = wrapSessionThreads(3);
    // It finds onnxruntime-node from @xenova/transformers' own folder (the copy that library loads).
    expect(fake.state.requires).toEqual([
      expect.stringMatching(/^createRequire file:.*adapters\/transformers\/library\.ts$/),
      'resolve @xenova/transformers',
      'createRequire /srv/bike-bot/node_modules/@xenova/transformers/src/transformers.js',
      'require onnxruntime-node',
    ]);
    expect(session.create).not.toBe(original);
    await expect(session.create('onnx/model_quantized.onnx', { executionProviders: ['cpu'], graphOptimizationLevel: 'all' })).resolves.toBe('session');
    await session.create('onnx/model.onnx');
    await session.create('onnx/model.onnx', null);
    await session.create('onnx/model.onnx', 'cpu');
    await session.create(new Uint8Array(4), {}, 'extra');
    expect(seen).toEqual([
      { self: session, args: ['onnx/model_quantized.onnx', { executionProviders: ['cpu'], graphOptimizationLevel: 'all', intraOpNumThreads: 3 }] },
      { self: session, args: ['onnx/model.onnx'] },
      { self: session, args: ['onnx/model.onnx', null] },
      { self: session, args: ['onnx/model.onnx', 'cpu'] },
      { self: session, args: [new Uint8Array(4), {}, 'extra'] },
    ]);
    undo();
    expect(session.create).toBe(original);
  });
});

// ---------------------------------------------------------------- which package

describe('importLibrary', () => {
  it('prefers @huggingface/transformers and falls back to @xenova/transformers when it is not installed', async () => {
    fake.state.modes['@huggingface/transformers'] = 'named';
    expect((await importLibrary('auto')).name).toBe('@huggingface/transformers');
    fake.state.modes['@huggingface/transformers'] = 'missing';
    const lib = await importLibrary('auto');
    expect(lib.name).toBe('@xenova/transformers');
    expect(lib.mod.env).toBe(fake.state.envs['@xenova/transformers']);
  });

  it('takes the API from a default export when the named one is absent', async () => {
    fake.state.modes['@xenova/transformers'] = 'default';
    const lib = await importLibrary('@xenova/transformers');
    await lib.mod.pipeline('feature-extraction', 'workshop', {});
    expect(fake.state.calls.map((c) => c.library)).toEqual(['@xenova/transformers']);
    expect(lib.mod.env).toBe(fake.state.envs['@xenova/transformers']);
  });

  it('reports a package that is installed but fails to load, with the sharp hint', async () => {
    fake.state.modes['@huggingface/transformers'] = 'broken';
    const err = await rejection(importLibrary('auto'));
    expect(err).toBeInstanceOf(EmbedderError);
    expect(err.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(err.message).toBe(
      'transformers embedder: @huggingface/transformers is installed but failed to load (Something went wrong installing the "sharp" module); ' +
        'if the message names sharp, add "overrides": { "sharp": "0.34.5" } to your package.json and reinstall',
    );
    expect(err.details).toEqual({ library: '@huggingface/transformers' });
    expect((err.cause as Error).message).toBe('Something went wrong installing the "sharp" module');
  });

  it('says what to install when neither package is there, or the chosen one is not', async () => {
    fake.state.modes['@xenova/transformers'] = 'missing';
    const none = await rejection(importLibrary('auto'));
    expect(none.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(none.message).toBe(
      'transformers embedder: neither @huggingface/transformers nor @xenova/transformers is installed; run npm install @xenova/transformers',
    );
    expect(none.details).toEqual({ library: 'auto' });
    fake.state.modes['@huggingface/transformers'] = 'named';
    const chosen = await rejection(importLibrary('@xenova/transformers'));
    expect(chosen.message).toBe(
      "transformers embedder: library @xenova/transformers is not installed; run npm install @xenova/transformers or set library: 'auto'",
    );
    expect(chosen.details).toEqual({ library: '@xenova/transformers' });
  });
});

// ---------------------------------------------------------------- embed(): input and pooling

describe('embed', () => {
  it('checks its input and names the bad text by index', async () => {
    const e = transformersEmbedder({ model: folder });
    const notArray = await rejection(e.embed('bell' as never));
    expect(notArray).toBeInstanceOf(InputError);
    expect(notArray.code).toBe(ErrorCodes.INPUT_TEXT);
    expect(notArray.message).toBe('transformers embedder: embed() takes an array of strings, got "bell"');
    const notString = await rejection(e.embed(['bell', 'chain oil', 7] as never));
    expect(notString).toBeInstanceOf(InputError);
    expect(notString.code).toBe(ErrorCodes.INPUT_TEXT);
    expect(notString.message).toBe('transformers embedder: text 2 is 7, expected a string');
    expect(notString.details).toEqual({ index: 2 });
    expect(await e.embed([])).toEqual([]);
    expect(fake.state.calls).toEqual([]);
  });

  it('pools the tokens the attention mask keeps and normalises each row (hand-computed)', async () => {
    const e = transformersEmbedder({ model: folder });
    const got = await e.embed(['bell', 'chain oil', 'brake pad wear']);
    expectRows(got, [BELL, CHAIN_OIL, BRAKE_PAD_WEAR]);
    // One call, padded to three tokens: "bell" has two padded positions, "chain oil" one.
    expect(current.batches).toEqual([['bell', 'chain oil', 'brake pad wear']]);
    expect(current.tokenizerOptions).toEqual([{ padding: true, truncation: true }]);
    expect(current.hiddenDisposed).toBe(1);
    expect(e.stats()).toEqual({ modelCalls: 1, textsEmbedded: 3, library: '@xenova/transformers' });
  });

  it('also reads the hidden state under the names logits and token_embeddings, and a tensor without dispose', async () => {
    for (const name of ['logits', 'token_embeddings']) {
      current = workshop({ output: (hidden) => ({ [name]: hidden }) });
      const e = transformersEmbedder({ model: folder });
      expectRows(await e.embed(['chain oil']), [CHAIN_OIL]);
    }
    // last_hidden_state comes first when a model gives several outputs.
    current = workshop({ output: (hidden) => ({ logits: { dims: [1, 1, 2], data: new Float32Array([0, 1]) }, last_hidden_state: hidden }) });
    expectRows(await transformersEmbedder({ model: folder }).embed(['inner tube']), [INNER_TUBE]);
    current = workshop({ output: (hidden) => ({ token_embeddings: { dims: [1, 1, 2], data: new Float32Array([0, 1]) }, logits: hidden }) });
    expectRows(await transformersEmbedder({ model: folder }).embed(['inner tube']), [INNER_TUBE]);
    current = workshop({ hiddenDispose: false });
    expectRows(await transformersEmbedder({ model: folder }).embed(['bell']), [BELL]);
  });

  it('refuses a row whose tokens the mask all drops: its mean is zero', async () => {
    // "blank" is the zero vector; a fully masked row is zero too, with count 0 (not divided by 0).
    const e = transformersEmbedder({ model: folder });
    const err = await rejection(e.embed(['blank']));
    expect(err.code).toBe(ErrorCodes.EMBED_INVALID);
    expect(err.message).toBe(`embedder ${e.id} returned an all-zero vector`);
    const masked = workshop();
    const tokenize = masked.extract.tokenizer;
    masked.extract.tokenizer = (texts, o) => {
      const out = tokenize(texts, o);
      (out.attention_mask.data as unknown as BigInt64Array).fill(0n);
      return out;
    };
    current = masked;
    const err2 = await rejection(transformersEmbedder({ model: folder }).embed(['bell']));
    expect(err2.message).toBe(`embedder transformers:${folder}:q8:mean returned an all-zero vector`);
  });

  it('uses the library’s pooled output when the pipeline hides its tokenizer or model', async () => {
    // Rows of an already pooled [n, dim] tensor; checkVector (src/embed/cache.ts) normalises each:
    // [3, 4] / 5 = [0.6, 0.8] and [0, 2] / 2 = [0, 1].
    const calls: unknown[] = [];
    let disposed = 0;
    const pooled = async (texts: string[], o: unknown): Promise<LibTensor> => {
      calls.push([texts, o]);
      return { dims: [2, 2], data: new Float32Array([3, 4, 0, 2]), dispose: () => void disposed++ };
    };
    fake.state.load = async () => pooled;
    const e = transformersEmbedder({ model: folder });
    expectRows(await e.embed(['bell', 'chain oil']), [[0.6, 0.8], [0, 1]]);
    expect(calls).toEqual([[['bell', 'chain oil'], { pooling: 'mean', normalize: true }]]);
    expect(disposed).toBe(1);
    expect(e.stats()).toEqual({ modelCalls: 1, textsEmbedded: 2, library: '@xenova/transformers' });
    // A tokenizer without a model (or the other way round) is not enough to pool here; no dispose is fine.
    const half = Object.assign(async (texts: string[]) => ({ dims: [texts.length, 2], data: new Float32Array([0, 5]) }), { tokenizer: current.extract.tokenizer });
    fake.state.load = async () => half;
    expectRows(await transformersEmbedder({ model: folder }).embed(['bell']), [[0, 1]]);
    const otherHalf = Object.assign(async (texts: string[]) => ({ dims: [texts.length, 2], data: new Float32Array([5, 0]) }), { model: current.extract.model });
    fake.state.load = async () => otherHalf;
    expectRows(await transformersEmbedder({ model: folder }).embed(['bell']), [[1, 0]]);
  });

  it('names the shape when the model output is not [texts, tokens, dim]', async () => {
    const cases: [Record<string, LibTensor | undefined>, string][] = [
      [{}, 'no last_hidden_state'],
      [{ last_hidden_state: undefined }, 'no last_hidden_state'],
      [{ last_hidden_state: { dims: 'x' as never, data: [] } }, 'a hidden state of shape [x]'],
      [{ last_hidden_state: { dims: [2, 4], data: [] } }, 'a hidden state of shape [2,4]'],
      [{ last_hidden_state: { dims: [2, 1, 2, 1], data: [] } }, 'a hidden state of shape [2,1,2,1]'],
      [{ last_hidden_state: { dims: [1, 1, 2], data: [] } }, 'a hidden state of shape [1,1,2]'],
      [{ last_hidden_state: { dims: [3, 1, 2], data: [] } }, 'a hidden state of shape [3,1,2]'],
      [{ last_hidden_state: { dims: [2, 1, 0], data: [] } }, 'a hidden state of shape [2,1,0]'],
    ];
    for (const [output, said] of cases) {
      current = workshop({ output: () => output });
      const err = await rejection(transformersEmbedder({ model: folder }).embed(['bell', 'tyre']));
      expect(err).toBeInstanceOf(EmbedderError);
      expect(err.code).toBe(ErrorCodes.EMBED_INVALID);
      expect(err.message).toBe(`transformers embedder ${folder} returned ${said} for 2 texts; expected [2, tokens, dim] (is it a feature-extraction model?)`);
    }
  });

  it('refuses an attention mask of the wrong length', async () => {
    // Two texts of one token each: the hidden state is [2, 1, 2], so the mask needs 2 entries.
    current = workshop({ output: (hidden) => ({ last_hidden_state: { dims: [2, 2, 2], data: new Float32Array(8).fill(1), dispose: hidden.dispose } }) });
    const err = await rejection(transformersEmbedder({ model: folder }).embed(['bell', 'tyre']));
    expect(err.code).toBe(ErrorCodes.EMBED_INVALID);
    expect(err.message).toBe(`transformers embedder ${folder}: attention mask has 2 entries for [2, 2] tokens`);
  });

  it('names the shape when the pooled fallback output is not [texts, dim]', async () => {
    const cases: [unknown, string][] = [
      ['x', 'x'],
      [[2, 2, 2], '2,2,2'],
      [[2], '2'],
      [[1, 2], '1,2'],
      [[3, 2], '3,2'],
      [[2, 0], '2,0'],
    ];
    for (const [dims, said] of cases) {
      fake.state.load = async () => async () => ({ dims, data: new Float32Array(8).fill(1) });
      const err = await rejection(transformersEmbedder({ model: folder }).embed(['bell', 'tyre']));
      expect(err.code).toBe(ErrorCodes.EMBED_INVALID);
      expect(err.message).toBe(`transformers embedder ${folder} returned a tensor of shape [${said}] for 2 texts; expected [2, dim] (is it a feature-extraction model?)`);
    }
  });

  it('checks the output width against the dim option or config.json, and learns it otherwise', async () => {
    current = workshop({ width: 3 });
    const byOption = transformersEmbedder({ model: folder, dim: 2 });
    const err = await rejection(byOption.embed(['bell']));
    expect(err.code).toBe(ErrorCodes.EMBED_INVALID);
    expect(err.message).toBe(`transformers embedder ${folder} outputs 3 dims but the dim option says 2; fix the dim option or the model files`);
    expect(err.details).toEqual({ expected: 2, received: 3 });
    const byConfig = await rejection(transformersEmbedder({ model: folder }).embed(['bell']));
    expect(byConfig.message).toBe(`transformers embedder ${folder} outputs 3 dims but config.json (hidden_size) says 2; fix the dim option or the model files`);
    // The same through the pooled fallback.
    fake.state.load = async () => async () => ({ dims: [1, 3], data: new Float32Array([1, 2, 2]) });
    const pooled = await rejection(transformersEmbedder({ model: folder, dim: 2 }).embed(['bell']));
    expect(pooled.message).toBe(`transformers embedder ${folder} outputs 3 dims but the dim option says 2; fix the dim option or the model files`);
    // Width 3 where nothing says otherwise: "bell" is [5, 12, 0] -> [5/13, 12/13, 0].
    current = workshop({ width: 3 });
    fake.state.load = async () => current.extract;
    const learns = transformersEmbedder({ model: 'workshop' });
    expectRows(await learns.embed(['bell']), [[5 / 13, 12 / 13, 0]]);
    expect(learns.dim).toBe(3);
    expectRows(await transformersEmbedder({ model: folder, dim: 3 }).embed(['bell']), [[5 / 13, 12 / 13, 0]]);
  });

  it('wraps a failure inside the model with the batch size, and passes its own errors through', async () => {
    const e = transformersEmbedder({ model: folder });
    const err = await rejection(e.embed(['bell', 'flat white']));
    expect(err).toBeInstanceOf(EmbedderError);
    expect(err.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(err.message).toBe(`transformers embedder ${folder} failed on a batch of 2 texts: the workshop vocabulary has no "flat"`);
    expect(err.details).toEqual({ batch: 2 });
    expect((err.cause as Error).message).toBe('the workshop vocabulary has no "flat"');
    expect(e.stats()).toEqual({ modelCalls: 0, textsEmbedded: 0, library: '@xenova/transformers' });
    // The embedder keeps working.
    expectRows(await e.embed(['bell']), [BELL]);
    expect(e.stats()).toEqual({ modelCalls: 1, textsEmbedded: 1, library: '@xenova/transformers' });
  });
});

// ---------------------------------------------------------------- batching

describe('batching', () => {
  it('sends each distinct text once, shortest first, and puts the results back in order', async () => {
    const e = transformersEmbedder({ model: folder });
    const got = await e.embed(['inner tube', 'bell', 'chain oil', 'bell', 'inner tube']);
    expectRows(got, [INNER_TUBE, BELL, CHAIN_OIL, BELL, INNER_TUBE]);
    expect(got[3]).toBe(got[1]);
    expect(got[4]).toBe(got[0]);
    expect(current.batches).toEqual([['bell', 'chain oil', 'inner tube']]);
    expect(e.stats()).toEqual({ modelCalls: 1, textsEmbedded: 3, library: '@xenova/transformers' });
  });

  it('splits at maxBatch', async () => {
    const e = transformersEmbedder({ model: folder, maxBatch: 2 });
    const texts = ['brake pad wear', 'inner tube', 'bell', 'chain oil', 'tyre pump saddle lever'];
    const got = await e.embed(texts);
    expectRows(got.slice(0, 4), [BRAKE_PAD_WEAR, INNER_TUBE, BELL, CHAIN_OIL]);
    // By length: bell 4, chain oil 9, inner tube 10, brake pad wear 14, tyre pump saddle lever 22.
    expect(current.batches).toEqual([['bell', 'chain oil'], ['inner tube', 'brake pad wear'], ['tyre pump saddle lever']]);
    expect(e.stats()).toEqual({ modelCalls: 3, textsEmbedded: 5, library: '@xenova/transformers' });
    const one = transformersEmbedder({ model: folder, maxBatch: 1 });
    current = workshop();
    await one.embed(['bell', 'tyre']);
    expect(current.batches).toEqual([['bell'], ['tyre']]);
    const exact = transformersEmbedder({ model: folder, maxBatch: 3 });
    current = workshop();
    await exact.embed(['bell', 'tyre', 'spoke']);
    expect(current.batches).toEqual([['bell', 'tyre', 'spoke']]);
  });

  it('collects the calls made in one tick into one model call, and embeds a text shared by two of them once', async () => {
    const e = transformersEmbedder({ model: folder });
    const [a, b, c] = await Promise.all([e.embed(['chain oil', 'bell']), e.embed(['bell']), e.embed(['inner tube'])]);
    expectRows(a!, [CHAIN_OIL, BELL]);
    expect(b![0]).toBe(a![1]);
    expectRows(c!, [INNER_TUBE]);
    expect(current.batches).toEqual([['bell', 'chain oil', 'inner tube']]);
    expect(e.stats()).toEqual({ modelCalls: 1, textsEmbedded: 3, library: '@xenova/transformers' });
  });

  it('rejects every call of a failed batch and goes on with the next', async () => {
    const e = transformersEmbedder({ model: folder });
    const [a, b] = await Promise.allSettled([e.embed(['bell']), e.embed(['flat tyre'])]);
    expect(a!.status).toBe('rejected');
    expect(b!.status).toBe('rejected');
    expect((a as PromiseRejectedResult).reason).toBe((b as PromiseRejectedResult).reason);
    expectRows(await e.embed(['bell']), [BELL]);
  });

  it('flushes calls of one tick on setImmediate, with no timer, when batchWindowMs is 0', async () => {
    const e = transformersEmbedder({ model: folder });
    await e.warmup();
    vi.useFakeTimers({ toFake: ['setTimeout'] });
    let done = false;
    const p = e.embed(['bell']).then((v) => {
      done = true;
      return v;
    });
    await settle();
    expect(done).toBe(true);
    expectRows(await p, [BELL]);
  });

  it('collects the calls of batchWindowMs into one model call', async () => {
    const e = transformersEmbedder({ model: folder, batchWindowMs: 50 });
    await e.warmup(); // loaded, on a real timer
    vi.useFakeTimers({ toFake: ['setTimeout'] });
    const first = e.embed(['bell']);
    await settle();
    vi.advanceTimersByTime(49);
    await settle();
    expect(current.batches).toEqual([['warm-up']]);
    const second = e.embed(['chain oil']);
    vi.advanceTimersByTime(1);
    const [a, b] = await Promise.all([first, second]);
    expectRows([...a, ...b], [BELL, CHAIN_OIL]);
    expect(current.batches).toEqual([['warm-up'], ['bell', 'chain oil']]);
    // The window starts again with the next call.
    const third = e.embed(['tyre']);
    await settle();
    vi.advanceTimersByTime(49);
    await settle();
    expect(current.batches).toEqual([['warm-up'], ['bell', 'chain oil']]);
    vi.advanceTimersByTime(1);
    await third;
    expect(current.batches).toEqual([['warm-up'], ['bell', 'chain oil'], ['tyre']]);
  });

  it('collects the calls that arrive while the model is busy into the next model call', async () => {
    const gate = deferred();
    const log: string[] = [];
    let seen = 0;
    current = workshop({
      around: async (texts) => {
        seen++;
        log.push(`${seen % 2 === 1 ? 'start' : 'end'} ${texts.join(' + ')}`);
        if (texts[0] === 'bell' && seen === 1) await gate.promise;
      },
    });
    const e = transformersEmbedder({ model: folder });
    const a = e.embed(['bell']);
    await until(() => log.length > 0);
    expect(log).toEqual(['start bell']);
    const b = e.embed(['inner tube']);
    const c = e.embed(['chain oil']);
    await settle();
    expect(log).toEqual(['start bell']);
    gate.resolve();
    expectRows([...(await a), ...(await b), ...(await c)], [BELL, INNER_TUBE, CHAIN_OIL]);
    expect(log).toEqual(['start bell', 'end bell', 'start chain oil + inner tube', 'end chain oil + inner tube']);
    expect(e.stats().modelCalls).toBe(2);
  });
});

// ---------------------------------------------------------------- the cache

describe('cache', () => {
  const key = (e: TransformersEmbedder, text: string): string => textDigest(`${e.id}\u0000${text}`);

  it('skips the model for hits and stores the misses under the core’s keys', async () => {
    const cache = new EmbeddingCache(10);
    const e = transformersEmbedder({ model: folder, cache });
    const stored = new Float32Array([0.6, 0.8]);
    cache.set(key(e, 'bell'), stored);
    const got = await e.embed(['inner tube', 'bell', 'chain oil']);
    expect(got[1]).toBe(stored);
    expectRows([got[0]!, got[2]!], [INNER_TUBE, CHAIN_OIL]);
    expect(current.batches).toEqual([['chain oil', 'inner tube']]);
    expect(cache.stats()).toEqual({ hits: 1, misses: 2, size: 3 });
    expect(cache.get(key(e, 'inner tube'))).toBe(got[0]);
    expect(cache.get(key(e, 'chain oil'))).toBe(got[2]);
    expect(e.stats()).toEqual({ modelCalls: 1, textsEmbedded: 2, library: '@xenova/transformers' });
  });

  it('does not even load the library when every text is a hit', async () => {
    const cache = new EmbeddingCache(10);
    const e = transformersEmbedder({ model: folder, cache });
    cache.set(key(e, 'bell'), new Float32Array([0, 1]));
    expect(rows(await e.embed(['bell', 'bell']))).toEqual([[0, 1], [0, 1]]);
    expect(fake.state.calls).toEqual([]);
    expect(e.stats()).toEqual({ modelCalls: 0, textsEmbedded: 0, library: undefined });
  });
});

// ---------------------------------------------------------------- loading

describe('loading', () => {
  it('sets the library’s folder, remote and local switches and cache for the load only, then restores them', async () => {
    const original = { localModelPath: '/srv/lib/models', allowRemoteModels: true, allowLocalModels: false, cacheDir: '/srv/lib/cache' };
    fake.state.envs['@xenova/transformers'] = { ...original };
    await transformersEmbedder({ model: folder, cacheDir }).embed(['bell']);
    expect(fake.state.calls).toEqual([
      {
        library: '@xenova/transformers',
        task: 'feature-extraction',
        model: 'workshop',
        options: { local_files_only: true, quantized: true },
        env: { localModelPath: models, allowRemoteModels: false, allowLocalModels: true, cacheDir },
      },
    ]);
    expect(fake.state.envs['@xenova/transformers']).toEqual(original);
    // Without a cacheDir option the library's own stays, during the load too; allowRemote lets the Hub in.
    await transformersEmbedder({ model: 'Xenova/all-MiniLM-L6-v2', localModelPath: models, allowRemote: true }).embed(['bell']);
    expect(fake.state.calls[1]).toEqual({
      library: '@xenova/transformers',
      task: 'feature-extraction',
      model: 'Xenova/all-MiniLM-L6-v2',
      options: { local_files_only: false, quantized: true },
      env: { localModelPath: models, allowRemoteModels: true, allowLocalModels: true, cacheDir: '/srv/lib/cache' },
    });
    expect(fake.state.envs['@xenova/transformers']).toEqual(original);
  });

  it('restores the settings after a failed load too, and says where it looked', async () => {
    const original = { ...fake.state.envs['@xenova/transformers']! };
    fake.state.load = async () => {
      throw new Error('Could not locate file: tokenizer.json');
    };
    const err = await rejection(transformersEmbedder({ model: folder }).embed(['bell']));
    expect(err.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(err.message).toBe(`transformers embedder: could not load model ${folder} from ${models}: Could not locate file: tokenizer.json`);
    expect(err.details).toEqual({ model: folder, folder: models, library: '@xenova/transformers' });
    expect((err.cause as Error).message).toBe('Could not locate file: tokenizer.json');
    expect(fake.state.envs['@xenova/transformers']).toEqual(original);
    const remote = await rejection(transformersEmbedder({ model: 'Xenova/all-MiniLM-L6-v2', localModelPath: models, allowRemote: true }).embed(['bell']));
    expect(remote.message).toBe(`transformers embedder: could not load model Xenova/all-MiniLM-L6-v2 from ${models} or the Hub: Could not locate file: tokenizer.json`);
  });

  it('gives @huggingface/transformers 3.x a dtype, the CPU device and session options only for threads', async () => {
    fake.state.modes['@huggingface/transformers'] = 'named';
    const e = transformersEmbedder({ model: folder });
    await e.embed(['bell']);
    expect(e.stats().library).toBe('@huggingface/transformers');
    await transformersEmbedder({ model: 'fp32-only', localModelPath: models, quantized: false, threads: 2 }).embed(['bell']);
    await transformersEmbedder({ model: folder, library: '@huggingface/transformers', allowRemote: true, threads: 1 }).embed(['bell']);
    expect(fake.state.calls.map((c) => [c.library, c.options])).toEqual([
      ['@huggingface/transformers', { local_files_only: true, dtype: 'q8', device: 'cpu' }],
      ['@huggingface/transformers', { local_files_only: true, dtype: 'fp32', device: 'cpu', session_options: { intraOpNumThreads: 2 } }],
      ['@huggingface/transformers', { local_files_only: false, dtype: 'q8', device: 'cpu', session_options: { intraOpNumThreads: 1 } }],
    ]);
    // 3.x takes the thread count itself: onnxruntime-node is not touched.
    expect(fake.state.requires).toEqual([]);
  });

  it('gives @xenova/transformers 2.x `quantized`, and its sessions the thread count during the load only', async () => {
    const created: unknown[] = [];
    const original = async (...args: unknown[]): Promise<string> => {
      created.push(args);
      return 'session';
    };
    fake.state.ort.InferenceSession.create = original;
    fake.state.load = async () => {
      await fake.state.ort.InferenceSession.create('onnx/model.onnx', { executionProviders: ['cpu'] });
      return current.extract;
    };
    await transformersEmbedder({ model: 'fp32-only', localModelPath: models, quantized: false, threads: 2 }).embed(['bell']);
    expect(fake.state.calls[0]!.options).toEqual({ local_files_only: true, quantized: false });
    expect(created).toEqual([['onnx/model.onnx', { executionProviders: ['cpu'], intraOpNumThreads: 2 }]]);
    expect(fake.state.ort.InferenceSession.create).toBe(original);
    // threads 0: the runtime's default, no wrap.
    fake.state.requires = [];
    await transformersEmbedder({ model: folder }).embed(['bell']);
    expect(created).toEqual([['onnx/model.onnx', { executionProviders: ['cpu'], intraOpNumThreads: 2 }], ['onnx/model.onnx', { executionProviders: ['cpu'] }]]);
    expect(fake.state.requires).toEqual([]);
  });

  it('does not keep a failed load: the next embed loads again', async () => {
    let attempts = 0;
    fake.state.load = async () => {
      attempts++;
      if (attempts === 1) throw new Error('the workshop disk is still mounting');
      return current.extract;
    };
    const e = transformersEmbedder({ model: folder });
    await rejection(e.embed(['bell']));
    expectRows(await e.embed(['bell']), [BELL]);
    await e.embed(['tyre']);
    expect(attempts).toBe(2);
  });

  it('says which file is missing when remote download is off', async () => {
    const missing = await rejection(transformersEmbedder({ model: 'empty', localModelPath: models }).embed(['bell']));
    expect(missing).toBeInstanceOf(EmbedderError);
    expect(missing.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(missing.message).toBe(
      `model empty not found in ${models} and remote download is off; put the model files there ` +
        `(${join(models, 'empty', 'config.json')}, tokenizer.json, tokenizer_config.json, onnx/model_quantized.onnx) or set allowRemote: true`,
    );
    expect(missing.details).toEqual({ model: 'empty', folder: models });
    const fp32 = await rejection(transformersEmbedder({ model: 'empty', localModelPath: models, quantized: false }).embed(['bell']));
    expect(fp32.message).toContain('tokenizer_config.json, onnx/model.onnx) or set allowRemote: true');

    const noWeights = join(models, 'no-weights');
    const q8 = await rejection(transformersEmbedder({ model: noWeights }).embed(['bell']));
    expect(q8.code).toBe(ErrorCodes.EMBED_MODEL);
    expect(q8.message).toBe(
      `model ${noWeights} in ${noWeights} has no onnx/model_quantized.onnx and remote download is off; add that file or set quantized: false to use onnx/model.onnx`,
    );
    expect(q8.details).toEqual({ model: noWeights, folder: noWeights });
    const notQ8 = await rejection(transformersEmbedder({ model: noWeights, quantized: false }).embed(['bell']));
    expect(notQ8.message).toBe(
      `model ${noWeights} in ${noWeights} has no onnx/model.onnx and remote download is off; add that file or set quantized: true to use onnx/model_quantized.onnx`,
    );
    // A folder (here and in the cache) with weights but no config.json is not a model folder.
    const noConfig = await rejection(transformersEmbedder({ model: 'no-config', localModelPath: models, cacheDir }).embed(['bell']));
    expect(noConfig.message.startsWith(`model no-config not found in ${models} and remote download is off;`)).toBe(true);
    // The right weights file is enough.
    expectRows(await transformersEmbedder({ model: 'fp32-only', localModelPath: models, quantized: false }).embed(['bell']), [BELL]);
    expect(fake.state.calls.length).toBe(1);
  });

  it('finds a model in the cache folder (the option’s, else the library’s) when the model folder lacks it', async () => {
    expectRows(await transformersEmbedder({ model: 'cached-only', localModelPath: models, cacheDir }).embed(['bell']), [BELL]);
    fake.state.envs['@xenova/transformers']!.cacheDir = cacheDir;
    expectRows(await transformersEmbedder({ model: 'cached-only', localModelPath: models }).embed(['bell']), [BELL]);
    // The option comes first: this cache holds config.json but no weights.
    const other = join(dir, 'other-cache');
    const err = await rejection(transformersEmbedder({ model: 'cached-only', localModelPath: models, cacheDir: other }).embed(['bell']));
    expect(err.message.startsWith(`model cached-only in ${join(other, 'cached-only')} has no onnx/model_quantized.onnx`)).toBe(true);
    // A cache that lacks the model does not stand in for it.
    const absent = await rejection(transformersEmbedder({ model: 'workshop-2', localModelPath: models, cacheDir }).embed(['bell']));
    expect(absent.message.startsWith(`model workshop-2 not found in ${models} and remote download is off;`)).toBe(true);
    expect(fake.state.calls.map((c) => c.model)).toEqual(['cached-only', 'cached-only']);
  });

  it('skips the file checks when remote download is on', async () => {
    await transformersEmbedder({ model: 'empty', localModelPath: models, allowRemote: true }).embed(['bell']);
    expect(fake.state.calls.map((c) => [c.model, c.options])).toEqual([['empty', { local_files_only: false, quantized: true }]]);
  });
});

// ---------------------------------------------------------------- close

describe('close', () => {
  it('rejects the queued calls and later ones, and disposes the pipeline', async () => {
    const e = transformersEmbedder({ model: folder });
    await e.warmup();
    const queued = rejection(e.embed(['bell']));
    await e.close();
    for (const err of [await queued, await rejection(e.embed(['tyre'])), await rejection(e.embed([]))]) {
      expect(err).toBeInstanceOf(EmbedderError);
      expect(err.code).toBe(ErrorCodes.EMBED_MODEL);
      expect(err.message).toBe(`transformers embedder ${folder} is closed; create a new one`);
    }
    expect(current.disposed).toBe(1);
    expect(current.batches).toEqual([['warm-up']]);
  });

  it('disposes a pipeline that finishes loading after close(), once, and rejects the call waiting for it', async () => {
    const gate = deferred();
    fake.state.load = async () => {
      await gate.promise;
      return current.extract;
    };
    const e = transformersEmbedder({ model: folder });
    const waiting = rejection(e.embed(['bell']));
    await until(() => fake.state.calls.length === 1);
    const closing = e.close();
    gate.resolve();
    await closing;
    const err = await waiting;
    expect(err.message).toBe(`transformers embedder ${folder} is closed; create a new one`);
    expect(current.disposed).toBe(1);
    expect(current.batches).toEqual([]);
  });

  it('rejects the waiting call when a pipeline without dispose finishes loading after close()', async () => {
    const gate = deferred();
    const bare = async (texts: string[]): Promise<LibTensor> => ({ dims: [texts.length, 2], data: new Float32Array([3, 4]) });
    fake.state.load = async () => {
      await gate.promise;
      return bare;
    };
    const e = transformersEmbedder({ model: folder });
    const waiting = rejection(e.embed(['bell']));
    await until(() => fake.state.calls.length === 1);
    const closing = e.close();
    gate.resolve();
    await closing;
    const err = await waiting;
    expect(err.message).toBe(`transformers embedder ${folder} is closed; create a new one`);
  });

  it('closes cleanly while a load is failing, and with nothing loaded or a pipeline without dispose', async () => {
    const gate = deferred();
    fake.state.load = async () => {
      await gate.promise;
      throw new Error('the workshop disk is gone');
    };
    const e = transformersEmbedder({ model: folder });
    const waiting = rejection(e.embed(['bell']));
    await until(() => fake.state.calls.length === 1);
    const closing = e.close();
    gate.resolve();
    await expect(closing).resolves.toBeUndefined();
    expect((await waiting).code).toBe(ErrorCodes.EMBED_MODEL);
    await expect(transformersEmbedder({ model: folder }).close()).resolves.toBeUndefined();
    const bare = async (texts: string[]): Promise<LibTensor> => ({ dims: [texts.length, 2], data: new Float32Array([3, 4]) });
    fake.state.load = async () => bare;
    const plain = transformersEmbedder({ model: folder });
    await plain.embed(['bell']);
    await expect(plain.close()).resolves.toBeUndefined();
  });
});
