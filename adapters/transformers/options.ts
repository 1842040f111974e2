// The options of the transformers embedder: one typed object with its defaults, and the checks that
// run once at construction with messages naming the option, the value and what was expected.

import { EmbeddingCache } from '../../src/embed/cache.js';
import { ConfigError, describeValue } from '../../src/errors.js';
import { LIBRARY_ORDER } from './library.js';

/** The transformers.js packages this adapter can drive; both expose the same `pipeline()` API. */
export type TransformersLibrary = '@huggingface/transformers' | '@xenova/transformers';

export interface TransformersEmbedderOptions {
  /**
   * The model: a model id (`Xenova/all-MiniLM-L6-v2`), looked up as a folder of that name inside
   * `localModelPath` (and, if `allowRemote`, downloaded from the Hugging Face Hub into the library's
   * cache), or a path to a model folder (absolute, or starting with `./` or `../`, resolved against
   * the working directory). The folder holds `config.json`, `tokenizer.json`, `tokenizer_config.json`
   * and `onnx/model_quantized.onnx` (or `onnx/model.onnx` with `quantized: false`).
   */
  model: string;
  /**
   * Folder that holds model folders, for a model given by id.
   * @default undefined — the library's own `env.localModelPath` (`node_modules/<library>/models/`)
   */
  localModelPath?: string;
  /**
   * Whether a model missing locally may be downloaded. Off by default so that a server never makes a
   * surprise network call or depends on the Hub at run time: put the files on disk, or turn this on
   * once to fill the library's cache.
   * @default false
   */
  allowRemote?: boolean;
  /**
   * Folder where downloaded files are cached (the library's `env.cacheDir`).
   * @default undefined — the library's default (`node_modules/<library>/.cache/`)
   */
  cacheDir?: string;
  /**
   * Load the 8-bit quantized weights (`onnx/model_quantized.onnx`) rather than float32 (`onnx/model.onnx`).
   * Quantized files are about a quarter of the size and usually faster on CPU (common practice).
   * @default true
   */
  quantized?: boolean;
  /**
   * Output dimension. If omitted it is read from the local folder's `config.json` (`hidden_size`) at
   * construction when the folder is known then, or else discovered by `warmup()`. The core reads `dim`
   * before the first turn: pass it, or `await embedder.warmup()` before creating tidemark. When given,
   * it is checked against the model's real output on the first call.
   * @default undefined
   */
  dim?: number;
  /** Most texts sent to the model in one call; larger batches are split. @default 32 */
  maxBatch?: number;
  /**
   * How long, in milliseconds, to collect concurrent `embed()` calls into one model call. 0 collects the
   * calls made in the same tick (flush on `setImmediate`); calls that arrive while the model is busy
   * are collected into the next call either way.
   * @default 0
   */
  batchWindowMs?: number;
  /**
   * ONNX Runtime intra-op threads for this model's session (`intraOpNumThreads`); 0 leaves the runtime
   * default, one thread per physical core (onnxruntime.ai, "Thread management").
   * @default 0
   */
  threads?: number;
  /**
   * An embedding cache to consult before the model (keys are digests of embedder id + text, the same
   * keys `embedCached` uses, so one cache can serve several embedders and the core). Leave it unset if
   * the same cache is already given to tidemark's core, which looks it up before calling the embedder.
   * @default undefined — no cache in the adapter
   */
  cache?: EmbeddingCache;
  /**
   * Which package to load. `auto` tries `@huggingface/transformers` (the maintained successor) first,
   * then `@xenova/transformers`.
   * @default 'auto'
   */
  library?: 'auto' | TransformersLibrary;
}

/** The options after defaults are applied; `undefined` means "the library's own default" (see each field). */
export type ResolvedTransformersEmbedderOptions = Omit<Required<TransformersEmbedderOptions>, 'localModelPath' | 'cacheDir' | 'dim' | 'cache'> & {
  localModelPath: string | undefined;
  cacheDir: string | undefined;
  dim: number | undefined;
  cache: EmbeddingCache | undefined;
};

/** Defaults of every optional field. */
export const TRANSFORMERS_EMBEDDER_DEFAULTS: Readonly<Omit<ResolvedTransformersEmbedderOptions, 'model'>> = {
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
};

/** Counters of the adapter's own work, for tests and benchmarks. */
export interface TransformersEmbedderStats {
  /** Pipeline calls made (each is one batch through the model). */
  modelCalls: number;
  /** Texts sent to the model (after cache hits and de-duplication within a batch). */
  textsEmbedded: number;
  /** The package in use once loaded. */
  library: TransformersLibrary | undefined;
}

export function checkOptions(o: ResolvedTransformersEmbedderOptions): void {
  const fail = (option: string, value: unknown, expected: string): never => {
    throw new ConfigError(`transformers embedder: ${option} must be ${expected}, got ${describeValue(value)}`, {
      details: { option, value: describeValue(value) },
    });
  };
  if (typeof o.model !== 'string' || o.model.trim() === '') fail('model', o.model, 'a model id or a folder path');
  if (o.localModelPath !== undefined && (typeof o.localModelPath !== 'string' || o.localModelPath === '')) {
    fail('localModelPath', o.localModelPath, 'a folder path');
  }
  if (o.cacheDir !== undefined && (typeof o.cacheDir !== 'string' || o.cacheDir === '')) fail('cacheDir', o.cacheDir, 'a folder path');
  if (typeof o.allowRemote !== 'boolean') fail('allowRemote', o.allowRemote, 'true or false');
  if (typeof o.quantized !== 'boolean') fail('quantized', o.quantized, 'true or false');
  if (o.dim !== undefined && (!Number.isInteger(o.dim) || o.dim < 1 || o.dim > 65_536)) fail('dim', o.dim, 'an integer in [1, 65536]');
  if (!Number.isInteger(o.maxBatch) || o.maxBatch < 1 || o.maxBatch > 4096) fail('maxBatch', o.maxBatch, 'an integer in [1, 4096]');
  if (typeof o.batchWindowMs !== 'number' || !Number.isFinite(o.batchWindowMs) || o.batchWindowMs < 0 || o.batchWindowMs > 1000) {
    fail('batchWindowMs', o.batchWindowMs, 'a number of milliseconds in [0, 1000]');
  }
  if (!Number.isInteger(o.threads) || o.threads < 0 || o.threads > 1024) fail('threads', o.threads, 'an integer in [0, 1024] (0 = runtime default)');
  if (o.cache !== undefined && !(o.cache instanceof EmbeddingCache)) fail('cache', o.cache, 'an EmbeddingCache');
  if (o.library !== 'auto' && !LIBRARY_ORDER.includes(o.library as TransformersLibrary)) {
    fail('library', o.library, `'auto', ${LIBRARY_ORDER.map((n) => `'${n}'`).join(' or ')}`);
  }
}
