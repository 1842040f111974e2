// The tests a mutation run (npm run mutate) reruns per mutant: the whole suite minus the slow suites
// that test wiring and packaging rather than the logic being mutated (benchmarks, the browser,
// the packed tarball, process-kill chaos runs, the real transformer model and outside data).
// TIDEMARK_MUTATE_TESTS narrows it further, e.g. 'test/memory/**/*.test.ts,test/middleware/**/*.test.ts'
// for a quick score of one room against its own suites.
import { defineConfig } from 'vitest/config';
import base from './vitest.config.js';

const only = process.env.TIDEMARK_MUTATE_TESTS?.split(',').map((s) => s.trim()).filter(Boolean);

export default defineConfig({
  ...base,
  test: {
    ...base.test,
    ...(only && only.length > 0 ? { include: only } : {}),
    exclude: [
      'node_modules/**',
      '.stryker-tmp/**',
      'test/bench/**',
      'test/chaos/**',
      'test/dashboard/browser.test.ts',
      'test/package/**',
      'test/outside/**',
      // The real-model suites load onnxruntime-node's native addon, which cannot load in the worker
      // threads Stryker's vitest runner uses ("Module did not self-register"); logic.test.ts tests the
      // adapter against a stand-in library and runs.
      'test/adapters/transformers/transformers.test.ts',
      'test/adapters/transformers/demo.test.ts',
      'test/memory/attention.tfjs.test.ts',
      'test/metrics/prometheus-live.test.ts',
      'test/metrics/rules.test.ts',
    ],
  },
});
