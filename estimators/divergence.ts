/**
 * Estimators of the Kullback–Leibler divergence D(P ‖ Q) = E_P log(p/q) in nats. The sample is from P and
 * `sample.q` from Q (same dimension, any size).
 *
 *   const d = getEstimator('knn-divergence').estimate({ ...pSample, q: qSample }, { k: 1 });
 *
 * - knn-divergence: Wang, Kulkarni & Verdú (2009), eq. (5), from k-th nearest-neighbour distances.
 * - histogram-divergence: plug-in Σ p̂ log(p̂/q̂) on one grid laid over both samples.
 * - gaussian-divergence: the closed form for the two fitted normal laws.
 */
import { defineEstimator, type Estimator, type EstimatorFile, type Sample } from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { KnnIndex } from '../src/math/knn.js';
import { solveLower } from '../src/math/linalg.js';
import { type AxisBins, BIN_RULES, type BinRule, axisIndices, binGrid, histogramGrid } from './histogram.js';
import { columnExtremes, type SpreadUnit, spreadUnitOfExtremes, toUnit } from './shared/scaling.js';
import { rankKeys, sortAscending } from '../src/math/sort.js';
import { orderGrid } from './shared/order-grid.js';

/** The P and Q samples after checking both; returns their sizes. */
export function checkedPair(id: string, sample: Sample): { n: number; m: number; dim: number; p: Float64Array; q: Float64Array } {
  const { n, dim } = sample;
  const other = sample.q;
  if (!other) {
    throw new EstimateError(
      'invalid-input',
      `${id}: the sample has no Q sample (sample.q is missing); a divergence D(P ‖ Q) needs a sample from P and one from Q`,
    );
  }
  if (other.dim !== dim) {
    throw new EstimateError('dimension', `${id}: the P sample has d = ${dim} but the Q sample has d = ${other.dim}; both must have the same dimension`);
  }
  const p = sample.data.subarray(0, n * dim);
  const q = other.data.subarray(0, other.n * dim);
  for (const [name, values] of [
    ['P', p],
    ['Q', q],
  ] as const) {
    for (let i = 0; i < values.length; i++) {
      if (!Number.isFinite(values[i])) {
        throw new EstimateError(
          'invalid-input',
          `${id}: value ${values[i]} in the ${name} sample at row ${Math.floor(i / dim) + 1}, column ${(i % dim) + 1}; only finite numbers are allowed`,
        );
      }
    }
  }
  return { n, m: other.n, dim, p, q };
}

/** A coordinate with a single value carries no information and has no bin width: say so before gridding. */
export function checkNotConstant(id: string, data: Float64Array, n: number, dim: number, what = 'the sample'): void {
  for (let j = 0; j < dim; j++) {
    let constant = true;
    for (let p = j + dim; p < n * dim && constant; p += dim) constant = data[p] === data[j];
    if (constant && n > 0) {
      throw new EstimateError(
        'ties',
        `${id}: all ${n} values of coordinate ${j + 1} of ${what} are equal (${data[j]}), so bins spanning it have zero width; drop that coordinate (it carries no information)`,
      );
    }
  }
}

/** The unit (estimators/shared/scaling.ts) for P and Q together, from their pooled extremes, or null when none is needed. */
export function pooledUnit(p: Float64Array, n: number, q: Float64Array, m: number, dim: number, mode: 'column' | 'common'): SpreadUnit | null {
  const fromP = columnExtremes(p, n, dim);
  const fromQ = columnExtremes(q, m, dim);
  for (let j = 0; j < dim; j++) {
    fromP.minimum[j] = Math.min(fromP.minimum[j], fromQ.minimum[j]);
    fromP.maximum[j] = Math.max(fromP.maximum[j], fromQ.maximum[j]);
  }
  return spreadUnitOfExtremes(fromP.minimum, fromP.maximum, mode);
}

// ---------------------------------------------------------------------------------------------------------
// Wang–Kulkarni–Verdú

/**
 * D̂ = (d/n) Σ_i log(ν_k(i)/ρ_k(i)) + log(m/(n − 1)), eq. (5) of Wang, Kulkarni & Verdú (2009): ρ_k(i) is
 * the Euclidean distance from P point i to its k-th nearest other P point, ν_k(i) to its k-th nearest Q
 * point. A zero distance (repeated values) is a 'ties' error.
 */
