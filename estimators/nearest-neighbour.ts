/**
 * Nearest-neighbour (Kozachenko–Leonenko) estimators of d-dimensional differential entropy. Each reads the
 * density at a sample point off the distance to its j-th nearest other point: the ball of that radius holds
 * about j/n of the probability, so f(x_i) ≈ j / (n V_d ρ_(j),i^d), and the digamma terms make the log of
 * that guess unbiased for locally uniform densities.
 *
 *   const h = kozachenkoLeonenkoEntropy(sample.data, sample.dim, 3, 'euclidean');
 *
 * Distances come from the exact kd-tree in src/math/knn.ts. Repeated points (zero distances) are reported as
 * EstimateError('ties'), never turned into −Infinity.
 */
import { defineEstimator, type Estimator, type EstimatorFile, type SettingSpec } from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { KnnIndex, type KnnNorm } from '../src/math/knn.js';
import { sortedNearestOthers } from '../src/math/knn-sorted.js';
import { sharedSortedValues } from './shared/sorted-values.js';
import { SampleMemo } from './shared/sample-memo.js';
import { digamma, logGamma, logUnitBallVolume } from '../src/math/special.js';
import { checkFiniteValues } from '../src/core/sample.js';
import { inSpreadUnit, rowsDifferingFromPartners } from './shared/scaling.js';
import { orderGrid } from './shared/order-grid.js';

const NORMS = ['euclidean', 'max'] as const;

const NORM_SETTING = {
  name: 'norm',
  meaning: 'distance between points: euclidean, or max (Chebyshev, the largest coordinate difference)',
  default: 'euclidean',
  kind: 'choice',
  choices: NORMS,
} as const satisfies SettingSpec;

/** log of the volume of the unit ball of the norm: Euclidean π^{d/2}/Γ(d/2+1), max norm 2^d (a cube). */
export function logUnitBallVolumeOf(norm: KnnNorm, dim: number): number {
  return norm === 'max' ? dim * Math.LN2 : logUnitBallVolume(dim);
}

/**
 * The Kozachenko–Leonenko estimate with the general-k form of Kraskov, Stögbauer & Grassberger (2004),
 * eq. (20):
 *
 *   Ĥ = ψ(n) − ψ(k) + log V_d + (d/n) Σ_i log ρ_i,
 *
 * ρ_i the distance from x_i to its k-th nearest other point, V_d the volume of the norm's unit ball.
 * Rescaling the data by c moves every ρ_i by the factor c and so the estimate by exactly d·log c.
 */
export function kozachenkoLeonenkoEntropy(data: Float64Array, dim: number, k: number, norm: KnnNorm, id = 'kozachenko-leonenko'): number {
  const n = checkedPointCount(id, data, dim, k);
  const { index, distances, stride, logJacobian } = neighbourDistances(data, n, dim, norm, k);
  let sumLogDistance = 0;
  let zeroCount = 0;
  for (let i = 0; i < n; i++) {
    const kthDistance = distances[i * stride + k - 1];
    if (kthDistance === 0) zeroCount++;
    else sumLogDistance += Math.log(kthDistance);
  }
  if (zeroCount > 0) throw tiesError(id, index(), data, distances, stride, zeroCount, n, k, (order) => order);
  return digamma(n) - digamma(k) + logUnitBallVolumeOf(norm, dim) + (dim * sumLogDistance) / n + logJacobian;
}

/** The neighbour orders the weighted estimator may use, and their weights. */
export interface NeighbourOrderWeights {
  /** The orders j with a weight, increasing: the distinct values of ⌊ℓk/d⌋ (ℓ = 1..d) that are ≥ 1. */
  orders: number[];
  /** w_j for j = 1..k at index j − 1; zero off `orders`. */
  weights: Float64Array;
  /** Number of bias-cancelling moment constraints, ⌊d/4⌋. */
  momentConstraints: number;
}

