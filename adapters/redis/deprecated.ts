// Deprecated names of `tidemark/redis`, kept for one minor version (from 0.2 until 0.3): the only
// place the old names live. Each is the new name under its old spelling.

import { REDIS_SLOT_STORE_DEFAULTS, RedisSlotStore, redisSlotStore, type RedisSlotStoreOptions } from './store.js';

/** @deprecated since 0.2: use `RedisSlotStore`. */
export const RedisStore = RedisSlotStore;
/** @deprecated since 0.2: use `RedisSlotStore`. */
export type RedisStore = RedisSlotStore;
/** @deprecated since 0.2: use `RedisSlotStoreOptions`. */
export type RedisStoreOptions = RedisSlotStoreOptions;
/** @deprecated since 0.2: use `redisSlotStore`. */
export const redisStore = redisSlotStore;
/** @deprecated since 0.2: use `REDIS_SLOT_STORE_DEFAULTS`. */
export const REDIS_STORE_DEFAULTS = REDIS_SLOT_STORE_DEFAULTS;