export function knnDivergence(p: Float64Array, n: number, q: Float64Array, m: number, dim: number, k: number, id = 'knn-divergence'): number {
  if (n <= k) throw new EstimateError('too-few-points', `${id} needs more than k = ${k} points from P; got ${n}`);
  if (m < k) throw new EstimateError('too-few-points', `${id} needs at least k = ${k} points from Q; got ${m}`);
  // One power of two for every coordinate of both samples (a unit for distances; estimators/shared/scaling.ts)
  // when the spread is subnormal or huge: squared distances then neither underflow nor overflow, and the
  // ratios ν/ρ are those of the data.
  const pooled = pooledUnit(p, n, q, m, dim, 'common');
  const pUnit = pooled ? toUnit(p, n, dim, pooled) : p;
  const qUnit = pooled ? toUnit(q, m, dim, pooled) : q;
  const within = new KnnIndex(pUnit, dim).nearestOthers(k).distances;
  const across = new KnnIndex(qUnit, dim).nearest(pUnit, k).distances;
  let sumLogRatio = 0;
  let zeroWithin = 0;
  let zeroAcross = 0;
  for (let i = 0; i < n; i++) {
    const rho = within[i * k + k - 1];
    const nu = across[i * k + k - 1];
    if (rho === 0) zeroWithin++;
    if (nu === 0) zeroAcross++;
    sumLogRatio += Math.log(nu / rho);
  }
  if (zeroWithin > 0) {
    throw new EstimateError(
      'ties',
      `${id}: ${zeroWithin} of ${n} P points have their k-th (k = ${k}) nearest other P point at distance 0 (repeated values), so log-distances would be -Infinity; ` +
        'add dequantize=auto (jitter within the recording step) or use a larger k',
    );
  }
  if (zeroAcross > 0) {
    throw new EstimateError(
      'ties',
      `${id}: ${zeroAcross} of ${n} P points have their k-th (k = ${k}) nearest Q point at distance 0 (values repeated in both samples), so log-distances would be -Infinity; ` +
        'add dequantize=auto (jitter within the recording step) or use a larger k',
    );
  }
  return (dim * sumLogRatio) / n + Math.log(m / (n - 1));
}

// ---------------------------------------------------------------------------------------------------------
// Histogram

const MAX_EXACT_INTEGER = 2 ** 53;

/** One integer cell key per point (P rows first, then Q rows) on the grid; keys stay below 2^53. */
function cellKeys(p: Float64Array, n: number, q: Float64Array, m: number, dim: number, grid: readonly AxisBins[]): Float64Array {
  const keys = new Float64Array(n + m);
  const axisP = new Float64Array(n);
  const axisQ = new Float64Array(m);
  const axis = new Float64Array(n + m);
  let keySpace = 1;
  for (let k = 0; k < dim; k++) {
    axisIndices(p, n, dim, k, grid[k], axisP);
    axisIndices(q, m, dim, k, grid[k], axisQ);
    axis.set(axisP, 0);
    axis.set(axisQ, n);
    let axisSpace = grid[k].binCount;
    if (keySpace * axisSpace >= MAX_EXACT_INTEGER) {
      keySpace = rankKeys(keys);
      if (keySpace * axisSpace >= MAX_EXACT_INTEGER) axisSpace = rankKeys(axis);
    }
    for (let i = 0; i < n + m; i++) keys[i] = keys[i] * axisSpace + axis[i];
    keySpace *= axisSpace;
  }
  return keys;
}

/**
 * D̂ = Σ_cells (c_P/n) log((c_P/n)/(c_Q/m)) = (1/n) Σ c_P (log c_P − log c_Q) + log(m/n), on the grid the
 * histogram entropy estimator lays over the pooled P and Q points (its rule applied to the pooled sample,
 * or a count per coordinate). A cell holding P points but no Q point makes the plug-in +∞: an error.
 */
