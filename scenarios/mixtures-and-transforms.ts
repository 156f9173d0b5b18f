/**
 * Scenarios whose true entropy is computed numerically: one-dimensional Gaussian mixtures, and monotone
 * transforms of a base scenario (h(g(X)) = h(X) + E[log |g′(X)|]). Both use adaptive quadrature whose error
 * estimate is reported in truthSource and checked to be below 1e-8.
 */
import { normalRandom } from '../src/math/random.js';
import type { ParamSpec, Rng, Sample, Scenario, ScenarioFamily, Tails, UnivariateDensity } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { normalCdf, normalSurvival } from '../src/math/special.js';
import { formatNumber, formatSpec, parseNumber, validateParams } from '../src/core/spec.js';
import { entropyByQuadrature, expectation, formatError, logDensityVarianceByQuadrature, normalRepresentation } from './build.js';

/** The largest quadrature error estimate accepted for a numeric truth. */
export const NUMERIC_TRUTH_BOUND = 1e-8;

function checkBound(owner: string, error: number): void {
  if (!(error < NUMERIC_TRUTH_BOUND)) {
    throw new UsageError(
      `${owner}: the quadrature error estimate ${formatError(error)} exceeds ${NUMERIC_TRUTH_BOUND}; this parameter set is too extreme for a trustworthy numeric truth`,
    );
  }
}

const LOG_SQRT_2PI = 0.5 * Math.log(2 * Math.PI);
export const MAX_MIXTURE_COMPONENTS = 8;

/** Parameter names w1, mu1, sigma1, ..., listed up to the highest component given. */
function mixtureSpecs(components: number): ParamSpec[] {
  const specs: ParamSpec[] = [];
  for (let k = 1; k <= components; k++) {
    specs.push({ name: `w${k}`, meaning: `weight of component ${k}`, default: 1 / components, min: 0, minExclusive: true, max: 1 });
    specs.push({ name: `mu${k}`, meaning: `mean of component ${k}`, default: 0 });
    specs.push({ name: `sigma${k}`, meaning: `SD of component ${k}`, default: 1, min: 0, minExclusive: true });
  }
  return specs;
}

export function gaussianMixtureScenario(weights: number[], means: number[], sds: number[]): Scenario {
  const k = weights.length;
  const weightSum = weights.reduce((s, w) => s + w, 0);
  if (Math.abs(weightSum - 1) > 1e-9) {
    throw new UsageError(`gaussian-mixture: the weights sum to ${formatNumber(weightSum)}; they must sum to 1`);
  }
  const logWeights = weights.map(Math.log);
  const logSds = sds.map(Math.log);
  const logTerms = new Float64Array(k);
  const logDensity = (x: number): number => {
    let max = -Infinity;
    for (let j = 0; j < k; j++) {
      const z = (x - means[j]) / sds[j];
      logTerms[j] = logWeights[j] - logSds[j] - LOG_SQRT_2PI - 0.5 * z * z;
      if (logTerms[j] > max) max = logTerms[j];
    }
    if (max === -Infinity) return -Infinity;
    let sum = 0;
    for (let j = 0; j < k; j++) sum += Math.exp(logTerms[j] - max);
    return max + Math.log(sum);
  };
  // Beyond 40 SDs of every component the integrand −f log f is below e^{−790}: the finite range loses nothing.
  const lower = Math.min(...means.map((m, j) => m - 40 * sds[j]));
  const upper = Math.max(...means.map((m, j) => m + 40 * sds[j]));
  const breakpoints = means.flatMap((m, j) => [m - 3 * sds[j], m - sds[j], m, m + sds[j], m + 3 * sds[j]]);
  const density: UnivariateDensity = {
    lower,
    upper,
    logDensity,
    cdf: (x) => weights.reduce((s, w, j) => s + w * normalCdf((x - means[j]) / sds[j]), 0),
    survival: (x) => weights.reduce((s, w, j) => s + w * normalSurvival((x - means[j]) / sds[j]), 0),
    breakpoints,
  };
  const params: Record<string, number> = {};
  for (let j = 0; j < k; j++) {
    params[`w${j + 1}`] = weights[j];
    params[`mu${j + 1}`] = means[j];
    params[`sigma${j + 1}`] = sds[j];
  }
  const id = formatSpec(
    'gaussian-mixture',
    params,
    mixtureSpecs(k).map((s) => s.name),
  );
  const entropy = entropyByQuadrature(density);
  checkBound(id, entropy.error);
  const mean = weights.reduce((s, w, j) => s + w * means[j], 0);
  const variance = weights.reduce((s, w, j) => s + w * (sds[j] * sds[j] + means[j] * means[j]), 0) - mean * mean;
  let varianceCache: { value: number; error: number } | undefined;
  const scenario: Scenario = {
    id,
    family: 'gaussian-mixture',
    quantity: 'entropy',
    dim: 1,
    params,
    truth: entropy.value,
    truthSource: `numeric: −∫ f log f by adaptive Gauss–Legendre quadrature on [min μ − 40σ, max μ + 40σ], error estimate ${formatError(entropy.error)} (bound ${NUMERIC_TRUTH_BOUND})`,
    support: 'unbounded',
    tails: 'light',
    univariate: density,
    marginals: [density],
    sample: (rng: Rng, n: number): Sample => {
      const draw = normalRandom.factory(0, 1, { prng: rng });
      const cumulative = weights.map((_, j) => weights.slice(0, j + 1).reduce((s, w) => s + w, 0));
      const data = new Float64Array(n);
      for (let i = 0; i < n; i++) {
        const u = rng();
        let j = 0;
        while (j < k - 1 && u >= cumulative[j]) j++;
        data[i] = means[j] + sds[j] * draw();
      }
      return { n, dim: 1, data };
    },
    logDensity: (x) => logDensity(x[0]),
    get logDensityVariance() {
      varianceCache ??= logDensityVarianceByQuadrature(density, entropy.value);
      return varianceCache.value;
    },
    get logDensityVarianceSource() {
      varianceCache ??= logDensityVarianceByQuadrature(density, entropy.value);
      return `numeric: adaptive Gauss–Legendre quadrature, error estimate ${formatError(varianceCache.error)}`;
    },
    moments: { mean: [mean], covariance: [[variance]] },
  };
  return scenario;
}

