// tidemark/transformers: an Embedder on the feature-extraction pipeline of transformers.js, for bots that
// want semantic matching ("my ride" ~ "my bicycle"). The library is an optional peer dependency loaded
// with a dynamic import() on first use, so importing tidemark itself never loads it.

import { existsSync } from 'node:fs';
import { basename, dirname, join, resolve } from 'node:path';
import { textDigest } from '../../src/memory/text.js';
import { checkVector } from '../../src/embed/cache.js';
import type { Embedder } from '../../src/embed/embedder.js';
import { ConfigError, EmbedderError, ErrorCodes, InputError, describeValue } from '../../src/errors.js';

import { checkOptions, TRANSFORMERS_EMBEDDER_DEFAULTS, type ResolvedTransformersEmbedderOptions, type TransformersEmbedderOptions, type TransformersEmbedderStats, type TransformersLibrary } from './options.js';
import { importLibrary, isFolderPath, readHiddenSize, serialised, wrapSessionThreads, type FeatureExtractor, type LibTensor, type LoadedLib, type Pending } from './library.js';

export { TRANSFORMERS_EMBEDDER_DEFAULTS, type ResolvedTransformersEmbedderOptions, type TransformersEmbedderOptions, type TransformersEmbedderStats, type TransformersLibrary } from './options.js';

export class TransformersEmbedder implements Embedder {
  readonly id: string;
  /** A trained sentence model: its cosines carry paraphrase, so reads use a dense list beside BM25. */
  readonly semantic = true;
  private readonly o: ResolvedTransformersEmbedderOptions;
  /** Model name as the library sees it (a folder name inside `root`) and that folder, if known now. */
  private readonly name: string;
  private readonly fixedRoot: string | undefined;
  private knownDim: number | undefined;
  private loading: Promise<{ lib: LoadedLib; extract: FeatureExtractor }> | undefined;
  private queue: Pending[] = [];
  private scheduled = false;
  private running = false;
  private closed = false;
  private counters = { modelCalls: 0, textsEmbedded: 0 };
  private libraryName: TransformersLibrary | undefined;

  constructor(options: TransformersEmbedderOptions) {
    if (typeof options !== 'object' || options === null) {
      throw new ConfigError(`transformers embedder: options must be an object with a model, got ${describeValue(options)}`);
    }
    // A field given as undefined takes its default; the caller's object is not kept or changed.
    const given = Object.fromEntries(Object.entries(options).filter(([, v]) => v !== undefined));
    const o = { ...TRANSFORMERS_EMBEDDER_DEFAULTS, ...given } as ResolvedTransformersEmbedderOptions;
    checkOptions(o);
    this.o = o;
    if (isFolderPath(o.model)) {
      const folder = resolve(o.model);
      this.fixedRoot = dirname(folder);
      this.name = basename(folder);
    } else {
      this.fixedRoot = o.localModelPath === undefined ? undefined : resolve(o.localModelPath);
      this.name = o.model;
    }
    this.knownDim = o.dim;
    if (this.knownDim === undefined && this.fixedRoot !== undefined) {
      this.knownDim = readHiddenSize(join(this.fixedRoot, this.name, 'config.json'));
    }
    // Model and weights decide the vectors; the package that runs them does not.
    this.id = `transformers:${o.model}:${o.quantized ? 'q8' : 'fp32'}:mean`;
  }

  /** Vector length; known from the `dim` option, the local config.json, or after `warmup()`. */
  get dim(): number {
    if (this.knownDim === undefined) {
      throw new ConfigError(
        `transformers embedder ${this.o.model}: dim is not known yet; pass the dim option or await embedder.warmup() before creating tidemark`,
        { details: { option: 'dim' } },
      );
    }
    return this.knownDim;
  }

  stats(): TransformersEmbedderStats {
    return { ...this.counters, library: this.libraryName };
  }

  /** Loads the model and runs one text through it, so the first turn pays no load and `dim` is known. */
  async warmup(): Promise<void> {
    await this.embed(['warm-up']);
  }

  async close(): Promise<void> {
    this.closed = true;
    const pending = this.queue;
    this.queue = [];
    for (const p of pending) p.reject(this.closedError());
    const loading = this.loading;
    this.loading = undefined;
    if (loading) {
      const loaded = await loading.catch(() => undefined);
      await loaded?.extract.dispose?.();
    }
  }

