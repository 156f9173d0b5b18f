/**
 * `gaussian-mixture-mv[...]`: a Gaussian mixture in any dimension with full covariances, written out in its
 * spec so that worker threads rebuild exactly the same law from the string alone. `hhat advise FILE` fits one
 * to the user's data (the look-alike) and benchmarks estimators on draws from it.
 *
 *   gaussian-mixture-mv[W:M1,...,Md:C11,C12,...,Cdd;W:...]
 *
 * one component per ';'-separated part: its weight, its mean vector and its covariance matrix (row-major,
 * symmetric, positive definite), separated by ':'. Weights must sum to 1 within 1e-6 (they are divided by
 * their sum, so rounded fitted weights are accepted); the id keeps them as written.
 *
 * The true entropy has no closed form. It is computed on first use (workers never need it):
 *   d = 1  adaptive Gauss–Legendre quadrature of −f log f (error estimate stated);
 *   d = 2  nested quadrature: for each x₁ the inner integral over x₂ runs to an absolute tolerance
 *          proportional to the marginal density f₁(x₁), so the inner errors add up to at most that
 *          proportionality constant; the outer error estimate is added to it;
 *   d ≥ 3  the Monte-Carlo mean of −log f over 10^6 draws seeded from the spec, with its standard error.
 */
import { createHash } from 'node:crypto';
import type { Rng, Sample, Scenario, UnivariateDensity } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { cholesky, type CholeskyFactor } from '../src/math/linalg.js';
import { integrate } from '../src/math/quadrature.js';
import { normalCdf, normalSurvival } from '../src/math/special.js';
import { formatNumber, parseNumber } from '../src/core/spec.js';
import { entropyByQuadrature, formatError, logDensityVarianceByQuadrature } from './build.js';
import { loadPackage } from '../src/core/vendor.js';

const normalRandom = loadPackage<typeof import('@stdlib/random-base-normal')>('@stdlib/random-base-normal');
const seedrandom = loadPackage<typeof import('seedrandom')>('seedrandom');

export const LOOKALIKE_FAMILY = 'gaussian-mixture-mv';
export const LOOKALIKE_USAGE = `${LOOKALIKE_FAMILY}[W:MEAN:COV;...], MEAN d comma-separated values, COV d×d row-major`;
export const LOOKALIKE_SUMMARY = 'Gaussian mixture in any dimension with full covariances (the look-alike of hhat advise); numeric truth';

/** Draws for the Monte-Carlo truth in d ≥ 3. */
export const MONTE_CARLO_DRAWS = 1_000_000;
/** Absolute tolerance of the inner integrals of the 2-D nested quadrature (each is weighted by φ(z₁) ≤ 0.4). */
const INNER_RELATIVE_TOLERANCE = 1e-10;
/** Half-width of the whitened square: outside it a standard Gaussian holds below 4Φ(−12) ≈ 7e-33. */
const WHITENED_LIMIT = 12;
/** Beyond this many SDs of every component the mass is below 2Φ(−20) ≈ 5.5e-89: ranges stop there. */
const RANGE_SDS = 20;
/** A nested-quadrature error above this falls back to Monte Carlo. */
const QUADRATURE_ACCEPT = 1e-6;

const LOG_2PI = Math.log(2 * Math.PI);

export interface MixtureComponent {
  weight: number;
  mean: number[];
  covariance: number[][];
}

/** The canonical spec of a mixture; numbers are written in their shortest round-trip form. */
export function lookalikeSpec(components: readonly MixtureComponent[]): string {
  const parts = components.map(
    (c) => `${formatNumber(c.weight)}:${c.mean.map(formatNumber).join(',')}:${c.covariance.flatMap((row) => row.map(formatNumber)).join(',')}`,
  );
  return `${LOOKALIKE_FAMILY}[${parts.join(';')}]`;
}

function numbers(text: string, what: string): number[] {
  return text.split(',').map((cell) => {
    const value = parseNumber(cell.trim());
    if (value === undefined || !Number.isFinite(value)) throw new UsageError(`${LOOKALIKE_FAMILY}: ${what} has "${cell.trim()}", which is not a finite number`);
    return value;
  });
}

