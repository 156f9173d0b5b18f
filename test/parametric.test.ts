import { describe, expect, it } from 'vitest';
import { Matrix, covariance, determinant } from 'ml-matrix';
import digamma from '@stdlib/math-base-special-digamma';
import trigamma from '@stdlib/math-base-special-trigamma';
import normalRandom from '@stdlib/random-base-normal';
import type { Rng, Sample } from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { rngFromSeed } from '../src/core/rng.js';
import { parametricEstimators } from '../estimators/parametric.js';
import { withValidation } from './helpers/settings.js';

const gaussian = withValidation(parametricEstimators.find((e) => e.id === 'gaussian')!);
const LOG_2_PI_E = Math.log(2 * Math.PI * Math.E);

/** A non-diagonal covariance through its Cholesky factor L (row-major, lower): Σ = L Lᵀ. */
const L3 = [
  [1.5, 0, 0],
  [0.8, 0.6, 0],
  [-0.4, 1.1, 0.3],
];
// det Σ = (Π L_ii)²; truth ½ log((2πe)^3 det Σ) (Cover & Thomas, Elements of Information Theory, Thm 8.4.1).
const TRUTH_3D = 1.5 * LOG_2_PI_E + Math.log(1.5 * 0.6 * 0.3);

function correlatedNormals(rng: Rng, n: number, lower: number[][]): Sample {
  const dim = lower.length;
  const draw = normalRandom.factory(0, 1, { prng: rng });
  const data = new Float64Array(n * dim);
  const z = new Float64Array(dim);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < dim; j++) z[j] = draw();
    for (let j = 0; j < dim; j++) {
      let x = 0;
      for (let k = 0; k <= j; k++) x += lower[j][k] * z[k];
      data[i * dim + j] = x;
    }
  }
  return { n, dim, data };
}

/** Σ_{i=1}^{d} ψ((n−i)/2) and Σ ψ'((n−i)/2): mean and variance of log det of a Wishart_d(n−1, I) matrix minus d log 2. */
function wishartLogDetMoments(n: number, dim: number): { mean: number; variance: number } {
  let mean = 0;
  let variance = 0;
  for (let i = 1; i <= dim; i++) {
    mean += digamma((n - i) / 2);
    variance += trigamma((n - i) / 2);
  }
  return { mean, variance };
}

