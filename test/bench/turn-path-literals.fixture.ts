// Fixture of test/bench/turn-path-literals.test.ts: literals the check must flag (lines 7 and 9) and pass.
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
];
