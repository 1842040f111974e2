// The shared empty tables new sessions plan against: one per shape, and at most 16 shapes kept (the
// 17th shape empties the cache, so a process serving many shapes does not keep them all). This file
// is alone so the cache starts empty (each test file has its own module instance).

import { describe, expect, it } from 'vitest';
import { emptyTable } from '../../src/memory/slots.js';

describe('emptyTable cache', () => {
  it('keeps the first 16 shapes and starts over at the 17th', () => {
    const first = emptyTable(1, 1);
    for (let c = 2; c <= 16; c++) emptyTable(c, 1); // 16 shapes in all
    expect(emptyTable(1, 1)).toBe(first);
    emptyTable(17, 1); // a 17th shape: the cache is emptied first
    const again = emptyTable(1, 1);
    expect(again).not.toBe(first);
    expect([again.capacity, again.dim, again.count()]).toEqual([1, 1, 0]);
  });
});
