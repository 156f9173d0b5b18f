/**
 * The leave-one-out resubstitution entropy estimate with a Gaussian kernel,
 *   Ĥ = −(1/n) Σ_i log f̂₋ᵢ(x_i),   f̂₋ᵢ(x) = 1/(n−1) Σ_{j≠i} K_H(x − x_j),
 * (Ahmad & Lin 1976; leave-one-out form: Joe 1989, Hall & Morton 1993), and the choice of its bandwidth.
 *
 * d = 1: K_H is the N(0, h²) density, h in data units.
 * d > 1: K_H is the N(0, h²Σ̂) density. On whitened points z = L⁻¹(x − x̄) this is a spherical kernel of
 *   width h, and Ĥ(x) = Ĥ(z) + ½ log det Σ̂ exactly, so h is in whitened units.
 *
 * Every path takes log f̂₋ᵢ(x_i) in log space, relative to the point's nearest neighbour, so a point many
 * bandwidths from all others (a heavy tail, an outlier) gets its true log density, however far below the
 * double range f̂₋ᵢ(x_i) itself is; Ĥ is then large, as the definition makes it, rather than refused.
 */
import type { Sample } from '../../src/core/contracts.js';
import { EstimateError } from '../../src/core/errors.js';
import { checkFiniteValues, sortedValues } from '../../src/core/sample.js';
import { type BandwidthRule, univariateRuleBandwidth, whitenedRuleBandwidth } from './bandwidth.js';
import { minimizeBounded } from './minimize.js';
import { type MultivariatePath, multivariateLogKernelSums } from './multivariate.js';
import { type UnivariatePath, univariateLogKernelSums } from './univariate.js';
import { whiten } from './whiten.js';
import { sharedSortedValues } from '../shared/sorted-values.js';
import { columnExtremes, spreadUnitOfExtremes, timesPowerOfTwo, toUnit } from '../shared/scaling.js';

export type BandwidthSetting = BandwidthRule | 'likelihood-cv' | number;

/** A sample made ready for repeated evaluation at different bandwidths. */
export interface KernelData {
  n: number;
  dim: number;
  /**
   * d = 1: the sorted values, in units of 2^unitExponent data units. d > 1: the whitened points,
   * row-major.
   */
  points: Float64Array;
  /**
   * log of the Jacobian from `points` back to data units: ½ log det Σ̂ for d > 1 (whitening), and
   * unitExponent·log 2 for d = 1.
   */
  halfLogDet: number;
  /**
   * d = 1: the points are the data divided by 2^unitExponent, a power of two near their spread when that
   * spread is subnormal or near the top of the double range (estimators/shared/scaling.ts), else 0. Bandwidths
   * of d = 1 are in these point units inside this module; `toDataUnits` and `fromDataUnits` convert.
   * Always 0 for d > 1, where the whitened unit already absorbs each column's scale.
   */
  unitExponent: number;
}

/** A bandwidth in the prepared points' units as data units (d = 1; whitened units are unchanged). */
export function toDataUnits(data: KernelData, bandwidth: number): number {
  return timesPowerOfTwo(bandwidth, data.unitExponent);
}

/** A bandwidth in data units (d = 1; whitened units unchanged) as the prepared points' units. */
export function fromDataUnits(data: KernelData, bandwidth: number): number {
  return timesPowerOfTwo(bandwidth, -data.unitExponent);
}

/** likelihood-cv searches log h over [rule − log 16, rule + log 4], to about 0.1% in h. */
export const CV_SEARCH_BELOW = Math.log(16);
export const CV_SEARCH_ABOVE = Math.log(4);
export const CV_SEARCH_TOLERANCE = 1e-3;

export function minimumSampleSize(dim: number): number {
  return dim === 1 ? 3 : dim + 2;
}

/** Checks the sample and sorts (d = 1) or whitens (d > 1) it. */
export function prepareKernelData(sample: Sample): KernelData {
  const { n, dim } = sample;
  const needed = minimumSampleSize(dim);
  if (n < needed) {
    throw new EstimateError('too-few-points', `kernel: needs at least ${needed} points in ${dim} dimension${dim === 1 ? '' : 's'}, got ${n}`);
  }
  checkFiniteValues('kernel', sample);
  const data = sample.data.subarray(0, n * dim);
  const { minimum, maximum } = columnExtremes(data, n, dim);
  for (let k = 0; k < dim; k++) {
    if (minimum[k] === maximum[k]) {
      throw new EstimateError(
        dim === 1 ? 'ties' : 'invalid-input',
        dim === 1
          ? `kernel: all ${n} values are equal (${minimum[0]}), so the density is a point mass; the kernel estimate needs spread data`
          : `kernel: column ${k + 1} is constant, so the sample covariance is singular; drop the column (the entropy of a point mass is −∞)`,
      );
    }
  }
  // Spreads that are subnormal or near the top of the double range are first brought near 1 by a power of
  // two per column (exact), so variances neither underflow to 0 nor overflow, and values near the top of
  // the range are moved near 0 so means do not overflow; the unit's log is added back.
  const unit = spreadUnitOfExtremes(minimum, maximum, 'column');
  if (dim === 1) {
    // The unit is an increasing map, so sorting after it gives the same order.
    // Shared with the other estimators of the draw (read-only); a unit change sorts its own copy.
    const sorted = unit ? sortedValues({ n, dim, data: toUnit(data, n, dim, unit) }) : sharedSortedValues(data);
    const unitExponent = unit ? unit.exponents[0] : 0;
    return { n, dim, points: sorted, halfLogDet: unit ? unit.logJacobian : 0, unitExponent };
  }
  const { z, halfLogDet } = whiten(unit ? { n, dim, data: toUnit(data, n, dim, unit) } : sample);
  return { n, dim, points: z, halfLogDet: halfLogDet + (unit ? unit.logJacobian : 0), unitExponent: 0 };
}