/**
 * Weights of the weighted Kozachenko–Leonenko estimator of Berrett, Samworth & Yuan (2019), Section 3. The
 * paper admits any w ∈ R^k with
 *
 *   Σ_j w_j = 1,
 *   Σ_j w_j Γ(j + 2ℓ/d) / Γ(j) = 0   for ℓ = 1..⌊d/4⌋,
 *   w_j = 0 unless j ∈ {⌊k/d⌋, ⌊2k/d⌋, ..., k};
 *
 * we take the one of minimum Euclidean norm (small weights keep the variance the weighting adds small).
 * Why these constraints: the single-order estimator Ĥ_j has bias Σ_ℓ λ_ℓ Γ(j + 2ℓ/d) / (Γ(j) n^{2ℓ/d}) +
 * o(n^{-1/2}), with λ_ℓ depending on the density but not on j; the moment constraints cancel every such
 * term, which would otherwise dominate the √n-scale error when d ≥ 4. For d ≤ 3 there are none, and the
 * minimum-norm weights are uniform on the allowed orders: d = 1 gives the single-k estimator, d = 2 the mean
 * of the j = ⌊k/2⌋ and j = k estimators, d = 3 the mean of the j = ⌊k/3⌋, ⌊2k/3⌋ and k estimators.
 *
 * Solved by Householder QR of the transposed (row-scaled) constraint matrix, then one step of iterative
 * refinement, so the constraints hold to rounding of their own sums. Throws when k is too small to leave
 * as many distinct orders as constraints (k ≥ d always suffices).
 */
export function neighbourOrderWeights(k: number, dim: number): NeighbourOrderWeights {
  if (!Number.isInteger(k) || k < 1) throw new RangeError(`k must be a positive integer, got ${k}`);
  if (!Number.isInteger(dim) || dim < 1) throw new RangeError(`dim must be a positive integer, got ${dim}`);
  const orderSet = new Set<number>();
  for (let l = 1; l <= dim; l++) {
    const j = Math.floor((l * k) / dim);
    if (j >= 1) orderSet.add(j);
  }
  const orders = [...orderSet].sort((a, b) => a - b);
  const momentConstraints = Math.floor(dim / 4);
  const rows = 1 + momentConstraints;
  if (orders.length < rows) {
    throw new RangeError(
      `weighted Kozachenko–Leonenko with d = ${dim} needs at least ${rows} distinct neighbour orders ⌊ℓk/d⌋ ≥ 1; k = ${k} gives ${orders.length}; use k ≥ ${dim}`,
    );
  }
  // Constraint matrix, one row per constraint, scaled to a largest entry of 1 (the right-hand side is e_1
  // and the first row is already all ones, so scaling changes nothing but conditioning).
  const cols = orders.length;
  const matrix = new Float64Array(rows * cols);
  for (let c = 0; c < cols; c++) matrix[c] = 1;
  for (let l = 1; l <= momentConstraints; l++) {
    const shift = (2 * l) / dim;
    let largest = 0;
    for (let c = 0; c < cols; c++) {
      const ratio = Math.exp(logGamma(orders[c] + shift) - logGamma(orders[c]));
      matrix[l * cols + c] = ratio;
      largest = Math.max(largest, ratio);
    }
    for (let c = 0; c < cols; c++) matrix[l * cols + c] /= largest;
  }
  const rhs = new Float64Array(rows);
  rhs[0] = 1;
  const solver = minimumNormSolver(matrix, rows, cols);
  const solution = solver(rhs);
  // One step of iterative refinement: solve for the residual's correction and add it.
  const residual = new Float64Array(rows);
  for (let r = 0; r < rows; r++) {
    let sum = 0;
    for (let c = 0; c < cols; c++) sum += matrix[r * cols + c] * solution[c];
    residual[r] = rhs[r] - sum;
  }
  const correction = solver(residual);
  const weights = new Float64Array(k);
  for (let c = 0; c < cols; c++) weights[orders[c] - 1] = solution[c] + correction[c];
  return { orders, weights, momentConstraints };
}

/**
 * Minimum-norm solutions of A w = b for a full-row-rank A (rows ≤ cols), by Householder QR of Aᵀ = QR:
 * then A = Rᵀ Qᵀ, so w = Q [R⁻ᵀ b; 0].
 * Kept by hand rather than ml-matrix's QrDecomposition: that one scales its Householder vectors differently,
 * and the weights it gives differ in the last bits (for 712 of the 755 valid (d ≤ 20, k ≤ 40) pairs, already
 * 5.6e-17 at d = 2, k = 2), so every weighted estimate would move off the baseline.
 */