function histogramDivergence(sample: Sample, settings: { bins: BinRule | number; scale: number }): number {
  const id = 'histogram-divergence';
  const { n, m, dim, p, q } = checkedPair(id, sample);
  // One P point is a point mass on one cell: Σ p̂ log(p̂/q̂) is then −log q̂ of that cell, which says nothing of
  // P's spread (the −h(P) part of the divergence), so at least two P points are needed, as for mi-histogram.
  if (n < 2 || m < 1) throw new EstimateError('too-few-points', `${id}: needs at least 2 points from P and 1 from Q; got ${n} from P and ${m} from Q`);
  const pooled = new Float64Array((n + m) * dim);
  pooled.set(p, 0);
  pooled.set(q, n * dim);
  checkNotConstant(id, pooled, n + m, dim, 'the pooled P and Q points');
  let grid: AxisBins[];
  try {
    grid = histogramGrid({ n: n + m, dim, data: pooled }, { bins: settings.bins, scale: settings.scale, width: 'none' });
  } catch (error) {
    if (error instanceof EstimateError)
      throw new EstimateError(
        error.code,
        error.message
          .replace(/^histogram/, `${id} (pooled P and Q)`)
          .replace(', a bin count, or width=W', ' or a bin count')
          .replace(', or width=W', ''),
      );
    throw error;
  }
  const keys = cellKeys(p, n, q, m, dim, grid);
  const keysP = sortAscending(keys.slice(0, n));
  const keysQ = sortAscending(keys.slice(n));
  let sum = 0;
  let emptyCells = 0;
  let strandedPoints = 0;
  let j = 0;
  for (let i = 0; i < n;) {
    const key = keysP[i];
    let countP = 0;
    while (i < n && keysP[i] === key) {
      countP++;
      i++;
    }
    while (j < m && keysQ[j] < key) j++;
    let countQ = 0;
    while (j < m && keysQ[j] === key) {
      countQ++;
      j++;
    }
    if (countQ === 0) {
      emptyCells++;
      strandedPoints += countP;
      continue;
    }
    sum += countP * (Math.log(countP) - Math.log(countQ));
  }
  if (emptyCells > 0) {
    throw new EstimateError(
      'too-few-points',
      `${id}: ${emptyCells} bin${emptyCells === 1 ? '' : 's'} holding ${strandedPoints} of the ${n} P points ha${emptyCells === 1 ? 's' : 've'} no Q point, so the plug-in divergence is +Infinity; ` +
        'use fewer bins (bins=sturges or a small count), a larger Q sample, or knn-divergence',
    );
  }
  return sum / n + Math.log(m / n);
}

// ---------------------------------------------------------------------------------------------------------
// Gaussian

/** Mean and covariance (divisor count − 1) of rows already divided by `scale`; covariance row-major. */
function fitted(values: Float64Array, count: number, dim: number, centre: Float64Array, scale: Float64Array): { mean: Float64Array; covariance: Float64Array } {
  const mean = new Float64Array(dim);
  const row = new Float64Array(dim);
  for (let i = 0; i < count; i++) for (let a = 0; a < dim; a++) mean[a] += (values[i * dim + a] - centre[a]) / scale[a];
  for (let a = 0; a < dim; a++) mean[a] /= count;
  const covariance = new Float64Array(dim * dim);
  for (let i = 0; i < count; i++) {
    for (let a = 0; a < dim; a++) row[a] = (values[i * dim + a] - centre[a]) / scale[a] - mean[a];
    for (let a = 0; a < dim; a++) for (let b = 0; b <= a; b++) covariance[a * dim + b] += row[a] * row[b];
  }
  for (let a = 0; a < dim; a++) {
    for (let b = 0; b <= a; b++) {
      covariance[a * dim + b] /= count - 1;
      covariance[b * dim + a] = covariance[a * dim + b];
    }
  }
  return { mean, covariance };
}

