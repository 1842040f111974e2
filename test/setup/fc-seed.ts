// Every property of every file uses the run's fast-check seed (see fc-seed.global.ts) unless the
// property passes its own `seed`.
import fc from 'fast-check';
import { inject } from 'vitest';
import './fc-seed.global.js';

fc.configureGlobal({ ...fc.readConfigureGlobal(), seed: inject('fcSeed') });
