/**
 * Student t tests shared by the analyses that compare squared errors: `compare` (paired, and Welch's when the
 * draws differ) and the thinning verdicts of src/analysis/dependence.ts (paired). Two-sided p-values and
 * intervals from Student's t distribution (@stdlib).
 */
import { loadPackage } from '../core/vendor.js';

const tCdf = loadPackage<typeof import('@stdlib/stats-base-dists-t-cdf')>('@stdlib/stats-base-dists-t-cdf');
const tQuantile = loadPackage<typeof import('@stdlib/stats-base-dists-t-quantile')>('@stdlib/stats-base-dists-t-quantile');

/** The default level of intervals and tests. */
export const DEFAULT_LEVEL = 0.95;

/** The p quantile of Student's t with df degrees of freedom. */
export function studentQuantile(p: number, df: number): number {
  return tQuantile(p, df);
}

export interface TTest {
  kind: 'paired-t' | 'welch-t';
  /** Paired: mean of d_r. Welch: MSE_new − MSE_base. Positive means the new run has the larger squared error. */
  difference: number;
  se: number;
  df: number;
  t: number;
  /** Two-sided. */
  p: number;
  interval: [number, number];
  level: number;
  /** Paired: pairs used; Welch: successes in the new and base runs. */
  count: number | { next: number; base: number };
}

function finishTest(kind: TTest['kind'], difference: number, se: number, df: number, level: number, count: TTest['count']): TTest {
  if (se === 0) {
    // Every difference equal: no spread to test against, so the sign alone decides (p 0), or nothing changed (p 1).
    return {
      kind,
      difference,
      se,
      df,
      t: difference === 0 ? 0 : Math.sign(difference) * Infinity,
      p: difference === 0 ? 1 : 0,
      interval: [difference, difference],
      level,
      count,
    };
  }
  const t = difference / se;
  const p = Math.min(1, 2 * tCdf(-Math.abs(t), df));
  const half = tQuantile(1 - (1 - level) / 2, df) * se;
  return { kind, difference, se, df, t, p, interval: [difference - half, difference + half], level, count };
}

/** One-sample t test on paired differences (NaN entries are left out). Null with fewer than two. */
export function pairedTTest(differences: ArrayLike<number>, level = DEFAULT_LEVEL): TTest | null {
  const values = Array.from(differences).filter(Number.isFinite);
  const m = values.length;
  if (m < 2) return null;
  const mean = values.reduce((s, d) => s + d, 0) / m;
  const variance = values.reduce((s, d) => s + (d - mean) ** 2, 0) / (m - 1);
  return finishTest('paired-t', mean, Math.sqrt(variance / m), m - 1, level, m);
}

/** Welch's t test of mean(next) − mean(base) with Welch–Satterthwaite degrees of freedom. Null with fewer than two on a side. */
export function welchTTest(next: ArrayLike<number>, base: ArrayLike<number>, level = DEFAULT_LEVEL): TTest | null {
  const a = Array.from(next).filter(Number.isFinite);
  const b = Array.from(base).filter(Number.isFinite);
  if (a.length < 2 || b.length < 2) return null;
  const mean = (xs: number[]) => xs.reduce((s, x) => s + x, 0) / xs.length;
  const variance = (xs: number[], mu: number) => xs.reduce((s, x) => s + (x - mu) ** 2, 0) / (xs.length - 1);
  const ma = mean(a);
  const mb = mean(b);
  const va = variance(a, ma) / a.length;
  const vb = variance(b, mb) / b.length;
  const se = Math.sqrt(va + vb);
  const df = se === 0 ? Infinity : (va + vb) ** 2 / (va ** 2 / (a.length - 1) + vb ** 2 / (b.length - 1));
  return finishTest('welch-t', ma - mb, se, df, level, { next: a.length, base: b.length });
}
