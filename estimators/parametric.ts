/**
 * Gaussian (parametric) entropy: the entropy of the normal distribution fitted to the sample,
 *
 *   Ĥ = ½ log((2πe)^d det Σ̂).
 *
 * correction = ahmed-gokhale (default): the uniformly minimum-variance unbiased estimator for Gaussian data
 * of Ahmed & Gokhale (1989). With S = Σ_i (x_i − x̄)(x_i − x̄)ᵀ the scatter matrix, S ~ Wishart_d(n − 1, Σ)
 * and E log det S = log det Σ + d log 2 + Σ_{i=1}^{d} ψ((n − i)/2) (ψ = digamma), so
 *
 *   Ĥ_AG = (d/2) log(πe) + ½ log det S − ½ Σ_{i=1}^{d} ψ((n − i)/2)
 *
 * has expectation exactly ½ log((2πe)^d det Σ) for every n > d; being a function of the complete sufficient
 * statistic it is the UMVU estimator. correction = none: the maximum-likelihood plug-in with Σ̂ = S/n,
 * which is biased low by ½ Σ ψ((n − i)/2) + (d/2) log(2/n) (about −d(d + 1)/(4n) for large n).
 *
 * Default ahmed-gokhale: it is exactly unbiased when the model holds, costs nothing extra, and converges to
 * the plug-in as n grows, so the plug-in's only advantage would be familiarity.
 *
 * det S by Cholesky (LLᵀ = S, log det S = 2 Σ log L_ii) on mean-centred data, each column divided by its
 * largest deviation, so neither a large common offset nor an extreme unit costs digits.
 */
import { defineEstimator, type Estimator, type EstimatorFile, type Sample } from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { digamma } from '../src/math/special.js';
import { checkFiniteValues } from '../src/core/sample.js';
import { spreadUnit, toUnit } from './shared/scaling.js';

/**
 * Sum of squares and cross-products about the mean, of the data divided column-wise by a scale whose log
 * is written to `logColumnScale` (d×d row-major). Dividing by each column's largest deviation keeps the
 * squares far from overflow and underflow whatever the data's unit; log det S = log det(scaled S) +
 * 2 Σ_j logColumnScale_j. A subnormal or huge spread is first brought near 1 by a power of two, and
 * values near the top of the double range near 0 (estimators/shared/scaling.ts, exact), so the mean neither
 * overflows nor loses the digits a subnormal has.
 */
export function scatterMatrix(sample: Sample, logColumnScale: Float64Array): Float64Array {
  const { n, dim } = sample;
  // Per column: the scatter's column scales take each column's own power of two back.
  const unit = spreadUnit(sample.data, n, dim, 'column');
  const data = unit ? toUnit(sample.data, n, dim, unit) : sample.data;
  const columnScale = new Float64Array(dim);
  const mean = new Float64Array(dim);
  for (let i = 0, p = 0; i < n; i++) for (let j = 0; j < dim; j++, p++) mean[j] += data[p];
  for (let j = 0; j < dim; j++) mean[j] /= n;
  columnScale.fill(0);
  for (let i = 0, p = 0; i < n; i++) {
    for (let j = 0; j < dim; j++, p++) columnScale[j] = Math.max(columnScale[j], Math.abs(data[p] - mean[j]));
  }
  const scatter = new Float64Array(dim * dim);
  const centred = new Float64Array(dim);
  for (let i = 0, p = 0; i < n; i++) {
    for (let j = 0; j < dim; j++, p++) centred[j] = (data[p] - mean[j]) / columnScale[j];
    for (let j = 0; j < dim; j++) {
      const cj = centred[j];
      const row = j * dim;
      for (let k = 0; k <= j; k++) scatter[row + k] += cj * centred[k];
    }
  }
  for (let j = 0; j < dim; j++) for (let k = 0; k < j; k++) scatter[k * dim + j] = scatter[j * dim + k];
  for (let j = 0; j < dim; j++) logColumnScale[j] = Math.log(columnScale[j]) + (unit ? unit.exponents[j] * Math.LN2 : 0);
  return scatter;
}

/**
 * log det of a symmetric positive-definite matrix by Cholesky. Throws an EstimateError naming the
 * coordinate at which the matrix stops being positive definite, judged against the rounding error of a
 * scatter matrix summed over n points.
 */