/**
 * Which way the kernel sums are computed; 'auto' (the default) picks by estimated cost. Forcing a path is for
 * tests and benchmarks: every path computes the same sums, within the error bounds in univariate.ts and
 * multivariate.ts.
 */
export interface KernelPaths {
  univariate?: UnivariatePath;
  multivariate?: MultivariatePath;
}

/**
 * log f̂₋ᵢ(x_i) for every point: in sorted order for d = 1, input order for d > 1. Densities in data units;
 * the bandwidth in the prepared points' units (as chooseBandwidth gives it).
 */
export function leaveOneOutLogDensities(data: KernelData, bandwidth: number, paths: KernelPaths = {}): Float64Array {
  const { n, dim, points, halfLogDet } = data;
  const logSums =
    dim === 1
      ? univariateLogKernelSums(points, bandwidth, paths.univariate).logSums
      : multivariateLogKernelSums(points, n, dim, bandwidth, paths.multivariate).logSums;
  const logNormaliser = Math.log(n - 1) + dim * Math.log(bandwidth) + (dim / 2) * Math.log(2 * Math.PI) + halfLogDet;
  for (let i = 0; i < n; i++) logSums[i] -= logNormaliser;
  return logSums;
}

/** Ĥ at a bandwidth, unchecked: +∞ or NaN where a log density or their sum overflows (see kernelEntropy). */
export function kernelEntropyAt(data: KernelData, bandwidth: number, paths: KernelPaths = {}): number {
  const logDensities = leaveOneOutLogDensities(data, bandwidth, paths);
  let sum = 0;
  for (let i = 0; i < data.n; i++) sum += logDensities[i];
  return -sum / data.n;
}

export function ruleBandwidth(data: KernelData, rule: BandwidthRule): number {
  return data.dim === 1 ? univariateRuleBandwidth(rule, data.points) : whitenedRuleBandwidth(rule, data.n, data.dim);
}

/**
 * The bandwidth maximising the leave-one-out log-likelihood Σ log f̂₋ᵢ(x_i), i.e. minimising Ĥ itself, by
 * Brent's method on t = log(h / h_silverman). Searching in t relative to the rule keeps the search
 * identical under a change of units. If the minimum lies at an end of the interval (for instance tied
 * values pull h towards 0), that end is returned.
 */
export function likelihoodCrossValidatedBandwidth(data: KernelData): number {
  const reference = ruleBandwidth(data, 'silverman');
  const objective = (t: number): number => kernelEntropyAt(data, reference * Math.exp(t));
  const best = minimizeBounded(objective, -CV_SEARCH_BELOW, CV_SEARCH_ABOVE, CV_SEARCH_TOLERANCE);
  return reference * Math.exp(best.x);
}

/**
 * The numeric bandwidth a setting stands for on this sample, in the prepared points' units (data units for
 * d = 1 unless `unitExponent` says otherwise, whitened for d > 1); a numeric setting (> 0 and finite, as the
 * estimators' `bandwidth` setting declares) is read in data units.
 */
export function chooseBandwidth(data: KernelData, setting: BandwidthSetting): number {
  if (typeof setting === 'number') return fromDataUnits(data, setting);
  return setting === 'likelihood-cv' ? likelihoodCrossValidatedBandwidth(data) : ruleBandwidth(data, setting);
}

/**
 * Ĥ at a bandwidth. It is finite whenever every log f̂₋ᵢ(x_i) and their sum fit in a double; it is not only
 * when some point's squared distance to its nearest neighbour, in bandwidths, exceeds the double range
 * (about 1.3e154 bandwidths away: the data span more than double precision can difference, or the
 * bandwidth is that small against a gap), or when the rule's bandwidth itself overflows. That is reported
 * as a 'numeric' failure.
 */
export function kernelEntropy(data: KernelData, bandwidth: number, paths: KernelPaths = {}): number {
  const entropy = kernelEntropyAt(data, bandwidth, paths);
  if (!Number.isFinite(entropy)) {
    const units = data.dim === 1 ? 'data units' : 'whitened units';
    throw new EstimateError(
      'numeric',
      `kernel: the estimate overflows double precision (${entropy}) with bandwidth ${formatBandwidth(toDataUnits(data, bandwidth))} (${units}): some point is too many bandwidths from its nearest neighbour for (distance/bandwidth)² to be a double, or the data's range overflows; rescale the data or use a larger bandwidth`,
    );
  }
  return entropy;
}

function formatBandwidth(value: number): string {
  return Number(value.toPrecision(3)).toString();
}
