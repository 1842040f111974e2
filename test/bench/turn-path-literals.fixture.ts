// Fixture of test/bench/turn-path-literals.test.ts: literals the check must flag (lines 7, 9 and 12) and pass.
const base = { sessionHash: 'h', tenant: 't', atMs: 0 };
const rec = { id: 'a', strength: 1, halfLife: 8 };
const more = { extra: 1 };
const none = {};
export const samples = [
  { ...base, outcome: 'allocated', slot: 3, atMs: 5 },
  { ...rec, strength: 0.5, halfLife: 16 },
  { ...rec, ...more },
  { ...rec, ...none },
  { outcome: 'gated_out', ...base },
  { outcome: 'gated_out', ...base, slot: 3 },
  { outcome: 'gated_out', ...base, atMs: 3 },
];
