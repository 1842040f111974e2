// Mutation testing (StrykerJS 9.x, vitest runner): `npm run mutate` breaks one expression at a time in
// src/ and adapters/ and reruns the tests that cover it; a mutant no test notices "survives". Incremental:
// a rerun reuses the results of unchanged code and tests (reports/mutation/incremental.json, local and
// not committed — it describes one machine's last run). One room only:
//   npm run mutate -- --mutate 'src/memory/**/*.ts'
// Tests run from vitest.mutate.config.ts: the suite minus benchmarks, browser, packaging and process-kill
// suites, which are minutes each and test wiring rather than the mutated logic (see DEVELOPERS.md).
const cpus = Number(process.env.TIDEMARK_MUTATE_CONCURRENCY ?? 2);

/** @type {import('@stryker-mutator/api/core').PartialStrykerOptions} */
export default {
  packageManager: 'npm',
  testRunner: 'vitest',
  vitest: { configFile: 'vitest.mutate.config.ts', related: true },
  coverageAnalysis: 'perTest',
  mutate: ['src/**/*.ts', 'adapters/**/*.ts', '!src/**/*.d.ts', '!src/deprecated.ts', '!adapters/redis/deprecated.ts'],
  // Mutants in module-level constants would rerun every test per mutant; they are few and listed by --ignoreStatic false.
  ignoreStatic: true,
  incremental: true,
  incrementalFile: 'reports/mutation/incremental.json',
  concurrency: cpus,
  timeoutMS: 20_000,
  timeoutFactor: 2,
  reporters: ['clear-text', 'progress', 'html', 'json'],
  htmlReporter: { fileName: 'reports/mutation/mutation.html' },
  jsonReporter: { fileName: 'reports/mutation/mutation.json' },
  clearTextReporter: { allowColor: false, logTests: false, reportMutants: true, reportScoreTable: true },
  thresholds: { high: 80, low: 70, break: null },
  tempDirName: '.stryker-tmp',
  cleanTempDir: 'always',
};