  async embed(texts: readonly string[]): Promise<Float32Array[]> {
    if (!Array.isArray(texts)) {
      throw new InputError(ErrorCodes.INPUT_TEXT, `transformers embedder: embed() takes an array of strings, got ${describeValue(texts)}`);
    }
    for (let i = 0; i < texts.length; i++) {
      if (typeof texts[i] !== 'string') {
        throw new InputError(ErrorCodes.INPUT_TEXT, `transformers embedder: text ${i} is ${describeValue(texts[i])}, expected a string`, {
          details: { index: i },
        });
      }
    }
    if (this.closed) throw this.closedError();
    if (texts.length === 0) return [];

    const cache = this.o.cache;
    if (cache === undefined) return this.enqueue(texts);
    const out = new Array<Float32Array>(texts.length);
    const keys = texts.map((t) => textDigest(this.id + '\u0000' + t));
    const missIdx: number[] = [];
    for (let i = 0; i < texts.length; i++) {
      const hit = cache.get(keys[i]!);
      if (hit) out[i] = hit;
      else missIdx.push(i);
    }
    if (missIdx.length > 0) {
      const got = await this.enqueue(missIdx.map((i) => texts[i]!));
      for (let m = 0; m < missIdx.length; m++) {
        out[missIdx[m]!] = got[m]!;
        cache.set(keys[missIdx[m]!]!, got[m]!);
      }
    }
    return out;
  }

  private closedError(): EmbedderError {
    return new EmbedderError(ErrorCodes.EMBED_MODEL, `transformers embedder ${this.o.model} is closed; create a new one`);
  }

  private enqueue(texts: readonly string[]): Promise<Float32Array[]> {
    return new Promise<Float32Array[]>((resolvePromise, reject) => {
      this.queue.push({ texts, resolve: resolvePromise, reject });
      this.schedule();
    });
  }

  private schedule(): void {
    if (this.scheduled || this.running) return;
    this.scheduled = true;
    const flush = (): void => void this.flush();
    if (this.o.batchWindowMs > 0) setTimeout(flush, this.o.batchWindowMs);
    else setImmediate(flush);
  }

  /** Embeds everything queued as few model calls as `maxBatch` allows; repeats while calls keep arriving. */
  private async flush(): Promise<void> {
    this.scheduled = false;
    this.running = true;
    try {
      while (this.queue.length > 0) {
        const batch = this.queue;
        this.queue = [];
        try {
          const vectors = await this.embedUnique(batch.flatMap((p) => p.texts));
          let at = 0;
          for (const p of batch) {
            p.resolve(p.texts.map(() => vectors[at++]!));
          }
        } catch (err) {
          for (const p of batch) p.reject(err);
        }
      }
    } finally {
      this.running = false;
      if (this.queue.length > 0) this.schedule();
    }
  }

  /** One vector per text, in order; each distinct text goes through the model once. */
  private async embedUnique(texts: readonly string[]): Promise<Float32Array[]> {
    const { extract } = await this.load();
    const slot = new Map<string, number>();
    const unique: string[] = [];
    const where = texts.map((t) => {
      let s = slot.get(t);
      if (s === undefined) {
        s = unique.length;
        slot.set(t, s);
        unique.push(t);
      }
      return s;
    });
    // Similar lengths in one call waste less on padding (common practice); results are put back in order.
    const order = unique.map((_, i) => i).sort((a, b) => unique[a]!.length - unique[b]!.length);
    const vectors = new Array<Float32Array>(unique.length);
    for (let start = 0; start < order.length; start += this.o.maxBatch) {
      const idx = order.slice(start, start + this.o.maxBatch);
      const rows = await this.runModel(extract, idx.map((i) => unique[i]!));
      for (let k = 0; k < idx.length; k++) vectors[idx[k]!] = rows[k]!;
    }
    return where.map((s) => vectors[s]!);
  }

  private async runModel(extract: FeatureExtractor, texts: string[]): Promise<Float32Array[]> {
    let rows: Float32Array[];
    try {
      rows = typeof extract.tokenizer === 'function' && typeof extract.model === 'function'
        ? await this.tokenizeRunPool(extract.tokenizer, extract.model, texts)
        : this.splitRows(await extract(texts, { pooling: 'mean', normalize: true }), texts.length);
    } catch (err) {
      if (err instanceof EmbedderError) throw err;
      throw new EmbedderError(
        ErrorCodes.EMBED_MODEL,
        `transformers embedder ${this.o.model} failed on a batch of ${texts.length} texts: ${(err as Error).message}`,
        { cause: err, details: { batch: texts.length } },
      );
    }
    this.counters.modelCalls++;
    this.counters.textsEmbedded += texts.length;
    return rows;
  }

