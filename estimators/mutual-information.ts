/**
 * Estimators of the mutual information I(X; Y) in nats. The sample's first `xDim` columns are X, the rest Y.
 *
 *   const ksg = getEstimator('ksg1');              // from estimators/index.ts
 *   ksg.estimate({ n, dim: 3, data, xDim: 1 }, { k: 3, copula: 'none' });
 *
 * - ksg1, ksg2: Kraskov, Stögbauer & Grassberger (2004), estimators (8) and (9), max norm, neighbour order k.
 * - mi-histogram: plug-in H(X) + H(Y) − H(X,Y) of one product grid (the joint grid and its projections).
 * - mi-kernel: Ĥ(X) + Ĥ(Y) − Ĥ(X,Y) with the leave-one-out Gaussian-kernel entropy estimator.
 * - mi-gaussian: ½ log(det Σ̂x det Σ̂y / det Σ̂), optionally exactly unbiased for Gaussian data.
 * - mi-from-entropies: Ĥ(X) + Ĥ(Y) − Ĥ(X,Y) with any built-in entropy estimator.
 *
 * Every one has `copula`: none, or rank, which first replaces each coordinate by its rank 1..n (equal values
 * ranked by row order, so no two ranks in a column are equal). That is the empirical copula rank/(n + 1)
 * times the common factor n + 1, which none of these estimates depends on (each is invariant to one scale
 * of all coordinates; mi-kernel reads a numeric 1-D bandwidth on the rank/(n + 1) scale), and integer ranks
 * are exact: max-norm distances between ranked points are exact integers, so equal distances are equal as
 * doubles and KSG's strict (variant 1) and inclusive (variant 2) counts, and its neighbour ties, are
 * decided on exact values, never by rounding. Ranks do not change under any increasing map of a coordinate,
 * so with copula=rank the estimate is exactly invariant to such maps (and MI itself is: it is the MI of the
 * copula). One caution: ranks make each 1-D marginal an exact lattice, on which nearest-neighbour entropy
 * estimates are biased (Kozachenko–Leonenko with k = 3 overstates the entropy of the evenly spaced ranks,
 * against the uniform law they stand for, by about 0.46 nats), so mi-from-entropies with copula=rank
 * overstates I by about that much per 1-D part; KSG, whose marginal counts use the joint neighbourhoods,
 * does not have this problem.
 *
 * The catalog and the harness reach these through estimators/index.ts; importing this file directly is fine.
 */
import { defineEstimator, type Estimator, type EstimatorFile, type Sample, type SettingSpec, type Settings } from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { KnnIndex } from '../src/math/knn.js';
import { digamma } from '../src/math/special.js';
import { validateSettings } from '../src/core/spec.js';
import { checkNotConstant } from './divergence.js';
import { type AxisBins, BIN_RULES, type BinRule, binGrid, histogramCells, histogramEstimators, histogramGrid } from './histogram.js';
import { BANDWIDTH_RULES, bandwidthGrid, kernelEstimator, kernelEstimators, type KernelSettings } from './kernel.js';
import { minimumSampleSize } from './kernel/resubstitution.js';
import { nearestNeighbourEstimators } from './nearest-neighbour.js';
import { logDeterminantSpd, parametricEstimators, scatterMatrix, wishartLogDetShift } from './parametric.js';
import { inSpreadUnit } from './shared/scaling.js';
import { spacingEstimators } from './spacing.js';
import { orderGrid } from './shared/order-grid.js';

const KSG_REFERENCE = 'Kraskov, A., Stögbauer, H. & Grassberger, P. (2004). Estimating mutual information. Physical Review E 69, 066138';

export const COPULA_SETTING = {
  name: 'copula',
  meaning:
    'none, or rank: replace each coordinate by its integer rank 1..n first (equal values by row order), making the estimate invariant to increasing maps of any coordinate; distances between ranks are exact, so KSG ties are decided exactly, not by rounding',
  default: 'none',
  kind: 'choice',
  choices: ['none', 'rank'],
} as const satisfies SettingSpec;

type Copula = (typeof COPULA_SETTING.choices)[number];

/** The bias correction of the Gaussian (log-determinant) estimators of MI and conditional MI. */
export const GAUSSIAN_CORRECTION_SETTING = {
  name: 'correction',
  meaning: 'ahmed-gokhale: subtract the exact Gaussian bias (unbiased for normal data); none: the plug-in',
  default: 'ahmed-gokhale',
  kind: 'choice',
  choices: ['ahmed-gokhale', 'none'],
} as const satisfies SettingSpec;

