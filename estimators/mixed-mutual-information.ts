/**
 * Mutual information with discrete or mixed variables, where exact ties are the data, not a recording artefact:
 *
 *   mi-mixed                 Gao, Kannan, Oh & Viswanath (2017), "Estimating mutual information for
 *                            discrete-continuous mixtures", NeurIPS 30, in the form of the authors' reference code
 *                            (recalled from memory): with the max norm on (X, Y), ρ_i = the distance to the k-th
 *                            nearest other point; where ρ_i > 0, k̃_i = k and n_x,i, n_y,i = the points (i included)
 *                            strictly within ρ_i in X and in Y; where ρ_i = 0, k̃_i, n_x,i, n_y,i = the points at
 *                            distance 0 (i included) jointly, in X and in Y; Î = (1/n) Σ [ψ(k̃_i) + log n − ψ(n_x,i)
 *                            − ψ(n_y,i)]. The form with log(n_x,i + 1) and inclusive counts (also recalled) is biased
 *                            at fixed k: 0.674 against I = 0.866 on mi-uniform-window:m=4 at n = 5000, k = 5, where
 *                            this form gives 0.869 (SciPy-based check, measured).
 *   mi-discrete-continuous   Ross (2014), "Mutual information between discrete and continuous data sets", PLoS
 *                            ONE 9(2): e87357, eq. (2) (from memory): X a label (each distinct X row), Y continuous;
 *                            d_i = the distance (max norm in Y) to the k-th nearest other point with i's label;
 *                            m_i = other points of any label within d_i (inclusive, so m_i ≥ k); N_x,i = points with
 *                            i's label; Î = ψ(N) − ⟨ψ(N_x,i)⟩ + ψ(k) − ⟨ψ(m_i)⟩. Points whose label occurs k times or
 *                            fewer have no k-th same-label neighbour and are left out first (N counts the rest).
 *                            Y must be continuous: repeated Y values that put a k-th neighbour at distance 0, or
 *                            lattice values whose tied distances move the estimate by more than 0.01 nats (our
 *                            tolerance, not the paper's), are an EstimateError 'ties' (SciPy check: Y ~ N(X, 1) rounded
 *                            to 1e-3 at n = 3000 gives 0.178 with Ross's inclusive m_i and 0.393 counting only the
 *                            k-th neighbour on the boundary, against I = 0.254; continuous, both 0.266).
 *
 * Cost: kd-tree searches and counts (src/math/knn.ts), O(n log n) for spread data. Tie groups do not make it
 * quadratic: a kd-tree node whose box lies inside a radius is counted whole, and a node of identical rows is a point
 * (measured for mi-mixed: 0.5 s at n = 2·10^5 in four tie groups of 5·10^4, 4.0 s at n = 8·10^5). mi-discrete-
 * continuous adds one kd-tree per label for the same-label neighbours and one strict count for the tie check.
 */
import { defineEstimator, type Estimator, type EstimatorFile } from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { KnnIndex } from '../src/math/knn.js';
import { digamma } from '../src/math/special.js';
import { checkedSplit, columns } from './mutual-information.js';
import { inSpreadUnit } from './shared/scaling.js';
import { labelCodes } from '../src/core/sample.js';
import { orderGrid } from './shared/order-grid.js';