/** Parses the bracket argument (the ';'-separated components) into components, checking every rule. */
export function parseLookalikeArgument(parts: readonly string[]): MixtureComponent[] {
  if (!parts.length || (parts.length === 1 && parts[0] === ''))
    throw new UsageError(`${LOOKALIKE_FAMILY}[...] needs at least one component: ${LOOKALIKE_USAGE}`);
  let dim = -1;
  const components = parts.map((part, k) => {
    const fields = part.split(':');
    if (fields.length !== 3)
      throw new UsageError(`${LOOKALIKE_FAMILY}: component ${k + 1} "${part}" must be WEIGHT:MEAN:COVARIANCE (three ':'-separated fields)`);
    const [weight] = numbers(fields[0], `component ${k + 1}'s weight`);
    if (!(weight > 0 && weight <= 1))
      throw new UsageError(`${LOOKALIKE_FAMILY}: component ${k + 1} has weight ${formatNumber(weight)}; weights must be in (0, 1]`);
    const mean = numbers(fields[1], `component ${k + 1}'s mean`);
    if (dim < 0) dim = mean.length;
    if (mean.length !== dim) throw new UsageError(`${LOOKALIKE_FAMILY}: component ${k + 1} has a mean of length ${mean.length}; component 1 has ${dim}`);
    const flat = numbers(fields[2], `component ${k + 1}'s covariance`);
    if (flat.length !== dim * dim)
      throw new UsageError(
        `${LOOKALIKE_FAMILY}: component ${k + 1}'s covariance has ${flat.length} ${flat.length === 1 ? 'entry' : 'entries'}; a ${dim}×${dim} matrix needs ${dim * dim}`,
      );
    const covariance = Array.from({ length: dim }, (_, i) => flat.slice(i * dim, i * dim + dim));
    for (let i = 0; i < dim; i++) {
      for (let j = 0; j < i; j++) {
        if (covariance[i][j] !== covariance[j][i])
          throw new UsageError(
            `${LOOKALIKE_FAMILY}: component ${k + 1}'s covariance differs at (${i + 1},${j + 1}) and (${j + 1},${i + 1}); it must be symmetric`,
          );
      }
    }
    return { weight, mean, covariance };
  });
  const total = components.reduce((s, c) => s + c.weight, 0);
  if (Math.abs(total - 1) > 1e-6) throw new UsageError(`${LOOKALIKE_FAMILY}: the weights sum to ${formatNumber(total)}; they must sum to 1`);
  return components;
}

/** Precomputed per-component terms for log-density evaluations in hot loops. */
interface Prepared {
  dim: number;
  count: number;
  weights: Float64Array;
  means: Float64Array; // count × dim
  lowers: Float64Array; // count × dim × dim, Cholesky factors
  /** log w − ½ log det Σ − (d/2) log 2π */
  logNorms: Float64Array;
}

function prepare(components: readonly MixtureComponent[], owner: string): { prepared: Prepared; factors: CholeskyFactor[] } {
  const dim = components[0].mean.length;
  const count = components.length;
  const total = components.reduce((s, c) => s + c.weight, 0);
  const weights = Float64Array.from(components, (c) => c.weight / total);
  const means = new Float64Array(count * dim);
  const lowers = new Float64Array(count * dim * dim);
  const logNorms = new Float64Array(count);
  const factors = components.map((c, k) => {
    const factor = cholesky(c.covariance);
    if (!factor) throw new UsageError(`${owner}: component ${k + 1}'s covariance is not positive definite`);
    means.set(c.mean, k * dim);
    lowers.set(factor.lower, k * dim * dim);
    logNorms[k] = Math.log(weights[k]) - 0.5 * factor.logDeterminant - 0.5 * dim * LOG_2PI;
    return factor;
  });
  return { prepared: { dim, count, weights, means, lowers, logNorms }, factors };
}

/**
 * log f at the point data[offset .. offset + dim − 1]; `residual` and `terms` are scratch arrays of length
 * dim and count, so the caller's loop allocates nothing.
 */
