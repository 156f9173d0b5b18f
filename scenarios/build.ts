/**
 * Shared construction of scenarios: canonical ids, lazily computed Var(log f), the univariate builder, and the
 * common part of the mutual-information and divergence builders.
 */
import type {
  NormalRepresentation,
  ParamSpec,
  Quantity,
  Rng,
  Sample,
  Scenario,
  ScenarioFamily,
  Support,
  Tails,
  UnivariateDensity,
} from '../src/core/contracts.js';
import { integrate } from '../src/math/quadrature.js';
import { lowerTimes, type CholeskyFactor } from '../src/math/linalg.js';
import { formatSpec } from '../src/core/spec.js';
import { normalCdf } from '../src/math/special.js';
import { loadPackage } from '../src/core/vendor.js';

const normalRandom = loadPackage<typeof import('@stdlib/random-base-normal')>('@stdlib/random-base-normal');

export function scenarioId(family: string, params: Record<string, number>, specs: readonly ParamSpec[]): string {
  return formatSpec(
    family,
    params,
    specs.map((s) => s.name),
  );
}

/** Quadrature tolerances used for every numeric truth; the achieved error is reported in truthSource. */
export const TRUTH_TOLERANCE = { absTol: 1e-11, relTol: 1e-13, maxPanels: 40000 } as const;

/** E[g(X)] = ∫ f(x) g(x, log f(x)) dx over the support of a univariate density, with its error estimate. */
export function expectation(density: UnivariateDensity, g: (x: number, logF: number) => number): { value: number; error: number } {
  const term = (x: number, logF: number) => {
    // Where the density underflows the term is zero, even if g overflows there.
    const f = Math.exp(logF);
    if (f === 0) return 0;
    const gx = g(x, logF);
    return gx === 0 ? 0 : f * gx;
  };
  const nearUpper = density.logDensityNearUpper;
  const result = integrate((x) => term(x, density.logDensity(x)), density.lower, density.upper, {
    ...TRUTH_TOLERANCE,
    breakpoints: density.breakpoints,
    upperDistance: nearUpper && Number.isFinite(density.upper) ? (u) => term(density.upper - u, nearUpper(u)) : undefined,
  });
  return { value: result.value, error: result.errorEstimate };
}

/** Differential entropy −∫ f log f by quadrature. */
export function entropyByQuadrature(density: UnivariateDensity): { value: number; error: number } {
  return expectation(density, (_x, logF) => -logF);
}

/** Var(log f(X)) by quadrature, centred at the known entropy for accuracy. */
export function logDensityVarianceByQuadrature(density: UnivariateDensity, entropy: number): { value: number; error: number } {
  return expectation(density, (_x, logF) => (logF + entropy) * (logF + entropy));
}

export function formatError(error: number): string {
  return error.toExponential(1);
}

export interface UnivariateDefinition extends Omit<ScenarioFacts, 'marginals' | 'moments'> {
  density: UnivariateDensity;
  /** Returns a function that draws one value from the stream. */
  sampler(rng: Rng): () => number;
  /** Closed-form Var(log f(X)) with its source; otherwise computed by quadrature on first use. */
  logDensityVariance?: { value: number; source: string };
  mean?: number;
  variance?: number;
}

export function univariateScenario(def: UnivariateDefinition): Scenario {
  let varianceCache: { value: number; source: string } | undefined = def.logDensityVariance;
  const scenario: Scenario = {
    id: scenarioId(def.family, def.params, def.specs),
    family: def.family,
    quantity: 'entropy',
    dim: 1,
    params: { ...def.params },
    truth: def.truth,
    truthSource: def.truthSource,
    support: def.support,
    tails: def.tails,
    univariate: def.density,
    marginals: [def.density],
    sample(rng: Rng, n: number): Sample {
      const draw = def.sampler(rng);
      const data = new Float64Array(n);
      for (let i = 0; i < n; i++) data[i] = draw();
      return { n, dim: 1, data };
    },
    logDensity: (x) => def.density.logDensity(x[0]),
    get logDensityVariance() {
      if (!varianceCache) {
        const q = logDensityVarianceByQuadrature(def.density, def.truth);
        varianceCache = { value: q.value, source: `numeric: adaptive Gauss–Legendre quadrature, error estimate ${formatError(q.error)}` };
      }
      return varianceCache.value;
    },
    get logDensityVarianceSource() {
      void scenario.logDensityVariance;
      return varianceCache?.source;
    },
  };
  if (def.mean !== undefined && def.variance !== undefined && Number.isFinite(def.mean) && Number.isFinite(def.variance)) {
    scenario.moments = { mean: [def.mean], covariance: [[def.variance]] };
  }
  return scenario;
}