  /**
   * The feature-extraction pipeline's own steps (tokenise with padding and truncation, run the model,
   * take `last_hidden_state`), with the pooling done here: mean over the tokens the attention mask keeps,
   * then L2 normalisation — how sentence-transformers models such as all-MiniLM-L6-v2 are meant to be
   * pooled (Reimers & Gurevych 2019, "Sentence-BERT"). The library's `pooling: 'mean', normalize: true`
   * computes the same, but converts a BigInt mask value per element and walks the hidden state with a
   * stride; on a batch of 32 x 18 tokens x 384 that cost ~100 ms here against ~1-2 ms for the model call.
   */
  private async tokenizeRunPool(
    tokenize: NonNullable<FeatureExtractor['tokenizer']>,
    model: NonNullable<FeatureExtractor['model']>,
    texts: string[],
  ): Promise<Float32Array[]> {
    const inputs = tokenize(texts, { padding: true, truncation: true });
    const outputs = await model(inputs);
    const hidden = outputs['last_hidden_state'] ?? outputs['logits'] ?? outputs['token_embeddings'];
    const n = texts.length;
    const dims = hidden?.dims;
    if (hidden === undefined || !Array.isArray(dims) || dims.length !== 3 || dims[0] !== n || !(dims[2]! > 0)) {
      throw new EmbedderError(
        ErrorCodes.EMBED_INVALID,
        `transformers embedder ${this.o.model} returned ${hidden === undefined ? 'no last_hidden_state' : `a hidden state of shape [${String(dims)}]`} for ${n} texts; expected [${n}, tokens, dim] (is it a feature-extraction model?)`,
      );
    }
    const seq = dims[1]!;
    const width = this.acceptWidth(dims[2]!);
    const maskData = inputs.attention_mask.data as ArrayLike<number | bigint>;
    if (maskData.length !== n * seq) {
      throw new EmbedderError(ErrorCodes.EMBED_INVALID, `transformers embedder ${this.o.model}: attention mask has ${maskData.length} entries for [${n}, ${seq}] tokens`);
    }
    const data = hidden.data;
    const acc = new Float64Array(width);
    const rows: Float32Array[] = [];
    for (let i = 0; i < n; i++) {
      acc.fill(0);
      let count = 0;
      for (let j = 0; j < seq; j++) {
        if (Number(maskData[i * seq + j]) === 0) continue;
        count++;
        const base = (i * seq + j) * width;
        for (let k = 0; k < width; k++) acc[k] += data[base + k]!;
      }
      const row = new Float32Array(width);
      let sq = 0;
      for (let k = 0; k < width; k++) {
        const mean = acc[k]! / Math.max(count, 1);
        acc[k] = mean;
        sq += mean * mean;
      }
      const inv = sq > 0 ? 1 / Math.sqrt(sq) : 0;
      for (let k = 0; k < width; k++) row[k] = acc[k]! * inv;
      rows.push(checkVector(row, width, this.id));
    }
    hidden.dispose?.();
    return rows;
  }

  /** Rows of an already pooled [n, dim] tensor (the fallback when the pipeline hides its parts). */
  private splitRows(out: LibTensor, n: number): Float32Array[] {
    const dims = out.dims;
    if (!Array.isArray(dims) || dims.length !== 2 || dims[0] !== n || !(dims[1]! > 0)) {
      throw new EmbedderError(
        ErrorCodes.EMBED_INVALID,
        `transformers embedder ${this.o.model} returned a tensor of shape [${String(dims)}] for ${n} texts; expected [${n}, dim] (is it a feature-extraction model?)`,
      );
    }
    const width = this.acceptWidth(dims[1]!);
    const rows: Float32Array[] = [];
    for (let i = 0; i < n; i++) {
      rows.push(checkVector(Float32Array.from(Array.prototype.slice.call(out.data, i * width, (i + 1) * width) as number[]), width, this.id));
    }
    out.dispose?.();
    return rows;
  }

  /** Learns `dim` from the first output, or checks the output against the known `dim`. */
  private acceptWidth(width: number): number {
    if (this.knownDim === undefined) this.knownDim = width;
    else if (width !== this.knownDim) {
      const source = this.o.dim !== undefined ? 'the dim option' : 'config.json (hidden_size)';
      throw new EmbedderError(
        ErrorCodes.EMBED_INVALID,
        `transformers embedder ${this.o.model} outputs ${width} dims but ${source} says ${this.knownDim}; fix the dim option or the model files`,
        { details: { expected: this.knownDim, received: width } },
      );
    }
    return width;
  }

