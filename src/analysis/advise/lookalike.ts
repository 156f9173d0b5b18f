/**
 * The look-alike of a sample: a Gaussian mixture fitted to it by EM with the component count chosen by BIC,
 * written as a `gaussian-mixture-mv[...]` scenario whose entropy is known numerically. Estimators benchmarked
 * on its draws at the sample's n show roughly the bias and error they have on the sample's own law.
 *
 *   const lookalike = buildLookalike(sample, { seed: 'oven-7' });
 *   lookalike.spec, lookalike.scenario.truth, lookalike.bic, lookalike.smallestSdRatio
 *
 * The fit runs on standardised coordinates (centred, divided by the SD) and is mapped back; samples above
 * 20 000 points are fitted on a seeded random subset of that size.
 */
import type { Sample, Scenario } from '../../core/contracts.js';
import { UsageError } from '../../core/errors.js';
import { rngFromSeed } from '../../core/rng.js';
import { parseScenario } from '../../../scenarios/index.js';
import { lookalikeSpec, lookalikeTruth, type MixtureComponent, type NumericTruth } from '../../../scenarios/lookalike.js';
import { DEFAULT_RIDGE, selectMixture, symmetricEigenvalues, type MixtureFit } from './mixture.js';

export interface LookalikeOptions {
  seed: string;
  maxComponents?: number;
  restarts?: number;
  /** Fit on at most this many points (default 20 000). */
  maxPoints?: number;
  columnNames?: readonly string[];
}

export interface Lookalike {
  spec: string;
  scenario: Scenario;
  components: MixtureComponent[];
  /** One row per K tried: BIC, log-likelihood, whether EM converged. */
  bic: { components: number; bic: number; logLikelihood: number; converged: boolean }[];
  /** K limit from the sample size (at least 5 points per free parameter) and maxComponents. */
  limit: number;
  chosen: number;
  /** Points the fit used (n, or the subset size). */
  fittedPoints: number;
  /** The smallest SD of any component along any direction, as a fraction of the data's SD (standardised units). */
  smallestSdRatio: number;
  /** smallestSdRatio below 1%: a component is nearly flat in some direction. */
  nearSingular: boolean;
  truth: NumericTruth;
  ridge: number;
}

export const NEAR_SINGULAR_SD_RATIO = 0.01;
const SIGNIFICANT_DIGITS = 12;

/** Enough digits that the rounding never matters, few enough that the spec stays readable. */
function round(x: number): number {
  return Number(x.toPrecision(SIGNIFICANT_DIGITS));
}

/**
 * The SDs and centres a look-alike can be written with: its covariances are products of two SDs, and the
 * look-alike's own estimators square and sum its values, so both must stay far inside the double range.
 */
export const LOOKALIKE_SD_RANGE = [1e-150, 1e150] as const;
const LOOKALIKE_MAX_CENTRE = 1e300;

/**
 * Why column j cannot be standardised: it is constant (every value equal), or its scale is beyond what a
 * look-alike can be written with. The SD is found from values divided by their largest deviation first, since
 * squares of deviations near 1e-170 vanish and near 1e200 overflow.
 */
function refuseScale(out: Float64Array, n: number, dim: number, j: number, name: string): never {
  let largest = 0;
  for (let i = 0; i < n; i++) largest = Math.max(largest, Math.abs(out[i * dim + j]));
  let mean = 0;
  for (let i = 0; i < n; i++) mean += out[i * dim + j] / largest;
  mean /= n;
  let sum = 0;
  let deviation = 0;
  for (let i = 0; i < n; i++) deviation = Math.max(deviation, Math.abs(out[i * dim + j] / largest - mean));
  if (!(deviation > 0)) throw new UsageError(`${name} is constant: its differential entropy is −∞ and no estimator applies; drop the column`);
  for (let i = 0; i < n; i++) sum += ((out[i * dim + j] / largest - mean) / deviation) ** 2;
  const sd = Math.sqrt(sum / (n - 1)) * deviation * largest;
  throw new UsageError(
    `${name} has SD ${sd.toPrecision(3)} and centre ${(mean * largest).toPrecision(3)}: advise's look-alike needs an SD from ${LOOKALIKE_SD_RANGE[0]} to ${LOOKALIKE_SD_RANGE[1]} and a centre within ±${LOOKALIKE_MAX_CENTRE}; rescale the column by a power of ten c (its entropy then moves by exactly log c) and run advise again, or use hhat estimate, which takes any scale`,
  );
}

