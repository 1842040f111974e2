// Benchmark dispatcher: `npm run bench -- NAME [flags]` runs bench/NAME.ts, whose default export is
// `main(argv: string[]): Promise<void>`. Each benchmark prints its figures; with --json its last
// stdout line is one JSON object. `--help` prints the comment that opens the benchmark's file.

import { readdirSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const here = dirname(fileURLToPath(import.meta.url));
const available = readdirSync(here)
  .filter((f) => f.endsWith('.ts') && f !== 'run.ts' && !f.startsWith('_'))
  .map((f) => f.slice(0, -3))
  .sort();

const [name, ...rest] = process.argv.slice(2);
if (!name || !available.includes(name)) {
  console.error(`usage: npm run bench -- NAME [flags]\navailable: ${available.join(', ')}`);
  process.exit(name ? 2 : 0);
}
if (rest.includes('--help') || rest.includes('-h')) {
  // Each benchmark's usage and what it measures is the comment that opens its file.
  const text = readFileSync(join(here, `${name}.ts`), 'utf8');
  const head = text.split('\n').findIndex((line) => !line.startsWith('//'));
  console.log(text.split('\n').slice(0, head).map((line) => line.replace(/^\/\/ ?/, '')).join('\n'));
  process.exit(0);
}
const mod = (await import(join(here, `${name}.ts`))) as { default: (argv: string[]) => Promise<void> };
await mod.default(rest);