/** Lower Cholesky factor (row-major) of a covariance; an EstimateError naming the sample when singular. */
function choleskyOf(id: string, which: string, covariance: Float64Array, dim: number, count: number): Float64Array {
  const lower = new Float64Array(dim * dim);
  const singularRatio = 4 * count * dim * Number.EPSILON;
  for (let j = 0; j < dim; j++) {
    const diagonal = covariance[j * dim + j];
    if (!(diagonal > 0)) {
      throw new EstimateError(
        'ties',
        `${id}: coordinate ${j + 1} of the ${which} sample has zero variance, so its fitted covariance is singular; drop that coordinate or add noise`,
      );
    }
    let pivot = diagonal;
    for (let t = 0; t < j; t++) pivot -= lower[j * dim + t] ** 2;
    if (!(pivot > singularRatio * diagonal)) {
      throw new EstimateError(
        'numeric',
        `${id}: the fitted covariance of the ${which} sample is singular (coordinate ${j + 1} is, to rounding, a linear combination of coordinates 1..${j}); drop a redundant coordinate`,
      );
    }
    const ljj = Math.sqrt(pivot);
    lower[j * dim + j] = ljj;
    for (let i = j + 1; i < dim; i++) {
      let value = covariance[i * dim + j];
      for (let t = 0; t < j; t++) value -= lower[i * dim + t] * lower[j * dim + t];
      lower[i * dim + j] = value / ljj;
    }
  }
  return lower;
}

/**
 * ½[tr(Σ̂q⁻¹Σ̂p) + (μ̂q − μ̂p)ᵀ Σ̂q⁻¹ (μ̂q − μ̂p) − d + log(det Σ̂q / det Σ̂p)] with sample means and covariances
 * (divisor count − 1). Both samples are first centred and divided by the pooled per-coordinate SD: the
 * divergence is invariant to one affine map of both, and the scaled matrices are better conditioned.
 */
function gaussianDivergenceEstimate(sample: Sample): number {
  const id = 'gaussian-divergence';
  const checked = checkedPair(id, sample);
  const { n, m, dim } = checked;
  if (n <= dim || m <= dim) {
    throw new EstimateError(
      'too-few-points',
      `${id}: a ${dim}-dimensional covariance needs at least ${dim + 1} points in each sample; got ${n} from P and ${m} from Q`,
    );
  }
  // A subnormal or huge spread is first brought near 1 per coordinate, for both samples alike (exact,
  // estimators/shared/scaling.ts; the divergence does not move), so the squares below neither underflow nor overflow.
  const unit = pooledUnit(checked.p, n, checked.q, m, dim, 'column');
  const p = unit ? toUnit(checked.p, n, dim, unit) : checked.p;
  const q = unit ? toUnit(checked.q, m, dim, unit) : checked.q;
  const centre = new Float64Array(dim);
  for (let i = 0; i < n * dim; i++) centre[i % dim] += p[i];
  for (let i = 0; i < m * dim; i++) centre[i % dim] += q[i];
  for (let a = 0; a < dim; a++) centre[a] /= n + m;
  const scale = new Float64Array(dim);
  for (let i = 0; i < n * dim; i++) scale[i % dim] += (p[i] - centre[i % dim]) ** 2;
  for (let i = 0; i < m * dim; i++) scale[i % dim] += (q[i] - centre[i % dim]) ** 2;
  for (let a = 0; a < dim; a++) {
    scale[a] = Math.sqrt(scale[a] / (n + m));
    if (!(scale[a] > 0)) throw new EstimateError('ties', `${id}: coordinate ${a + 1} is constant across both samples; drop it (it carries no divergence)`);
  }
  const fitP = fitted(p, n, dim, centre, scale);
  const fitQ = fitted(q, m, dim, centre, scale);
  const lowerP = choleskyOf(id, 'P', fitP.covariance, dim, n);
  const lowerQ = choleskyOf(id, 'Q', fitQ.covariance, dim, m);
  // tr(Σq⁻¹Σp) = ‖Lq⁻¹ Lp‖²_F, column by column.
  let trace = 0;
  const column = new Float64Array(dim);
  for (let c = 0; c < dim; c++) {
    for (let r = 0; r < dim; r++) column[r] = lowerP[r * dim + c];
    solveLower(lowerQ, dim, column);
    for (let r = 0; r < dim; r++) trace += column[r] * column[r];
  }
  const shift = new Float64Array(dim);
  for (let a = 0; a < dim; a++) shift[a] = fitQ.mean[a] - fitP.mean[a];
  solveLower(lowerQ, dim, shift);
  let quadratic = 0;
  for (let a = 0; a < dim; a++) quadratic += shift[a] * shift[a];
  let logDetRatio = 0;
  for (let a = 0; a < dim; a++) logDetRatio += 2 * (Math.log(lowerQ[a * dim + a]) - Math.log(lowerP[a * dim + a]));
  return 0.5 * (trace + quadratic - dim + logDetRatio);
}

