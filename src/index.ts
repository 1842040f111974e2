// tidemark: working memory for chatbots. The front door: the factory, the public types, the
// extension points and their defaults, and the error classes. Adapters live in subpath exports
// (tidemark/redis, tidemark/http, tidemark/transformers, tidemark/prometheus) so their dependencies
// load only when used, and so these declarations never name an optional peer's types: a TypeScript
// user without prom-client, ioredis, hnswlib-node or @xenova/transformers still passes `tsc --strict`.

export { createTidemark, Tidemark, TIDEMARK_DEFAULTS } from './middleware/tidemark.js';
export type {
  TidemarkOptions,
  OutboxOptions,
  WrapContext,
  WrapInput,
  WriteOptions,
  WriteReport,
  WriteDetail,
  StoredValue,
  OverwrittenValue,
  DroppedItem,
  WrapCallOptions,
  FactTarget,
  EditInput,
  CorrectionReport,
  SessionView,
  SlotView,
} from './middleware/tidemark.js';
export type { Reply } from './middleware/stream.js';
export type * from './middleware/events.js';
export type * from './types.js';

export type { Embedder } from './embed/embedder.js';
export { HashingEmbedder, hashingEmbedder, HASHING_EMBEDDER_DEFAULTS } from './embed/hashing.js';
export type { HashingEmbedderOptions } from './embed/hashing.js';
export { EmbeddingCache } from './embed/cache.js';

export type { Store, SessionSnapshot, SlotOp, CommitRequest, CommitResult, EraseTarget, EraseReport, SweepRequest, SweepReport } from './store/store.js';
export { InProcessStore, inProcessStore, IN_PROCESS_STORE_DEFAULTS } from './store/in-process.js';
export type { InProcessStoreOptions } from './store/in-process.js';

export type { VectorIndex, VectorMatch } from './vectors/vector-index.js';
export { createVectorIndex, VECTOR_INDEX_DEFAULTS } from './vectors/index.js';
export type { VectorIndexOptions } from './vectors/index.js';

export type { Extractor, Candidate } from './memory/extract.js';
export { RuleExtractor } from './memory/extract.js';
export { SlotTable } from './memory/slots.js';
export { MEMORY_DEFAULTS, READ_DEFAULTS, WRITE_DEFAULTS } from './memory/params.js';
export type { MemoryParams, ReadParams, WriteParams } from './memory/params.js';
export { DEFAULT_GATE_WEIGHTS } from './memory/gate.js';
export type { GateFeatures, GateWeights } from './memory/gate.js';
export { PROMPT_DEFAULTS, approxTokens } from './memory/prompt.js';
export type { PromptOptions, TokenCounter } from './memory/prompt.js';

export { RetentionTracker, RETENTION_TRACKER_DEFAULTS, kaplanMeier, survivalAt, halfLifeDistribution, retentionSnapshot } from './metrics/retention.js';
export type { RetentionSnapshot, SurvivalCurve, SurvivalStep, LifetimeObservation, HalfLifeDistribution } from './metrics/retention.js';
export { DashboardCollector, COLLECTOR_DEFAULTS } from './metrics/collector.js';
export type { DashboardSnapshot, CollectorOptions } from './metrics/collector.js';

export {
  TidemarkError,
  InputError,
  ConfigError,
  StoreError,
  EmbedderError,
  ErrorCodes,
  isTidemarkError,
} from './errors.js';
export type { ErrorCode } from './errors.js';

// Old names, kept for one minor version: see src/deprecated.ts.
export * from './deprecated.js';
