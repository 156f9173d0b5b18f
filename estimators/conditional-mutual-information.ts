/**
 * Estimators of the conditional mutual information I(X; Y | Z) in nats. The sample's first `xDim` columns are
 * X, the next `yDim` are Y and the rest (at least one) are Z.
 *
 *   const cmi = getEstimator('cmi-ksg');            // from estimators/index.ts
 *   cmi.estimate({ n, dim: 3, data, xDim: 1, yDim: 1 }, { k: 4, copula: 'none' });
 *
 * - cmi-ksg: Frenzel & Pompe (2007), the Kraskov–Stögbauer–Grassberger construction applied to
 *   I(X; Y | Z) = H(X,Z) + H(Y,Z) − H(Z) − H(X,Y,Z), max norm, neighbour order k.
 * - cmi-gaussian: the same combination of Gaussian entropies, ½ log(det Σ̂_XZ det Σ̂_YZ / (det Σ̂_Z det Σ̂)),
 *   by default exactly unbiased for Gaussian data.
 *
 * Both have `copula` (none, or rank: each coordinate replaced by its integer rank 1..n first, as for the
 * mutual-information estimators). I(X; Y | Z) is unchanged by an increasing map of any coordinate, so with
 * copula=rank so is the estimate, exactly.
 *
 * `ksgConditionalMutualInformation` works on any row-major X | Y | Z array, so an estimator of a quantity
 * built from a conditional MI of embedded vectors (transfer entropy: I(Y_{t+1}; X_t^(l) | Y_t^(k))) can call it
 * on its embedding directly.
 */
import { defineEstimator, type Estimator, type EstimatorFile, type Sample } from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { KnnIndex } from '../src/math/knn.js';
import { digamma } from '../src/math/special.js';
import { COPULA_SETTING, GAUSSIAN_CORRECTION_SETTING, rankTransform } from './mutual-information.js';
import { logDeterminantSpd, scatterMatrix, wishartLogDetShift } from './parametric.js';
import { inSpreadUnit } from './shared/scaling.js';
import { orderGrid } from './shared/order-grid.js';

type Copula = (typeof COPULA_SETTING.choices)[number];

/** Both estimators are in both default sets of conditional mutual information, at order 0: registry order. */
const IN_DEFAULT_SETS = { estimate: true, bench: true } as const;

/** The X | Y | Z split of a conditional-MI sample, after checking it and its values. */
export function checkedTriple(id: string, sample: Sample): { n: number; xDim: number; yDim: number; zDim: number } {
  const { n, dim, data, xDim, yDim } = sample;
  if (xDim === undefined || yDim === undefined) {
    throw new EstimateError(
      'invalid-input',
      `${id}: the sample does not say which columns are X and Y (xDim ${xDim === undefined ? 'is missing' : `= ${xDim}`}, yDim ${yDim === undefined ? 'is missing' : `= ${yDim}`}); conditional mutual information needs X, Y and Z columns, each at least one`,
    );
  }
  if (!Number.isInteger(xDim) || !Number.isInteger(yDim) || xDim < 1 || yDim < 1 || xDim + yDim > dim - 1) {
    throw new EstimateError(
      'dimension',
      `${id}: xDim = ${xDim}, yDim = ${yDim} is not allowed for d = ${dim}; X takes the first xDim columns, Y the next yDim and Z the rest, so xDim ≥ 1, yDim ≥ 1 and xDim + yDim ≤ ${dim - 1}`,
    );
  }
  for (let p = 0; p < n * dim; p++) {
    if (!Number.isFinite(data[p])) {
      throw new EstimateError(
        'invalid-input',
        `${id}: value ${data[p]} at row ${Math.floor(p / dim) + 1}, column ${(p % dim) + 1}; only finite numbers are allowed`,
      );
    }
  }
  return { n, xDim, yDim, zDim: dim - xDim - yDim };
}

/** The checked sample's values, rank-transformed when copula=rank (a new array; the sample is not changed). */
function prepared(id: string, sample: Sample, copula: Copula): { data: Float64Array; n: number; xDim: number; yDim: number; zDim: number } {
  const split = checkedTriple(id, sample);
  const raw = sample.data.subarray(0, split.n * sample.dim);
  return { ...split, data: copula === 'rank' ? rankTransform(raw, split.n, sample.dim) : raw };
}

