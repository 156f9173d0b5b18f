import { describe, expect, it } from 'vitest';
import { quantilePairInPlace, rankKeys, selectInPlace } from '../src/math/sort.js';
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

describe('quantilePairInPlace and selectInPlace', () => {
  it('give the order statistics and type-7 quantiles a full sort gives (NumPy quantile convention), ties and every small n included', () => {
    const rng = rngFromSeed('quantile-pair');
    // Reference: Array.prototype.sort by comparison, then linear interpolation at p·(n − 1), written out here.
    const quantile = (sorted: number[], p: number) => {
      const position = p * (sorted.length - 1);
      const below = Math.floor(position);
      const fraction = position - below;
      return fraction === 0 ? sorted[below] : sorted[below] + (sorted[below + 1] - sorted[below]) * fraction;
    };
    let checked = 0;
    for (let n = 1; n <= 40; n++) {
      for (const range of [3, 1e9]) {
        const values = Float64Array.from({ length: n }, () => Math.floor(rng() * range) - range / 2);
        const sorted = Array.from(values).sort((a, b) => a - b);
        for (const [p, q] of [
          [0.25, 0.75],
          [0.1, 0.9],
          [0.5, 0.5],
          [0, 1],
          [0.3, 0.31],
        ]) {
          const [lower, upper] = quantilePairInPlace(Float64Array.from(values), p, q);
          expect(lower, `n = ${n}, p = ${p}`).toBe(quantile(sorted, p));
          expect(upper, `n = ${n}, q = ${q}`).toBe(quantile(sorted, q));
          checked++;
        }
        const k = Math.floor(rng() * n);
        const selected = Float64Array.from(values);
        selectInPlace(selected, k);
        expect(selected[k]).toBe(sorted[k]);
        for (let i = 0; i < n; i++) expect(i < k ? selected[i] <= selected[k] : selected[i] >= selected[k]).toBe(true);
      }
    }
    expect(checked).toBe(400);
  });
});
