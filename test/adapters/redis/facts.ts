// Invented bike-workshop facts for the Redis proofs: every (process, fact) pair names its own part,
// so the final memory of a session does not depend on the order in which the facts were written.

const PARTS = [
  'saddle', 'helmet', 'chain', 'pedal', 'tyre', 'brake', 'bell', 'lamp', 'basket', 'pump', 'lock', 'mirror',
  'rack', 'gear', 'spoke', 'rim', 'fork', 'frame', 'grip', 'mudguard', 'kickstand', 'derailleur', 'cassette',
  'crank', 'bottle', 'cleat', 'tube', 'valve', 'hub', 'stem', 'seatpost', 'headset', 'axle', 'cable',
  'sprocket', 'reflector', 'trailer', 'pannier', 'toolkit', 'computer',
];

export const PART_COUNT = PARTS.length;

export function factText(proc: number, fact: number, perProc = 10): string {
  const n = proc * perProc + fact;
  return `My ${PARTS[n % PARTS.length]} order number is ${4000 + n}.`;
}

/**
 * Facts that overwrite one another: every process restates the same few topics of a session with
 * its own values, so which value is current depends on the order the store committed them.
 */
export const OVERWRITE_TOPICS = 4;
export function overwriteText(proc: number, fact: number): string {
  return `My ${PARTS[fact % OVERWRITE_TOPICS]} order number is ${5000 + proc * 100 + fact}.`;
}
