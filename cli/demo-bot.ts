// The demo's bot: a bike workshop's booking assistant with a tiny rule-based reply generator that
// streams its reply word by word and uses what tidemark recalled. Invented scenario, for the demo
// and `tidemark serve` only.

import type { WrapContext, WrapInput } from '../src/middleware/tidemark.js';
import type { RecallItem } from '../src/types.js';

const find = (items: readonly RecallItem[], re: RegExp): RecallItem | undefined => items.find((i) => re.test(`${i.key} ${i.value}`));

/** Composes the reply text from the user's message and the recalled items. */
export function demoReplyText(text: string, items: readonly RecallItem[]): string {
  const t = text.toLowerCase();
  const name = items.find((i) => i.key === 'my name')?.value;
  const hello = name ? `${name}, ` : '';
  if (/\b(hi|hello|hey)\b/.test(t) && t.length < 40) return 'Hello! Welcome to Spoke & Sprocket Cycles. How can I help with your bike today?';
  if (/\b(when|what day|what time)\b.*\b(booking|appointment|service)\b|\bmy booking\b.*\?/.test(t)) {
    const b = find(items, /booking|book|service/i);
    return b ? `${hello}your booking: ${b.value}. See you then!` : "I can't find a booking for you yet. Which day suits you?";
  }
  if (/\b(book|schedule|appointment)\b/.test(t)) return `${name ? `${name}, n` : 'N'}oted. I've pencilled that in; we open at 8:30.`;
  if (/\b(move|change|reschedule|instead)\b/.test(t)) return `No problem${name ? `, ${name}` : ''}. I've updated the booking.`;
  if (/\ballerg/.test(t)) {
    const a = items.find((i) => /allerg/i.test(i.key));
    return a && t.includes('?') ? `You told us you're allergic to ${a.value}; we'll use a different product.` : "Thanks for telling us. We'll note it on your job card.";
  }
  if (/\b(lube|lubricant|chain oil|degreaser)\b/.test(t)) {
    const a = items.find((i) => /allerg/i.test(i.key));
    return a ? `${name ? `${name}, w` : 'W'}e'll keep ${a.value} away from your bike and use a plant-based cleaner instead.` : 'We usually clean chains with a citrus degreaser.';
  }
  if (/\bbike\b.*\?/.test(t)) {
    const b = items.find((i) => /bike/i.test(i.key));
    return b ? `You ride ${b.value}.` : 'What bike do you ride?';
  }
  if (/\bname\b.*\?/.test(t)) return name ? `You're ${name}.` : "I don't think you've told me your name.";
  if (t.includes('?')) return "Good question! I'll ask a mechanic and get back to you.";
  return `Got it${name ? `, ${name}` : ''}.`;
}

/** A wrap()-compatible handler that streams its reply word by word. */
export function demoHandler(input: WrapInput, ctx: WrapContext): AsyncIterable<string> {
  const text = demoReplyText(String(input.text), ctx.memory.items);
  const words = text.split(/(?<= )/);
  return (async function* () {
    for (const w of words) {
      if (ctx.signal?.aborted) return;
      // Yield to the event loop between words, like a model streaming tokens.
      await new Promise<void>((r) => setImmediate(r));
      yield w;
    }
  })();
}

/** The demo conversation: one customer over a week, with an update and some small talk. */
export const DEMO_CONVERSATION: ReadonlyArray<{ text: string; at: string }> = [
  { text: 'Hi there!', at: '2026-03-02T09:00:00Z' },
  { text: 'My name is Dana Whitfield and my bike is a green Corvane with a dynamo hub.', at: '2026-03-02T09:00:20Z' },
  { text: 'Can I book a full service for Tuesday?', at: '2026-03-02T09:01:00Z' },
  { text: "I'm allergic to citrus degreaser, so please keep it away from my bike.", at: '2026-03-02T09:01:40Z' },
  { text: 'Lovely weather for riding today, isn\'t it?', at: '2026-03-02T09:02:10Z' },
  { text: 'My partner Sam may drop the bike off on the way to work.', at: '2026-03-02T09:02:30Z' },
  { text: 'I commute 14 km each way along the canal.', at: '2026-03-02T09:02:40Z' },
  { text: 'Actually, can we move it to Friday instead?', at: '2026-03-04T18:30:00Z' },
  { text: 'Do you sell mudguards?', at: '2026-03-04T18:31:00Z' },
  { text: 'My phone number is 07700 900123 if anything comes up.', at: '2026-03-04T18:32:00Z' },
  { text: 'When is my booking?', at: '2026-03-05T08:00:00Z' },
  { text: 'Will you use any degreaser on my bike?', at: '2026-03-05T08:00:30Z' },
  { text: 'Thanks!', at: '2026-03-05T08:01:00Z' },
];