function logDensityAt(p: Prepared, data: ArrayLike<number>, offset: number, residual: Float64Array, terms: Float64Array): number {
  const { dim, count, means, lowers, logNorms } = p;
  let max = -Infinity;
  for (let k = 0; k < count; k++) {
    const meanBase = k * dim;
    const lowerBase = k * dim * dim;
    let quadratic = 0;
    // Forward substitution L·y = x − μ; the quadratic form is |y|².
    for (let i = 0; i < dim; i++) {
      let sum = data[offset + i] - means[meanBase + i];
      const row = lowerBase + i * dim;
      for (let j = 0; j < i; j++) sum -= lowers[row + j] * residual[j];
      const y = sum / lowers[row + i];
      residual[i] = y;
      quadratic += y * y;
    }
    const term = logNorms[k] - 0.5 * quadratic;
    terms[k] = term;
    if (term > max) max = term;
  }
  if (max === -Infinity) return -Infinity;
  let sum = 0;
  for (let k = 0; k < count; k++) sum += Math.exp(terms[k] - max);
  return max + Math.log(sum);
}

/** Draws n points: a component by its weight, then μ + L·z. */
function drawMixture(p: Prepared, rng: Rng, n: number): Sample {
  const { dim, count, weights, means, lowers } = p;
  const cumulative = new Float64Array(count);
  let running = 0;
  for (let k = 0; k < count; k++) cumulative[k] = running += weights[k];
  const draw = normalRandom.factory(0, 1, { prng: rng });
  const z = new Float64Array(dim);
  const data = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) {
    const u = rng() * running;
    let k = 0;
    while (k < count - 1 && u >= cumulative[k]) k++;
    for (let j = 0; j < dim; j++) z[j] = draw();
    const lowerBase = k * dim * dim;
    for (let r = 0; r < dim; r++) {
      let sum = means[k * dim + r];
      for (let c = 0; c <= r; c++) sum += lowers[lowerBase + r * dim + c] * z[c];
      data[i * dim + r] = sum;
    }
  }
  return { n, dim, data };
}

/** The 1-D mixture of coordinate j's marginals: weights w_k, means μ_kj, SDs √Σ_k,jj. */
function marginalDensity(components: readonly MixtureComponent[], weights: Float64Array, j: number): UnivariateDensity {
  const means = components.map((c) => c.mean[j]);
  const sds = components.map((c) => Math.sqrt(c.covariance[j][j]));
  const logTerms = new Float64Array(components.length);
  const logWeights = Array.from(weights, Math.log);
  const logDensity = (x: number): number => {
    let max = -Infinity;
    for (let k = 0; k < means.length; k++) {
      const z = (x - means[k]) / sds[k];
      logTerms[k] = logWeights[k] - Math.log(sds[k]) - 0.5 * LOG_2PI - 0.5 * z * z;
      if (logTerms[k] > max) max = logTerms[k];
    }
    if (max === -Infinity) return -Infinity;
    let sum = 0;
    for (let k = 0; k < means.length; k++) sum += Math.exp(logTerms[k] - max);
    return max + Math.log(sum);
  };
  return {
    lower: Math.min(...means.map((m, k) => m - RANGE_SDS * sds[k])),
    upper: Math.max(...means.map((m, k) => m + RANGE_SDS * sds[k])),
    logDensity,
    cdf: (x) => means.reduce((s, m, k) => s + weights[k] * normalCdf((x - m) / sds[k]), 0),
    survival: (x) => means.reduce((s, m, k) => s + weights[k] * normalSurvival((x - m) / sds[k]), 0),
    breakpoints: means.flatMap((m, k) => [m - 3 * sds[k], m - sds[k], m, m + sds[k], m + 3 * sds[k]]),
  };
}

export interface NumericTruth {
  value: number;
  /** Quadrature: the error estimate; Monte Carlo: the standard error. */
  error: number;
  method: 'quadrature' | 'nested-quadrature' | 'monte-carlo';
  source: string;
  /** Var(log f(X)), with where it comes from. */
  logDensityVariance: number;
  logDensityVarianceSource: string;
}

