import { describe, expect, it } from 'vitest';
import { rankKeys } from '../src/math/sort.js';
import { rngFromSeed } from '../src/core/rng.js';

describe('rankKeys', () => {
  it('replaces each key by its rank among the distinct keys, as an independent brute force ranks them', () => {
    const rng = rngFromSeed('rank-keys');
    // Small integer keys repeat often; above 2^15 values the radix sort path is taken too.
    for (const [n, range] of [
      [50, 7],
      [1000, 1e9],
      [40000, 300],
    ] as const) {
      const keys = Float64Array.from({ length: n }, () => Math.floor(rng() * range) * 1e6);
      // Brute force: the distinct values sorted by comparison, and each key's position among them.
      const distinct = [...new Set(keys)].sort((a, b) => a - b);
      const expected = Array.from(keys, (key) => distinct.indexOf(key));
      const ranked = Float64Array.from(keys);
      expect(rankKeys(ranked)).toBe(distinct.length);
      expect(Array.from(ranked)).toEqual(expected);
    }
  });
});