/** What every scenario definition states besides its sampler; `specs` order the params in the canonical id. */
export interface ScenarioFacts {
  family: string;
  specs: readonly ParamSpec[];
  params: Record<string, number>;
  truth: number;
  truthSource: string;
  support: Support;
  tails: Tails;
  marginals?: UnivariateDensity[];
  moments?: { mean: number[]; covariance: number[][] };
}

/** A scenario from its facts and sampler; the optional facts are set only when given. */
export function scenarioFromFacts(facts: ScenarioFacts, quantity: Quantity, dim: number, sample: (rng: Rng, n: number) => Sample): Scenario {
  const scenario: Scenario = {
    id: scenarioId(facts.family, facts.params, facts.specs),
    family: facts.family,
    quantity,
    dim,
    params: { ...facts.params },
    truth: facts.truth,
    truthSource: facts.truthSource,
    support: facts.support,
    tails: facts.tails,
    sample,
  };
  if (facts.marginals) scenario.marginals = facts.marginals;
  if (facts.moments) scenario.moments = facts.moments;
  return scenario;
}

/** A family whose create() builds a univariate scenario from validated params. */
export function family(
  id: string,
  summary: string,
  params: readonly ParamSpec[],
  create: (p: Record<string, number>) => Scenario,
  examples?: readonly Record<string, number>[],
): ScenarioFamily {
  return { id, quantity: 'entropy', summary, params, create, examples };
}

/** n rows of N(0, LLᵀ) into a new row-major array; `eachRow` may rewrite a row in place. */
export function gaussianRows(rng: Rng, n: number, chol: CholeskyFactor, eachRow?: (data: Float64Array, offset: number) => void): Float64Array {
  const dim = chol.dim;
  const draw = normalRandom.factory(0, 1, { prng: rng });
  const z = new Float64Array(dim);
  const data = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < dim; j++) z[j] = draw();
    lowerTimes(chol.lower, dim, z, data, i * dim);
    if (eachRow) eachRow(data, i * dim);
  }
  return data;
}

/**
 * The largest double below 1 and the smallest above 0: Φ(z) rounds to 1 for z > 8.3 (probability 5e-17), where
 * an unbounded quantile would be infinite; clamping moves that much probability to the largest finite value.
 */
const P_MAX = 1 - 2 ** -53;
const P_MIN = Number.MIN_VALUE;

/**
 * The inverse of a univariate CDF: the closed form when the density declares one, otherwise the CDF inverted
 * by Newton steps kept inside a bisection bracket (rtsafe; Press et al., Numerical Recipes, 3rd ed., §9.4),
 * to a relative width of 4e-16 or an exact hit.
 */
export function quantileOf(density: UnivariateDensity): (p: number) => number {
  if (density.quantile) return density.quantile.bind(density);
  return (p) => invertCdf(density, p);
}

