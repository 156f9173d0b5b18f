/**
 * Predicted seconds of one estimate, from the estimator, its settings, n and d: what `hhat estimate` and
 * `hhat advise` use to decide, before spending the time, which estimators to run on every row of a large
 * file and which on a subsample.
 *
 *   predictedSeconds(parseEstimatorSpec('kernel'), 5_000_000, 5)        // ≈ 1.9e5: a kernel sum is ~n² in d > 3
 *   rowsWithin(parseEstimatorSpec('kernel'), 5_000_000, 5, 30)           // ≈ 62 000 rows fit in 30 s
 *
 * The forms follow each method's work: sorting (spacing estimators, histogram keys) and kd-tree searches
 * (nearest-neighbour estimators, KSG) grow like n log n, the kd-tree's cost per point roughly doubling per
 * added dimension until it is no better than comparing every pair; a d = 1 kernel sum is binned and
 * convolved (linear in n), and so is a d = 2 or 3 one on a grid once n is large enough; a d ≥ 4 kernel sum
 * visits the pairs within its cutoff radius, nearly all of the n² at the bandwidths the rules give. The constants were measured with Node 20 on the 2-core machine this
 * project is developed on (bench/large-file.ts --calibrate prints predicted against measured seconds), on
 * Gaussian-mixture data, and round up: a prediction is meant to err on the slow side. Being a fixed
 * function of (estimator, settings, n, d), the same command makes the same choice on every machine, so the
 * numbers it prints do not depend on the machine's load.
 */
import type { ConfiguredEstimator } from '../../estimators/index.js';
import type { Settings } from '../core/contracts.js';

const MICROSECOND = 1e-6;

/** Seconds of an all-points k-nearest-neighbour search with neighbour order k (kd-tree, or all pairs in high d). */
export function knnSearchSeconds(n: number, dim: number, k: number): number {
  const orderFactor = 1 + k / 6;
  const treePerPoint = 0.2 * MICROSECOND * Math.pow(2, dim) * Math.max(1, Math.log2(Math.max(n, 2)) / 20);
  const allPairsPerPoint = 1.5e-9 * n * dim;
  return n * orderFactor * Math.min(treePerPoint, Math.max(allPairsPerPoint, 0.4 * MICROSECOND));
}

/**
 * Per point, the grid path of d = 2 and 3 kernel sums (estimators/kernel/grid.ts: a window of 16^d nodes
 * written and read per point): measured 3.4 and 16 µs per point at n = 10⁵ (bench/kernel.ts, on a loaded
 * machine), rounded up.
 */
const KERNEL_GRID_PER_POINT: Record<number, number> = { 2: 5 * MICROSECOND, 3: 20 * MICROSECOND };

/**
 * Seconds of a leave-one-out kernel estimate: binned FFT sums in d = 1; in d = 2 and 3 the cheaper of the
 * grid (linear in n) and the pair sums within the cutoff, as the estimator itself chooses; pair sums beyond.
 */
export function kernelSeconds(n: number, dim: number, settings: Settings): number {
  const evaluations = settings.bandwidth === 'likelihood-cv' ? 15 : 1;
  const scale = typeof settings.scale === 'number' ? Math.max(1, settings.scale) : 1;
  if (dim === 1) return evaluations * (0.3 * MICROSECOND * n * scale + 0.05 * MICROSECOND * n * Math.log2(Math.max(n, 2)));
  // A pair's distance costs d operations; whitening is a covariance (n·d²) and its Cholesky factor (d³).
  const perPair = 4.5e-9 * Math.max(1, dim / 3) * Math.min(Math.pow(scale, dim), 1e6);
  const pairs = perPair * n * n;
  const grid = KERNEL_GRID_PER_POINT[dim] === undefined ? Infinity : KERNEL_GRID_PER_POINT[dim] * n;
  return evaluations * (Math.min(pairs, grid) + MICROSECOND * n * dim) + whiteningSeconds(n, dim);
}

