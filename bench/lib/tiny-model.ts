// Builds, into a folder, a tiny BERT-shaped model that transformers.js loads like a real one: config.json,
// a WordPiece tokenizer.json, tokenizer_config.json and onnx/model_quantized.onnx, whose graph is one
// Gather from a token-embedding table to `last_hidden_state`. Used by the adapter's tests and by bench/embed.ts.

import { mkdir, writeFile } from 'node:fs/promises';
import { join } from 'node:path';
import onnxProto from 'onnx-proto';
import type { onnx as OnnxTypes } from 'onnx-proto';
import { rng as mulberry32 } from './stats.js';

const { onnx } = onnxProto;

export interface TinyModelOptions {
  /** Hidden size: the length of every token vector and of the pooled output. @default 32 */
  dim?: number;
  /** Seed of the pseudo-random embedding table, so two builds with the same seed are byte-identical. @default 7 */
  seed?: number;
  /** Folder name of the model inside the root folder (the model id given to the pipeline). @default 'tiny-bert' */
  name?: string;
}

export const TINY_MODEL_DEFAULTS: Required<TinyModelOptions> = { dim: 32, seed: 7, name: 'tiny-bert' };

export interface TinyModel {
  /** Folder holding the model folder: what transformers.js calls `localModelPath`. */
  root: string;
  /** The model id, a folder name inside `root`. */
  name: string;
  /** `join(root, name)`. */
  folder: string;
  dim: number;
  /** Token -> id, as written to tokenizer.json. */
  vocab: ReadonlyMap<string, number>;
  /** Row `id` is the vector of token `id`; `vocab.size x dim` numbers, row-major. */
  embeddings: Float32Array;
}

const SPECIALS = ['[PAD]', '[UNK]', '[CLS]', '[SEP]', '[MASK]'] as const;

// Whole words from the demo domains (invented), then single characters and `##` continuations so that
// any lowercase ASCII word splits into known pieces and never falls back to [UNK].
const WORDS = [
  'my', 'the', 'a', 'is', 'i', 'bike', 'bicycle', 'ride', 'chain', 'brake', 'brakes', 'wheel', 'tyre',
  'booking', 'service', 'tuesday', 'friday', 'plant', 'fern', 'water', 'soil', 'pot', 'lesson', 'verb',
  'spanish', 'french', 'name', 'maya', 'tom', 'hillcrest', 'school', 'daughter', 'likes', 'needs', 'at',
];
const CHARS = 'abcdefghijklmnopqrstuvwxyz0123456789'.split('');
const PUNCT = ['.', ',', '?', '!', "'", '-', ':', ';'];


function buildVocab(): Map<string, number> {
  const tokens = [...SPECIALS, ...WORDS, ...CHARS, ...CHARS.map((c) => '##' + c), ...PUNCT];
  const vocab = new Map<string, number>();
  for (const t of tokens) if (!vocab.has(t)) vocab.set(t, vocab.size);
  return vocab;
}

/** The ONNX graph: `last_hidden_state[b, s, :] = embeddings[input_ids[b, s], :]`. */
function buildOnnx(vocabSize: number, dim: number, embeddings: Float32Array): Uint8Array {
  const dims = (names: (string | number)[]): OnnxTypes.ITensorShapeProto => ({
    dim: names.map((n) => (typeof n === 'number' ? { dimValue: n } : { dimParam: n })),
  });
  const input = (name: string): OnnxTypes.IValueInfoProto => ({
    name,
    type: { tensorType: { elemType: onnx.TensorProto.DataType.INT64, shape: dims(['batch_size', 'sequence_length']) } },
  });
  const model = onnx.ModelProto.create({
    irVersion: 7,
    producerName: 'tidemark-tiny-model',
    opsetImport: [{ domain: '', version: 13 }],
    graph: {
      name: 'tiny_bert',
      node: [{ opType: 'Gather', input: ['embeddings', 'input_ids'], output: ['last_hidden_state'], name: 'lookup', attribute: [{ name: 'axis', type: onnx.AttributeProto.AttributeType.INT, i: 0 }] }],
      initializer: [{ name: 'embeddings', dataType: onnx.TensorProto.DataType.FLOAT, dims: [vocabSize, dim], rawData: new Uint8Array(embeddings.buffer.slice(0)) }],
      // The feature-extraction pipeline feeds all three BERT inputs; declaring them keeps it from
      // warning about extra inputs. Only input_ids is used.
      input: [input('input_ids'), input('attention_mask'), input('token_type_ids')],
      output: [{ name: 'last_hidden_state', type: { tensorType: { elemType: onnx.TensorProto.DataType.FLOAT, shape: dims(['batch_size', 'sequence_length', dim]) } } }],
    },
  });
  return onnx.ModelProto.encode(model).finish();
}

