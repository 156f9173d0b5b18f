/**
 * The fast exponential of the kernel sums against Math.exp (V8's port of fdlibm's exp, correctly rounded in
 * almost all cases, so within 1 ulp of the true value) and against exact identities.
 */
import { describe, expect, it } from 'vitest';
import { expNonPositive } from '../src/math/exp.js';

const relative = (x: number) => Math.abs(expNonPositive(x) - Math.exp(x)) / Math.exp(x);

describe('expNonPositive', () => {
  it('is within 4.5e-16 relative of Math.exp where the result is normal (x in [−708, 0]: a fine grid, the table nodes and random points)', () => {
    let worst = 0;
    for (let i = 0; i <= 200_000; i++) worst = Math.max(worst, relative(-708 * (i / 200_000)));
    // The nodes k·ln2/64 and the points halfway between, where the reduced argument is largest.
    for (let k = 0; k < 65_000; k++) worst = Math.max(worst, relative((-k * Math.LN2) / 64), relative((-(k + 0.5) * Math.LN2) / 64));
    let state = 12345;
    for (let i = 0; i < 200_000; i++) {
      state = (state * 48271) % 2147483647;
      worst = Math.max(worst, relative(-40 * (state / 2147483647)), relative(-708 * (state / 2147483647)));
    }
    expect(worst).toBeLessThan(4.5e-16);
  });

  it('is exact at 0 and at multiples of ln 2 that are powers of two in double precision', () => {
    expect(expNonPositive(0)).toBe(1);
    expect(expNonPositive(-0)).toBe(1);
    // exp(−m·ln2) = 2^−m: the argument −m·LN2 is not exactly m·ln 2, so allow the 1-ulp rounding of the argument.
    for (const m of [1, 10, 100, 1000]) expect(Math.abs(expNonPositive(-m * Math.LN2) / 2 ** -m - 1)).toBeLessThan(m * 1.2e-16 + 4e-16);
  });

  it('underflows as Math.exp does: subnormal results within a few 2^−1074, 0 below −745.2, NaN for NaN', () => {
    for (let x = -708.5; x > -745.2; x -= 0.37) expect(Math.abs(expNonPositive(x) - Math.exp(x))).toBeLessThanOrEqual(4 * 2 ** -1074);
    expect(expNonPositive(-745.3)).toBe(0);
    // Every x below −745.2 is +0 (the clamp at −800 and the zero powers of two below 2^−1075), on a fine grid
    // through the clamp; Math.exp is 0 there too.
    for (let x = -745.2; x > -900; x -= 0.013) {
      expect(Object.is(expNonPositive(x), 0)).toBe(true);
      expect(Math.exp(x)).toBe(0);
    }
    expect(expNonPositive(-1e300)).toBe(0);
    expect(expNonPositive(-Infinity)).toBe(0);
    expect(expNonPositive(NaN)).toBeNaN();
  });
});