/** −E log f and Var(log f) by the Monte-Carlo mean over `draws` points seeded from `seedText`. */
export function monteCarloEntropy(p: Prepared, seedText: string, draws: number): { value: number; se: number; variance: number } {
  const generator = seedrandom.xor4096(createHash('sha256').update(`hhat-lookalike-truth-v1\n${seedText}`).digest('hex'));
  const rng: Rng = () => generator.double();
  const residual = new Float64Array(p.dim);
  const terms = new Float64Array(p.count);
  // Blocks keep the draws' memory small; Welford's update keeps the mean and variance exact-ish.
  const block = 65536;
  let mean = 0;
  let m2 = 0;
  let seen = 0;
  for (let start = 0; start < draws; start += block) {
    const size = Math.min(block, draws - start);
    const sample = drawMixture(p, rng, size);
    for (let i = 0; i < size; i++) {
      const value = -logDensityAt(p, sample.data, i * p.dim, residual, terms);
      seen++;
      const delta = value - mean;
      mean += delta / seen;
      m2 += delta * (value - mean);
    }
  }
  const variance = m2 / (seen - 1);
  return { value: mean, se: Math.sqrt(variance / seen), variance };
}

/**
 * h = −Σ_k w_k E_k[log f(X)], each E_k an integral against component k's own Gaussian: in its whitened
 * coordinates z (x = μ_k + L_k z) it is ∫∫ φ(z₁)φ(z₂) log f(μ_k + L_k z) dz, computed by nested adaptive
 * Gauss–Legendre quadrature on [−Z, Z]² (the mass outside is below 2·2Φ(−Z) and log f grows only like
 * |z|²). The inner integral over z₂ runs to an absolute tolerance τ·φ(z₁), so the inner errors add up to at
 * most τ times the worst achieved ratio; the outer error estimate is added to it.
 */
function nestedQuadratureEntropy(p: Prepared): { value: number; error: number } {
  const limit = WHITENED_LIMIT;
  const point = new Float64Array(2);
  const residual = new Float64Array(2);
  const terms = new Float64Array(p.count);
  const logPhi = (z: number) => -0.5 * z * z - 0.5 * LOG_2PI;
  let value = 0;
  let error = 0;
  for (let k = 0; k < p.count; k++) {
    const m0 = p.means[2 * k];
    const m1 = p.means[2 * k + 1];
    const l00 = p.lowers[4 * k];
    const l10 = p.lowers[4 * k + 2];
    const l11 = p.lowers[4 * k + 3];
    let worstInnerRatio = 0;
    const inner = (z1: number): number => {
      const outerWeight = Math.exp(logPhi(z1));
      point[0] = m0 + l00 * z1;
      const result = integrate(
        (z2) => {
          point[1] = m1 + l10 * z1 + l11 * z2;
          return Math.exp(logPhi(z2)) * logDensityAt(p, point, 0, residual, terms);
        },
        -limit,
        limit,
        { absTol: INNER_RELATIVE_TOLERANCE, relTol: 1e-13, maxPanels: 4000, breakpoints: [0] },
      );
      worstInnerRatio = Math.max(worstInnerRatio, result.errorEstimate);
      return outerWeight * result.value;
    };
    const outer = integrate(inner, -limit, limit, { absTol: 1e-9, relTol: 1e-13, maxPanels: 4000, breakpoints: [0] });
    value -= p.weights[k] * outer.value;
    // ∫ φ(z₁)·(inner error) dz₁ ≤ worst inner error, since φ integrates to at most 1.
    error += p.weights[k] * (outer.errorEstimate + worstInnerRatio);
  }
  return { value, error };
}