function tokenizerJson(vocab: Map<string, number>): unknown {
  const special = (id: string) => ({ SpecialToken: { id, type_id: 0 } });
  return {
    version: '1.0',
    truncation: null,
    padding: null,
    added_tokens: SPECIALS.map((content) => ({
      id: vocab.get(content),
      content,
      single_word: false,
      lstrip: false,
      rstrip: false,
      normalized: false,
      special: true,
    })),
    normalizer: { type: 'BertNormalizer', clean_text: true, handle_chinese_chars: true, strip_accents: null, lowercase: true },
    pre_tokenizer: { type: 'BertPreTokenizer' },
    post_processor: {
      type: 'TemplateProcessing',
      single: [special('[CLS]'), { Sequence: { id: 'A', type_id: 0 } }, special('[SEP]')],
      pair: [special('[CLS]'), { Sequence: { id: 'A', type_id: 0 } }, special('[SEP]'), { Sequence: { id: 'B', type_id: 1 } }, { SpecialToken: { id: '[SEP]', type_id: 1 } }],
      special_tokens: {
        '[CLS]': { id: '[CLS]', ids: [vocab.get('[CLS]')], tokens: ['[CLS]'] },
        '[SEP]': { id: '[SEP]', ids: [vocab.get('[SEP]')], tokens: ['[SEP]'] },
      },
    },
    decoder: { type: 'WordPiece', prefix: '##', cleanup: true },
    model: {
      type: 'WordPiece',
      unk_token: '[UNK]',
      continuing_subword_prefix: '##',
      max_input_chars_per_word: 100,
      vocab: Object.fromEntries(vocab),
    },
  };
}

/**
 * Writes the tiny model into `root/name/` and returns where it is and what it holds. `root` must
 * exist or be creatable; files already there are overwritten.
 */
export async function buildTinyModel(root: string, options: TinyModelOptions = {}): Promise<TinyModel> {
  const o = { ...TINY_MODEL_DEFAULTS, ...options };
  if (!Number.isInteger(o.dim) || o.dim < 2 || o.dim > 4096) {
    throw new RangeError(`tiny model: dim must be an integer in [2, 4096], got ${String(o.dim)}`);
  }
  const vocab = buildVocab();
  const rand = mulberry32(o.seed);
  const embeddings = new Float32Array(vocab.size * o.dim);
  for (let i = 0; i < embeddings.length; i++) embeddings[i] = rand() * 2 - 1;

  const folder = join(root, o.name);
  await mkdir(join(folder, 'onnx'), { recursive: true });
  const config = {
    model_type: 'bert',
    architectures: ['BertModel'],
    hidden_size: o.dim,
    vocab_size: vocab.size,
    num_hidden_layers: 0,
    num_attention_heads: 1,
    max_position_embeddings: 512,
    type_vocab_size: 2,
    pad_token_id: vocab.get('[PAD]'),
  };
  const tokenizerConfig = {
    tokenizer_class: 'BertTokenizer',
    do_lower_case: true,
    model_max_length: 512,
    cls_token: '[CLS]',
    sep_token: '[SEP]',
    pad_token: '[PAD]',
    unk_token: '[UNK]',
    mask_token: '[MASK]',
  };
  await Promise.all([
    writeFile(join(folder, 'config.json'), JSON.stringify(config, null, 2)),
    writeFile(join(folder, 'tokenizer.json'), JSON.stringify(tokenizerJson(vocab))),
    writeFile(join(folder, 'tokenizer_config.json'), JSON.stringify(tokenizerConfig, null, 2)),
    writeFile(join(folder, 'onnx', 'model_quantized.onnx'), buildOnnx(vocab.size, o.dim, embeddings)),
  ]);
  return { root, name: o.name, folder, dim: o.dim, vocab, embeddings };
}

/**
 * What the model plus mean pooling and L2 normalisation must return for `tokens` (already split into
 * vocabulary pieces, without [CLS]/[SEP]): the normalised mean of the rows of [CLS], the tokens and [SEP].
 * Computed in float64, independently of transformers.js, so tests can check the pipeline against it.
 */
export function expectedEmbedding(model: TinyModel, tokens: readonly string[]): Float64Array {
  const ids = ['[CLS]', ...tokens, '[SEP]'].map((t) => {
    const id = model.vocab.get(t);
    if (id === undefined) throw new RangeError(`tiny model: token ${JSON.stringify(t)} is not in the vocabulary`);
    return id;
  });
  const out = new Float64Array(model.dim);
  for (const id of ids) for (let j = 0; j < model.dim; j++) out[j] += model.embeddings[id * model.dim + j]! / ids.length;
  let s = 0;
  for (let j = 0; j < model.dim; j++) s += out[j]! * out[j]!;
  const inv = 1 / Math.sqrt(s);
  for (let j = 0; j < model.dim; j++) out[j] = out[j]! * inv;
  return out;
}