/** Every MI estimator is in both default sets of mutual information, at order 0: registry order. */
const IN_DEFAULT_SETS = { estimate: true, bench: true } as const;

// ---------------------------------------------------------------------------------------------------------
// Shared checks and transforms

/** The X/Y split of a mutual-information sample, after checking it and its values. */
export function checkedSplit(id: string, sample: Sample): { n: number; xDim: number; yDim: number } {
  const { n, dim, data, xDim } = sample;
  if (xDim === undefined) {
    throw new EstimateError(
      'invalid-input',
      `${id}: the sample does not say which columns are X (xDim is missing); mutual information needs xDim between 1 and dim − 1 = ${dim - 1}`,
    );
  }
  if (!Number.isInteger(xDim) || xDim < 1 || xDim > dim - 1) {
    throw new EstimateError(
      'dimension',
      `${id}: xDim = ${xDim} is not allowed for d = ${dim}; X takes the first xDim columns and Y the rest, so 1 ≤ xDim ≤ ${dim - 1}`,
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
  return { n, xDim, yDim: dim - xDim };
}

/** Columns [from, to) of a row-major n × dim array, as a new row-major array. */
export function columns(data: Float64Array, n: number, dim: number, from: number, to: number): Float64Array {
  const width = to - from;
  const out = new Float64Array(n * width);
  for (let i = 0, p = 0; i < n; i++) {
    const row = i * dim + from;
    for (let j = 0; j < width; j++) out[p++] = data[row + j];
  }
  return out;
}

/**
 * Each coordinate replaced by its rank 1..n, equal values ranked by row order, so no two values of a column
 * are equal: the empirical copula, up to the common factor 1/(n + 1), which every MI estimator here is
 * invariant to (max-norm neighbour counts, bin rules, kernel bandwidth rules and covariance ratios all scale
 * with the data; mi-kernel rescales a numeric 1-D bandwidth to match). Integer ranks are exact doubles and so are their differences: max-norm distances between
 * ranked points are exact integers, and two distances equal in exact arithmetic are equal as doubles,
 * which rank/(n + 1) does not guarantee (its rounding decided some KSG counts). A new array; the input is not
 * changed.
 */
export function rankTransform(data: Float64Array, n: number, dim: number): Float64Array {
  const out = new Float64Array(n * dim);
  const column = new Float64Array(n);
  const order = new Uint32Array(n);
  const byValueThenRow = (a: number, b: number): number => column[a] - column[b] || a - b;
  for (let j = 0; j < dim; j++) {
    for (let i = 0; i < n; i++) {
      column[i] = data[i * dim + j];
      order[i] = i;
    }
    order.sort(byValueThenRow);
    for (let r = 0; r < n; r++) out[order[r] * dim + j] = r + 1;
  }
  return out;
}

/** The sample to estimate from: checked, split, and rank-transformed when copula=rank. */
function prepared(id: string, sample: Sample, copula: Copula): { data: Float64Array; n: number; xDim: number; yDim: number } {
  const { n, xDim, yDim } = checkedSplit(id, sample);
  const raw = sample.data.subarray(0, n * sample.dim);
  const data = copula === 'rank' ? rankTransform(raw, n, sample.dim) : raw;
  return { data, n, xDim, yDim };
}

/** Rethrows a histogram/kernel error under this estimator's id, without advice on settings it does not have. */
function renamed(id: string, from: string, error: unknown): never {
  if (error instanceof EstimateError) {
    const message = (error.message.startsWith(from) ? id + error.message.slice(from.length) : `${id}: ${error.message}`)
      .replace(', a bin count, or width=W', ' or a bin count')
      .replace(', or width=W', '');
    throw new EstimateError(error.code, message);
  }
  throw error;
}

// ---------------------------------------------------------------------------------------------------------
// Kraskov–Stögbauer–Grassberger

/** ψ(m) for integer m ≥ 1, computed once per distinct m (the counts repeat). */
function digammaTable(size: number): (m: number) => number {
  const table = new Float64Array(size + 1).fill(Number.NaN);
  return (m) => {
    let value = table[m];
    if (value !== value) {
      value = digamma(m);
      table[m] = value;
    }
    return value;
  };
}

/**
 * The KSG estimates with the max norm in X, in Y and in the joint space (‖z‖ = max(‖x‖, ‖y‖)).
 * For each point i let ε_i/2 be the distance to its k-th nearest other point in the joint space.
 *
 *   variant 1, eq. (8): I = ψ(k) + ψ(N) − ⟨ψ(n_x + 1) + ψ(n_y + 1)⟩, n_x(i) = #{j ≠ i: ‖x_i − x_j‖ < ε_i/2}
 *                       (strict), likewise n_y.
 *   variant 2, eq. (9): I = ψ(k) − 1/k + ψ(N) − ⟨ψ(n_x) + ψ(n_y)⟩, where ε_x,i/2 and ε_y,i/2 are the largest
 *                       X- and Y-distances from i to its k joint neighbours and n_x(i) = #{j ≠ i:
 *                       ‖x_i − x_j‖ ≤ ε_x,i/2} (inclusive; at least k).
 *
 * Ties in distances. Variant 1 uses only the k-th distance ε_i/2, which ties do not change. Variant 2 needs
 * the k neighbours themselves, which are not defined when several points lie at exactly the k-th distance:
 * they are then every point strictly closer and the tied points of lowest row index (a k-NN search would
 * report an arbitrary choice). Distances are compared as computed, so equality is decided by the doubles:
 * on data whose differences are exact, as the integer ranks of copula=rank, equal distances are genuinely
 * equal, and the strict count of variant 1 and the inclusive counts of variant 2 apply to exact values.
 *
 * Radius counts come from kd-trees on X and on Y (exact: src/math/knn.ts). Points whose k-th joint neighbour is
 * at distance 0 (repeated rows) are a 'ties' error.
 */
/**
 * A variable whose every row is the same point carries no information, but the k-NN counts do not see that: with
 * Y constant every count in Y is n − 1 and KSG 2 returns −1/k. Refused as the other estimators refuse such ties.
 */
function refuseConstantBlock(data: Float64Array, n: number, dim: number, from: number, to: number, name: string, id: string): void {
  for (let i = 1; i < n; i++) for (let j = from; j < to; j++) if (data[i * dim + j] !== data[j]) return;
  throw new EstimateError(
    'ties',
    `${id}: ${name} is constant (all ${n} rows hold the same ${to - from === 1 ? 'value' : 'point'}), so its mutual information with anything is 0 and the neighbour counts cannot estimate it; drop that variable`,
  );
}

export function ksgMutualInformation(data: Float64Array, n: number, xDim: number, yDim: number, k: number, variant: 1 | 2, id = `ksg${variant}`): number {
  const dim = xDim + yDim;
  if (n <= k) throw new EstimateError('too-few-points', `${id} needs n > k; got n = ${n} with k = ${k}`);
  // Max-norm distances compare every coordinate, so a subnormal or huge spread gets one power of two for
  // all of them (exact, estimators/shared/scaling.ts): differences then cannot overflow, and I does not move.
  data = inSpreadUnit(data.subarray(0, n * dim), n, dim, 'common').data;
  const joint = new KnnIndex(data.subarray(0, n * dim), dim, { norm: 'max' });
  // Variant 2 also asks for the (k+1)-th neighbour: where it is as near as the k-th, the k are tied.
  const stride = variant === 2 ? Math.min(k + 1, n - 1) : k;
  const { distances, indices } = joint.nearestOthers(stride, { indices: variant === 2 });
  const kth = new Float64Array(n);
  for (let i = 0; i < n; i++) kth[i] = distances[i * stride + k - 1];
  let zeroCount = 0;
  for (let i = 0; i < n; i++) if (kth[i] === 0) zeroCount++;
  if (zeroCount > 0) {
    const copies = joint.countOthersWithin(new Float64Array(n), { inclusive: true });
    let mostCopies = 0;
    for (let i = 0; i < n; i++) if (copies[i] > mostCopies) mostCopies = copies[i];
    throw new EstimateError(
      'ties',
      `${id}: ${zeroCount} of ${n} points have their k-th (k = ${k}) nearest neighbour in (X, Y) at distance 0 (repeated rows; the largest group is ${mostCopies + 1} identical rows); ` +
        `add dequantize=auto (jitter within the recording step), use copula=rank (ties broken by row order), or k ≥ ${mostCopies + 1} if the repeats are genuine`,
    );
  }
  refuseConstantBlock(data, n, dim, 0, xDim, 'X', id);
  refuseConstantBlock(data, n, dim, xDim, dim, 'Y', id);
  const xData = columns(data, n, dim, 0, xDim);
  const yData = columns(data, n, dim, xDim, dim);
  const radiusX = new Float64Array(n);
  const radiusY = new Float64Array(n);
  if (variant === 1) {
    radiusX.set(kth);
    radiusY.set(kth);
  } else {
    neighbourExtents(joint, data, n, xDim, yDim, k, kth, distances, indices!, stride, radiusX, radiusY);
  }
  const inclusive = variant === 2;
  const countX = new KnnIndex(xData, xDim, { norm: 'max' }).countOthersWithin(radiusX, { inclusive });
  const countY = new KnnIndex(yData, yDim, { norm: 'max' }).countOthersWithin(radiusY, { inclusive });
  const psi = digammaTable(n);
  const offset = variant === 1 ? 1 : 0;
  let sum = 0;
  for (let i = 0; i < n; i++) sum += psi(countX[i] + offset) + psi(countY[i] + offset);
  const constant = digamma(k) + digamma(n) - (variant === 2 ? 1 / k : 0);
  return constant - sum / n;
}

/** Neighbour lists of tied points are fetched in batches of at most this many entries. */
const TIED_BATCH_ENTRIES = 1 << 20;

/**
 * KSG variant 2's ε_x,i/2 and ε_y,i/2: the largest X- and Y-distances from x_i to its k nearest joint
 * neighbours. Where other points tie at the k-th distance ε_i/2 (the (k+1)-th neighbour, `stride` = k + 1
 * columns of `distances`, is as near), the k are every point strictly closer and then the tied ones of lowest
 * row index, the order copula=rank breaks value ties in. Those points fill the closed joint ball of radius
 * ε_i/2; it is counted, then fetched as the nearest points to x_i (itself included, at distance 0), for the
 * tied points only.
 */
function neighbourExtents(
  joint: KnnIndex,
  data: Float64Array,
  n: number,
  xDim: number,
  yDim: number,
  k: number,
  kth: Float64Array,
  distances: Float64Array,
  neighbours: Int32Array,
  stride: number,
  radiusX: Float64Array,
  radiusY: Float64Array,
): void {
  const dim = xDim + yDim;
  const tied: number[] = [];
  const members = new Int32Array(k);
  for (let i = 0; i < n; i++) {
    if (stride > k && distances[i * stride + k] === kth[i]) tied.push(i);
    else {
      members.set(neighbours.subarray(i * stride, i * stride + k));
      extentsOver(data, dim, xDim, i, members, k, radiusX, radiusY);
    }
  }
  if (tied.length === 0) return;
  const tiedPoints = new Float64Array(tied.length * dim);
  const tiedRadii = new Float64Array(tied.length);
  for (let q = 0; q < tied.length; q++) {
    tiedPoints.set(data.subarray(tied[q] * dim, tied[q] * dim + dim), q * dim);
    tiedRadii[q] = kth[tied[q]];
  }
  const ballSize = joint.countWithin(tiedPoints, tiedRadii, { inclusive: true });
  // Ball points at exactly ε_i/2, sorted by row; the strictly closer ones all belong to the k.
  const atEdge = new Int32Array(n);
  let start = 0;
  while (start < tied.length) {
    let widest = ballSize[start];
    let stop = start + 1;
    while (stop < tied.length && Math.max(widest, ballSize[stop]) * (stop + 1 - start) <= TIED_BATCH_ENTRIES) {
      widest = Math.max(widest, ballSize[stop]);
      stop++;
    }
    const ball = joint.nearest(tiedPoints.subarray(start * dim, stop * dim), widest, { indices: true }).indices!;
    for (let q = start; q < stop; q++) {
      const i = tied[q];
      const row = i * dim;
      let inside = 0;
      let edge = 0;
      for (let t = (q - start) * widest, end = t + ballSize[q]; t < end; t++) {
        const j = ball[t];
        if (j === i) continue;
        let distance = 0;
        for (let a = 0; a < dim; a++) {
          const gap = Math.abs(data[row + a] - data[j * dim + a]);
          if (gap > distance) distance = gap;
        }
        if (distance < kth[i]) members[inside++] = j;
        else atEdge[edge++] = j;
      }
      atEdge.subarray(0, edge).sort();
      for (let e = 0; inside < k; e++) members[inside++] = atEdge[e];
      extentsOver(data, dim, xDim, i, members, k, radiusX, radiusY);
    }
    start = stop;
  }
}

/** Largest X- and Y-distances from point i to the k points in `members`. */
function extentsOver(
  data: Float64Array,
  dim: number,
  xDim: number,
  i: number,
  members: Int32Array,
  k: number,
  radiusX: Float64Array,
  radiusY: Float64Array,
): void {
  const row = i * dim;
  let largestX = 0;
  let largestY = 0;
  for (let t = 0; t < k; t++) {
    const other = members[t] * dim;
    for (let a = 0; a < xDim; a++) {
      const gap = Math.abs(data[row + a] - data[other + a]);
      if (gap > largestX) largestX = gap;
    }
    for (let a = xDim; a < dim; a++) {
      const gap = Math.abs(data[row + a] - data[other + a]);
      if (gap > largestY) largestY = gap;
    }
  }
  radiusX[i] = largestX;
  radiusY[i] = largestY;
}

const KSG_DEFAULT_K = 3;

function ksgEstimator(variant: 1 | 2): Estimator {
  const id = `ksg${variant}`;
  return defineEstimator({
    id,
    family: 'nearest-neighbour',
    quantity: 'mutual-information',
    summary:
      variant === 1
        ? 'Kraskov–Stögbauer–Grassberger estimator (8): k-th joint neighbour distance, strict marginal counts, max norm'
        : 'Kraskov–Stögbauer–Grassberger estimator (9): per-space neighbour extents, inclusive marginal counts, max norm',
    settings: [{ name: 'k', meaning: 'neighbour order in the joint (X, Y) space', default: KSG_DEFAULT_K, kind: 'integer', min: 1 }, COPULA_SETTING],
    dims: [2, Infinity],
    reference: `${KSG_REFERENCE}, estimator (${variant === 1 ? 8 : 9}).`,
    tuning: orderGrid(),
    defaultFor: IN_DEFAULT_SETS,
    estimate(sample, { k, copula }) {
      const { data, n, xDim, yDim } = prepared(id, sample, copula);
      return ksgMutualInformation(data, n, xDim, yDim, k, variant, id);
    },
    lacks: {
      // Variant 2 needs the k nearest points themselves; where several tie at the k-th distance it takes those
      // of lowest row index (see ksgMutualInformation). Integer ranks tie often, so with copula=rank the order
      // of the rows decides which tied points count (measured: 0.100 vs 0.112 nats at n = 200, rows permuted).
      ...(variant === 2
        ? {
            rowOrder: (settings: Settings) =>
              settings.copula === 'rank'
                ? 'with copula=rank, max-norm distances between integer ranks tie often, and variant 2 takes tied neighbours by lowest row index, so the row order decides which of them count'
                : undefined,
          }
        : {}),
      // The joint distance max(‖x − x'‖, ‖y − y'‖) weighs X against Y, so rescaling one of them changes which
      // points are the k nearest and the counts: the method is invariant to one factor for both (checked),
      // and with copula=rank to any increasing map of each coordinate.
      separateScale: (settings) =>
        settings.copula === 'rank'
          ? undefined
          : 'the joint max-norm distance compares X distances with Y distances, so rescaling X alone changes the neighbours (standardise the columns, or use copula=rank)',
    },
  });
}

// ---------------------------------------------------------------------------------------------------------
// Histogram

/**
 * Plug-in MI on one product grid: the histogram estimator's grid for the joint sample (its bin rule with the
 * joint dimension, or a bin count per coordinate), and the projections of that grid for X and Y. With
 * S = Σ c log c over occupied cells, H_plug = log n − S/n (bin volumes cancel in the difference), so
 *   Î = log n + (S_xy − S_x − S_y)/n,
 * and Miller–Madow adds (B − 1)/(2n) to each entropy: (B_x + B_y − B_xy − 1)/(2n) in total.
 */
function histogramMutualInformation(
  sample: Sample,
  { bins, scale, correction, copula }: { bins: BinRule | number; scale: number; correction: 'none' | 'miller-madow'; copula: Copula },
): number {
  const id = 'mi-histogram';
  const { data, n, xDim, yDim } = prepared(id, sample, copula);
  const dim = xDim + yDim;
  if (n < 2) throw new EstimateError('too-few-points', `${id} needs at least 2 points, got ${n}`);
  const joint: Sample = { n, dim, data };
  checkNotConstant(id, data, n, dim);
  let grid: AxisBins[];
  try {
    grid = histogramGrid(joint, { bins, scale, width: 'none' });
  } catch (error) {
    renamed(id, 'histogram', error);
  }
  const cellsXY = histogramCells(joint, grid);
  const cellsX = histogramCells({ n, dim: xDim, data: columns(data, n, dim, 0, xDim) }, grid.slice(0, xDim));
  const cellsY = histogramCells({ n, dim: yDim, data: columns(data, n, dim, xDim, dim) }, grid.slice(xDim));
  const plugIn = Math.log(n) + (cellsXY.sumCountLogCount - cellsX.sumCountLogCount - cellsY.sumCountLogCount) / n;
  return correction === 'miller-madow' ? plugIn + (cellsX.occupied + cellsY.occupied - cellsXY.occupied - 1) / (2 * n) : plugIn;
}

// ---------------------------------------------------------------------------------------------------------
// Kernel

/**
 * Ĥ(X) + Ĥ(Y) − Ĥ(X,Y). Rule bandwidths scale with the data, so the three entropies shift by d·log c under a
 * common scale c and I does not move. A numeric bandwidth of a 1-D part is in data units, which does not
 * scale: with copula=rank it is read on the rank/(n + 1) scale of (0, 1) the copula lives on, so it is
 * multiplied by n + 1 for the integer ranks (a numeric bandwidth of a d > 1 part is in whitened units,
 * unaffected).
 */
function kernelMutualInformation(sample: Sample, { bandwidth, scale, copula }: KernelSettings & { copula: Copula }): number {
  const id = 'mi-kernel';
  const { data, n, xDim, yDim } = prepared(id, sample, copula);
  const dim = xDim + yDim;
  // Checked here for the joint sample, the largest of the three: a marginal's refusal would speak of its own dimension.
  const needed = minimumSampleSize(dim);
  if (n < needed) throw new EstimateError('too-few-points', `${id} needs at least ${needed} points for (X, Y) in ${dim} dimensions, got ${n}`);
  const rankUnit = copula === 'rank' ? n + 1 : 1;
  const entropyOf = (part: Sample): number => {
    const partBandwidth = typeof bandwidth === 'number' && part.dim === 1 ? bandwidth * rankUnit : bandwidth;
    try {
      return kernelEstimator.estimate(part, { bandwidth: partBandwidth, scale });
    } catch (error) {
      return renamed(id, 'kernel', error);
    }
  };
  const hx = entropyOf({ n, dim: xDim, data: columns(data, n, dim, 0, xDim) });
  const hy = entropyOf({ n, dim: yDim, data: columns(data, n, dim, xDim, dim) });
  const hxy = entropyOf({ n, dim, data });
  return hx + hy - hxy;
}

// ---------------------------------------------------------------------------------------------------------
// Gaussian

/**
 * ½ log(det S_x det S_y / det S) with S the scatter matrix (the factors n and the column scales cancel).
 * correction = ahmed-gokhale subtracts its exact Gaussian bias ½[W(d_x) + W(d_y) − W(d)], W(m) =
 * Σ_{i=1}^{m} ψ((n − i)/2) (E log det of a Wishart_m(n − 1, Σ) scatter is log det Σ + m log 2 + W(m);
 * Ahmed & Gokhale 1989): it is then the difference of three unbiased entropy estimates, so unbiased.
 */
function gaussianMutualInformationEstimate(sample: Sample, { correction, copula }: { correction: 'ahmed-gokhale' | 'none'; copula: Copula }): number {
  const id = 'mi-gaussian';
  const { data, n, xDim, yDim } = prepared(id, sample, copula);
  const dim = xDim + yDim;
  if (n <= dim) throw new EstimateError('too-few-points', `${id}: a ${dim}-dimensional covariance needs n ≥ ${dim + 1} points, but n = ${n}`);
  const scatter = scatterMatrix({ n, dim, data }, new Float64Array(dim));
  // The joint first: when it is positive definite, so are its diagonal blocks, so errors name joint columns.
  const logDetJoint = logDeterminantSpd(scatter, dim, n, id);
  const block = (from: number, to: number): Float64Array => {
    const width = to - from;
    const out = new Float64Array(width * width);
    for (let r = 0; r < width; r++) for (let c = 0; c < width; c++) out[r * width + c] = scatter[(from + r) * dim + from + c];
    return out;
  };
  const logDetX = logDeterminantSpd(block(0, xDim), xDim, n, id);
  const logDetY = logDeterminantSpd(block(xDim, dim), yDim, n, id);
  const plugIn = 0.5 * (logDetX + logDetY - logDetJoint);
  if (correction === 'none') return plugIn;
  return plugIn - 0.5 * (wishartLogDetShift(n, xDim) + wishartLogDetShift(n, yDim) - wishartLogDetShift(n, dim));
}

// ---------------------------------------------------------------------------------------------------------
// From any entropy estimator

const ENTROPY_DEFAULT = 'kozachenko-leonenko';

/**
 * The entropy estimators mi-from-entropies can use: every built-in one, taken from the family modules the
 * registry (estimators/index.ts) is built from. Not from the registry itself: the registry lists this
 * module's estimators, and importing it here would make an import cycle that fails whenever this file is
 * loaded first. So estimators added at run time (user modules) are not offered here.
 */
const entropyEstimatorList: readonly Estimator[] = [
  ...histogramEstimators,
  ...spacingEstimators,
  ...nearestNeighbourEstimators,
  ...kernelEstimators,
  ...parametricEstimators,
  // The joint (X, Y) has d ≥ 2: a 1-D-only method (the spacing estimators) could never give H(X,Y).
].filter((e) => e.quantity === 'entropy' && e.dims[1] >= 2);

function entropyEstimatorIds(): string[] {
  return entropyEstimatorList.map((e) => e.id);
}

const entropySetting = {
  name: 'entropy',
  meaning: 'the entropy estimator used for H(X), H(Y) and H(X,Y): a built-in entropy estimator for d ≥ 2, with its default settings',
  default: ENTROPY_DEFAULT,
  kind: 'choice',
  choices: entropyEstimatorIds(),
} as const satisfies SettingSpec;

/** The entropy estimator `entropy` names (one of the setting's choices) and its settings: defaults, and our k where it has one. */
function innerEstimator(entropy: string, k: number): { inner: Estimator; settings: Settings } {
  const inner = entropyEstimatorList.find((e) => e.id === entropy)!;
  return { inner, settings: validateSettings(inner.id, inner.settings, inner.settings.some((s) => s.name === 'k') ? { k } : {}) };
}

function fromEntropies(sample: Sample, { entropy, k, copula }: { entropy: string; k: number; copula: Copula }): number {
  const id = 'mi-from-entropies';
  const { inner, settings } = innerEstimator(entropy, k);
  const { data, n, xDim, yDim } = prepared(id, sample, copula);
  const dim = xDim + yDim;
  const [minDim, maxDim] = inner.dims;
  for (const [part, d] of [
    ['X', xDim],
    ['Y', yDim],
    ['(X, Y)', dim],
  ] as const) {
    if (d < minDim || d > maxDim) {
      const range = maxDim === Infinity ? `d ≥ ${minDim}` : minDim === maxDim ? `d = ${minDim}` : `${minDim} ≤ d ≤ ${maxDim}`;
      throw new EstimateError(
        'dimension',
        `${id}: entropy=${inner.id} supports ${range}, but ${part} has d = ${d}; choose an entropy estimator for any dimension`,
      );
    }
  }
  const entropyOf = (part: Sample): number => inner.estimate(part, settings);
  const hx = entropyOf({ n, dim: xDim, data: columns(data, n, dim, 0, xDim) });
  const hy = entropyOf({ n, dim: yDim, data: columns(data, n, dim, xDim, dim) });
  const hxy = entropyOf({ n, dim, data });
  return hx + hy - hxy;
}

// ---------------------------------------------------------------------------------------------------------

export const mutualInformationEstimators: Estimator[] = [
  ksgEstimator(1),
  ksgEstimator(2),
  defineEstimator({
    id: 'mi-histogram',
    family: 'histogram',
    quantity: 'mutual-information',
    summary: 'plug-in H(X) + H(Y) − H(X,Y) on one product grid of equal-width bins, optional Miller–Madow terms',
    settings: [
      {
        name: 'bins',
        meaning: 'bin rule (applied with the joint dimension), or a number of bins per coordinate',
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
      {
        name: 'correction',
        meaning: 'none, or miller-madow: add (occupied bins − 1)/(2n) to each of the three entropies',
        default: 'none',
        kind: 'choice',
        choices: ['none', 'miller-madow'],
      },
      COPULA_SETTING,
    ],
    dims: [2, Infinity],
    reference:
      'Plug-in estimate on a partition, e.g. Moddemeijer, R. (1989). On estimation of entropy and mutual information of continuous distributions. Signal Processing 16(3), 233–248; ' +
      'Miller, G. A. (1955), Note on the bias of information estimates; bin rules as in the histogram entropy estimator.',
    tuning: binGrid,
    defaultFor: IN_DEFAULT_SETS,
    estimate: histogramMutualInformation,
  }),
  defineEstimator({
    id: 'mi-kernel',
    family: 'kernel',
    quantity: 'mutual-information',
    summary: 'Ĥ(X) + Ĥ(Y) − Ĥ(X,Y) with the leave-one-out Gaussian-kernel entropy estimator',
    settings: [
      {
        name: 'bandwidth',
        meaning:
          'bandwidth rule for each of the three kernel estimates, or a number (data units for a 1-D part, on the (0, 1) scale rank/(n+1) with copula=rank; whitened units otherwise)',
        default: 'silverman',
        kind: 'choice-or-number',
        choices: BANDWIDTH_RULES,
        min: 0,
        minExclusive: true,
      },
      {
        name: 'scale',
        meaning: 'multiplies each bandwidth a rule gives; ignored with a numeric bandwidth',
        default: 1,
        kind: 'number',
        min: 0,
        minExclusive: true,
      },
      COPULA_SETTING,
    ],
    dims: [2, Infinity],
    reference:
      'Moon, Y.-I., Rajagopalan, B. & Lall, U. (1995). Estimation of mutual information using kernel density estimators. Physical Review E 52(3), 2318–2321; ' +
      `entropy estimates as in the kernel estimator (${kernelEstimator.reference.split(';')[0]}).`,
    tuning: bandwidthGrid,
    defaultFor: IN_DEFAULT_SETS,
    estimate: kernelMutualInformation,
    lacks: {
      // A numeric bandwidth of a one-dimensional part is in data units (with copula=rank, on the rank scale).
      scale: (settings) =>
        typeof settings.bandwidth === 'number' && settings.copula !== 'rank'
          ? `bandwidth=${settings.bandwidth} is in data units for a one-dimensional X or Y, which do not change with the data's unit`
          : undefined,
    },
  }),
  defineEstimator({
    id: 'mi-gaussian',
    family: 'parametric',
    quantity: 'mutual-information',
    summary: 'MI of the fitted normal law, ½ log(det Σ̂x det Σ̂y / det Σ̂), unbiased under normality by default',
    settings: [GAUSSIAN_CORRECTION_SETTING, COPULA_SETTING],
    dims: [2, Infinity],
    reference:
      'Cover, T. M. & Thomas, J. A. (2006). Elements of Information Theory, 2nd ed., Sec. 8.5 (Gaussian MI); bias term from Ahmed, N. A. & Gokhale, D. V. (1989), IEEE Trans. Inf. Theory 35(3), 688–692.',
    // No tuning grid: nothing to smooth; the correction picks an estimator.
    defaultFor: IN_DEFAULT_SETS,
    estimate: gaussianMutualInformationEstimate,
  }),
  defineEstimator({
    id: 'mi-from-entropies',
    family: 'entropy-combination',
    quantity: 'mutual-information',
    summary: 'Ĥ(X) + Ĥ(Y) − Ĥ(X,Y) with any built-in entropy estimator (default Kozachenko–Leonenko)',
    settings: [
      entropySetting,
      { name: 'k', meaning: 'neighbour order, passed to the entropy estimator when it has a k setting', default: KSG_DEFAULT_K, kind: 'integer', min: 1 },
      COPULA_SETTING,
    ],
    dims: [2, Infinity],
    reference:
      'Cover, T. M. & Thomas, J. A. (2006). Elements of Information Theory, 2nd ed., Secs. 8.5–8.6: I(X;Y) = h(X) + h(Y) − h(X,Y); entropies by the chosen estimator (see its own reference).',
    // The k grid of the entropy estimator used (none when it has no k): k is all this estimator passes on.
    tuning(base, n) {
      const { inner, settings } = innerEstimator(base.entropy, base.k);
      return (inner.tuning?.(settings, n) ?? []).filter((axis): axis is { setting: 'k'; values: readonly number[] } => axis.setting === 'k');
    },
    defaultFor: IN_DEFAULT_SETS,
    estimate: fromEntropies,
    lacks: {
      // Ĥ(X, Y) by nearest neighbours uses distances that mix X's and Y's units; the histogram (per-coordinate
      // bin rules), kernel (whitened) and Gaussian entropies of (X, Y) follow each coordinate's scale.
      separateScale: (settings) =>
        settings.copula !== 'rank' && nearestNeighbourEstimators.some((e) => e.id === (settings.entropy ?? ENTROPY_DEFAULT))
          ? `entropy=${String(settings.entropy ?? ENTROPY_DEFAULT)} measures (X, Y) by distances that add X's and Y's units, so rescaling X alone changes Ĥ(X, Y) by more than log|c| (use copula=rank)`
          : undefined,
    },
  }),
];

export const registration: EstimatorFile = { catalogOrder: 60, estimators: mutualInformationEstimators };