describe('gaussian entropy', () => {
  it('equals ½ log((2πe)^d det Σ̂) with Σ̂ from ml-matrix (maximum likelihood, divide by n)', () => {
    for (const [n, seed] of [
      [7, 'g-a'],
      [50, 'g-b'],
      [400, 'g-c'],
    ] as const) {
      const sample = correlatedNormals(rngFromSeed(seed), n, L3);
      const rows = Array.from({ length: n }, (_, i) => Array.from(sample.data.subarray(i * 3, i * 3 + 3)));
      // ml-matrix's covariance divides by n − 1; its determinant of a 3×3 is the cofactor expansion.
      const mlCovariance = covariance(new Matrix(rows)).mul((n - 1) / n);
      const expected = 0.5 * (3 * LOG_2_PI_E + Math.log(determinant(mlCovariance)));
      expect(gaussian.estimate(sample, { correction: 'none' })).toBeCloseTo(expected, 12);
    }
  });

  it('Ahmed–Gokhale is unbiased at n = 10, d = 3 while the plug-in is visibly biased (Monte Carlo)', () => {
    // 4000 replicates. The SD of one estimate is ½ sqrt(Σ ψ'((n−i)/2)) ≈ 0.46 (variance of log det of a Wishart
    // matrix, from memory), so the Monte-Carlo SE of the mean is ≈ 0.0074; we require the bias within 4 SE.
    const n = 10;
    const replicates = 4000;
    const rng = rngFromSeed('ahmed-gokhale-monte-carlo');
    let sumCorrected = 0;
    let sumSquaresCorrected = 0;
    let sumPlain = 0;
    for (let r = 0; r < replicates; r++) {
      const sample = correlatedNormals(rng, n, L3);
      const corrected = gaussian.estimate(sample, { correction: 'ahmed-gokhale' });
      sumCorrected += corrected;
      sumSquaresCorrected += corrected * corrected;
      sumPlain += gaussian.estimate(sample, { correction: 'none' });
    }
    const meanCorrected = sumCorrected / replicates;
    const sdCorrected = Math.sqrt((sumSquaresCorrected - replicates * meanCorrected ** 2) / (replicates - 1));
    const standardError = sdCorrected / Math.sqrt(replicates);
    const { mean: shift, variance } = wishartLogDetMoments(n, 3);
    // The SD matches the Wishart log-determinant variance (a check on the sampler and on the formula).
    expect(sdCorrected / (0.5 * Math.sqrt(variance))).toBeGreaterThan(0.93);
    expect(sdCorrected / (0.5 * Math.sqrt(variance))).toBeLessThan(1.07);
    expect(Math.abs(meanCorrected - TRUTH_3D)).toBeLessThan(4 * standardError);
    // The plug-in's exact bias: ½ Σ ψ((n−i)/2) + (d/2) log(2/n) ≈ −0.54 here, about 70 SE.
    const plainBias = 0.5 * shift + 1.5 * Math.log(2 / n);
    const meanPlain = sumPlain / replicates;
    expect(meanPlain - TRUTH_3D).toBeLessThan(-20 * standardError);
    expect(Math.abs(meanPlain - TRUTH_3D - plainBias)).toBeLessThan(4 * standardError);
  });

  it('converges at n = 20000 on a standard normal and a correlated 3-D normal', () => {
    // Tolerance: 4 SD, with the exact SD ½ sqrt(Σ ψ'((n−i)/2)) (≈ sqrt(d/(2n)): 0.0050 for d = 1, 0.0087 for
    // d = 3); Ahmed–Gokhale is exactly unbiased, the plug-in's exact bias is subtracted.
    const n = 20000;
    const cases = [
      { sample: correlatedNormals(rngFromSeed('gaussian-convergence-1d'), n, [[1]]), truth: 0.5 * LOG_2_PI_E },
      { sample: correlatedNormals(rngFromSeed('gaussian-convergence-3d'), n, L3), truth: TRUTH_3D },
    ];
    for (const { sample, truth } of cases) {
      const { mean: shift, variance } = wishartLogDetMoments(n, sample.dim);
      const sd = 0.5 * Math.sqrt(variance);
      expect(Math.abs(gaussian.estimate(sample, {}) - truth)).toBeLessThan(4 * sd);
      const plainBias = 0.5 * shift + (sample.dim / 2) * Math.log(2 / n);
      expect(Math.abs(gaussian.estimate(sample, { correction: 'none' }) - truth - plainBias)).toBeLessThan(4 * sd);
    }
  });

  it('shifts by d·log c under rescaling and ignores a common offset', () => {
    const sample = correlatedNormals(rngFromSeed('gaussian-units'), 300, L3);
    const base = gaussian.estimate(sample, {});
    for (const c of [1e-150, 0.01, 7, 1e150]) {
      const scaled = { ...sample, data: sample.data.map((x) => x * c) };
      // Exact identity: det(c²Σ̂) = c^{2d} det Σ̂.
      expect(Math.abs(gaussian.estimate(scaled, {}) - base - 3 * Math.log(c)), `c=${c}`).toBeLessThan(1e-12);
    }
    const shifted = { ...sample, data: sample.data.map((x) => x + 1e6) };
    // The offset costs about log2(1e6) ≈ 20 bits of each value, not of the covariance.
    expect(Math.abs(gaussian.estimate(shifted, {}) - base)).toBeLessThan(1e-8);
  });

  it('reports singular covariances, too few points and bad values as EstimateErrors', () => {
    const rng = rngFromSeed('gaussian-singular');
    const collinear = correlatedNormals(rng, 100, L3);
    for (let i = 0; i < 100; i++) collinear.data[i * 3 + 2] = 2 * collinear.data[i * 3] - 0.5 * collinear.data[i * 3 + 1];
    const codeOf = (sample: Sample): string => {
      try {
        gaussian.estimate(sample, {});
      } catch (error) {
        expect(error).toBeInstanceOf(EstimateError);
        expect((error as Error).message).toMatch(/^gaussian: /);
        return (error as EstimateError).code;
      }
      return 'no error';
    };
    expect(codeOf(collinear)).toBe('numeric');
    expect(() => gaussian.estimate(collinear, {})).toThrow(/singular.*coordinate 3/);
    const constantColumn = correlatedNormals(rng, 50, L3);
    for (let i = 0; i < 50; i++) constantColumn.data[i * 3 + 1] = 0.1;
    expect(codeOf(constantColumn)).toBe('ties');
    expect(codeOf(correlatedNormals(rng, 3, L3))).toBe('too-few-points');
    const withNaN = correlatedNormals(rng, 20, L3);
    withNaN.data[7] = NaN;
    expect(codeOf(withNaN)).toBe('invalid-input');
    // n = d + 1 is the smallest sample with a nonsingular covariance; Ahmed–Gokhale is defined there.
    expect(Number.isFinite(gaussian.estimate(correlatedNormals(rng, 4, L3), {}))).toBe(true);
  });
});
