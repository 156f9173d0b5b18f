import { describe, expect, it } from 'vitest';
import digammaStdlib from '@stdlib/math-base-special-digamma';
import gammaStdlib from '@stdlib/math-base-special-gamma';
import normalRandom from '@stdlib/random-base-normal';
import type { Sample } from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { estimateErrorOf } from './helpers/estimate-error.js';
import { rngFromSeed } from '../src/core/rng.js';
import {
  kozachenkoLeonenkoEntropy,
  nearestNeighbourEstimators,
  neighbourOrderWeights,
  weightedKozachenkoLeonenkoEntropy,
} from '../estimators/nearest-neighbour.js';

type Norm = 'euclidean' | 'max';

const klEstimator = nearestNeighbourEstimators.find((e) => e.id === 'kozachenko-leonenko')!;
const weightedEstimator = nearestNeighbourEstimators.find((e) => e.id === 'kozachenko-leonenko-weighted')!;

function gaussianSample(seed: string, n: number, dim: number): Sample {
  const draw = normalRandom.factory(0, 1, { prng: rngFromSeed(seed) });
  return { n, dim, data: Float64Array.from({ length: n * dim }, () => draw()) };
}

/** Distances from point i to every other point, sorted: the O(n²) brute force. */
function sortedOtherDistances(data: Float64Array, dim: number, i: number, norm: Norm): Float64Array {
  const n = data.length / dim;
  const out = new Float64Array(n - 1);
  let c = 0;
  for (let j = 0; j < n; j++) {
    if (j === i) continue;
    let value = 0;
    for (let axis = 0; axis < dim; axis++) {
      const diff = data[i * dim + axis] - data[j * dim + axis];
      value = norm === 'max' ? Math.max(value, Math.abs(diff)) : value + diff * diff;
    }
    out[c++] = norm === 'max' ? value : Math.sqrt(value);
  }
  return out.sort();
}

/** log volume of the unit ball, computed independently: π^{d/2}/Γ(d/2+1) (@stdlib gamma) or 2^d. */
function logBallVolume(dim: number, norm: Norm): number {
  return norm === 'max' ? Math.log(2 ** dim) : Math.log(Math.PI ** (dim / 2) / gammaStdlib(dim / 2 + 1));
}

/** Kozachenko–Leonenko by brute force: ψ(n) − ψ(k) + log V_d + (d/n) Σ log ρ_i (KSG 2004, eq. 20). */
function bruteKozachenkoLeonenko(sample: Sample, k: number, norm: Norm): number {
  const { n, dim, data } = sample;
  let sumLog = 0;
  for (let i = 0; i < n; i++) sumLog += Math.log(sortedOtherDistances(data, dim, i, norm)[k - 1]);
  return digammaStdlib(n) - digammaStdlib(k) + logBallVolume(dim, norm) + (dim * sumLog) / n;
}

function relativeError(a: number, b: number): number {
  return Math.abs(a - b) / Math.max(Math.abs(a), Math.abs(b));
}

describe('kozachenko-leonenko', () => {
  it('agrees with an O(n²) brute-force implementation to 1e-12 relative (d = 1, 2, 5; both norms; k = 1, 3, 7)', () => {
    for (const dim of [1, 2, 5]) {
      const sample = gaussianSample(`kl-brute-${dim}`, 400, dim);
      for (const norm of ['euclidean', 'max'] as const) {
        for (const k of [1, 3, 7]) {
          const ours = klEstimator.estimate(sample, { k, norm });
          expect(relativeError(ours, bruteKozachenkoLeonenko(sample, k, norm))).toBeLessThan(1e-12);
        }
      }
    }
  });

  it('the defaults are k = 3 and the Euclidean norm', () => {
    const sample = gaussianSample('kl-defaults', 300, 2);
    const defaults = Object.fromEntries(klEstimator.settings.map((s) => [s.name, s.default]));
    expect(defaults).toEqual({ k: 3, norm: 'euclidean' });
    expect(klEstimator.estimate(sample, defaults)).toBe(kozachenkoLeonenkoEntropy(sample.data, 2, 3, 'euclidean'));
  });
});

