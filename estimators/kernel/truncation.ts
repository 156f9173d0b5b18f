/**
 * Where the Gaussian kernel sum may be cut off.
 *
 * A point's kernel sum is S_i = Σ_{j≠i} exp(−u_ij²/2), u_ij = |x_i − x_j|/h. Dropping every term with
 * u_ij > c drops at most n − 1 terms of at most exp(−c²/2) each, so whenever the kept part is ≥ 1 the
 * relative error of S_i (and hence the absolute error of log S_i and of the entropy) is at most
 * n·exp(−c²/2). Choosing c = sqrt(2 ln(n/ε)) makes that bound ε. Points whose kept part is below 1 (nothing
 * near them at the bandwidth scale) are recomputed without truncation, in log space.
 */

/** Bound on the error of each log kernel sum, and so on the entropy, from cutting off far neighbours. */
export const TRUNCATION_TOLERANCE = 1e-11;

/** The cutoff c in bandwidths: n·exp(−c²/2) = TRUNCATION_TOLERANCE (about 8.3 at n = 10⁴, 8.8 at 10⁶). */
export function kernelCutoff(n: number): number {
  return Math.sqrt(2 * Math.log(Math.max(n, 2) / TRUNCATION_TOLERANCE));
}