export const gaussianMixtureFamily: ScenarioFamily & { parse(values: Record<string, string>): Scenario } = {
  id: 'gaussian-mixture',
  quantity: 'entropy',
  summary: `one-dimensional Gaussian mixture, up to ${MAX_MIXTURE_COMPONENTS} components (w1,mu1,sigma1,w2,...); numeric truth`,
  params: mixtureSpecs(2).map((s) => ({ ...s, default: s.name.startsWith('mu') ? (s.name === 'mu1' ? -2 : 2) : s.default })),
  create: (p) => fromParams(p),
  parse: (values) => {
    const numeric: Record<string, number> = {};
    for (const [key, text] of Object.entries(values)) {
      const value = parseNumber(text);
      if (value === undefined) throw new UsageError(`gaussian-mixture: ${key}=${text} is not a number`);
      numeric[key] = value;
    }
    return fromParams(numeric);
  },
  examples: [
    // Marron & Wand's "claw" density (Ann. Statist. 20(2), 1992): ½N(0,1) + Σ_{l=0..4} ⅒N(l/2 − 1, 0.1²).
    {
      w1: 0.5,
      mu1: 0,
      sigma1: 1,
      w2: 0.1,
      mu2: -1,
      sigma2: 0.1,
      w3: 0.1,
      mu3: -0.5,
      sigma3: 0.1,
      w4: 0.1,
      mu4: 0,
      sigma4: 0.1,
      w5: 0.1,
      mu5: 0.5,
      sigma5: 0.1,
      w6: 0.1,
      mu6: 1,
      sigma6: 0.1,
    },
    // Two well separated, unequal components: a gap in the support that bins and bandwidths must bridge.
    { w1: 0.7, mu1: 0, sigma1: 1, w2: 0.3, mu2: 6, sigma2: 0.5 },
  ],
};

