// `tidemark/redis`: the Redis and Redis Cluster store. ioredis is an optional peer dependency, loaded
// only by this subpath (type-only imports, and a dynamic import when the store is given a URL).

export { RedisSlotStore, redisSlotStore, REDIS_SLOT_STORE_DEFAULTS, type RedisSlotStoreOptions } from './store.js';
// Old names, kept for one minor version.
export { RedisStore, redisStore, REDIS_STORE_DEFAULTS, type RedisStoreOptions } from './deprecated.js';
export { REDIS_CLIENT_OPTIONS, REDIS_CLUSTER_OPTIONS, type RedisClient } from './client.js';
export { PAYLOAD_FORMAT, type KeyFormat } from './codec.js';
export type { SessionKeys } from './keys.js';