export function mixedMutualInformation(data: Float64Array, n: number, xDim: number, yDim: number, k: number, id = 'mi-mixed'): number {
  const dim = xDim + yDim;
  if (n <= k) throw new EstimateError('too-few-points', `${id} needs n > k; got n = ${n} with k = ${k}`);
  data = inSpreadUnit(data.subarray(0, n * dim), n, dim, 'common').data;
  const joint = new KnnIndex(data, dim, { norm: 'max' });
  const { distances } = joint.nearestOthers(k);
  const rho = new Float64Array(n);
  let zeros = 0;
  for (let i = 0; i < n; i++) if ((rho[i] = distances[i * k + k - 1]) === 0) zeros++;
  const xIndex = new KnnIndex(columns(data, n, dim, 0, xDim), xDim, { norm: 'max' });
  const yIndex = new KnnIndex(columns(data, n, dim, xDim, dim), yDim, { norm: 'max' });
  const countX = xIndex.countOthersWithin(rho);
  const countY = yIndex.countOthersWithin(rho);
  // Where ρ_i = 0 the counts are of the points at distance 0 (copies), jointly and in each space.
  const none = new Float64Array(n);
  const copies = zeros ? joint.countOthersWithin(none, { inclusive: true }) : null;
  const copiesX = zeros ? xIndex.countOthersWithin(none, { inclusive: true }) : null;
  const copiesY = zeros ? yIndex.countOthersWithin(none, { inclusive: true }) : null;
  let sum = 0;
  for (let i = 0; i < n; i++) {
    const tied = rho[i] === 0;
    const kTilde = tied ? copies![i] + 1 : k;
    const nx = (tied ? copiesX![i] : countX[i]) + 1;
    const ny = (tied ? copiesY![i] : countY[i]) + 1;
    sum += digamma(kTilde) - digamma(nx) - digamma(ny);
  }
  return sum / n + Math.log(n);
}

export function discreteContinuousMutualInformation(
  data: Float64Array,
  n: number,
  xDim: number,
  yDim: number,
  k: number,
  id = 'mi-discrete-continuous',
): number {
  const dim = xDim + yDim;
  const { codes, count } = labelCodes(columns(data, n, dim, 0, xDim), n, xDim);
  if (count > n / 2) {
    throw new EstimateError(
      'invalid-input',
      `${id}: X takes ${count} distinct values in ${n} rows, so it is not a label; for a continuous X use ksg1 or mi-mixed`,
    );
  }
  const sizes = new Int32Array(count);
  for (let i = 0; i < n; i++) sizes[codes[i]]++;
  // Keep the points whose label has more than k members.
  const kept: number[] = [];
  for (let i = 0; i < n; i++) if (sizes[codes[i]] > k) kept.push(i);
  const m = kept.length;
  if (m < 2) throw new EstimateError('too-few-points', `${id}: no value of X occurs more than k = ${k} times; use a smaller k or more rows`);
  const y = new Float64Array(m * yDim);
  kept.forEach((row, p) => y.set(data.subarray(row * dim + xDim, (row + 1) * dim), p * yDim));
  const scaled = inSpreadUnit(y, m, yDim, 'common').data;
  // Per label: the k-th nearest same-label distance of each member.
  const radius = new Float64Array(m);
  const members = new Map<number, number[]>();
  kept.forEach((row, p) => {
    const list = members.get(codes[row]);
    if (list) list.push(p);
    else members.set(codes[row], [p]);
  });
  for (const list of members.values()) {
    const own = new Float64Array(list.length * yDim);
    list.forEach((p, q) => own.set(scaled.subarray(p * yDim, (p + 1) * yDim), q * yDim));
    const { distances } = new KnnIndex(own, yDim, { norm: 'max' }).nearestOthers(k);
    list.forEach((p, q) => (radius[p] = distances[q * k + k - 1]));
  }
  const index = new KnnIndex(scaled, yDim, { norm: 'max' });
  const within = index.countOthersWithin(radius, { inclusive: true });
  const inside = index.countOthersWithin(radius);
  let sum = 0;
  let zero = 0;
  let tied = 0;
  let spread = 0;
  for (let p = 0; p < m; p++) {
    sum += digamma(sizes[codes[kept[p]]]) + digamma(within[p]);
    if (radius[p] === 0) zero++;
    // For a continuous Y only the k-th same-label neighbour lies at distance d_i; more there means tied distances.
    else if (within[p] > inside[p] + 1) {
      tied++;
      spread += digamma(within[p]) - digamma(inside[p] + 1);
    }
  }
  checkContinuousY(id, { m, k, zero, tied, spread: spread / m });
  return digamma(m) + digamma(k) - sum / m;
}

/**
 * Ross's estimator assumes a continuous Y. Refuse a Y with repeated values (one point with d_i = 0 already makes its
 * local density infinite, as for ksg1), and a Y on a lattice whose tied distances decide the estimate: counting the
 * points exactly at d_i (Ross's m_i) or only the k-th neighbour among them gives estimates `spread` apart.
 */