function fromParams(p: Record<string, number>): Scenario {
  let components = 0;
  for (const key of Object.keys(p)) {
    const match = /^(w|mu|sigma)([1-9]\d*)$/.exec(key);
    if (!match) throw new UsageError(`gaussian-mixture: unknown parameter "${key}"; allowed: wK, muK, sigmaK for K = 1..${MAX_MIXTURE_COMPONENTS}`);
    components = Math.max(components, Number(match[2]));
  }
  if (components === 0) components = 2;
  if (components > MAX_MIXTURE_COMPONENTS)
    throw new UsageError(`gaussian-mixture: ${components} components given; at most ${MAX_MIXTURE_COMPONENTS} are allowed`);
  const weights: number[] = [];
  const means: number[] = [];
  const sds: number[] = [];
  const defaults = gaussianMixtureFamily.params;
  for (let j = 1; j <= components; j++) {
    const w = p[`w${j}`] ?? (components === 2 ? 0.5 : undefined);
    const mu = p[`mu${j}`] ?? defaults.find((s) => s.name === `mu${j}`)?.default;
    const sigma = p[`sigma${j}`] ?? 1;
    if (w === undefined || mu === undefined) throw new UsageError(`gaussian-mixture: component ${j} needs w${j} and mu${j}`);
    if (!(w > 0 && w <= 1)) throw new UsageError(`gaussian-mixture: w${j}=${formatNumber(w)} is not allowed; weights must be in (0, 1]`);
    if (!(sigma > 0) || !Number.isFinite(sigma))
      throw new UsageError(`gaussian-mixture: sigma${j}=${formatNumber(sigma)} is not allowed; it must be a number > 0`);
    if (!Number.isFinite(mu)) throw new UsageError(`gaussian-mixture: mu${j}=${formatNumber(mu)} is not a finite number`);
    weights.push(w);
    means.push(mu);
    sds.push(sigma);
  }
  return gaussianMixtureScenario(weights, means, sds);
}

/** A monotone map g with its log-derivative and how it changes the support and tails. */
interface MonotoneMap {
  id: string;
  summary: string;
  params: ParamSpec[];
  /** Builds the map for validated params; `base` lets maps check their domain. */
  build(
    p: Record<string, number>,
    base: Scenario,
  ): {
    apply: (x: number) => number;
    logAbsDerivative: (x: number) => number;
    support: Scenario['support'];
    tails: Tails;
    /** Interior points of the base support where log|g′| bends, for quadrature. */
    breakpoints?: number[];
  };
}

const logistic = (x: number) => (x >= 0 ? 1 / (1 + Math.exp(-x)) : Math.exp(x) / (1 + Math.exp(x)));

export const monotoneMaps: MonotoneMap[] = [
  {
    id: 'affine',
    summary: 'a·x + b: a unit change and an offset; log|g′| = log|a| exactly',
    params: [
      { name: 'a', meaning: 'scale (nonzero)', default: 2 },
      { name: 'b', meaning: 'offset', default: 0 },
    ],
    build: (p, base) => {
      if (p.a === 0) throw new UsageError('transformed[affine...]: a=0 is not allowed; a must be nonzero');
      return { apply: (x) => p.a * x + p.b, logAbsDerivative: () => Math.log(Math.abs(p.a)), support: base.support, tails: base.tails };
    },
  },
  {
    id: 'exp',
    summary: 'eˣ: makes any base positive and right-skewed; log g′ = x',
    params: [],
    build: (_p, base) => {
      if (base.tails === 'heavy')
        throw new UsageError(`transformed[exp;${base.id}]: exp of a heavy-tailed base has no finite entropy shift; use a light or exponential-tailed base`);
      return { apply: Math.exp, logAbsDerivative: (x) => x, support: base.support === 'bounded' ? 'bounded' : 'half', tails: 'heavy' };
    },
  },
  {
    id: 'log',
    summary: 'log x for a positive base; log|g′| = −log x',
    params: [],
    build: (_p, base) => {
      if (!base.univariate || base.univariate.lower < 0) throw new UsageError(`transformed[log;${base.id}]: log needs a base with positive support`);
      return { apply: Math.log, logAbsDerivative: (x) => -Math.log(x), support: 'unbounded', tails: 'exponential' };
    },
  },
  {
    id: 'sinh',
    summary: 'sinh x: stretches both tails exponentially; log g′ = log cosh x',
    params: [],
    build: (_p, base) => {
      if (base.tails !== 'light') throw new UsageError(`transformed[sinh;${base.id}]: sinh needs a light-tailed base`);
      return {
        apply: Math.sinh,
        logAbsDerivative: (x) => {
          const a = Math.abs(x);
          return a + Math.log1p(Math.exp(-2 * a)) - Math.LN2;
        },
        support: base.support === 'bounded' ? 'bounded' : base.support,
        tails: 'heavy',
        breakpoints: [0],
      };
    },
  },
  {
    id: 'asinh',
    summary: 'asinh x: compresses tails logarithmically; log g′ = −½ log(1 + x²)',
    params: [],
    build: (_p, base) => ({
      apply: Math.asinh,
      logAbsDerivative: (x) => -0.5 * Math.log1p(x * x),
      support: base.support,
      tails: base.tails === 'heavy' ? 'exponential' : 'light',
      breakpoints: [0],
    }),
  },
  {
    id: 'cubic',
    summary: 'x + x³: flat near 0, steep in the tails; log g′ = log(1 + 3x²)',
    params: [],
    build: (_p, base) => {
      if (base.tails === 'heavy') throw new UsageError(`transformed[cubic;${base.id}]: cubic needs a light or exponential-tailed base`);
      return {
        apply: (x) => x + x * x * x,
        logAbsDerivative: (x) => Math.log1p(3 * x * x),
        support: base.support,
        tails: base.tails === 'light' ? 'exponential' : 'heavy',
        breakpoints: [0],
      };
    },
  },
  {
    id: 'logistic',
    summary: '1/(1 + e^{−x}): squeezes the line into (0, 1); log g′ = −|x| − 2 log(1 + e^{−|x|})',
    params: [],
    build: () => ({
      apply: logistic,
      logAbsDerivative: (x) => {
        const a = Math.abs(x);
        return -a - 2 * Math.log1p(Math.exp(-a));
      },
      support: 'bounded',
      tails: 'light',
      breakpoints: [0],
    }),
  },
];

