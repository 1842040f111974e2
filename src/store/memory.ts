// Deprecated names of the in-process store, kept for one minor version (since 0.2). Use
// `InProcessStore`, `inProcessStore` and `IN_PROCESS_STORE_DEFAULTS` from src/store/in-process.ts.

import { IN_PROCESS_STORE_DEFAULTS, InProcessStore, inProcessStore, type InProcessStoreOptions } from './in-process.js';

export { scopeKey, scopeOf } from './in-process.js';

/** @deprecated since 0.2: use `InProcessStore`. */
export const MemoryStore = InProcessStore;
/** @deprecated since 0.2: use `InProcessStore`. */
export type MemoryStore = InProcessStore;
/** @deprecated since 0.2: use `InProcessStoreOptions`. */
export type MemoryStoreOptions = InProcessStoreOptions;
/** @deprecated since 0.2: use `inProcessStore`. */
export const memoryStore = inProcessStore;
/** @deprecated since 0.2: use `IN_PROCESS_STORE_DEFAULTS`. */
export const MEMORY_STORE_DEFAULTS = IN_PROCESS_STORE_DEFAULTS;
