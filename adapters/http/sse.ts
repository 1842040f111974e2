// Server-Sent Events framing per the HTML Living Standard, "Server-sent events" § event stream
// interpretation: one field per line, a blank line ends an event, and a multi-line payload is sent as
// several `data:` lines (the client joins them with "\n"). CR, LF and CRLF all end a line there.

export interface SseMessage {
  /** Event type; omitted for the default `message` type. Must not contain line breaks. */
  event?: string;
  data: string;
  id?: string;
}

const LINE_BREAK = /\r\n|\r|\n/;

/** Frames one event. `data` may hold any text, line breaks included; it round-trips exactly. */
export function sseFrame(message: SseMessage): string {
  let out = '';
  if (message.event !== undefined) out += `event: ${oneLine('event', message.event)}\n`;
  if (message.id !== undefined) out += `id: ${oneLine('id', message.id)}\n`;
  // The parser strips exactly one space after the colon, so "data: " + line keeps leading spaces.
  for (const line of message.data.split(LINE_BREAK)) out += `data: ${line}\n`;
  return `${out}\n`;
}

/** A comment line: ignored by clients, keeps proxies from timing out an idle stream. */
export function sseComment(text: string): string {
  return `: ${text.replace(/\r\n|\r|\n/g, ' ')}\n\n`;
}

/** Tells the client how long to wait before reconnecting (ms). */
export function sseRetry(ms: number): string {
  return `retry: ${Math.max(0, Math.floor(ms))}\n\n`;
}

function oneLine(field: string, v: string): string {
  if (LINE_BREAK.test(v) || v.includes('\0')) throw new TypeError(`SSE ${field} must be a single line without NUL`);
  return v;
}

export const SSE_HEADERS: Readonly<Record<string, string>> = {
  'content-type': 'text/event-stream; charset=utf-8',
  'cache-control': 'no-cache, no-transform',
  // Reverse proxies (nginx) buffer responses unless told not to; a stream must not be buffered.
  'x-accel-buffering': 'no',
};
