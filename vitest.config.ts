import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    testTimeout: 30_000,
    hookTimeout: 60_000,
    // Redis and Cluster suites share servers; files run in parallel but each uses its own key prefix.
    pool: 'forks',
    // fast-check seed: fixed, printed, settable with TIDEMARK_FC_SEED (test/setup/fc-seed.global.ts).
    globalSetup: ['test/setup/fc-seed.global.ts'],
    setupFiles: ['test/setup/fc-seed.ts'],
  },
});