function histogramSeconds(n: number, dim: number): number {
  return 0.12 * MICROSECOND * n * dim + 0.02 * MICROSECOND * n * Math.log2(Math.max(n, 2));
}

/** A sample covariance (n·d² operations) and its Cholesky factor (d³). */
function whiteningSeconds(n: number, dim: number): number {
  return 2e-9 * n * dim * dim + 1e-9 * dim ** 3;
}

function gaussianSeconds(n: number, dim: number): number {
  return 0.03 * MICROSECOND * n * dim + whiteningSeconds(n, dim);
}

function numberSetting(settings: Settings, name: string, fallback: number): number {
  const value = settings[name];
  return typeof value === 'number' ? value : fallback;
}

/** Extra sizes that some quantities need: the X part of an MI sample, the Q sample's size of a divergence. */
export interface CostContext {
  xDim?: number;
  qN?: number;
}

/**
 * Predicted seconds for one estimate on n rows of d columns, or null for an estimator this model does not
 * know (a user's module): such an estimator is always run on every row.
 */
export function predictedSeconds(configured: ConfiguredEstimator, n: number, dim: number, context: CostContext = {}): number | null {
  const { settings } = configured;
  const id = configured.estimator.id;
  switch (id) {
    // The lattice estimator does what a histogram does: per column a sort (step detection) and a cell code, then one sort.
    case 'histogram':
    case 'lattice':
      return histogramSeconds(n, dim);
    case 'vasicek':
    case 'van-es':
    case 'ebrahimi':
      return 0.1 * MICROSECOND * n;
    case 'correa':
      return 0.2 * MICROSECOND * n;
    case 'kozachenko-leonenko':
      return knnSearchSeconds(n, dim, numberSetting(settings, 'k', 3));
    case 'kozachenko-leonenko-weighted':
      return knnSearchSeconds(n, dim, numberSetting(settings, 'k', 12));
    case 'kernel':
      return kernelSeconds(n, dim, settings);
    case 'gaussian':
    case 'mi-gaussian':
      return gaussianSeconds(n, dim);
    // mi-mixed: a joint search and counts in X and Y, as KSG; mi-discrete-continuous: per-label searches and two counts in Y
    // (inclusive, and strict for its tie check).
    case 'mi-mixed':
    case 'mi-discrete-continuous':
      return 2 * knnSearchSeconds(n, dim, numberSetting(settings, 'k', 5));
    case 'ksg1':
    case 'ksg2':
      // The joint search, then radius counts in the X and Y spaces.
      return 2 * knnSearchSeconds(n, dim, numberSetting(settings, 'k', 3)) + (settings.copula === 'rank' ? histogramSeconds(n, dim) : 0);
    case 'cmi-ksg':
      // The joint search, then radius counts in (X, Z), (Y, Z) and Z: measured 0.22 s at n = 20000, d = 3,
      // about 4 joint searches of this model.
      return 4 * knnSearchSeconds(n, dim, numberSetting(settings, 'k', 4)) + (settings.copula === 'rank' ? histogramSeconds(n, dim) : 0);
    case 'cmi-gaussian':
      // One covariance, four small log-determinants.
      return gaussianSeconds(n, dim) + 4e-9 * dim ** 3;
    case 'te-ksg': {
      // cmi-ksg on the embedding: 1 + history + sourceHistory columns.
      const width = 1 + numberSetting(settings, 'history', 1) + numberSetting(settings, 'sourceHistory', 1);
      return 4 * knnSearchSeconds(n, width, numberSetting(settings, 'k', 4)) + (settings.copula === 'rank' ? histogramSeconds(n, 2) : 0);
    }
    case 'te-gaussian': {
      const width = 1 + numberSetting(settings, 'history', 1) + numberSetting(settings, 'sourceHistory', 1);
      return gaussianSeconds(n, width) + 4e-9 * width ** 3;
    }
    case 'mi-histogram':
      return 2 * histogramSeconds(n, dim);
    case 'mi-kernel': {
      const xDim = context.xDim ?? 1;
      return kernelSeconds(n, xDim, settings) + kernelSeconds(n, dim - xDim, settings) + kernelSeconds(n, dim, settings);
    }
    case 'mi-from-entropies': {
      const xDim = context.xDim ?? 1;
      const inner = typeof settings.entropy === 'string' ? settings.entropy : 'kozachenko-leonenko';
      const part = (d: number): number => {
        if (inner === 'kernel') return kernelSeconds(n, d, {});
        if (inner === 'histogram') return histogramSeconds(n, d);
        if (inner === 'gaussian') return gaussianSeconds(n, d);
        if (inner.startsWith('kozachenko-leonenko')) return knnSearchSeconds(n, d, numberSetting(settings, 'k', 3));
        return 0.2 * MICROSECOND * n;
      };
      return part(xDim) + part(dim - xDim) + part(dim);
    }
    case 'knn-divergence': {
      const k = numberSetting(settings, 'k', 1);
      const m = context.qN ?? n;
      return knnSearchSeconds(n, dim, k) + knnSearchSeconds(m, dim, k) + knnSearchSeconds(n, dim, k) * 0.5;
    }
    case 'histogram-divergence':
      return histogramSeconds(n + (context.qN ?? n), dim);
    case 'gaussian-divergence':
      return gaussianSeconds(n + (context.qN ?? n), dim);
    default:
      return null;
  }
}