function invertCdf(density: UnivariateDensity, p: number): number {
  const { cdf } = density;
  let lo = density.lower;
  let hi = density.upper;
  // Unbounded ends: step out from a finite point by doubling until the bracket holds p.
  if (!Number.isFinite(lo)) {
    let step = 1;
    lo = Number.isFinite(hi) ? hi - step : -step;
    while (cdf(lo) > p && Number.isFinite(lo)) lo -= step *= 2;
  }
  if (!Number.isFinite(hi)) {
    let step = 1;
    hi = lo + step;
    while (cdf(hi) < p && Number.isFinite(hi)) hi += step *= 2;
  }
  let x = 0.5 * (lo + hi);
  for (let iteration = 0; iteration < 400; iteration++) {
    const miss = cdf(x) - p;
    if (miss === 0) return x;
    if (miss < 0) lo = x;
    else hi = x;
    if (hi - lo <= 4e-16 * Math.max(Math.abs(lo), Math.abs(hi)) || hi - lo < Number.MIN_VALUE * 4) return x;
    const f = Math.exp(density.logDensity(x));
    const newton = f > 0 && Number.isFinite(f) ? x - miss / f : NaN;
    // A Newton step that leaves the bracket (or a flat or infinite density) falls back to bisection.
    x = newton > lo && newton < hi ? newton : 0.5 * (lo + hi);
    if (x === lo || x === hi) return x;
  }
  return x;
}

/**
 * The survival function S(x) = 1 − F(x): the density's own, accurate far in the upper tail, or 1 − cdf with
 * `stable: false` (then S is only good to about 1e-16 absolute, and nowhere below that).
 */
export function survivalOf(density: UnivariateDensity): { survival: (x: number) => number; stable: boolean } {
  if (density.survival) return { survival: density.survival.bind(density), stable: true };
  return { survival: (x) => 1 - density.cdf(x), stable: false };
}

/**
 * The upper quantile x with S(x) = q for small q, where F⁻¹(1 − q) cannot be asked (1 − q rounds to 1 once
 * q < 1.1e-16): the survival function inverted as invertCdf inverts the CDF. Without a stable survival
 * function the answer is F⁻¹(largest double below 1), i.e. q is raised to about 1.1e-16.
 */
export function upperQuantileOf(density: UnivariateDensity): (q: number) => number {
  const { survival, stable } = survivalOf(density);
  if (!stable) {
    const quantile = quantileOf(density);
    return (q) => quantile(Math.min(P_MAX, 1 - q));
  }
  // x ↦ −S(x) is increasing, with derivative f: the CDF inversion applies to it as is.
  const flipped: UnivariateDensity = { ...density, cdf: (x) => -survival(x), quantile: undefined };
  return (q) => invertCdf(flipped, -q);
}

/**
 * How a scenario's rows come from independent standard normals: its own declaration, or for a one-dimensional
 * entropy scenario the quantile of Φ(z) (probability integral transform: if Z ~ N(0,1), F⁻¹(Φ(Z)) has CDF F).
 * Undefined when the law has neither (heavy-tailed mixtures of scales, divergence pairs, ...).
 */
export function normalRepresentation(scenario: Scenario): NormalRepresentation | undefined {
  if (scenario.fromNormals) return scenario.fromNormals;
  if (scenario.dim !== 1 || scenario.quantity !== 'entropy' || !scenario.univariate) return undefined;
  const quantile = quantileOf(scenario.univariate);
  return {
    width: 1,
    map(normals, n) {
      const data = new Float64Array(n);
      for (let i = 0; i < n; i++) data[i] = quantile(Math.min(P_MAX, Math.max(P_MIN, normalCdf(normals[i]))));
      return { n, dim: 1, data };
    },
  };
}

/** Rows mean + L·z for rows z of independent standard normals: N(mean, LLᵀ) in law. */
export function gaussianFromNormals(
  chol: CholeskyFactor,
  mean: readonly number[],
  eachRow?: (data: Float64Array, offset: number) => void,
): NormalRepresentation {
  const dim = chol.dim;
  return {
    width: dim,
    map(normals, n) {
      const data = new Float64Array(n * dim);
      for (let i = 0; i < n; i++) {
        lowerTimes(chol.lower, dim, normals.subarray(i * dim, i * dim + dim), data, i * dim);
        for (let j = 0; j < dim; j++) data[i * dim + j] += mean[j];
        if (eachRow) eachRow(data, i * dim);
      }
      return { n, dim, data };
    },
  };
}
