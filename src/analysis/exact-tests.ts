/**
 * Exact tests on counts, for comparisons that one huge value must not sway:
 *
 *   signTest(12, 3)          // 12 replicates worse, 3 better (ties dropped): two-sided p from Binomial(15, ½)
 *   fisherExact(3, 27, 0, 30) // failures 3 of 30 against 0 of 30 in independent runs
 *
 * The sign test (e.g. Conover, Practical Nonparametric Statistics, 3rd ed., 1999, §3.4; reference from
 * memory) doubles the smaller tail of Binomial(m, ½). On paired failures, where one run failed and the other
 * did not, it is the exact McNemar test (McNemar, Psychometrika 12:153–157, 1947). Fisher's exact test sums
 * the hypergeometric probabilities of every table at most as likely as the observed one (the two-sided rule
 * SciPy's fisher_exact uses, with its relative tolerance 1 + 1e-7 for ties in probability).
 */
import { logGamma, regularizedBeta } from '../math/special.js';

export interface SignTest {
  /** Replicates where the first quantity is larger (worse), smaller (better), equal (dropped). */
  above: number;
  below: number;
  ties: number;
  /** Two-sided. */
  p: number;
}

/** P(X ≤ k) for X ~ Binomial(m, ½), by the regularized incomplete beta I_½(m − k, k + 1). */
function binomialHalfCdf(k: number, m: number): number {
  if (k < 0) return 0;
  if (k >= m) return 1;
  return regularizedBeta(0.5, m - k, k + 1);
}

/** Two-sided exact sign test of `above` against `below` (ties already dropped). */
export function signTest(above: number, below: number, ties = 0): SignTest {
  const m = above + below;
  const p = m === 0 ? 1 : Math.min(1, 2 * binomialHalfCdf(Math.min(above, below), m));
  return { above, below, ties, p };
}

/** One-sided exact sign test: P(X ≥ above) for X ~ Binomial(above + below, ½), the chance of so many or more above. */
export function signTestAbove(above: number, below: number): number {
  // By symmetry P(X ≥ a) = P(X ≤ m − a): the lower tail keeps its digits where 1 − cdf would lose them.
  return above + below === 0 ? 1 : binomialHalfCdf(below, above + below);
}

/** Sign test on differences: positive ones against negative ones, zeros and non-finite values dropped. */
export function signTestOf(differences: ArrayLike<number>): SignTest {
  let above = 0;
  let below = 0;
  let ties = 0;
  for (let i = 0; i < differences.length; i++) {
    const d = differences[i];
    if (d > 0) above++;
    else if (d < 0) below++;
    else if (d === 0) ties++;
  }
  return signTest(above, below, ties);
}

function logChoose(n: number, k: number): number {
  return logGamma(n + 1) - logGamma(k + 1) - logGamma(n - k + 1);
}

/**
 * Two-sided Fisher exact test of the 2×2 table [[a, b], [c, d]] (rows: runs; columns: failed, succeeded).
 */
export function fisherExact(a: number, b: number, c: number, d: number): number {
  const rowA = a + b;
  const rowC = c + d;
  const failed = a + c;
  const total = rowA + rowC;
  const logDenominator = logChoose(total, failed);
  const logProbability = (x: number) => logChoose(rowA, x) + logChoose(rowC, failed - x) - logDenominator;
  const observed = logProbability(a);
  const low = Math.max(0, failed - rowC);
  const high = Math.min(rowA, failed);
  let p = 0;
  for (let x = low; x <= high; x++) {
    const lp = logProbability(x);
    if (lp <= observed + Math.log1p(1e-7)) p += Math.exp(lp);
  }
  return Math.min(1, p);
}