export function logDeterminantSpd(matrix: Float64Array, dim: number, n: number, id = 'gaussian'): number {
  const lower = Float64Array.from(matrix);
  // A pivot smaller than this fraction of its diagonal entry is indistinguishable from rounding noise.
  const singularRatio = 4 * n * dim * Number.EPSILON;
  let logDeterminant = 0;
  for (let j = 0; j < dim; j++) {
    const diagonal = matrix[j * dim + j];
    if (!(diagonal > 0)) {
      throw new EstimateError('ties', `${id}: coordinate ${j + 1} has zero variance, so the covariance is singular; drop that coordinate or add noise`);
    }
    let pivot = lower[j * dim + j];
    for (let k = 0; k < j; k++) pivot -= lower[j * dim + k] ** 2;
    if (!(pivot > singularRatio * diagonal)) {
      throw new EstimateError(
        'numeric',
        `${id}: the covariance is singular: coordinate ${j + 1} is (to rounding) a linear combination of coordinates 1..${j} ` +
          `(residual variance fraction ${(Math.max(pivot, 0) / diagonal).toExponential(2)}); drop a redundant coordinate`,
      );
    }
    const ljj = Math.sqrt(pivot);
    lower[j * dim + j] = ljj;
    logDeterminant += 2 * Math.log(ljj);
    for (let i = j + 1; i < dim; i++) {
      let value = lower[i * dim + j];
      for (let k = 0; k < j; k++) value -= lower[i * dim + k] * lower[j * dim + k];
      lower[i * dim + j] = value / ljj;
    }
  }
  return logDeterminant;
}

/** Σ_{i=1}^{d} ψ((n − i)/2): E log det S − log det Σ − d log 2 for a Wishart_d(n − 1, Σ) scatter matrix. */
export function wishartLogDetShift(n: number, dim: number): number {
  let total = 0;
  for (let i = 1; i <= dim; i++) total += digamma((n - i) / 2);
  return total;
}

function gaussianEntropy(sample: Sample, correction: 'ahmed-gokhale' | 'none'): number {
  const id = 'gaussian';
  const { n, dim, data } = sample;
  if (n <= dim) {
    throw new EstimateError('too-few-points', `${id}: a ${dim}-dimensional covariance needs n ≥ ${dim + 1} points, but n = ${n}`);
  }
  checkFiniteValues(id, sample);
  for (let j = 0; j < dim; j++) {
    let equal = true;
    for (let p = j + dim; p < n * dim && equal; p += dim) equal = data[p] === data[j];
    if (equal) {
      throw new EstimateError(
        'ties',
        `${id}: all ${n} values of coordinate ${j + 1} are equal (${data[j]}), so the covariance is singular; drop that coordinate or add noise`,
      );
    }
  }
  const logColumnScale = new Float64Array(dim);
  const scatter = scatterMatrix(sample, logColumnScale);
  let logDetScatter = logDeterminantSpd(scatter, dim, n, id);
  for (let j = 0; j < dim; j++) logDetScatter += 2 * logColumnScale[j];
  if (!Number.isFinite(logDetScatter)) throw new EstimateError('numeric', `${id}: the covariance overflows the double range; rescale the data`);
  if (correction === 'none') {
    return (dim / 2) * Math.log(2 * Math.PI * Math.E) + 0.5 * (logDetScatter - dim * Math.log(n));
  }
  return (dim / 2) * Math.log(Math.PI * Math.E) + 0.5 * logDetScatter - 0.5 * wishartLogDetShift(n, dim);
}

export const parametricEstimators: Estimator[] = [
  defineEstimator({
    id: 'gaussian',
    family: 'parametric',
    quantity: 'entropy',
    summary: 'entropy of the fitted normal distribution, ½ log((2πe)^d det Σ̂), unbiased under normality by default',
    settings: [
      {
        name: 'correction',
        meaning: 'ahmed-gokhale: UMVU for Gaussian data; none: maximum-likelihood covariance (divide by n)',
        default: 'ahmed-gokhale',
        kind: 'choice',
        choices: ['ahmed-gokhale', 'none'],
      },
    ],
    dims: [1, Infinity],
    reference:
      'Ahmed, N. A. & Gokhale, D. V. (1989). Entropy expressions and their estimators for multivariate distributions. IEEE Trans. Inf. Theory 35(3), 688–692.',
    // No tuning grid: the correction picks an estimator (unbiased or maximum likelihood), not a smoothing level.
    defaultFor: { estimate: [{ order: 60 }], bench: true },
    estimate: (sample, { correction }) => gaussianEntropy(sample, correction),
  }),
];

export const registration: EstimatorFile = { catalogOrder: 50, estimators: parametricEstimators };