/** Centred, SD-scaled copy of (a subset of) the sample, with the centres and scales. */
function standardise(
  sample: Sample,
  rows: Uint32Array | null,
  names: readonly string[],
): { data: Float64Array; n: number; centres: Float64Array; scales: Float64Array } {
  const { dim, data } = sample;
  const n = rows ? rows.length : sample.n;
  const out = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) {
    const source = rows ? rows[i] : i;
    for (let j = 0; j < dim; j++) out[i * dim + j] = data[source * dim + j];
  }
  const centres = new Float64Array(dim);
  const scales = new Float64Array(dim);
  for (let j = 0; j < dim; j++) {
    let mean = 0;
    for (let i = 0; i < n; i++) mean += out[i * dim + j];
    mean /= n;
    let sum = 0;
    for (let i = 0; i < n; i++) sum += (out[i * dim + j] - mean) ** 2;
    const sd = Math.sqrt(sum / (n - 1));
    if (!(sd >= LOOKALIKE_SD_RANGE[0] && sd <= LOOKALIKE_SD_RANGE[1] && Math.abs(mean) <= LOOKALIKE_MAX_CENTRE))
      refuseScale(out, n, dim, j, names[j] ?? `column ${j + 1}`);
    centres[j] = mean;
    scales[j] = sd;
    for (let i = 0; i < n; i++) out[i * dim + j] = (out[i * dim + j] - mean) / sd;
  }
  return { data: out, n, centres, scales };
}

/** A seeded subset of `size` distinct rows (partial Fisher–Yates). */
function subset(n: number, size: number, seed: string): Uint32Array {
  const rng = rngFromSeed(`hhat-advise-subset-v1\n${seed}`);
  const order = new Uint32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  for (let i = 0; i < size; i++) {
    const j = i + Math.min(n - i - 1, Math.floor(rng() * (n - i)));
    const t = order[i];
    order[i] = order[j];
    order[j] = t;
  }
  return order.slice(0, size);
}

/** Maps a fit in standardised coordinates back to the data's: μ = c + s∘μ′, Σ_ab = s_a s_b Σ′_ab. */
function toComponents(fit: MixtureFit, centres: Float64Array, scales: Float64Array): MixtureComponent[] {
  const { dim, components } = fit;
  const weights = Array.from(fit.weights, round);
  const total = weights.reduce((a, b) => a + b, 0);
  return Array.from({ length: components }, (_, k) => ({
    weight: round(weights[k] / total),
    mean: Array.from({ length: dim }, (_, j) => round(centres[j] + scales[j] * fit.means[k * dim + j])),
    covariance: Array.from({ length: dim }, (_, a) =>
      Array.from({ length: dim }, (_, b) => {
        const [i, j] = a >= b ? [a, b] : [b, a];
        return round(scales[i] * scales[j] * fit.covariances[k * dim * dim + i * dim + j]);
      }),
    ),
  }));
}

export function buildLookalike(sample: Sample, options: LookalikeOptions): Lookalike {
  const maxPoints = options.maxPoints ?? 20000;
  const rows = sample.n > maxPoints ? subset(sample.n, maxPoints, options.seed) : null;
  const standard = standardise(sample, rows, options.columnNames ?? []);
  const { best, fits, limit } = selectMixture(standard.data, standard.n, sample.dim, {
    seed: options.seed,
    maxComponents: options.maxComponents ?? 6,
    restarts: options.restarts,
  });
  if (!Number.isFinite(best.logLikelihood)) {
    throw new UsageError(
      'no Gaussian mixture could be fitted to these data (every EM start collapsed); the data may be nearly discrete or lie on a lower-dimensional set',
    );
  }
  const dim = sample.dim;
  let smallestVariance = Infinity;
  for (let k = 0; k < best.components; k++) {
    const eigenvalues = symmetricEigenvalues(best.covariances.subarray(k * dim * dim, (k + 1) * dim * dim), dim);
    smallestVariance = Math.min(smallestVariance, eigenvalues[0]);
  }
  const smallestSdRatio = Math.sqrt(Math.max(0, smallestVariance));
  const components = toComponents(best, standard.centres, standard.scales);
  const spec = lookalikeSpec(components);
  const scenario = parseScenario(spec);
  return {
    spec: scenario.id,
    scenario,
    components,
    bic: fits.map((f) => ({ components: f.components, bic: f.bic, logLikelihood: f.logLikelihood, converged: f.converged })),
    limit,
    chosen: best.components,
    fittedPoints: standard.n,
    smallestSdRatio,
    nearSingular: smallestSdRatio < NEAR_SINGULAR_SD_RATIO,
    truth: lookalikeTruth(scenario),
    ridge: DEFAULT_RIDGE,
  };
}
