import { describe, expect, it } from 'vitest';
import { rngFromSeed } from '../src/core/rng.js';
import { circularConvolveReal, fftInPlace } from '../src/math/fft.js';

// Every check here is against an independent brute-force computation: the O(N²) DFT sum with its own
// Math.cos / Math.sin table, and the O(N²) circular convolution sum.

/**
 * Sizes whose stage counts are even and odd (a transform may group stages, leaving one over), down to the
 * trivial ones, up to the 2^12 the binned kernel estimator uses.
 */
const SIZES = [1, 2, 4, 8, 16, 32, 64, 2048, 4096];

function uniformDraws(seed: string, count: number): Float64Array {
  const rng = rngFromSeed(seed);
  const out = new Float64Array(count);
  for (let i = 0; i < count; i++) out[i] = 2 * rng() - 1;
  return out;
}

/** X_k = s Σ_j x_j exp(∓2πi jk/N), by the direct sum; the angle index jk mod N keeps the table exact. */
function directDft(re: Float64Array, im: Float64Array, inverse: boolean): { re: Float64Array; im: Float64Array } {
  const size = re.length;
  const cos = new Float64Array(size);
  const sin = new Float64Array(size);
  for (let r = 0; r < size; r++) {
    cos[r] = Math.cos((2 * Math.PI * r) / size);
    sin[r] = (inverse ? 1 : -1) * Math.sin((2 * Math.PI * r) / size);
  }
  const outRe = new Float64Array(size);
  const outIm = new Float64Array(size);
  const scale = inverse ? 1 / size : 1;
  for (let k = 0; k < size; k++) {
    let sr = 0;
    let si = 0;
    for (let j = 0, r = 0; j < size; j++, r = (r + k) % size) {
      sr += re[j] * cos[r] - im[j] * sin[r];
      si += re[j] * sin[r] + im[j] * cos[r];
    }
    outRe[k] = sr * scale;
    outIm[k] = si * scale;
  }
  return { re: outRe, im: outIm };
}

function maxAbsDifference(a: Float64Array, b: Float64Array): number {
  let worst = 0;
  for (let i = 0; i < a.length; i++) worst = Math.max(worst, Math.abs(a[i] - b[i]));
  return worst;
}

// Rounding error of either sum grows like ε·√N·log2 N times the size of the terms (|x_j| ≤ √2 here): at
// N = 4096 about 1e-13 forward; 1e-11 leaves room and still catches any wrong twiddle or pairing, which
// moves entries by O(1).
const tolerance = (size: number, inverse: boolean) => (inverse ? 1e-11 / size : 1e-11) * Math.max(1, Math.sqrt(size) / 8);

describe('fftInPlace against the direct O(N²) DFT (brute force)', () => {
  for (const size of SIZES) {
    for (const inverse of [false, true]) {
      it(`N = ${size}, ${inverse ? 'inverse' : 'forward'}, complex input`, () => {
        const re = uniformDraws(`fft-re-${size}`, size);
        const im = uniformDraws(`fft-im-${size}`, size);
        const expected = directDft(re, im, inverse);
        fftInPlace(re, im, inverse);
        expect(maxAbsDifference(re, expected.re)).toBeLessThan(tolerance(size, inverse));
        expect(maxAbsDifference(im, expected.im)).toBeLessThan(tolerance(size, inverse));
      });
    }
  }

  it('inverse(forward(x)) = x at every size (round trip; x itself is the reference)', () => {
    for (const size of SIZES) {
      const x = uniformDraws(`fft-round-re-${size}`, size);
      const y = uniformDraws(`fft-round-im-${size}`, size);
      const re = Float64Array.from(x);
      const im = Float64Array.from(y);
      fftInPlace(re, im);
      fftInPlace(re, im, true);
      expect(maxAbsDifference(re, x)).toBeLessThan(1e-14 * Math.max(1, Math.log2(size)));
      expect(maxAbsDifference(im, y)).toBeLessThan(1e-14 * Math.max(1, Math.log2(size)));
    }
  });
});

describe('circularConvolveReal against the direct O(N²) circular sum (brute force)', () => {
  for (const size of SIZES) {
    it(`N = ${size}`, () => {
      const a = uniformDraws(`conv-a-${size}`, size);
      const b = uniformDraws(`conv-b-${size}`, size);
      const aCopy = Float64Array.from(a);
      const bCopy = Float64Array.from(b);
      const out = circularConvolveReal(a, b);
      const direct = new Float64Array(size);
      for (let k = 0; k < size; k++) for (let j = 0; j < size; j++) direct[k] += a[j] * b[(k - j + size) % size];
      expect(maxAbsDifference(out, direct)).toBeLessThan(1e-12 * Math.max(1, Math.sqrt(size)));
      // The inputs are documented as left unmodified.
      expect(a).toEqual(aCopy);
      expect(b).toEqual(bCopy);
    });
  }
});