function computeTruth(id: string, p: Prepared, marginals: UnivariateDensity[]): NumericTruth {
  if (p.dim === 1) {
    const entropy = entropyByQuadrature(marginals[0]);
    const variance = logDensityVarianceByQuadrature(marginals[0], entropy.value);
    return {
      value: entropy.value,
      error: entropy.error,
      method: 'quadrature',
      source: `numeric: −∫ f log f by adaptive Gauss–Legendre quadrature on [min μ − ${RANGE_SDS}σ, max μ + ${RANGE_SDS}σ], error estimate ${formatError(entropy.error)}`,
      logDensityVariance: variance.value,
      logDensityVarianceSource: `numeric: adaptive Gauss–Legendre quadrature, error estimate ${formatError(variance.error)}`,
    };
  }
  if (p.dim === 2) {
    const nested = nestedQuadratureEntropy(p);
    // Var(log f) only feeds the efficiency score: a smaller Monte-Carlo run is enough for it.
    const mc = monteCarloEntropy(p, `${id}\nvariance`, 200_000);
    if (nested.error < QUADRATURE_ACCEPT) {
      return {
        value: nested.value,
        error: nested.error,
        method: 'nested-quadrature',
        source: `numeric: −Σ w_k E_k[log f] by nested adaptive Gauss–Legendre quadrature in each component's whitened coordinates on [−${WHITENED_LIMIT}, ${WHITENED_LIMIT}]², error bound ${formatError(nested.error)} (outer estimates + inner errors)`,
        logDensityVariance: mc.variance,
        logDensityVarianceSource: 'numeric: Monte-Carlo variance of log f over 200000 seeded draws',
      };
    }
  }
  const mc = monteCarloEntropy(p, id, MONTE_CARLO_DRAWS);
  return {
    value: mc.value,
    error: mc.se,
    method: 'monte-carlo',
    source: `numeric: Monte-Carlo mean of −log f over ${MONTE_CARLO_DRAWS} draws seeded from the spec, standard error ${formatError(mc.se)}`,
    logDensityVariance: mc.variance,
    logDensityVarianceSource: `numeric: Monte-Carlo variance of log f over ${MONTE_CARLO_DRAWS} seeded draws`,
  };
}

const truthOf = new WeakMap<Scenario, () => NumericTruth>();

/** The scenario a list of components names (the bracket family's builder). */
export function lookalikeScenario(components: readonly MixtureComponent[]): Scenario {
  const id = lookalikeSpec(components);
  const { prepared } = prepare(components, LOOKALIKE_FAMILY);
  const dim = prepared.dim;
  const marginals = Array.from({ length: dim }, (_, j) => marginalDensity(components, prepared.weights, j));
  const overallMean = Array.from({ length: dim }, (_, j) => components.reduce((s, c, k) => s + prepared.weights[k] * c.mean[j], 0));
  const covariance = Array.from({ length: dim }, (_, i) =>
    Array.from(
      { length: dim },
      (_, j) => components.reduce((s, c, k) => s + prepared.weights[k] * (c.covariance[i][j] + c.mean[i] * c.mean[j]), 0) - overallMean[i] * overallMean[j],
    ),
  );
  let truth: NumericTruth | undefined;
  const ensureTruth = () => (truth ??= computeTruth(id, prepared, marginals));
  const residual = new Float64Array(dim);
  const terms = new Float64Array(prepared.count);
  const params: Record<string, number> = { dim, components: prepared.count };
  const scenario: Scenario = {
    id,
    family: LOOKALIKE_FAMILY,
    quantity: 'entropy',
    dim,
    params,
    get truth() {
      return ensureTruth().value;
    },
    get truthSource() {
      return ensureTruth().source;
    },
    get logDensityVariance() {
      return ensureTruth().logDensityVariance;
    },
    get logDensityVarianceSource() {
      return ensureTruth().logDensityVarianceSource;
    },
    support: 'unbounded',
    tails: 'light',
    sample: (rng, n) => drawMixture(prepared, rng, n),
    logDensity: (x) => logDensityAt(prepared, x, 0, residual, terms),
    marginals,
    moments: { mean: overallMean, covariance },
  };
  if (dim === 1) scenario.univariate = marginals[0];
  truthOf.set(scenario, ensureTruth);
  return scenario;
}

/** The numeric truth with its method and error, computed on first use (for reports that state them). */
export function lookalikeTruth(scenario: Scenario): NumericTruth {
  const truth = truthOf.get(scenario);
  if (!truth) throw new UsageError(`${scenario.id} is not a ${LOOKALIKE_FAMILY} scenario`);
  return truth();
}