function minimumNormSolver(matrix: Float64Array, rows: number, cols: number): (rhs: Float64Array) => Float64Array {
  // Work on Aᵀ (cols × rows), column-major by constraint: transposed[r][c] = A[r][c].
  const transposed = Float64Array.from(matrix);
  const reflectors: Float64Array[] = [];
  const diagonal = new Float64Array(rows);
  let largestDiagonal = 0;
  for (let r = 0; r < rows; r++) {
    // Householder vector for column r of Aᵀ, entries r..cols-1.
    let norm = 0;
    for (let c = r; c < cols; c++) norm = Math.hypot(norm, transposed[r * cols + c]);
    const alpha = transposed[r * cols + r] > 0 ? -norm : norm;
    const v = new Float64Array(cols);
    for (let c = r; c < cols; c++) v[c] = transposed[r * cols + c];
    v[r] -= alpha;
    let vNormSquared = 0;
    for (let c = r; c < cols; c++) vNormSquared += v[c] * v[c];
    if (vNormSquared > 0) {
      for (let rr = r; rr < rows; rr++) {
        let dot = 0;
        for (let c = r; c < cols; c++) dot += v[c] * transposed[rr * cols + c];
        const factor = (2 * dot) / vNormSquared;
        for (let c = r; c < cols; c++) transposed[rr * cols + c] -= factor * v[c];
      }
    }
    reflectors.push(v);
    diagonal[r] = transposed[r * cols + r];
    largestDiagonal = Math.max(largestDiagonal, Math.abs(diagonal[r]));
  }
  for (let r = 0; r < rows; r++) {
    if (!(Math.abs(diagonal[r]) > 1e-13 * largestDiagonal)) {
      throw new RangeError('the weight constraints are numerically dependent; use a larger k');
    }
  }
  return (rhs) => {
    // Forward substitution with Rᵀ (lower triangular): Rᵀ[r][s] = R[s][r] = transposed[r * cols + s].
    const y = new Float64Array(cols);
    for (let r = 0; r < rows; r++) {
      let sum = rhs[r];
      for (let s = 0; s < r; s++) sum -= transposed[r * cols + s] * y[s];
      y[r] = sum / diagonal[r];
    }
    // w = H_0 H_1 ... H_{rows-1} y: apply the reflectors in reverse order.
    for (let r = rows - 1; r >= 0; r--) {
      const v = reflectors[r];
      let dot = 0;
      let vNormSquared = 0;
      for (let c = r; c < cols; c++) {
        dot += v[c] * y[c];
        vNormSquared += v[c] * v[c];
      }
      if (vNormSquared === 0) continue;
      const factor = (2 * dot) / vNormSquared;
      for (let c = r; c < cols; c++) y[c] -= factor * v[c];
    }
    return y;
  };
}

/**
 * The weighted Kozachenko–Leonenko estimate of Berrett, Samworth & Yuan (2019):
 *
 *   Ĥ_w = Σ_j w_j Ĥ_j,   Ĥ_j = (1/n) Σ_i log( ρ_(j),i^d V_d (n − 1) e^{−ψ(j)} ),
 *
 * with the weights of `neighbourOrderWeights`. Note the paper's single-j estimator Ĥ_j uses log(n − 1)
 * where the Kraskov form uses ψ(n); the two differ by O(1/n).
 */
