/**
 * A percentile interval for an entropy estimate from a smoothed bootstrap.
 *
 *   const interval = smoothedBootstrap(sample, configured, estimate, { resamples: 400, level: 0.95, seed: 'x' });
 *
 * Why smoothed: a plain bootstrap resample repeats about a third of the points, and repeated points are
 * zero distances to nearest-neighbour and spacing estimators (they fail, or with jitter far below the data's
 * resolution they return values pulled far down: we measured −0.68 nats at n = 500 for Kozachenko–Leonenko on
 * a gamma sample, and twice the true spread). So each resampled point moves by Gaussian noise, the smoothed
 * bootstrap of Silverman & Young (1987), "The bootstrap: to smooth or not to smooth?", Biometrika 74(3),
 * 469–479, in its variance-preserving form:
 *
 *   x* = x̄ + (x_I − x̄ + h·L·ε) / √(1 + h²),   ε ~ N(0, I_d),  L Lᵀ the sample covariance,
 *
 * with h a quarter of Silverman's rule-of-thumb factor (4/(d + 2))^{1/(d+4)} n^{−1/(d+4)}: large enough that
 * the copies of a resampled point sit at neighbour distances rather than on top of each other, small enough
 * that the smoothing changes the law little.
 *
 * What little it changes, and what resampling changes, moves every bootstrap estimate by about the same
 * amount; the interval is therefore the percentile interval of the bootstrap estimates shifted so that their
 * median sits on the estimate itself: [Ĥ + q_{α/2} − q_½, Ĥ + q_{1−α/2} − q_½] (quantiles by linear
 * interpolation between order statistics). It describes the estimate's sampling spread; the estimator's own
 * bias is a separate correction (the look-alike's).
 */
import { normalRandom } from '../../math/random.js';
import type { Sample } from '../../core/contracts.js';
import { cholesky } from '../../math/linalg.js';
import { quantileOfSorted } from '../../math/moments.js';
import { rngFromSeed } from '../../core/rng.js';
import { runEstimator, type ConfiguredEstimator } from '../../../estimators/index.js';

export interface BootstrapOptions {
  resamples: number;
  /** Coverage of the interval, e.g. 0.95. */
  level: number;
  seed: string;
  /** Multiplies Silverman's factor (default 0.25). */
  smoothing?: number;
  /** Stop drawing resamples after this many milliseconds (at least `minResamples` are drawn). */
  deadlineMs?: number;
  minResamples?: number;
}

export interface BootstrapInterval {
  level: number;
  lower: number;
  upper: number;
  /** Resamples whose estimate succeeded. */
  resamples: number;
  failures: number;
  /** h: the noise is h·L·ε before the variance-preserving shrink. */
  bandwidth: number;
  /** Median bootstrap estimate minus the estimate: the shift removed. */
  shift: number;
  method: string;
}

export const DEFAULT_SMOOTHING = 0.25;

/** Silverman's rule-of-thumb factor (4/(d + 2))^{1/(d+4)} n^{−1/(d+4)} for a Gaussian kernel. */
export function silvermanFactor(n: number, dim: number): number {
  return Math.pow(4 / (dim + 2), 1 / (dim + 4)) * Math.pow(n, -1 / (dim + 4));
}

/** Sample mean and a Cholesky factor of the sample covariance (a tiny ridge if it is singular). */
function meanAndFactor(sample: Sample): { mean: Float64Array; lower: Float64Array } {
  const { n, dim, data } = sample;
  const mean = new Float64Array(dim);
  for (let i = 0; i < n; i++) for (let j = 0; j < dim; j++) mean[j] += data[i * dim + j] / n;
  const covariance = Array.from({ length: dim }, () => Array(dim).fill(0) as number[]);
  for (let i = 0; i < n; i++) {
    for (let a = 0; a < dim; a++) {
      const ca = data[i * dim + a] - mean[a];
      for (let b = 0; b <= a; b++) covariance[a][b] += (ca * (data[i * dim + b] - mean[b])) / (n - 1);
    }
  }
  for (let a = 0; a < dim; a++) for (let b = 0; b < a; b++) covariance[b][a] = covariance[a][b];
  let factor = cholesky(covariance);
  if (!factor) {
    const scale = Math.max(...covariance.map((row, i) => row[i]), 1e-300);
    factor = cholesky(covariance.map((row, i) => row.map((v, j) => v + (i === j ? 1e-9 * scale : 0))));
  }
  return { mean, lower: factor ? factor.lower : new Float64Array(dim * dim) };
}

export function smoothedBootstrap(sample: Sample, configured: ConfiguredEstimator, estimate: number, options: BootstrapOptions): BootstrapInterval {
  const { n, dim, data } = sample;
  const h = (options.smoothing ?? DEFAULT_SMOOTHING) * silvermanFactor(n, dim);
  const shrink = 1 / Math.sqrt(1 + h * h);
  const { mean, lower } = meanAndFactor(sample);
  const rng = rngFromSeed(`hhat-advise-bootstrap-v1\n${options.seed}`);
  const draw = normalRandom.factory(0, 1, { prng: rng });
  const noise = new Float64Array(dim);
  const resample: Sample = { n, dim, data: new Float64Array(n * dim) };
  const values: number[] = [];
  let failures = 0;
  const started = performance.now();
  const minimum = Math.min(options.resamples, options.minResamples ?? options.resamples);
  for (let b = 0; b < options.resamples; b++) {
    if (b >= minimum && options.deadlineMs !== undefined && performance.now() - started > options.deadlineMs) break;
    const out = resample.data;
    for (let i = 0; i < n; i++) {
      const source = Math.min(n - 1, Math.floor(rng() * n));
      for (let j = 0; j < dim; j++) noise[j] = draw();
      for (let r = 0; r < dim; r++) {
        let smoothing = 0;
        for (let c = 0; c <= r; c++) smoothing += lower[r * dim + c] * noise[c];
        out[i * dim + r] = mean[r] + shrink * (data[source * dim + r] - mean[r] + h * smoothing);
      }
    }
    try {
      const value = runEstimator(configured, resample).value;
      if (Number.isFinite(value)) values.push(value);
      else failures++;
    } catch {
      failures++;
    }
  }
  const sorted = Float64Array.from(values).sort();
  const alpha = 1 - options.level;
  const centre = sorted.length ? quantileOfSorted(sorted, 0.5) : NaN;
  const shift = centre - estimate;
  return {
    level: options.level,
    lower: sorted.length ? quantileOfSorted(sorted, alpha / 2) - shift : NaN,
    upper: sorted.length ? quantileOfSorted(sorted, 1 - alpha / 2) - shift : NaN,
    resamples: sorted.length,
    failures,
    bandwidth: h,
    shift,
    method: `smoothed bootstrap (variance-preserving Gaussian noise, h = ${h.toPrecision(2)} × the sample covariance's square root), percentile interval re-centred on the estimate`,
  };
}