const ROSS_TIE_TOLERANCE = 0.01;

function checkContinuousY(id: string, t: { m: number; k: number; zero: number; tied: number; spread: number }): void {
  const advice = `Ross's estimator needs a continuous Y; for a Y with atoms (repeated values) use mi-mixed`;
  if (t.zero > 0) {
    throw new EstimateError(
      'ties',
      `${id}: ${t.zero} of ${t.m} points have their k-th (k = ${t.k}) same-label neighbour in Y at distance 0 (repeated values); ${advice}`,
    );
  }
  if (t.spread > ROSS_TIE_TOLERANCE) {
    throw new EstimateError(
      'ties',
      `${id}: ${t.tied} of ${t.m} points have other points exactly at their k-th (k = ${t.k}) same-label neighbour distance in Y (values on a lattice), and counting them or not moves the estimate by ${t.spread.toFixed(4)} nats (more than ${ROSS_TIE_TOLERANCE}); ${advice}`,
    );
  }
}

const MIXED_K = 5;
const ROSS_K = 3;
/** The tuning grid's neighbour orders for both estimators. */
const MIXED_ORDERS = [1, 2, 3, 5, 8, 10];

export const mixedMutualInformationEstimators: Estimator[] = [
  defineEstimator({
    id: 'mi-mixed',
    family: 'nearest-neighbour',
    quantity: 'mutual-information',
    summary: 'Gao–Kannan–Oh–Viswanath: k-NN mutual information for discrete, continuous and mixed variables (ties counted, max norm)',
    // k = 5: the order of the paper's experiments (from memory), a common choice for KSG-type estimators.
    settings: [{ name: 'k', meaning: 'neighbour order in the joint (X, Y) space', default: MIXED_K, kind: 'integer', min: 1 }],
    dims: [2, Infinity],
    reference:
      'Gao, W., Kannan, S., Oh, S. & Viswanath, P. (2017). Estimating mutual information for discrete-continuous mixtures. Advances in Neural Information Processing Systems 30, Algorithm 1.',
    tuning: orderGrid(MIXED_ORDERS),
    lacks: {
      separateScale: 'the joint max-norm distance compares X distances with Y distances, so rescaling X alone changes the neighbours (standardise the columns)',
    },
    estimate(sample, { k }) {
      const { n, xDim, yDim } = checkedSplit('mi-mixed', sample);
      return mixedMutualInformation(sample.data, n, xDim, yDim, k);
    },
  }),
  defineEstimator({
    id: 'mi-discrete-continuous',
    family: 'nearest-neighbour',
    quantity: 'mutual-information',
    summary: 'Ross: k-NN mutual information between a discrete X (a label) and a continuous Y (max norm in Y)',
    settings: [{ name: 'k', meaning: 'neighbour order among points with the same X', default: ROSS_K, kind: 'integer', min: 1 }],
    dims: [2, Infinity],
    reference: 'Ross, B. C. (2014). Mutual information between discrete and continuous data sets. PLoS ONE 9(2), e87357, eq. (2).',
    // Below n/4: each label needs more than k points for its k-th same-label neighbour.
    tuning: (_base, n) => [{ setting: 'k', values: MIXED_ORDERS.filter((k) => k < n / 4) }],
    // X must be a label: the suite draws three labelled classes with Gaussian Y, whose I(X; Y) is known.
    conformanceLaw: 'mi-label-gaussian:m=3,gap=1',
    lacks: {
      // The estimate compares distances within Y only; X enters as labels, so it is unchanged by any map of X
      // that keeps the labels apart (a rescaling, a shift).
      symmetry: 'X is a label and Y a continuous variable: the two roles are not interchangeable',
    },
    estimate(sample, { k }) {
      const { n, xDim, yDim } = checkedSplit('mi-discrete-continuous', sample);
      return discreteContinuousMutualInformation(sample.data, n, xDim, yDim, k);
    },
  }),
];

export const registration: EstimatorFile = { catalogOrder: 61, estimators: mixedMutualInformationEstimators };