export function weightedKozachenkoLeonenkoEntropy(data: Float64Array, dim: number, k: number, norm: KnnNorm, id = 'kozachenko-leonenko-weighted'): number {
  const n = checkedPointCount(id, data, dim, k);
  let orderWeights: NeighbourOrderWeights;
  try {
    orderWeights = neighbourOrderWeights(k, dim);
  } catch (error) {
    throw new EstimateError('invalid-input', `${id}: ${(error as Error).message}`);
  }
  const { orders, weights } = orderWeights;
  const { index, distances, stride, logJacobian } = neighbourDistances(data, n, dim, norm, k);
  const firstOrder = orders[0];
  let zeroCount = 0;
  for (let i = 0; i < n; i++) if (distances[i * stride + firstOrder - 1] === 0) zeroCount++;
  // The smallest order used is ⌊k/d⌋ (when ≥ 1), so it exceeds m - 1 once k ≥ d·m.
  if (zeroCount > 0) throw tiesError(id, index(), data, distances, stride, zeroCount, n, firstOrder, (order) => dim * order);
  let weightedLogDistance = 0;
  let weightedDigamma = 0;
  for (const j of orders) {
    let sumLogDistance = 0;
    for (let i = 0; i < n; i++) sumLogDistance += Math.log(distances[i * stride + j - 1]);
    weightedLogDistance += weights[j - 1] * (sumLogDistance / n);
    weightedDigamma += weights[j - 1] * digamma(j);
  }
  return dim * weightedLogDistance + logUnitBallVolumeOf(norm, dim) + Math.log(n - 1) - weightedDigamma + logJacobian;
}

/**
 * All-points neighbour distances of one sample, kept while the sample's data array lives, so that every k of
 * a tuning grid and both Kozachenko–Leonenko estimators on the same draw share one tree and few searches.
 * A draw's first search fetches the largest k the previous draw of the same dimension and norm was asked
 * for in this thread (the default plan's two estimators: k = 3 and 12, one search), at least the k asked; a
 * draw searched twice already (a tuning grid) fetches SHARED_NEIGHBOURS at once. So a run that only ever asks
 * for one k never pays for neighbours it does not use.
 * The j-th distance does not depend on how many neighbours were searched: the estimates are bit-identical.
 * In one dimension the distances come from the sorted values (src/math/knn-sorted.ts) and the kd-tree is built
 * only if a ties report needs it.
 */
interface NeighbourSearch {
  /** The sample's points in the common spread unit. */
  points: Float64Array;
  /** Their kd-tree, built on first use. */
  index: () => KnnIndex;
  distances: Float64Array;
  /** Neighbours per point in `distances`. */
  stride: number;
  logJacobian: number;
  /** Searches made on this draw so far. */
  searches: number;
  /** The largest k asked of this draw so far. */
  largestAsked: number;
}

/** The largest k of the built-in tuning grids (the weighted estimator's 2..20). */
const SHARED_NEIGHBOURS = 20;
/** Distances kept per sample at most (8 bytes each): beyond this each request searches again instead. */
const SHARED_DISTANCES_MAX = 2 ** 22;
const searches = new SampleMemo<NeighbourSearch>();
/** Per draw, dimension and norm: the most other copies any point has (the ties error's advice). */
const largestCopyGroups = new SampleMemo<number>();
/** Per dimension and norm, the largest k asked of the most recent draw in this thread. */
const recentLargestAsked = new Map<string, number>();

function lazyIndex(points: Float64Array, dim: number, norm: KnnNorm): () => KnnIndex {
  let index: KnnIndex | undefined;
  return () => (index ??= new KnnIndex(points, dim, { norm }));
}

function neighbourDistances(data: Float64Array, n: number, dim: number, norm: KnnNorm, k: number): NeighbourSearch {
  const key = `${dim}|${norm}`;
  const kept = searches.peek(data, key);
  const largestAsked = Math.max(kept?.largestAsked ?? 0, k);
  if (kept) kept.largestAsked = largestAsked;
  const previousDraw = recentLargestAsked.get(key) ?? k;
  recentLargestAsked.set(key, largestAsked);
  if (kept && kept.stride >= k) return kept;

  let stride: number;
  let base: Pick<NeighbourSearch, 'points' | 'index' | 'logJacobian'>;
  if (kept) {
    base = kept;
    stride = kept.searches >= 2 ? Math.min(n - 1, Math.max(k, SHARED_NEIGHBOURS)) : k;
  } else {
    // Distances compare coordinates, so one power of two for all columns (estimators/shared/scaling.ts).
    const scaled = inSpreadUnit(data, n, dim, 'common');
    base = { points: scaled.data, index: lazyIndex(scaled.data, dim, norm), logJacobian: scaled.logJacobian };
    stride = Math.min(n - 1, Math.max(k, Math.min(previousDraw, SHARED_NEIGHBOURS)));
  }
  // In 1-D the sorted copy is the one the spacing and kernel estimators of the draw share (unless a unit change made a new array).
  const distances = dim === 1 ? sortedNearestOthers(base.points, sharedSortedValues(base.points), stride, norm) : base.index().nearestOthers(stride).distances;
  // Field by field, not spread from `base` (a kept search or a new one): one map for every search (see withRows).
  const { points, index, logJacobian } = base;
  const search: NeighbourSearch = { points, index, distances, stride, logJacobian, searches: (kept?.searches ?? 0) + 1, largestAsked };
  if (n * stride <= SHARED_DISTANCES_MAX) searches.set(data, key, search);
  return search;
}

