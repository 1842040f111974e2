// One bot process of a fleet (`bench load --rate R --processes N`): opens the store on the key space
// the parent chose, runs its share of the fixed-rate schedule and prints its result (histograms
// encoded) as one JSON line. It deletes nothing: the parent cleans the shared key space up.

import { createTidemark } from '../../src/middleware/tidemark.js';
import { openBackend, type BackendOptions, type StoreKind } from '../load.js';
import { runFixedRate, type FixedRateOptions } from './fixed-rate.js';

export interface ChildJob {
  kind: StoreKind;
  redisUrl: string;
  backend: BackendOptions;
  capacity: number;
  run: FixedRateOptions;
}

const job = JSON.parse(process.argv[2] ?? '{}') as ChildJob;
const backend = await openBackend(job.kind, job.redisUrl, false, job.backend);
const { store } = await backend.open();
const tm = createTidemark({ store, tenant: job.run.tenant, capacity: job.capacity, hashKey: 'load-bench' });
// After its warm-up the child says "ready" and waits for the parent's start time on stdin.
const ready = (): Promise<number> =>
  new Promise((resolve) => {
    let buf = '';
    process.stdin.on('data', (d: Buffer) => {
      buf += d.toString();
      if (buf.includes('\n')) resolve(Number(buf.trim()));
    });
    process.stdout.write('ready\n');
  });
const result = await runFixedRate(tm, { ...job.run, ready });
process.stdin.destroy();
await tm.close();
await backend.close();
process.stdout.write(`${JSON.stringify(result)}\n`);