const KNN_DEFAULT_K = 1;

export const divergenceEstimators: Estimator[] = [
  defineEstimator({
    id: 'knn-divergence',
    family: 'nearest-neighbour',
    quantity: 'divergence',
    summary: 'Wang–Kulkarni–Verdú k-th nearest-neighbour distances within P and from P to Q, Euclidean',
    settings: [{ name: 'k', meaning: 'neighbour order, the same within P and from P to Q', default: KNN_DEFAULT_K, kind: 'integer', min: 1 }],
    dims: [1, Infinity],
    reference:
      'Wang, Q., Kulkarni, S. R. & Verdú, S. (2009). Divergence estimation for multidimensional densities via k-nearest-neighbor distances. IEEE Transactions on Information Theory 55(5), 2392–2405, eq. (5).',
    lacks: {
      // Ratios of Euclidean distances survive a common scale, shift or rotation, not a shear or unequal stretch.
      affine:
        'ratios of Euclidean distances are kept by a rescaling, shift or rotation, but not by a linear map that shears or stretches coordinates unequally',
    },
    tuning: orderGrid(),
    defaultFor: { estimate: true, bench: true },
    estimate(sample, { k }) {
      const id = 'knn-divergence';
      const { n, m, dim, p, q } = checkedPair(id, sample);
      return knnDivergence(p, n, q, m, dim, k, id);
    },
  }),
  defineEstimator({
    id: 'histogram-divergence',
    family: 'histogram',
    quantity: 'divergence',
    summary: 'plug-in Σ p̂ log(p̂/q̂) on one grid of equal-width bins over both samples; empty Q bins under P mass are an error',
    settings: [
      {
        name: 'bins',
        meaning: 'bin rule (applied to the pooled P and Q points), or a number of bins per coordinate',
        default: 'freedman-diaconis',
        kind: 'choice-or-integer',
        choices: BIN_RULES,
        min: 1,
      },
      {
        name: 'scale',
        meaning: 'multiplies the bin count a rule gives (rounded, at least 1); ignored with a numeric bins',
        default: 1,
        kind: 'number',
        min: 0,
        minExclusive: true,
      },
    ],
    dims: [1, Infinity],
    reference:
      'Plug-in partition estimate of the divergence, as the equal-width baseline in Wang, Q., Kulkarni, S. R. & Verdú, S. (2005), Divergence estimation of continuous distributions based on data-dependent partitions, IEEE Trans. Inf. Theory 51(9), 3064–3074.',
    tuning: binGrid,
    // In the default plan also with Sturges bins, after the others: with Freedman–Diaconis bins most replicates
    // leave P mass in bins Q never reaches.
    defaultFor: { estimate: true, bench: [{}, { order: 1, settings: { bins: 'sturges' } }] },
    estimate: histogramDivergence,
    lacks: {
      // The cells are products of intervals along the axes: per-coordinate scales and shifts keep them, a
      // shear or rotation does not.
      affine: 'the cells are boxes along the coordinate axes, so a linear map that mixes coordinates moves points between cells',
    },
  }),
  defineEstimator({
    id: 'gaussian-divergence',
    family: 'parametric',
    quantity: 'divergence',
    summary: 'divergence between the normal laws fitted to P and to Q (sample means and covariances)',
    settings: [],
    dims: [1, Infinity],
    reference:
      'Kullback, S. (1959). Information Theory and Statistics, Wiley (divergence between normal laws), with the fitted means and covariances plugged in.',
    defaultFor: { estimate: true, bench: true },
    estimate: (sample) => gaussianDivergenceEstimate(sample),
  }),
];

export const registration: EstimatorFile = { catalogOrder: 70, estimators: divergenceEstimators };