/** n, after checking the data are finite and n > k (k is an integer ≥ 1, as its setting declares). */
function checkedPointCount(id: string, data: Float64Array, dim: number, k: number): number {
  const n = Math.floor(data.length / dim);
  checkFiniteValues(id, { n, dim, data });
  if (n <= k) throw new EstimateError('too-few-points', `${id} needs n > k; got n = ${n} with k = ${k}`);
  return n;
}

/**
 * The 'ties' error: how many points have a zero j-th neighbour distance, and what would avoid it. `kFor`
 * turns "the smallest neighbour order used must exceed m" into the k setting that achieves it.
 */
function tiesError(
  id: string,
  index: KnnIndex,
  data: Float64Array,
  distances: Float64Array,
  stride: number,
  zeroCount: number,
  n: number,
  order: number,
  kFor: (order: number) => number,
): EstimateError {
  const artefact = underflowedNeighbours(id, index, data, distances, stride, n, order);
  if (artefact) return artefact;
  // Exact copies of each point (other points at distance 0): the largest group decides the k that works. Both
  // estimators (and every k of a grid) report ties on the same draw, so it is counted once per draw.
  const mostCopies = largestCopyGroups.get(data, `${index.dim}|${index.norm}`, () => {
    const copies = index.countOthersWithin(new Float64Array(n), { inclusive: true });
    let most = 0;
    for (let i = 0; i < n; i++) if (copies[i] > most) most = copies[i];
    return most;
  });
  return new EstimateError(
    'ties',
    `${id}: ${zeroCount} of ${n} points have their ${ordinal(order)} nearest neighbour at distance 0 (repeated values; ` +
      `the largest group is ${mostCopies + 1} identical points), so log-distances would be -Infinity; ` +
      `add dequantize=auto (jitter within the recording step), use k ≥ ${kFor(mostCopies + 1)} if the repeats are genuine, or use a histogram estimator`,
  );
}

/**
 * A zero distance between rows that differ: their squared Euclidean distance underflowed, or the unit
 * change merged them, because the data span more than double precision resolves. Not ties, so not the
 * ties advice: an error saying so, or null when every zero distance is between identical rows.
 */
function underflowedNeighbours(
  id: string,
  index: KnnIndex,
  data: Float64Array,
  distances: Float64Array,
  stride: number,
  n: number,
  order: number,
): EstimateError | null {
  const dim = index.dim;
  const neighbours = index.nearestOthers(order, { indices: true }).indices!;
  const rows = new Int32Array(n * order);
  const partners = new Int32Array(n * order);
  let pairs = 0;
  for (let i = 0; i < n; i++) {
    if (distances[i * stride + order - 1] !== 0) continue;
    for (let t = 0; t < order; t++) {
      rows[pairs] = i;
      partners[pairs++] = neighbours[i * order + t];
    }
  }
  const differing = rowsDifferingFromPartners(data, dim, rows, partners, pairs);
  if (differing === 0) return null;
  return new EstimateError(
    'numeric',
    `${id}: ${differing} pairs of distinct points are at a distance that rounds to 0 (below about 1e-154 of the widest column's range for squared Euclidean distances): the values span more orders of magnitude than double precision can hold in one distance; rescale the columns to comparable spreads or transform them (e.g. log)${index.norm === 'euclidean' ? ', or use norm=max' : ''}`,
  );
}

function ordinal(j: number): string {
  const tens = j % 100;
  if (tens >= 11 && tens <= 13) return `${j}th`;
  return `${j}${['th', 'st', 'nd', 'rd'][j % 10] ?? 'th'}`;
}

