/**
 * Normal-reference bandwidth rules.
 *
 * d = 1, in data units: Silverman's rule 0.9·min(σ̂, IQR/1.34)·n^(−1/5) (Silverman 1986, Density Estimation
 * for Statistics and Data Analysis, eq. 3.31) and Scott's 1.06·σ̂·n^(−1/5) (Scott 1992, Multivariate Density
 * Estimation). d > 1, in whitened units (identity sample covariance): Silverman's (4/(d+2))^(1/(d+4))·
 * n^(−1/(d+4)) and Scott's n^(−1/(d+4)). σ̂ is the sample standard deviation with divisor n − 1; the IQR
 * uses linearly interpolated quantiles (Hyndman & Fan 1996, type 7).
 */
import { EstimateError } from '../../src/core/errors.js';
import { quantileOfSorted, squaredDeviations } from '../../src/math/moments.js';

export type BandwidthRule = 'silverman' | 'scott';

/**
 * A one-dimensional rule's bandwidth in data units, from sorted values. When the IQR is 0 but σ̂ is not
 * (more than half the sample on one value), Silverman's rule uses σ̂ alone (common practice).
 */
export function univariateRuleBandwidth(rule: BandwidthRule, sorted: Float64Array): number {
  const n = sorted.length;
  const sd = Math.sqrt(squaredDeviations(sorted).sumOfSquares / (n - 1));
  if (!(sd > 0)) {
    throw new EstimateError('ties', `kernel: all ${n} values are equal, so the ${rule} bandwidth is 0; the kernel estimate needs spread data`);
  }
  if (rule === 'scott') return 1.06 * sd * Math.pow(n, -1 / 5);
  const iqrScale = (quantileOfSorted(sorted, 0.75) - quantileOfSorted(sorted, 0.25)) / 1.34;
  const spread = iqrScale > 0 ? Math.min(sd, iqrScale) : sd;
  return 0.9 * spread * Math.pow(n, -1 / 5);
}

/** A rule's bandwidth for d > 1 in whitened units (the data's sample covariance is the identity). */
export function whitenedRuleBandwidth(rule: BandwidthRule, n: number, dim: number): number {
  const nFactor = Math.pow(n, -1 / (dim + 4));
  return rule === 'scott' ? nFactor : Math.pow(4 / (dim + 2), 1 / (dim + 4)) * nFactor;
}
