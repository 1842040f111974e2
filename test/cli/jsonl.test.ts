import { describe, expect, it } from 'vitest';
import { ErrorCodes } from '../../src/errors.js';
import { parseProbes, parseTranscript, ReplayFormatError, toJsonl } from '../../cli/jsonl.js';

const good = (turn: string, text = 'hello there'): string => JSON.stringify({ session: 's1', turn, role: 'user', text });

describe('parseTranscript', () => {
  it('reads turns with their line numbers and skips blank lines', () => {
    const r = parseTranscript(`${good('t1')}\n\n${JSON.stringify({ session: 's1', turn: 't2', role: 'assistant', text: 'hi', at: '2025-03-03T09:00:00Z', speaker: 'bot' })}\n`);
    expect(r.issues).toEqual([]);
    expect(r.items).toEqual([
      { session: 's1', turn: 't1', role: 'user', text: 'hello there', line: 1 },
      { session: 's1', turn: 't2', role: 'assistant', text: 'hi', at: '2025-03-03T09:00:00Z', speaker: 'bot', line: 3 },
    ]);
  });

  it('reports each malformed line with its number and keeps the good ones', () => {
    const text = [
      good('t1'),
      '{not json',
      JSON.stringify({ session: 's1', turn: 't3', role: 'robot', text: 'x' }),
      JSON.stringify({ session: 'bad id!', turn: 't4', role: 'user', text: 'x' }),
      JSON.stringify({ session: 's1', turn: 't5', role: 'user', text: '   ' }),
      JSON.stringify([1, 2]),
      good('t1'),
      JSON.stringify({ session: 's1', turn: 't8', role: 'user', text: 'x', at: 'yesterday' }),
      good('t9'),
    ].join('\n');
    const r = parseTranscript(text, { file: 'chat.jsonl' });
    expect(r.items.map((t) => [t.turn, t.line])).toEqual([['t1', 1], ['t9', 9]]);
    expect(r.issues.map((i) => [i.line, i.file])).toEqual([[2, 'chat.jsonl'], [3, 'chat.jsonl'], [4, 'chat.jsonl'], [5, 'chat.jsonl'], [6, 'chat.jsonl'], [7, 'chat.jsonl'], [8, 'chat.jsonl']]);
    expect(r.issues[0]!.message).toBe('not valid JSON');
    expect(r.issues[1]!.message).toContain('field "role"');
    expect(r.issues[4]!.message).toBe('expected a JSON object, got an array of 2');
    expect(r.issues[5]!.message).toContain('appears twice');
    expect(r.issues[6]!.message).toContain('field "at"');
  });

  it('never echoes the text of a bad line', () => {
    const r = parseTranscript(JSON.stringify({ session: 's1', turn: 't1', role: 'user', text: 42, secret: 'my pin is 1234' }));
    expect(r.issues[0]!.message).not.toContain('1234');
  });

  it('throws TIDEMARK_E_REPLAY_FORMAT at the first bad line in strict mode', () => {
    let err: unknown;
    try {
      parseTranscript(`${good('t1')}\n{oops`, { strict: true, file: 'x.jsonl' });
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(ReplayFormatError);
    expect((err as ReplayFormatError).code).toBe(ErrorCodes.REPLAY_FORMAT);
    expect((err as ReplayFormatError).message).toBe('x.jsonl line 2: not valid JSON');
    expect((err as ReplayFormatError).details).toEqual({ file: 'x.jsonl', line: 2 });
  });
});

describe('parseProbes', () => {
  it('reads probes, defaults the id and dedupes expect', () => {
    const r = parseProbes([
      JSON.stringify({ id: 'fact:a', session: 's1', query: 'what bike?', expect: ['t3', 't9', 't3'], after: 't40' }),
      JSON.stringify({ session: 's1', query: 'name?', expect: ['t1'] }),
      JSON.stringify({ session: 's1', query: 'name?', expect: [] }),
    ].join('\n'));
    expect(r.items).toEqual([
      { id: 'fact:a', session: 's1', query: 'what bike?', expect: ['t3', 't9'], after: 't40', line: 1 },
      { id: 'line:2', session: 's1', query: 'name?', expect: ['t1'], line: 2 },
    ]);
    expect(r.issues).toEqual([{ file: 'probes', line: 3, message: 'field "expect" must be a non-empty array of turn ids (or may be left out when "expectText" is given), got an array of 0' }]);
  });

  it('round-trips through toJsonl', () => {
    const recs = [{ session: 's1', query: 'q', expect: ['t1'] }];
    expect(parseProbes(toJsonl(recs)).items[0]).toMatchObject(recs[0]!);
  });
});
