/**
 * The leave-one-out resubstitution entropy estimate with a Gaussian kernel,
 *   Ĥ = −(1/n) Σ_i log f̂₋ᵢ(x_i),   f̂₋ᵢ(x) = 1/(n−1) Σ_{j≠i} K_H(x − x_j),
 * (Ahmad & Lin 1976; leave-one-out form: Joe 1989, Hall & Morton 1993), and the choice of its bandwidth.
 *
 * d = 1: K_H is the N(0, h²) density, h in data units.
 * d > 1: K_H is the N(0, h²Σ̂) density. On whitened points z = L⁻¹(x − x̄) this is a spherical kernel of
 *   width h, and Ĥ(x) = Ĥ(z) + ½ log det Σ̂ exactly, so h is in whitened units.
 */
import type { Sample } from '../../src/contracts.js';
import { EstimateError } from '../../src/errors.js';
import { checkFiniteValues, sortedValues } from '../../src/sample.js';
import { type BandwidthRule, univariateRuleBandwidth, whitenedRuleBandwidth } from './bandwidth.js';
import { minimizeBounded } from './minimize.js';
import { multivariateLogKernelSums } from './multivariate.js';
import { univariateLogKernelSums } from './univariate.js';
import { whiten } from './whiten.js';

export type BandwidthSetting = BandwidthRule | 'likelihood-cv' | number;

/** A sample made ready for repeated evaluation at different bandwidths. */
export interface KernelData {
  n: number;
  dim: number;
  /** d = 1: the sorted values. d > 1: the whitened points, row-major. */
  points: Float64Array;
  /** ½ log det Σ̂ for d > 1; 0 for d = 1. */
  halfLogDet: number;
}

/** Below this log density (the smallest normal double, 2^−1022) f̂₋ᵢ(x_i) counts as having underflowed. */
export const LOG_DENSITY_FLOOR = -1022 * Math.LN2;

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
  if (dim === 1) return { n, dim, points: sortedValues(sample), halfLogDet: 0 };
  const { z, halfLogDet } = whiten(sample);
  return { n, dim, points: z, halfLogDet };
}

/** log f̂₋ᵢ(x_i) for every point: in sorted order for d = 1, input order for d > 1. Data units. */
export function leaveOneOutLogDensities(data: KernelData, bandwidth: number): Float64Array {
  const { n, dim, points, halfLogDet } = data;
  const logSums = dim === 1 ? univariateLogKernelSums(points, bandwidth).logSums : multivariateLogKernelSums(points, n, dim, bandwidth).logSums;
  const logNormaliser = Math.log(n - 1) + dim * Math.log(bandwidth) + (dim / 2) * Math.log(2 * Math.PI) + halfLogDet;
  for (let i = 0; i < n; i++) logSums[i] -= logNormaliser;
  return logSums;
}

export interface KernelEntropy {
  entropy: number;
  /** Points whose f̂₋ᵢ(x_i) is below LOG_DENSITY_FLOOR. */
  underflowCount: number;
  /** The smallest log f̂₋ᵢ(x_i). */
  minLogDensity: number;
}

export function kernelEntropyAt(data: KernelData, bandwidth: number): KernelEntropy {
  const logDensities = leaveOneOutLogDensities(data, bandwidth);
  let sum = 0;
  let underflowCount = 0;
  let minLogDensity = Infinity;
  for (let i = 0; i < data.n; i++) {
    sum += logDensities[i];
    if (logDensities[i] < LOG_DENSITY_FLOOR) underflowCount++;
    if (logDensities[i] < minLogDensity) minLogDensity = logDensities[i];
  }
  return { entropy: -sum / data.n, underflowCount, minLogDensity };
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
  const objective = (t: number): number => kernelEntropyAt(data, reference * Math.exp(t)).entropy;
  const best = minimizeBounded(objective, -CV_SEARCH_BELOW, CV_SEARCH_ABOVE, CV_SEARCH_TOLERANCE);
  return reference * Math.exp(best.x);
}

/** The numeric bandwidth a setting stands for on this sample (data units for d = 1, whitened for d > 1). */
export function chooseBandwidth(data: KernelData, setting: BandwidthSetting): number {
  if (typeof setting === 'number') {
    if (!(setting > 0) || !Number.isFinite(setting)) {
      throw new EstimateError('invalid-input', `kernel: bandwidth=${setting} is not allowed; it must be silverman, scott, likelihood-cv or a number > 0`);
    }
    return setting;
  }
  switch (setting) {
    case 'silverman':
    case 'scott':
      return ruleBandwidth(data, setting);
    case 'likelihood-cv':
      return likelihoodCrossValidatedBandwidth(data);
    default:
      throw new EstimateError('invalid-input', `kernel: bandwidth=${String(setting)} is not allowed; it must be silverman, scott, likelihood-cv or a number > 0`);
  }
}

/**
 * Ĥ at a bandwidth, refusing samples where some f̂₋ᵢ(x_i) is below the double range. The sums are taken in
 * log space, so such a value could be computed, but it comes from a point many bandwidths from all others
 * and would dominate Ĥ with hundreds of nats; it is reported as a failure instead, with the bandwidth that
 * would avoid it: log f̂ ≈ −(distance/h)²/2 there, so scaling h by sqrt(min log f̂ / floor) suffices.
 */
export function kernelEntropy(data: KernelData, bandwidth: number): number {
  const { entropy, underflowCount, minLogDensity } = kernelEntropyAt(data, bandwidth);
  if (underflowCount > 0) {
    const units = data.dim === 1 ? 'data units' : 'whitened units';
    const enough = bandwidth * Math.sqrt(minLogDensity / LOG_DENSITY_FLOOR);
    throw new EstimateError(
      'numeric',
      `kernel: the leave-one-out density underflows (below 2^-1022) at ${underflowCount} of ${data.n} points with bandwidth ${formatBandwidth(bandwidth)} (${units}): they lie too far from every other point (outliers or heavy tails); use a larger bandwidth, about ${formatBandwidth(enough)} or more`,
    );
  }
  if (!Number.isFinite(entropy)) {
    throw new EstimateError('numeric', `kernel: the estimate is not finite (${entropy}) with bandwidth ${bandwidth}; the data's range may overflow double precision, so rescale it`);
  }
  return entropy;
}

function formatBandwidth(value: number): string {
  return Number(value.toPrecision(3)).toString();
}