/**
 * n when `fits(n)`, else the largest m < n with `fits(m)` (fits must hold for small m and fail beyond some
 * point), rounded down to two significant digits so a stated subsample size reads as chosen.
 */
export function largestRowsWhere(n: number, fits: (m: number) => boolean): number {
  if (fits(n)) return n;
  let lo = 0;
  let hi = n;
  while (hi - lo > 1) {
    const mid = Math.floor((lo + hi) / 2);
    if (fits(mid)) lo = mid;
    else hi = mid;
  }
  return roundRowsDown(lo);
}

/**
 * The rows an estimator may use within `seconds`: n when its predicted time fits (or the model does not know
 * it), else the largest subsample that does (largestRowsWhere). For a divergence, P and Q shrink together:
 * their ratio is kept.
 */
export function rowsWithin(configured: ConfiguredEstimator, n: number, dim: number, seconds: number, context: CostContext = {}): number {
  const at = (m: number): number | null =>
    predictedSeconds(configured, m, dim, context.qN === undefined ? context : { ...context, qN: Math.round((context.qN * m) / n) });
  if (at(n) === null) return n;
  return largestRowsWhere(n, (m) => (at(m) ?? 0) <= seconds);
}

/** Predicted seconds of one benchmark replicate: every estimator once at n rows (those the model knows). */
export function predictedReplicateSeconds(configured: readonly ConfiguredEstimator[], n: number, dim: number): number {
  return configured.reduce((sum, c) => sum + (predictedSeconds(c, n, dim) ?? 0), 0);
}

/** A row count rounded down to two significant digits, so stated subsample sizes read as chosen, not computed. */
export function roundRowsDown(m: number): number {
  if (m < 100) return m;
  const unit = 10 ** (Math.floor(Math.log10(m)) - 1);
  return Math.floor(m / unit) * unit;
}

/** Seconds as people read them: 0.4 s, 12 s, 3.1 min, 2.5 h, 4 days. */
export function describeSeconds(seconds: number): string {
  if (seconds < 10) return `${Number(seconds.toPrecision(2))} s`;
  if (seconds < 120) return `${Math.round(seconds)} s`;
  if (seconds < 7200) return `${Number((seconds / 60).toPrecision(2))} min`;
  if (seconds < 2 * 86400) return `${Number((seconds / 3600).toPrecision(2))} h`;
  return `${Number((seconds / 86400).toPrecision(2))} days`;
}
