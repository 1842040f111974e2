// Profiling driver (not a benchmark): whole turns through createTidemark, in-process.
import { createTidemark } from '../src/middleware/tidemark.js';
import { HashingEmbedder } from '../src/embed/hashing.js';
import { rng } from './lib/stats.js';
const NAMES = ['Dana', 'Ravi', 'Mei', 'Tomasz', 'Aoife', 'Kwame'];
const THINGS = ['bike', 'fern', 'monstera', 'lesson', 'booking', 'order', 'chain', 'saddle'];
export default async function main(argv: string[]): Promise<void> {
  const turns = Number(argv[0] ?? 20000);
  const r = rng(3);
  const pick = <T>(a: T[]): T => a[Math.floor(r() * a.length)]!;
  const texts = Array.from({ length: turns }, (_, i) => i % 3 === 0 ? `My ${pick(THINGS)} number ${i} is from ${pick(NAMES)}` : i % 3 === 1 ? `Can I book a ${pick(THINGS)} check for Friday at ${1 + (i % 11)}pm?` : `Remember that ${pick(NAMES)} will collect the ${pick(THINGS)} ${i}`);
  const tm = createTidemark({ capacity: 64, embedder: new HashingEmbedder({ dim: 384 }) });
  const t0 = performance.now();
  for (let i = 0; i < turns; i++) {
    const session = `s${Math.floor(i / 200)}`;
    const ctx = await tm.read({ session, text: texts[i]! });
    await tm.write({ session, text: texts[i]! }, { reinforce: ctx.items.filter((x) => x.source === 'slot').map((x) => x.id) });
  }
  console.log(`${turns} turns, ${Math.round(turns / ((performance.now() - t0) / 1000))} turns/s`);
  await tm.close();
}
