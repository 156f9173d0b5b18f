/**
 * The WebAssembly pair loops (src/math/pair-sums.ts) against plain JavaScript loops written here from the
 * definition, two rows at a time in the same order, with expNonPositive (src/math/exp.ts, itself checked against
 * Math.exp in test/exp.test.ts): the sums must be the same doubles, on every dimension the module has, for equal
 * and different ranges, odd and even ranges, and bandwidths from wide to so narrow that terms underflow.
 * The generated files must be what tools/pair-sums-wasm.mjs makes now.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { expNonPositive } from '../src/math/exp.js';
import { PAIR_SUMS_DIMS, pairSums, sortedPairSums } from '../src/math/pair-sums.js';
import { PAIR_SUMS_WASM } from '../src/math/pair-sums-wasm.js';

/** Reference: rows p, p + 1 against each q; squared distances in axis order; q gets the two terms added together. */
function referencePairs(z: Float64Array, dim: number, fromA: number, toA: number, fromB: number, toB: number, scale: number, sums: Float64Array): void {
  const same = fromA === fromB;
  const squared = (i: number, j: number) => {
    let s = 0;
    for (let a = 0; a < dim; a++) {
      const d = z[i * dim + a] - z[j * dim + a];
      s = a === 0 ? d * d : s + d * d;
    }
    return s;
  };
  let p = fromA;
  for (; p + 1 < toA; p += 2) {
    let sumX = 0;
    let sumY = 0;
    let q = fromB;
    if (same) {
      const term = expNonPositive(scale * squared(p, p + 1));
      sumX += term;
      sumY += term;
      q = p + 2;
    }
    for (; q < toB; q++) {
      const termX = expNonPositive(scale * squared(p, q));
      const termY = expNonPositive(scale * squared(p + 1, q));
      sumX += termX;
      sumY += termY;
      sums[q] += termX + termY;
    }
    sums[p] += sumX;
    sums[p + 1] += sumY;
  }
  if (p < toA) {
    let sumX = 0;
    for (let q = same ? p + 1 : fromB; q < toB; q++) {
      const term = expNonPositive(scale * squared(p, q));
      sumX += term;
      sums[q] += term;
    }
    sums[p] += sumX;
  }
}

function points(n: number, dim: number, seed: number): Float64Array {
  let state = seed;
  const z = new Float64Array(n * dim);
  for (let i = 0; i < z.length; i++) {
    state = (state * 48271) % 2147483647;
    // Mostly a unit cloud, every seventh coordinate far out (terms far below 1 and underflowing ones).
    z[i] = (state / 2147483647 - 0.5) * (i % 7 === 0 ? 40 : 2);
  }
  return z;
}