describe('one neighbour search per draw, shared by every k (a tuning grid) and both estimators', () => {
  it('a grid of k on one array gives exactly what each k gives on its own copy, and the brute force to 1e-12', () => {
    const sample = gaussianSample('shared-search', 300, 2);
    for (const norm of ['euclidean', 'max'] as const) {
      for (const k of [3, 1, 2, 12, 5, 20, 9]) {
        const shared = klEstimator.estimate(sample, { k, norm });
        expect(shared, `k = ${k}`).toBe(klEstimator.estimate({ ...sample, data: Float64Array.from(sample.data) }, { k, norm }));
        expect(relativeError(shared, bruteKozachenkoLeonenko(sample, k, norm))).toBeLessThan(1e-12);
        const weighted = weightedEstimator.estimate(sample, { k: Math.max(k, 2), norm });
        expect(weighted).toBe(weightedEstimator.estimate({ ...sample, data: Float64Array.from(sample.data) }, { k: Math.max(k, 2), norm }));
      }
    }
  });

  it('an array refilled with another draw is searched again, never answered from the previous one', () => {
    const sample = gaussianSample('shared-refill-a', 300, 2);
    const other = gaussianSample('shared-refill-b', 300, 2);
    klEstimator.estimate(sample, { k: 3, norm: 'euclidean' });
    klEstimator.estimate(sample, { k: 4, norm: 'euclidean' });
    sample.data.set(other.data);
    for (const k of [3, 4, 6])
      expect(relativeError(klEstimator.estimate(sample, { k, norm: 'euclidean' }), bruteKozachenkoLeonenko(other, k, 'euclidean'))).toBeLessThan(1e-12);
  });
});

