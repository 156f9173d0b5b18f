/**
 * Scores of a cell's replicate estimates against the true value, each with its Monte-Carlo standard error.
 *
 * Standard errors use the delta method on replicate moments (no resampling, so they are deterministic):
 *   bias:  SD/√m;
 *   SD:    √Var(s²)/(2s) with Var(s²) ≈ (μ₄ − σ⁴(m−3)/(m−1))/m, the variance of the sample variance (e.g.
 *          Cramér, Mathematical Methods of Statistics, 1946, §27.4; reference from memory), checked by Monte
 *          Carlo in test/harness.test.ts;
 *   RMSE:  SE(MSE)/(2·RMSE) with SE(MSE) = SD of the squared errors/√m;
 *   MAE:   SD of the absolute errors/√m;
 *   failure rate: √(p(1−p)/R).
 * m counts successful replicates, R all replicates.
 */

/** A score with its Monte-Carlo standard error (not an estimator's output: that is an estimate, a number). */
export interface ValueWithSe {
  value: number;
  se: number;
}

export interface CellScores {
  replicates: number;
  successes: number;
  failures: number;
  failureRate: ValueWithSe;
  mean: ValueWithSe;
  bias: ValueWithSe;
  sd: ValueWithSe;
  rmse: ValueWithSe;
  mae: ValueWithSe;
  /** n·Var(Ĥ)/Var(log f(X)): 1 is the asymptotic best any estimator can do. Null when Var(log f) is unknown or 0. */
  efficiency: ValueWithSe | null;
}

const NONE: ValueWithSe = { value: NaN, se: NaN };

/** Scores from replicate estimates (NaN marks a failed replicate). */
export function scoreCell(estimates: ArrayLike<number>, truth: number, n: number, logDensityVariance?: number): CellScores {
  const replicates = estimates.length;
  const values: number[] = [];
  for (let i = 0; i < replicates; i++) if (Number.isFinite(estimates[i])) values.push(estimates[i]);
  const m = values.length;
  const failures = replicates - m;
  const p = replicates ? failures / replicates : 0;
  const failureRate = { value: p, se: replicates ? Math.sqrt((p * (1 - p)) / replicates) : NaN };
  if (m < 2) {
    const single = m === 1 ? { value: values[0], se: NaN } : NONE;
    return {
      replicates,
      successes: m,
      failures,
      failureRate,
      mean: single,
      bias: m === 1 ? { value: values[0] - truth, se: NaN } : NONE,
      sd: NONE,
      rmse: m === 1 ? { value: Math.abs(values[0] - truth), se: NaN } : NONE,
      mae: m === 1 ? { value: Math.abs(values[0] - truth), se: NaN } : NONE,
      efficiency: null,
    };
  }
  // Centre at the truth first: errors are small numbers even when the truth is large, which keeps the sums exact-ish.
  let sumError = 0;
  for (const v of values) sumError += v - truth;
  const meanError = sumError / m;
  let m2 = 0;
  let m4 = 0;
  let sumSq = 0;
  let sumSq2 = 0;
  let sumAbs = 0;
  for (const v of values) {
    const e = v - truth;
    const c = e - meanError;
    m2 += c * c;
    m4 += c * c * c * c;
    sumSq += e * e;
    sumSq2 += e * e * e * e;
    sumAbs += Math.abs(e);
  }
  const variance = m2 / (m - 1);
  const sd = Math.sqrt(variance);
  const centralFourth = m4 / m;
  const populationVariance = m2 / m;
  const varianceOfVariance = Math.max(0, (centralFourth - (populationVariance * populationVariance * (m - 3)) / (m - 1)) / m);
  const sdSe = sd > 0 ? Math.sqrt(varianceOfVariance) / (2 * sd) : 0;
  const mse = sumSq / m;
  const squaredErrorVariance = Math.max(0, (sumSq2 / m - mse * mse) * (m / (m - 1)));
  const rmse = Math.sqrt(mse);
  const rmseSe = rmse > 0 ? Math.sqrt(squaredErrorVariance / m) / (2 * rmse) : 0;
  const mae = sumAbs / m;
  const absVariance = Math.max(0, (sumSq / m - mae * mae) * (m / (m - 1)));
  let efficiency: ValueWithSe | null = null;
  if (logDensityVariance !== undefined && logDensityVariance > 0) {
    const scale = n / logDensityVariance;
    efficiency = { value: scale * variance, se: scale * Math.sqrt(varianceOfVariance) };
  }
  return {
    replicates,
    successes: m,
    failures,
    failureRate,
    mean: { value: truth + meanError, se: sd / Math.sqrt(m) },
    bias: { value: meanError, se: sd / Math.sqrt(m) },
    sd: { value: sd, se: sdSe },
    rmse: { value: rmse, se: rmseSe },
    mae: { value: mae, se: Math.sqrt(absVariance / m) },
    efficiency,
  };
}

export interface RateFit {
  /** Slope of log(metric) on log n: −½ is the parametric rate. */
  slope: number;
  /**
   * Standard error from the metric's own Monte-Carlo errors (weighted least squares with known variances),
   * scaled up by √(χ²/ν) when the points scatter about the line more than those errors allow (ν = points − 2).
   */
  se: number;
  sizes: number;
}

/**
 * Fits log(metric) = a + slope·log n by weighted least squares, with weights 1/Var(log metric) from the delta
 * method (Var(log x) ≈ (SE/x)²). Points whose metric is not clearly above zero (value < 2·SE) are left out,
 * since their logarithm is noise; null when fewer than two points remain.
 *
 * With known variances the slope's SE is 1/√Sxx, which assumes the power law holds. Where it does not (a metric
 * that falls and then rises), the residuals show it: χ² = Σ w·(y − ŷ)² on ν = points − 2 degrees of freedom. When
 * χ²/ν > 1 the SE is multiplied by √(χ²/ν), the scale factor of weighted averages and fits with known errors
 * (common practice; e.g. the Particle Data Group's averaging procedure, recalled from memory). Two points fit any
 * line (ν = 0), so their SE stays unscaled.
 */
export function fitRate(points: { n: number; value: number; se: number }[]): RateFit | null {
  const usable = points.filter((p) => p.value > 0 && Number.isFinite(p.se) && p.value > 2 * p.se);
  if (usable.length < 2) return null;
  const xs = usable.map((p) => Math.log(p.n));
  const ys = usable.map((p) => Math.log(p.value));
  const ws = usable.map((p) => {
    const rel = p.se / p.value;
    return rel > 0 ? 1 / (rel * rel) : 1e12;
  });
  const sw = ws.reduce((a, b) => a + b, 0);
  const mx = ws.reduce((s, w, i) => s + w * xs[i], 0) / sw;
  const my = ws.reduce((s, w, i) => s + w * ys[i], 0) / sw;
  let sxx = 0;
  let sxy = 0;
  for (let i = 0; i < xs.length; i++) {
    sxx += ws[i] * (xs[i] - mx) ** 2;
    sxy += ws[i] * (xs[i] - mx) * (ys[i] - my);
  }
  if (sxx === 0) return null;
  const slope = sxy / sxx;
  const dof = xs.length - 2;
  let chi2 = 0;
  for (let i = 0; i < xs.length; i++) chi2 += ws[i] * (ys[i] - my - slope * (xs[i] - mx)) ** 2;
  const scale = dof > 0 ? Math.max(1, Math.sqrt(chi2 / dof)) : 1;
  return { slope, se: scale * Math.sqrt(1 / sxx), sizes: usable.length };
}