/** The listed columns of a row-major n × dim array, as a new row-major array. */
function pickColumns(data: Float64Array, n: number, dim: number, keep: readonly number[]): Float64Array {
  const width = keep.length;
  const out = new Float64Array(n * width);
  for (let i = 0, p = 0; i < n; i++) {
    const row = i * dim;
    for (let j = 0; j < width; j++) out[p++] = data[row + keep[j]];
  }
  return out;
}

const span = (from: number, to: number): number[] => Array.from({ length: to - from }, (_, j) => from + j);

// ---------------------------------------------------------------------------------------------------------
// Frenzel–Pompe (KSG for conditional MI)

/**
 * I(X; Y | Z) = ψ(k) − ⟨ψ(n_xz + 1) + ψ(n_yz + 1) − ψ(n_z + 1)⟩ (Frenzel & Pompe 2007, eq. 2): ε_i is the
 * max-norm distance from point i to its k-th nearest other point in the joint (X, Y, Z) space, and
 * n_xz(i) = #{j ≠ i: ‖(x, z)_i − (x, z)_j‖ < ε_i} (strict, max norm), likewise n_yz in (Y, Z) and n_z in Z.
 * The max norm of a subspace is the max over its coordinates of |difference|, computed exactly, and the k-d
 * tree's counts are exact (src/math/knn.ts), so the counts are those of a brute-force computation.
 * Points whose k-th joint neighbour is at distance 0 (repeated rows) are a 'ties' error. `data` is row-major
 * with columns X | Y | Z.
 */
export function ksgConditionalMutualInformation(data: Float64Array, n: number, xDim: number, yDim: number, zDim: number, k: number, id = 'cmi-ksg'): number {
  const dim = xDim + yDim + zDim;
  if (n <= k) throw new EstimateError('too-few-points', `${id} needs n > k; got n = ${n} with k = ${k}`);
  // One power of two for every coordinate (exact) keeps differences of subnormal or huge data in range.
  data = inSpreadUnit(data.subarray(0, n * dim), n, dim, 'common').data;
  const joint = new KnnIndex(data, dim, { norm: 'max' });
  const { distances } = joint.nearestOthers(k);
  const radius = new Float64Array(n);
  let zeroCount = 0;
  for (let i = 0; i < n; i++) {
    radius[i] = distances[i * k + k - 1];
    if (radius[i] === 0) zeroCount++;
  }
  if (zeroCount > 0) {
    throw new EstimateError(
      'ties',
      `${id}: ${zeroCount} of ${n} points have their k-th (k = ${k}) nearest neighbour in (X, Y, Z) at distance 0 (repeated rows); ` +
        'add dequantize=auto (jitter within the recording step), use copula=rank (ties broken by row order), or a larger k if the repeats are genuine',
    );
  }
  const zColumns = span(xDim + yDim, dim);
  const countIn = (keep: number[]): Int32Array =>
    new KnnIndex(pickColumns(data, n, dim, keep), keep.length, { norm: 'max' }).countOthersWithin(radius, { inclusive: false });
  const countXZ = countIn([...span(0, xDim), ...zColumns]);
  const countYZ = countIn(span(xDim, dim));
  const countZ = countIn(zColumns);
  // ψ of the counts, each distinct count computed once (they repeat).
  const table = new Float64Array(n + 1).fill(Number.NaN);
  const psi = (m: number): number => {
    let value = table[m];
    if (value !== value) table[m] = value = digamma(m);
    return value;
  };
  let sum = 0;
  for (let i = 0; i < n; i++) sum += psi(countXZ[i] + 1) + psi(countYZ[i] + 1) - psi(countZ[i] + 1);
  return digamma(k) - sum / n;
}

// ---------------------------------------------------------------------------------------------------------
// Gaussian

/**
 * ½ log(det S_XZ det S_YZ / (det S_Z det S)) with S the scatter matrix: every column appears as often in the
 * numerator as in the denominator, so the factor n and the column scales cancel. correction = ahmed-gokhale
 * subtracts the exact Gaussian bias ½[W(d_xz) + W(d_yz) − W(d_z) − W(d)], W(m) = Σ_{i=1}^{m} ψ((n − i)/2)
 * (E log det of a Wishart_m(n − 1, Σ) scatter is log det Σ + m log 2 + W(m); Ahmed & Gokhale 1989): the
 * estimate is then a sum of unbiased entropy estimates, so unbiased for Gaussian data.
 */
