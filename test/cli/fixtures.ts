// A tiny hand-written transcript (bike workshop, invented) and its probes, for the replay tests.

export const TINY_TRANSCRIPT = [
  { session: 's1', turn: 't1', role: 'user', text: 'Hi, my name is Dana Whitfield.' },
  { session: 's1', turn: 't2', role: 'assistant', text: 'Nice to meet you, Dana.' },
  { session: 's1', turn: 't3', role: 'user', text: 'My bike is a green Corvane Tourer.' },
  { session: 's1', turn: 't4', role: 'assistant', text: 'Lovely bike.' },
  { session: 's1', turn: 't5', role: 'user', text: 'Can I book a service for Tuesday?' },
  { session: 's1', turn: 't6', role: 'assistant', text: 'Booked for Tuesday.' },
  { session: 's1', turn: 't7', role: 'user', text: 'Actually, make it Thursday.' },
  { session: 's1', turn: 't8', role: 'assistant', text: 'Done, Thursday it is.' },
  { session: 's1', turn: 't9', role: 'user', text: 'thanks!' },
  { session: 's2', turn: 'u1', role: 'user', text: 'My name is Priya.' },
]
  .map((t) => JSON.stringify(t))
  .join('\n');

export const TINY_PROBES = [
  { id: 'fact:name', session: 's1', query: "What is the customer's name?", expect: ['t1'] },
  { id: 'latest:service', session: 's1', query: 'When is the service booked?', expect: ['t7'] },
  { id: 'fact:service-early', session: 's1', query: 'When is the service booked?', expect: ['t5'], after: 't5' },
  { id: 'fact:bike', session: 's1', query: 'Which bike does the customer have?', expect: ['t3'], after: 't3' },
  { id: 'fact:other', session: 's2', query: "What is the customer's name?", expect: ['u1'] },
]
  .map((p) => JSON.stringify(p))
  .join('\n');
