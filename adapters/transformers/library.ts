// Loading transformers.js: which package to import (@huggingface/transformers 3.x or
// @xenova/transformers 2.x), the small part of its API used here, loads serialised around its
// process-wide settings, the ONNX Runtime thread count for 2.x, and reading a local model folder.

import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { isAbsolute, sep } from 'node:path';
import { EmbedderError, ErrorCodes } from '../../src/errors.js';
import type { TransformersLibrary } from './options.js';

// The small part of the transformers.js API used here (the same in 2.x and 3.x).
export interface LibTensor {
  dims: number[];
  data: ArrayLike<number>;
  dispose?(): void;
}
export interface TokenizerOutput {
  input_ids: LibTensor;
  attention_mask: LibTensor;
}
export type FeatureExtractor = ((texts: string[], options: { pooling: 'mean'; normalize: boolean }) => Promise<LibTensor>) & {
  /** The pipeline's tokenizer and model, present in 2.x and 3.x; used to pool outside the library. */
  tokenizer?: (texts: string[], options: { padding: boolean; truncation: boolean }) => TokenizerOutput;
  model?: (inputs: TokenizerOutput) => Promise<Record<string, LibTensor | undefined>>;
  dispose?(): Promise<void>;
};
export interface LibEnv {
  localModelPath: string;
  allowRemoteModels: boolean;
  allowLocalModels: boolean;
  cacheDir: string | null;
}
export interface LibModule {
  pipeline(task: 'feature-extraction', model: string, options: Record<string, unknown>): Promise<FeatureExtractor>;
  env: LibEnv;
}
export interface LoadedLib {
  name: TransformersLibrary;
  mod: LibModule;
}

export interface Pending {
  texts: readonly string[];
  resolve(v: Float32Array[]): void;
  reject(e: unknown): void;
}

export const LIBRARY_ORDER: readonly TransformersLibrary[] = ['@huggingface/transformers', '@xenova/transformers'];

// transformers.js keeps its settings in one process-wide `env`; loads are serialised so that each one
// sees its own folder and remote setting, which are restored afterwards.
let loadChain: Promise<unknown> = Promise.resolve();
export function serialised<T>(task: () => Promise<T>): Promise<T> {
  const run = loadChain.then(task, task);
  loadChain = run.catch(() => undefined);
  return run;
}

/** True when `name` itself is missing, not a package it imports (sharp, onnxruntime-node): their paths contain `name` too. */
export function isModuleNotFound(err: unknown, name: string): boolean {
  const e = err as { code?: unknown; message?: unknown };
  const message = String(e?.message);
  // Vite (and so vitest) replaces an optional peer dependency that is not installed with a stub that
  // throws this message instead of a module-not-found error (seen with vite 8).
  if (message.startsWith(`Could not resolve "${name}"`)) return true;
  if (e?.code !== 'ERR_MODULE_NOT_FOUND' && e?.code !== 'MODULE_NOT_FOUND') return false;
  return message.startsWith(`Cannot find package '${name}'`) || message.startsWith(`Cannot find module '${name}'`);
}

export async function importLibrary(choice: 'auto' | TransformersLibrary): Promise<LoadedLib> {
  const names = choice === 'auto' ? LIBRARY_ORDER : [choice];
  for (const name of names) {
    try {
      // A variable specifier keeps TypeScript and bundlers from requiring the optional package.
      const spec: string = name;
      const mod = (await import(spec)) as LibModule & { default?: LibModule };
      return { name, mod: typeof mod.pipeline === 'function' ? mod : (mod.default as LibModule) };
    } catch (err) {
      if (isModuleNotFound(err, name)) continue;
      throw new EmbedderError(
        ErrorCodes.EMBED_MODEL,
        `transformers embedder: ${name} is installed but failed to load (${(err as Error).message}); ` +
          `if the message names sharp, add "overrides": { "sharp": "0.34.5" } to your package.json and reinstall`,
        { cause: err, details: { library: name } },
      );
    }
  }
  throw new EmbedderError(
    ErrorCodes.EMBED_MODEL,
    choice === 'auto'
      ? 'transformers embedder: neither @huggingface/transformers nor @xenova/transformers is installed; run npm install @xenova/transformers'
      : `transformers embedder: library ${choice} is not installed; run npm install ${choice} or set library: 'auto'`,
    { details: { library: choice } },
  );
}

/**
 * @xenova/transformers 2.x creates its ONNX Runtime sessions without session options, so the thread
 * count is set by wrapping `InferenceSession.create` of the onnxruntime-node copy that library loads,
 * for the duration of one (serialised) load only. Returns the function that undoes the wrap.
 */
export function wrapSessionThreads(threads: number): () => void {
  const libRequire = createRequire(createRequire(import.meta.url).resolve('@xenova/transformers'));
  const ort = libRequire('onnxruntime-node') as { InferenceSession: { create: (...args: unknown[]) => Promise<unknown> } };
  const session = ort.InferenceSession;
  const original = session.create;
  session.create = function (this: unknown, ...args: unknown[]): Promise<unknown> {
    // create(buffer | path, options): the form transformers.js 2.x uses.
    if (args.length === 2 && typeof args[1] === 'object' && args[1] !== null) {
      args[1] = { ...(args[1] as object), intraOpNumThreads: threads };
    }
    return original.apply(this, args);
  };
  return () => {
    session.create = original;
  };
}

export function isFolderPath(model: string): boolean {
  return isAbsolute(model) || model === '.' || model === '..' || ['./', '../', `.${sep}`, `..${sep}`].some((p) => model.startsWith(p));
}

export function readHiddenSize(configPath: string): number | undefined {
  try {
    const size = (JSON.parse(readFileSync(configPath, 'utf8')) as { hidden_size?: unknown }).hidden_size;
    return Number.isInteger(size) && (size as number) > 0 ? (size as number) : undefined;
  } catch {
    return undefined;
  }
}
