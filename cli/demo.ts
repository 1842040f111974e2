// `tidemark demo`: the bike workshop conversation run through wrap() with a streaming reply, printing
// for each turn what was recalled, what was written, overwritten, gated out or evicted, and a summary.

import type { Writable } from 'node:stream';
import { createTidemark, type TidemarkOptions } from '../src/middleware/tidemark.js';
import type { EvictEvent, GateEvent, WriteEvent } from '../src/middleware/events.js';
import type { RecallItem } from '../src/types.js';
import { DEMO_CONVERSATION, demoHandler } from './demo-bot.js';

export interface DemoOptions {
  /** Slots for the demo session (small, so that eviction shows). @default 6 */
  capacity?: number;
  out?: Writable;
  /** ANSI colours. @default out.isTTY */
  color?: boolean;
  /** Extra createTidemark options (an embedder, a store). */
  tidemark?: TidemarkOptions;
}

export async function runDemo(options: DemoOptions = {}): Promise<{ friday: boolean }> {
  const out = options.out ?? process.stdout;
  const tty = options.color ?? Boolean((out as NodeJS.WriteStream).isTTY);
  const c = (code: string) => (s: string) => (tty ? `\u001b[${code}m${s}\u001b[0m` : s);
  const dim = c('2');
  const bold = c('1');
  const teal = c('36');
  const amber = c('33');
  const rose = c('31');
  const say = (s = ''): void => void out.write(s + '\n');

  const tm = createTidemark({
    capacity: options.capacity ?? 6,
    ...options.tidemark,
  });
  const session = 'demo-dana';
  const counts = { slot: 0, logbook: 0, miss: 0, allocated: 0, overwritten: 0, reinforced: 0, gated_out: 0, capacity: 0, decayed: 0, expired: 0, erased: 0 };
  let writes: WriteEvent[] = [];
  let gates: GateEvent[] = [];
  let evicts: EvictEvent[] = [];
  tm.on('read', (e) => counts[e.result]++);
  tm.on('write', (e) => {
    writes.push(e);
    counts[e.outcome]++;
  });
  tm.on('gate', (e) => {
    gates.push(e);
    if (!e.passed) counts.gated_out++;
  });
  tm.on('evict', (e) => {
    evicts.push(e);
    counts[e.reason]++;
  });

  let recalled = '';
  const chat = tm.wrap((input, ctx) => {
    recalled = `[${ctx.memory.trace.result}] ${describeRecall(ctx.memory.items)}`;
    return demoHandler(input, ctx);
  });
  say(bold('tidemark demo — Spoke & Sprocket Cycles booking assistant'));
  say(dim(`one customer over a week; ${options.capacity ?? 6} memory slots; embedder ${tm.embedder.id}`));
  let n = 0;
  for (const turn of DEMO_CONVERSATION) {
    n++;
    writes = [];
    gates = [];
    evicts = [];
    say('');
    say(`${bold(`turn ${n}`)} ${teal('customer:')} ${turn.text}`);
    const stream = await chat({ session, text: turn.text, at: turn.at });
    say(dim(`   recalled: ${recalled}`));
    out.write(`   ${amber('assistant:')} `);
    for await (const chunk of stream) out.write(chunk);
    out.write('\n');
    await tm.flush();
    const view = await tm.inspect(session);
    for (const w of writes) {
      const s = view.slots.find((x) => x.index === w.slot);
      const what = s ? `${s.key} = ${s.value}` : `slot ${w.slot}`;
      if (w.outcome === 'reinforced') say(dim(`   reinforced slot ${w.slot} (${what}) -> strength ${w.strength.toFixed(2)}, half-life ${w.halfLife.toFixed(0)} turns`));
      else say(`   ${w.outcome === 'overwritten' ? amber('overwrote') : teal('wrote')} slot ${w.slot}: ${what} ${dim(`(gate ${w.gate.toFixed(2)}, from ${s?.provenance.join(', ')})`)}`);
    }
    for (const e of evicts) {
      const a = view.logbook.find((x) => x.id === e.id);
      say(`   ${rose('evicted')} slot ${e.slot} (${e.reason}) -> logbook: ${a ? `${a.keyText} = ${a.value}` : e.id}`);
    }
    for (const g of gates.filter((x) => !x.passed)) say(dim(`   gated out (salience ${g.score.toFixed(2)} < ${g.threshold})`));
  }

  // The update check: Friday (the live slot) must outrank Tuesday (superseded, in the logbook).
  const check = await tm.read({ session, text: 'When is my booking?' });
  const rank = (re: RegExp) => check.items.findIndex((i) => re.test(i.value));
  const fri = rank(/friday/i);
  const tue = rank(/tuesday/i);
  const friday = fri === 0 && (tue === -1 || tue > fri);
  say('');
  say(bold('"When is my booking?" — ranked recall'));
  check.items.forEach((i, k) => {
    const tag = i.source === 'slot' ? 'slot' : `logbook, ${i.kind}`;
    say(`   ${k + 1}. ${i.value}  ${dim(`weight ${i.weight.toFixed(3)}, coverage ${i.coverage.toFixed(2)}, ${tag}, from ${i.provenance.join(', ')}`)}`);
  });
  say(friday ? teal('   Friday outranks Tuesday: the update won.') : rose('   Friday does NOT outrank Tuesday.'));

  const view = await tm.inspect(session);
  say('');
  say(bold('summary'));
  say(`   turns ${view.turns}; reads: ${counts.slot} from a slot, ${counts.logbook} from the logbook, ${counts.miss} miss`);
  say(`   writes: ${counts.allocated} allocated, ${counts.overwritten} overwritten, ${counts.reinforced} reinforced, ${counts.gated_out} gated out`);
  const kept = view.logbook.filter((x) => x.kind === 'turn').length;
  say(`   evictions: ${counts.capacity} capacity, ${counts.decayed} decayed; logbook holds ${kept} turns and ${view.logbook.length - kept} values that left working memory`);
  say(`   slots in use ${view.slots.length}/${view.capacity}:`);
  for (const s of view.slots) say(dim(`     [${s.index}] ${s.key} = ${s.value}  (strength ${s.strength.toFixed(2)}, half-life ${s.halfLife.toFixed(0)}${s.pinned ? ', pinned' : ''})`));
  await tm.close();
  return { friday };
}

function describeRecall(items: ReadonlyArray<RecallItem>): string {
  if (items.length === 0) return 'nothing';
  return items
    .map((i) => {
      // A kept turn has no key: say who said it instead.
      const head = i.key === '' || i.key === i.value ? (i.kind === 'turn' ? `${i.speaker ?? i.role ?? 'turn'} said "${i.value}"` : i.value) : `${i.key}: ${i.value}`;
      return `${head} (weight ${i.weight.toFixed(2)}, ${i.provenance.join('+')}${i.source === 'logbook' ? `, logbook/${i.kind}` : ''})`;
    })
    .join('; ');
}