describe('kozachenko-leonenko-weighted: weights', () => {
  // Γ(j + 2ℓ/d)/Γ(j) straight from @stdlib's gamma (the estimator uses exp of log-gamma differences).
  const gammaRatio = (j: number, shift: number) => gammaStdlib(j + shift) / gammaStdlib(j);

  const cases: [number, number][] = [];
  for (const dim of [1, 2, 3, 4, 5, 6, 7, 8, 10, 12]) for (const k of [dim, 12, 20, 50]) cases.push([k, dim]);

  it('sum to 1 and satisfy Σ_j w_j Γ(j+2ℓ/d)/Γ(j) = 0 for ℓ = 1..⌊d/4⌋ to 1e-12', () => {
    for (const [k, dim] of cases) {
      const { weights, momentConstraints } = neighbourOrderWeights(k, dim);
      expect(momentConstraints).toBe(Math.floor(dim / 4));
      let sum = 0;
      for (let j = 1; j <= k; j++) sum += weights[j - 1];
      expect(Math.abs(sum - 1)).toBeLessThan(1e-12);
      for (let l = 1; l <= Math.floor(dim / 4); l++) {
        let moment = 0;
        let scale = 0; // the sum's own rounding scale
        for (let j = 1; j <= k; j++) {
          moment += weights[j - 1] * gammaRatio(j, (2 * l) / dim);
          scale += Math.abs(weights[j - 1] * gammaRatio(j, (2 * l) / dim));
        }
        expect(Math.abs(moment)).toBeLessThan(1e-12 * Math.max(1, scale));
      }
    }
  });

  it('are zero off the orders {⌊k/d⌋, ⌊2k/d⌋, ..., k}', () => {
    for (const [k, dim] of cases) {
      const allowed = new Set(Array.from({ length: dim }, (_, l) => Math.floor(((l + 1) * k) / dim)));
      const { weights } = neighbourOrderWeights(k, dim);
      for (let j = 1; j <= k; j++) if (!allowed.has(j)) expect(weights[j - 1]).toBe(0);
    }
  });

  it('are the minimum-norm solution: they match the normal-equations solution Aᵀ(AAᵀ)⁻¹e₁', () => {
    for (const [k, dim] of cases) {
      const { orders, weights } = neighbourOrderWeights(k, dim);
      const rows = 1 + Math.floor(dim / 4);
      const a = Array.from({ length: rows }, (_, l) => orders.map((j) => (l === 0 ? 1 : gammaRatio(j, (2 * l) / dim))));
      // Gram matrix AAᵀ (at most 4×4 here), solved by Gaussian elimination with partial pivoting.
      const gram = a.map((ri) => a.map((rj) => ri.reduce((s, x, c) => s + x * rj[c], 0)));
      const rhs: number[] = a.map((_, l) => (l === 0 ? 1 : 0));
      for (let p = 0; p < rows; p++) {
        let best = p;
        for (let r = p + 1; r < rows; r++) if (Math.abs(gram[r][p]) > Math.abs(gram[best][p])) best = r;
        [gram[p], gram[best]] = [gram[best], gram[p]];
        [rhs[p], rhs[best]] = [rhs[best], rhs[p]];
        for (let r = p + 1; r < rows; r++) {
          const f = gram[r][p] / gram[p][p];
          for (let c = p; c < rows; c++) gram[r][c] -= f * gram[p][c];
          rhs[r] -= f * rhs[p];
        }
      }
      const lambda = new Array<number>(rows).fill(0);
      for (let r = rows - 1; r >= 0; r--) {
        let s = rhs[r];
        for (let c = r + 1; c < rows; c++) s -= gram[r][c] * lambda[c];
        lambda[r] = s / gram[r][r];
      }
      const largest = Math.max(...orders.map((j) => Math.abs(weights[j - 1])));
      orders.forEach((j, c) => {
        const normalEquations = a.reduce((s, row, l) => s + row[c] * lambda[l], 0);
        // The normal equations square the condition number, hence the looser 1e-7 here.
        expect(Math.abs(weights[j - 1] - normalEquations)).toBeLessThan(1e-7 * largest);
      });
    }
  });

  it('for d = 1 put all weight on k; for d = 2, 3 spread it evenly over ⌊ℓk/d⌋', () => {
    expect(Array.from(neighbourOrderWeights(5, 1).weights)).toEqual([0, 0, 0, 0, 1]);
    const two = neighbourOrderWeights(12, 2);
    expect(two.orders).toEqual([6, 12]);
    expect(two.weights[5]).toBeCloseTo(0.5, 15);
    expect(two.weights[11]).toBeCloseTo(0.5, 15);
    const three = neighbourOrderWeights(12, 3);
    expect(three.orders).toEqual([4, 8, 12]);
    for (const j of [4, 8, 12]) expect(three.weights[j - 1]).toBeCloseTo(1 / 3, 15);
  });

  it('a k too small to leave 1 + ⌊d/4⌋ distinct orders is an invalid-input error', () => {
    // d = 8, k = 1: the only order is 1, but two constraints need two orders.
    const sample = gaussianSample('weighted-small-k', 50, 8);
    expect(() => weightedEstimator.estimate(sample, { k: 1, norm: 'euclidean' })).toThrow(EstimateError);
  });
});