describe('WebAssembly pair sums (src/math/pair-sums.ts)', () => {
  it('add the same doubles as plain two-row loops with expNonPositive, bit for bit', () => {
    let compared = 0;
    let underflowed = 0;
    for (const dim of PAIR_SUMS_DIMS) {
      for (const n of [2, 3, 6, 7, 57, 300]) {
        const z = points(n, dim, 1000 * dim + n);
        for (const h of [3, 0.4, 0.02]) {
          const scale = -0.5 / (h * h);
          // Ranges as the blocked pass (blocks of 64) and as the cell list (a range against a later one) take them.
          const ranges: [number, number, number, number][] = [];
          for (let a = 0; a < n; a += 64) for (let b = a; b < n; b += 64) ranges.push([a, Math.min(a + 64, n), b, Math.min(b + 64, n)]);
          // Row ranges of every length mod 4 (the module takes four rows at a time, then two, then one).
          if (n > 10) ranges.push([1, 6, 6, n], [0, 5, 7, 9], [1, 8, 8, n], [2, 8, 9, 12], [3, 10, 10, 11]);
          const expected = new Float64Array(n);
          const got = new Float64Array(n);
          const pairs = pairSums(z, n, dim);
          for (const [fromA, toA, fromB, toB] of ranges) {
            referencePairs(z, dim, fromA, toA, fromB, toB, scale, expected);
            pairs.add(fromA, toA, fromB, toB, scale);
          }
          pairs.addTo(got);
          for (let i = 0; i < n; i++) {
            expect(Object.is(got[i], expected[i]), `d = ${dim}, n = ${n}, h = ${h}, point ${i}: ${got[i]} against ${expected[i]}`).toBe(true);
            compared++;
            if (expected[i] < 1e-300) underflowed++;
          }
        }
      }
    }
    expect(compared).toBeGreaterThan(4000);
    // The narrow bandwidth leaves far points with sums at or below the double range, the case the clamp is for.
    expect(underflowed).toBeGreaterThan(10);
  });

  it('in one dimension (sortedPairSums) add the same doubles as the row-by-row pass over sorted values', () => {
    // Reference: row i walks j = i + 1, … while the gap is within reach, its own sum kept apart (the pass
    // estimators/kernel/univariate.ts made in JavaScript before it moved to the module).
    const reference = (sorted: Float64Array, reach: number, scale: number): Float64Array => {
      const sums = new Float64Array(sorted.length);
      for (let i = 0; i < sorted.length; i++) {
        let sumI = 0;
        for (let j = i + 1; j < sorted.length; j++) {
          const gap = sorted[j] - sorted[i];
          if (gap > reach) break;
          const term = expNonPositive(scale * gap * gap);
          sumI += term;
          sums[j] += term;
        }
        sums[i] += sumI;
      }
      return sums;
    };
    let compared = 0;
    for (const n of [0, 1, 2, 3, 4, 5, 40, 301]) {
      const values = points(n, 1, 7 + n);
      // Repeated values (gaps of 0) and a tight run among the spread ones.
      for (let i = 5; i < n; i += 9) values[i] = values[i - 1];
      const sorted = values.sort();
      for (const h of [5, 0.3, 0.01]) {
        for (const cutoff of [8, 1e-3, 0]) {
          const reach = cutoff * h;
          const want = reference(sorted, reach, -0.5 / (h * h));
          const got = sortedPairSums(sorted, reach, -0.5 / (h * h));
          for (let i = 0; i < n; i++) {
            expect(Object.is(got[i], want[i]), `n = ${n}, h = ${h}, reach = ${reach}, point ${i}: ${got[i]} against ${want[i]}`).toBe(true);
            compared++;
          }
        }
      }
    }
    expect(compared).toBeGreaterThan(3000);
  });

  it('refuses a PairSums used after a later pairSums call in the same thread', () => {
    const first = pairSums(points(10, 3, 1), 10, 3);
    pairSums(points(10, 2, 2), 10, 2);
    expect(() => first.add(0, 10, 0, 10, -0.5)).toThrow(/replaced by a later pairSums call/);
    expect(() => pairSums(points(10, 6, 3), 10, 6)).toThrow(/no WebAssembly loop for d = 6/);
  });

  it('are what tools/pair-sums-wasm.mjs generates now (the .wat text and the assembled bytes)', async () => {
    const generator = '../tools/pair-sums-wasm.mjs';
    const { pairSumsWat, assemble, moduleSource } = (await import(generator)) as {
      pairSumsWat: () => string;
      assemble: (text: string) => Promise<Buffer>;
      moduleSource: (bytes: Buffer) => string;
    };
    const text = pairSumsWat();
    const folder = join(import.meta.dirname, '..', 'src', 'math');
    expect(readFileSync(join(folder, 'pair-sums.wat'), 'utf8')).toBe(text);
    const bytes = await assemble(text);
    expect(bytes.toString('base64')).toBe(PAIR_SUMS_WASM);
    // The whole module: the bytes and the layout and dimensions they were made for.
    expect(readFileSync(join(folder, 'pair-sums-wasm.ts'), 'utf8')).toBe(moduleSource(bytes));
  });
});