function gaussianConditionalEstimate(sample: Sample, { correction, copula }: { correction: 'ahmed-gokhale' | 'none'; copula: Copula }): number {
  const id = 'cmi-gaussian';
  const { data, n, xDim, yDim, zDim } = prepared(id, sample, copula);
  const dim = xDim + yDim + zDim;
  if (n <= dim) throw new EstimateError('too-few-points', `${id}: a ${dim}-dimensional covariance needs n ≥ ${dim + 1} points, but n = ${n}`);
  const scatter = scatterMatrix({ n, dim, data }, new Float64Array(dim));
  // The joint first: when it is positive definite, so are its principal blocks, so errors name joint columns.
  const logDetJoint = logDeterminantSpd(scatter, dim, n, id);
  const logDetOf = (keep: number[]): number => {
    const width = keep.length;
    const block = new Float64Array(width * width);
    for (let r = 0; r < width; r++) for (let c = 0; c < width; c++) block[r * width + c] = scatter[keep[r] * dim + keep[c]];
    return logDeterminantSpd(block, width, n, id);
  };
  const zColumns = span(xDim + yDim, dim);
  const plugIn = 0.5 * (logDetOf([...span(0, xDim), ...zColumns]) + logDetOf(span(xDim, dim)) - logDetOf(zColumns) - logDetJoint);
  if (correction === 'none') return plugIn;
  const w = (m: number): number => wishartLogDetShift(n, m);
  return plugIn - 0.5 * (w(xDim + zDim) + w(yDim + zDim) - w(zDim) - w(dim));
}

// ---------------------------------------------------------------------------------------------------------

const CMI_KSG_DEFAULT_K = 4;

export const conditionalMutualInformationEstimators: Estimator[] = [
  defineEstimator({
    id: 'cmi-ksg',
    family: 'nearest-neighbour',
    quantity: 'conditional-mutual-information',
    summary: 'Frenzel–Pompe: k-th joint (X,Y,Z) neighbour distance, strict counts in (X,Z), (Y,Z) and Z, max norm',
    settings: [{ name: 'k', meaning: 'neighbour order in the joint (X, Y, Z) space', default: CMI_KSG_DEFAULT_K, kind: 'integer', min: 1 }, COPULA_SETTING],
    dims: [3, Infinity],
    reference:
      'Frenzel, S. & Pompe, B. (2007). Partial mutual information for coupling analysis of multivariate time series. Physical Review Letters 99, 204101; ' +
      'Vejmelka, M. & Paluš, M. (2008). Inferring the directionality of coupling with conditional mutual information. Physical Review E 77, 026214.',
    tuning: orderGrid(),
    defaultFor: IN_DEFAULT_SETS,
    estimate(sample, { k, copula }) {
      const { data, n, xDim, yDim, zDim } = prepared('cmi-ksg', sample, copula);
      return ksgConditionalMutualInformation(data, n, xDim, yDim, zDim, k);
    },
    lacks: {
      // The joint max norm compares X, Y and Z distances, so rescaling one variable changes which points are
      // the k nearest: invariant to one factor for all (checked), and with copula=rank to increasing maps.
      separateScale: (settings) =>
        settings.copula === 'rank'
          ? undefined
          : 'the joint max-norm distance compares X, Y and Z distances, so rescaling one of them alone changes the neighbours (standardise the columns, or use copula=rank)',
    },
  }),
  defineEstimator({
    id: 'cmi-gaussian',
    family: 'parametric',
    quantity: 'conditional-mutual-information',
    summary: 'conditional MI of the fitted normal law, ½ log(det Σ̂_XZ det Σ̂_YZ / (det Σ̂_Z det Σ̂)), unbiased under normality by default',
    settings: [GAUSSIAN_CORRECTION_SETTING, COPULA_SETTING],
    dims: [3, Infinity],
    reference:
      'Cover, T. M. & Thomas, J. A. (2006). Elements of Information Theory, 2nd ed., Secs. 2.5, 8.4–8.6 (chain rule, Gaussian entropy); ' +
      'bias term from Ahmed, N. A. & Gokhale, D. V. (1989), IEEE Trans. Inf. Theory 35(3), 688–692.',
    // No tuning grid: nothing to smooth; the correction picks an estimator.
    defaultFor: IN_DEFAULT_SETS,
    estimate: gaussianConditionalEstimate,
  }),
];

export const registration: EstimatorFile = { catalogOrder: 65, estimators: conditionalMutualInformationEstimators };