describe('kozachenko-leonenko-weighted: estimate', () => {
  it('equals Σ_j w_j Ĥ_j computed by brute force, Ĥ_j = mean log(ρ_(j)^d V_d (n−1) e^{−ψ(j)}) (d = 1, 2, 5; both norms)', () => {
    for (const dim of [1, 2, 5]) {
      const sample = gaussianSample(`weighted-brute-${dim}`, 300, dim);
      const k = 10;
      const { weights } = neighbourOrderWeights(k, dim);
      for (const norm of ['euclidean', 'max'] as const) {
        const sorted = Array.from({ length: sample.n }, (_, i) => sortedOtherDistances(sample.data, dim, i, norm));
        let expected = 0;
        for (let j = 1; j <= k; j++) {
          if (weights[j - 1] === 0) continue;
          let sumLog = 0;
          for (let i = 0; i < sample.n; i++) sumLog += Math.log(sorted[i][j - 1]);
          const single = (dim * sumLog) / sample.n + logBallVolume(dim, norm) + Math.log(sample.n - 1) - digammaStdlib(j);
          expected += weights[j - 1] * single;
        }
        expect(relativeError(weightedEstimator.estimate(sample, { k, norm }), expected)).toBeLessThan(1e-12);
      }
    }
  });

  it('for d = 1 equals the k-th neighbour Kozachenko–Leonenko estimate with ψ(n) replaced by log(n − 1)', () => {
    const sample = gaussianSample('weighted-d1', 500, 1);
    const kl = kozachenkoLeonenkoEntropy(sample.data, 1, 7, 'euclidean');
    const weighted = weightedKozachenkoLeonenkoEntropy(sample.data, 1, 7, 'euclidean');
    expect(relativeError(weighted, kl - digammaStdlib(500) + Math.log(499))).toBeLessThan(1e-13);
  });
});

describe('3-D standard Gaussian, n = 20000', () => {
  // Truth: (d/2) log(2πe) for the standard normal in d dimensions (Cover & Thomas, Elements of Information
  // Theory, 2nd ed., Theorem 8.4.1; theorem number from memory). Also follows from −log f(x) =
  // (d/2) log(2π) + |x|²/2 with E|x|² = d.
  const truth = 1.5 * Math.log(2 * Math.PI * Math.E);
  const sample = gaussianSample('gaussian-3d-20000', 20000, 3);
  // Tolerance. The efficiency bound gives SD ≥ sqrt(Var log f(X) / n) = sqrt((d/2)/n) = 0.0087 (for the
  // Gaussian, −log f is a constant plus χ²_d/2, of variance d/2). Measured by us on 100 independent
  // replicates of this setting (seeds 'sim-g3-0' .. 'sim-g3-99', `npx tsx bench/knn.ts --accuracy` reruns it):
  //   kozachenko-leonenko k = 3:            bias −0.0091, SD 0.0097
  //   kozachenko-leonenko-weighted k = 12:  bias −0.0145, SD 0.0081
  // Both under-estimate here (the Gaussian's curvature and tails; the weighted estimator for d = 3 averages
  // orders 4, 8, 12, and bias grows with the order). Each check is centred on truth + measured bias and
  // allows 4.5 SD (4 SD for the sample, 0.5 SD for the Monte-Carlo error of the measured bias, SD/√100),
  // so a correct estimator fails with probability below 1e-4 while a bias shift of 0.05 nats is caught.
  const klExpected = truth - 0.0091;
  const klTolerance = 4.5 * 0.0097;
  const weightedExpected = truth - 0.0145;
  const weightedTolerance = 4.5 * 0.0081;

  it('kozachenko-leonenko (k = 3) is within its tolerance of (3/2) log(2πe)', () => {
    const estimate = klEstimator.estimate(sample, { k: 3, norm: 'euclidean' });
    expect(Math.abs(estimate - klExpected)).toBeLessThan(klTolerance);
  });

  it('kozachenko-leonenko-weighted (default k) is within its tolerance of (3/2) log(2πe)', () => {
    const defaults = Object.fromEntries(weightedEstimator.settings.map((setting) => [setting.name, setting.default]));
    expect(defaults).toEqual({ k: 12, norm: 'euclidean' });
    const estimate = weightedEstimator.estimate(sample, defaults);
    expect(Math.abs(estimate - weightedExpected)).toBeLessThan(weightedTolerance);
  });
});