const KL_DEFAULT_K = 3;

/**
 * Default largest neighbour order for the weighted estimator: k = 12. The weights need at least 1 + ⌊d/4⌋
 * distinct orders ⌊ℓk/d⌋ ≥ 1 (k = 12 gives them up to d = 44); the paper's theory wants k to grow slowly
 * with n and gives no constant, and a larger k trades variance for bias. We measured RMSE on standard
 * Gaussians (40 replicates per cell, `npx tsx bench/knn.ts --accuracy`) for k in {4, 8, 12, 16, 24, 32},
 * d in {1, 2, 3, 4, 5, 8}, n in {1000, 10000}: no k is best everywhere (small k wins for d = 2, 3, large k
 * for d = 1 and 8), and k = 12 has the smallest worst-case ratio to the best k of the grid (1.36, at d = 3,
 * n = 10000; k = 8: 1.56 at d = 8, k = 16: 1.47, k = 24: 1.71).
 */
const WEIGHTED_DEFAULT_K = 12;

/** The weighted estimator's largest order: 2..20, enough orders ⌊ℓk/d⌋ for the weights in the plans' dimensions. */
const WEIGHTED_TUNING_K = [2, 4, 6, 8, 12, 16, 20];

export const nearestNeighbourEstimators: Estimator[] = [
  defineEstimator({
    id: 'kozachenko-leonenko',
    family: 'nearest-neighbour',
    quantity: 'entropy',
    summary: 'Kozachenko–Leonenko k-th nearest-neighbour distance estimator, any dimension',
    settings: [
      {
        name: 'k',
        meaning: 'neighbour order: each point uses the distance to its k-th nearest other point',
        default: KL_DEFAULT_K,
        kind: 'integer',
        min: 1,
      },
      NORM_SETTING,
    ],
    dims: [1, Infinity],
    reference:
      'Kozachenko, L. F. & Leonenko, N. N. (1987). Sample estimate of the entropy of a random vector. Problems of Information Transmission 23(2), 95–101; ' +
      'general k as in Kraskov, A., Stögbauer, H. & Grassberger, P. (2004). Estimating mutual information. Physical Review E 69, 066138, eq. (20).',
    tuning: orderGrid(),
    defaultFor: { estimate: [{ order: 10 }], bench: true },
    estimate(sample, { k, norm }) {
      return kozachenkoLeonenkoEntropy(sample.data.subarray(0, sample.n * sample.dim), sample.dim, k, norm, 'kozachenko-leonenko');
    },
  }),
  defineEstimator({
    id: 'kozachenko-leonenko-weighted',
    family: 'nearest-neighbour',
    quantity: 'entropy',
    summary: 'weighted average of Kozachenko–Leonenko estimators over neighbour orders, cancelling the leading bias terms (efficient in any d)',
    settings: [
      {
        name: 'k',
        meaning: 'largest neighbour order used; orders ⌊ℓk/d⌋, ℓ = 1..d, get weights',
        default: WEIGHTED_DEFAULT_K,
        kind: 'integer',
        min: 1,
      },
      NORM_SETTING,
    ],
    dims: [1, Infinity],
    reference:
      'Berrett, T. B., Samworth, R. J. & Yuan, M. (2019). Efficient multivariate entropy estimation via k-nearest neighbour distances. The Annals of Statistics 47(1), 288–318.',
    tuning: orderGrid(WEIGHTED_TUNING_K),
    // In d = 1 it is the plain estimator at k = 12 (one order); from d = 4 its bias cancellation makes it the first choice.
    defaultFor: {
      estimate: [
        { dims: [2, 3], order: 15 },
        { dims: [4, Infinity], order: 5 },
      ],
      bench: true,
    },
    estimate(sample, { k, norm }) {
      return weightedKozachenkoLeonenkoEntropy(sample.data.subarray(0, sample.n * sample.dim), sample.dim, k, norm, 'kozachenko-leonenko-weighted');
    },
  }),
];

export const registration: EstimatorFile = { catalogOrder: 30, estimators: nearestNeighbourEstimators };