  private load(): Promise<{ lib: LoadedLib; extract: FeatureExtractor }> {
    if (!this.loading) {
      const loading = this.loadOnce();
      this.loading = loading;
      // A failed load is not kept: the user may put the files in place and try again.
      loading.catch(() => {
        if (this.loading === loading) this.loading = undefined;
      });
    }
    return this.loading;
  }

  private async loadOnce(): Promise<{ lib: LoadedLib; extract: FeatureExtractor }> {
    const lib = await importLibrary(this.o.library);
    this.libraryName = lib.name;
    const env = lib.mod.env;
    const root = this.fixedRoot ?? resolve(env.localModelPath);
    const cacheDir = this.o.cacheDir ?? env.cacheDir ?? undefined;
    if (!this.o.allowRemote) this.checkLocalFiles(root, cacheDir);

    const extract = await serialised(async () => {
      const saved = { localModelPath: env.localModelPath, allowRemoteModels: env.allowRemoteModels, allowLocalModels: env.allowLocalModels, cacheDir: env.cacheDir };
      env.localModelPath = root;
      env.allowLocalModels = true;
      env.allowRemoteModels = this.o.allowRemote;
      if (this.o.cacheDir !== undefined) env.cacheDir = this.o.cacheDir;
      const unwrap = this.o.threads > 0 && lib.name === '@xenova/transformers' ? wrapSessionThreads(this.o.threads) : () => {};
      try {
        const common = { local_files_only: !this.o.allowRemote };
        // 3.x chooses weights by dtype ('q8' = onnx/model_quantized.onnx) and takes ONNX Runtime session
        // options; 2.x takes `quantized` and no session options (threads are set by wrapSessionThreads).
        const options =
          lib.name === '@huggingface/transformers'
            ? { ...common, dtype: this.o.quantized ? 'q8' : 'fp32', device: 'cpu', ...(this.o.threads > 0 ? { session_options: { intraOpNumThreads: this.o.threads } } : {}) }
            : { ...common, quantized: this.o.quantized };
        return await lib.mod.pipeline('feature-extraction', this.name, options);
      } catch (err) {
        throw new EmbedderError(
          ErrorCodes.EMBED_MODEL,
          `transformers embedder: could not load model ${this.o.model} from ${root}${this.o.allowRemote ? ' or the Hub' : ''}: ${(err as Error).message}`,
          { cause: err, details: { model: this.o.model, folder: root, library: lib.name } },
        );
      } finally {
        unwrap();
        Object.assign(env, saved);
      }
    });
    if (this.closed) {
      await extract.dispose?.();
      throw this.closedError();
    }
    return { lib, extract };
  }

  /** With remote download off, say plainly which folder lacks which file instead of a library stack. */
  private checkLocalFiles(root: string, cacheDir: string | undefined): void {
    const folder = join(root, this.name);
    const cached = cacheDir === undefined ? undefined : join(cacheDir, this.name);
    const where = existsSync(join(folder, 'config.json')) ? folder : cached !== undefined && existsSync(join(cached, 'config.json')) ? cached : undefined;
    if (where === undefined) {
      throw new EmbedderError(
        ErrorCodes.EMBED_MODEL,
        `model ${this.o.model} not found in ${root} and remote download is off; put the model files there ` +
          `(${join(folder, 'config.json')}, tokenizer.json, tokenizer_config.json, onnx/${this.weightsFile()}) or set allowRemote: true`,
        { details: { model: this.o.model, folder: root } },
      );
    }
    const weights = join(where, 'onnx', this.weightsFile());
    if (!existsSync(weights)) {
      throw new EmbedderError(
        ErrorCodes.EMBED_MODEL,
        `model ${this.o.model} in ${where} has no onnx/${this.weightsFile()} and remote download is off; add that file` +
          (this.o.quantized ? ' or set quantized: false to use onnx/model.onnx' : ' or set quantized: true to use onnx/model_quantized.onnx'),
        { details: { model: this.o.model, folder: where } },
      );
    }
  }

  private weightsFile(): string {
    return this.o.quantized ? 'model_quantized.onnx' : 'model.onnx';
  }
}

/** An Embedder on a transformers.js feature-extraction model (see TransformersEmbedderOptions). */
export function transformersEmbedder(options: TransformersEmbedderOptions): TransformersEmbedder {
  return new TransformersEmbedder(options);
}