describe('units: rescaling the data by c shifts the estimate by exactly d·log c', () => {
  for (const estimator of [klEstimator, weightedEstimator]) {
    it(`${estimator.id}, d = 1 and 3, both norms, c in {1e-3, 0.1, 10, 1e3}`, () => {
      for (const dim of [1, 3]) {
        const sample = gaussianSample(`units-${dim}`, 2000, dim);
        for (const norm of ['euclidean', 'max'] as const) {
          const settings = { k: estimator === klEstimator ? 3 : 12, norm };
          const base = estimator.estimate(sample, settings);
          for (const c of [1e-3, 0.1, 10, 1e3]) {
            const scaled: Sample = { n: sample.n, dim, data: sample.data.map((x) => c * x) };
            const shifted = estimator.estimate(scaled, settings);
            const expected = base + dim * Math.log(c);
            // Relative to the sizes of the numbers involved, i.e. rounding only.
            const scale = Math.max(Math.abs(base), Math.abs(shifted), Math.abs(dim * Math.log(c)));
            expect(Math.abs(shifted - expected)).toBeLessThan(1e-12 * scale);
          }
        }
      }
    });
  }
});

describe('bad input', () => {
  it('repeated points give EstimateError("ties") with the count and a way forward, never -Infinity', () => {
    // 100 distinct points, then the first 10 of them repeated three more times: those 40 points each have
    // 3 copies at distance 0, so their 1st..3rd neighbour distances are 0.
    const base = gaussianSample('ties', 100, 2);
    const data = new Float64Array(130 * 2);
    data.set(base.data);
    for (let r = 0; r < 3; r++) data.set(base.data.subarray(0, 20), 200 + r * 20);
    const sample: Sample = { n: 130, dim: 2, data };
    for (const estimator of [klEstimator, weightedEstimator]) {
      const error = estimateErrorOf(() => estimator.estimate(sample, { k: 3, norm: 'euclidean' }));
      expect(error.code).toBe('ties');
      expect(error.message).toContain('40 of 130 points');
      expect(error.message).toContain('4 identical points');
      expect(error.message).toMatch(/jitter/);
      expect(error.message).toMatch(/histogram/);
    }
    // With k beyond the largest group of copies the k-th distances are positive and the estimate is finite.
    expect(Number.isFinite(klEstimator.estimate(sample, { k: 4, norm: 'euclidean' }))).toBe(true);
    expect(Number.isFinite(klEstimator.estimate(sample, { k: 4, norm: 'max' }))).toBe(true);
    // The same buffer refilled: the largest group is counted again (it is kept per draw), now 31 copies of point 0.
    for (let r = 100; r < 130; r++) data.set(base.data.subarray(0, 2), 2 * r);
    for (const estimator of [klEstimator, weightedEstimator]) {
      expect(estimateErrorOf(() => estimator.estimate(sample, { k: 3, norm: 'euclidean' })).message).toContain('31 identical points');
    }
  });

  it('n ≤ k gives EstimateError("too-few-points") naming n and k', () => {
    const sample = gaussianSample('few', 3, 2);
    const error = estimateErrorOf(() => klEstimator.estimate(sample, { k: 3, norm: 'euclidean' }));
    expect(error.code).toBe('too-few-points');
    expect(error.message).toBe('kozachenko-leonenko needs n > k; got n = 3 with k = 3');
    expect(estimateErrorOf(() => weightedEstimator.estimate(sample, { k: 3, norm: 'euclidean' })).code).toBe('too-few-points');
  });

  it('non-finite values are invalid input', () => {
    const sample = gaussianSample('nan', 20, 2);
    sample.data[7] = NaN;
    const error = estimateErrorOf(() => klEstimator.estimate(sample, { k: 3, norm: 'euclidean' }));
    expect(error.code).toBe('invalid-input');
    expect(error.message).toBe('kozachenko-leonenko: value NaN at row 4, column 2; only finite numbers are allowed');
  });

  it('each estimator names its paper', () => {
    expect(klEstimator.reference).toMatch(/Kozachenko.*Leonenko.*1987/);
    expect(weightedEstimator.reference).toMatch(/Berrett.*Samworth.*Yuan.*2019/);
  });
});