export function transformedScenario(mapId: string, mapValues: Record<string, string>, base: Scenario): Scenario {
  const map = monotoneMaps.find((m) => m.id === mapId);
  if (!map) throw new UsageError(`transformed[...]: unknown map "${mapId}"; known: ${monotoneMaps.map((m) => m.id).join(', ')}`);
  if (!base.univariate || base.quantity !== 'entropy') {
    throw new UsageError(`transformed[${mapId};${base.id}]: the base must be a one-dimensional entropy scenario`);
  }
  const mapParams = validateParams(`transformed[...]: map ${mapId}`, map.params, mapValues);
  const built = map.build(mapParams, base);
  // A smooth map of a bounded base stays bounded, so its tails stay light whatever the map does to a line.
  const g = base.support === 'bounded' ? { ...built, support: 'bounded' as const, tails: 'light' as const } : built;
  const baseDensity = base.univariate;
  const shiftDensity: UnivariateDensity = {
    ...baseDensity,
    breakpoints: [...(baseDensity.breakpoints ?? []), ...(g.breakpoints ?? [])],
  };
  const mapSpec = formatSpec(
    mapId,
    mapParams,
    map.params.map((s) => s.name),
  );
  const id = `transformed[${mapSpec};${base.id}]`;
  const shift = expectation(shiftDensity, (x) => g.logAbsDerivative(x));
  checkBound(id, shift.error);
  let varianceCache: { value: number; error: number } | undefined;
  const truth = base.truth + shift.value;
  const variance = () => {
    // Var(log f_Y(Y)) = Var(log f_X(X) − log|g′(X)|), integrated in the base's coordinates.
    varianceCache ??= expectation(shiftDensity, (x, logF) => {
      const centred = logF - g.logAbsDerivative(x) + truth;
      return centred * centred;
    });
    return varianceCache;
  };
  const baseRepresentation = normalRepresentation(base);
  return {
    ...(baseRepresentation && {
      fromNormals: {
        width: 1,
        map: (normals: Float64Array, n: number) => {
          const s = baseRepresentation.map(normals, n);
          for (let i = 0; i < n; i++) s.data[i] = g.apply(s.data[i]);
          return s;
        },
      },
    }),
    id,
    family: 'transformed',
    quantity: 'entropy',
    dim: 1,
    params: { ...mapParams },
    truth,
    truthSource: `numeric: h(base) + E[log|g′(X)|]; base ${base.id}: ${base.truthSource}; shift ${shift.value.toPrecision(12)} by adaptive Gauss–Legendre quadrature, error estimate ${formatError(shift.error)} (bound ${NUMERIC_TRUTH_BOUND})`,
    support: g.support,
    tails: g.tails,
    sample: (rng, n) => {
      const s = base.sample(rng, n);
      for (let i = 0; i < n; i++) s.data[i] = g.apply(s.data[i]);
      return s;
    },
    get logDensityVariance() {
      return variance().value;
    },
    get logDensityVarianceSource() {
      return `numeric: adaptive Gauss–Legendre quadrature in the base's coordinates, error estimate ${formatError(variance().error)}`;
    },
  };
}

/** Listed in the catalog: transforms that turn familiar bases into unfamiliar shapes with exact-enough truths. */
export const transformedExamples: readonly string[] = [
  'transformed[sinh;normal]',
  'transformed[cubic;normal]',
  'transformed[logistic;normal:mu=0,sigma=2]',
  'transformed[log;gamma:shape=3,scale=1]',
  'transformed[exp;uniform]',
  'transformed[affine:a=1000,b=0;normal]',
];
