/**
 * Univariate scenarios with closed-form differential entropy.
 *
 * Closed forms: T. M. Cover and J. A. Thomas, Elements of Information Theory, 2nd ed., Wiley 2006, Table 17.1
 * ("CT Table 17.1"), and A. V. Lazo and P. N. Rathie, "On the entropy of continuous probability
 * distributions", IEEE Trans. Inf. Theory 24(1), 1978 ("Lazo–Rathie 1978"). Draws come from the
 * @stdlib/random-base-* samplers fed with the replicate's stream.
 */
import {
  arcsineRandom,
  betaRandom,
  cauchyRandom,
  chiRandom,
  chisquareRandom,
  exponentialRandom,
  frechetRandom,
  gammaRandom,
  gumbelRandom,
  invgammaRandom,
  kumaraswamyRandom,
  laplaceRandom,
  levyRandom,
  logisticRandom,
  lognormalRandom,
  normalRandom,
  paretoRandom,
  rayleighRandom,
  tRandom,
  triangularRandom,
  uniformRandom,
  weibullRandom,
} from '../src/math/random.js';
import type { ParamSpec, Scenario, ScenarioFamily, UnivariateDensity } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import {
  EULER_GAMMA,
  digamma,
  erf,
  erfc,
  fullPrecision,
  logBeta,
  logGamma,
  logProduct,
  logQuotient,
  logWidth,
  normalCdf,
  normalSurvival,
  regularizedBeta,
  regularizedBetaUpper,
  regularizedGammaP,
  regularizedGammaQ,
} from '../src/math/special.js';
import {
  STIRLING_SERIES_MIN,
  digammaStirlingRemainder,
  gammaEntropyUnitScale,
  logGammaStirlingRemainder,
  trigammaStirlingRemainderScaled,
} from '../src/math/stirling.js';
import { family, univariateScenario } from './build.js';

const LOG_2PI = Math.log(2 * Math.PI);

/**
 * ½ log(c·σ²) for c, σ > 0. Where c·σ² is an ordinary double the formula forms it (the values committed in
 * baselines); where σ² would overflow or underflow, ½ log c + log σ.
 */
function halfLogTimesSquare(c: number, sigma: number): number {
  const v = c * sigma * sigma;
  return fullPrecision(v) ? 0.5 * Math.log(v) : 0.5 * Math.log(c) + Math.log(sigma);
}

/**
 * The entropy of the d-dimensional Student t with ν ≥ 2·STIRLING_SERIES_MIN, less ½ log det Σ. With a = ν/2,
 * b = a + d/2, Stirling's series (remainders r and s) turns
 *   log Γ(a) − log Γ(b) + b(ψ(b) − ψ(a)) + (d/2) log(νπ)
 * into ½ log1p(d/ν) + (d/2) log 2π + d/2 + d/(2ν) + r(a) − r(b) + b(s(b) − s(a)): the terms of size ν log ν that
 * cancel in the first form are gone, so the Gaussian limit (d/2) log(2πe) is approached without losing digits.
 */
export function studentEntropyLargeNu(nu: number, dim: number): number {
  const a = nu / 2;
  const b = a + dim / 2;
  const remainders = logGammaStirlingRemainder(a) - logGammaStirlingRemainder(b) + b * (digammaStirlingRemainder(b) - digammaStirlingRemainder(a));
  return 0.5 * Math.log1p(dim / nu) + (dim / 2) * LOG_2PI + dim / 2 + dim / (2 * nu) + remainders;
}

/** Whether the Student t entropy is taken from studentEntropyLargeNu. */
export function studentUsesSeries(nu: number): boolean {
  return nu / 2 >= STIRLING_SERIES_MIN;
}

/**
 * Laws that are a monotone function of one standard normal map it directly (exact, and faster than the quantile
 * of Φ(z), which loses the upper tail's digits to rounding of Φ near 1).
 */
function withNormalMap(scenario: Scenario, ofNormal: (z: number) => number): Scenario {
  scenario.fromNormals = {
    width: 1,
    map(normals, n) {
      const data = new Float64Array(n);
      for (let i = 0; i < n; i++) data[i] = ofNormal(normals[i]);
      return { n, dim: 1, data };
    },
  };
  return scenario;
}
const CT = 'Cover & Thomas, Elements of Information Theory, 2nd ed. (2006), Table 17.1';
const LR = 'Lazo & Rathie, IEEE Trans. Inf. Theory 24(1) (1978)';

const location = (name: string, meaning: string, def = 0): ParamSpec => ({ name, meaning, default: def });
const positive = (name: string, meaning: string, def: number, extra: Partial<ParamSpec> = {}): ParamSpec => ({
  name,
  meaning,
  default: def,
  min: 0,
  minExclusive: true,
  ...extra,
});

function requireOrder(familyId: string, lowName: string, low: number, highName: string, high: number): void {
  if (!(low < high)) throw new UsageError(`${familyId}: needs ${lowName} < ${highName}; got ${lowName}=${low}, ${highName}=${high}`);
}

const uniformSpecs = [location('a', 'lower end'), location('b', 'upper end', 1)];
const uniform = family(
  'uniform',
  'uniform on [a, b]; bounded, flat',
  uniformSpecs,
  (p) => {
    requireOrder('uniform', 'a', p.a, 'b', p.b);
    const width = p.b - p.a;
    return univariateScenario({
      family: 'uniform',
      specs: uniformSpecs,
      params: p,
      truth: logWidth(p.a, p.b),
      truthSource: `log(b − a); ${CT}`,
      support: 'bounded',
      tails: 'light',
      density: {
        lower: p.a,
        upper: p.b,
        logDensity: (x) => (x >= p.a && x <= p.b ? -Math.log(width) : -Infinity),
        cdf: (x) => Math.min(1, Math.max(0, (x - p.a) / width)),
        survival: (x) => Math.min(1, Math.max(0, (p.b - x) / width)),
        quantile: (u) => p.a + u * width,
      },
      sampler: (rng) => uniformRandom.factory(p.a, p.b, { prng: rng }),
      logDensityVariance: { value: 0, source: 'exact: log f is constant on the support' },
      mean: (p.a + p.b) / 2,
      variance: (width * width) / 12,
    });
  },
  [{ a: -0.5, b: 0.5 }],
);

const normalSpecs = [location('mu', 'mean'), positive('sigma', 'standard deviation', 1)];
const normal = family(
  'normal',
  'Gaussian; the maximum-entropy law for a given variance',
  normalSpecs,
  (p) =>
    withNormalMap(
      univariateScenario({
        family: 'normal',
        specs: normalSpecs,
        params: p,
        truth: halfLogTimesSquare(2 * Math.PI * Math.E, p.sigma),
        truthSource: `½ log(2πeσ²); ${CT}`,
        support: 'unbounded',
        tails: 'light',
        density: {
          lower: -Infinity,
          upper: Infinity,
          logDensity: (x) => {
            const z = (x - p.mu) / p.sigma;
            return -0.5 * z * z - Math.log(p.sigma) - 0.5 * LOG_2PI;
          },
          cdf: (x) => normalCdf((x - p.mu) / p.sigma),
          survival: (x) => normalSurvival((x - p.mu) / p.sigma),
          breakpoints: [p.mu],
        },
        sampler: (rng) => normalRandom.factory(p.mu, p.sigma, { prng: rng }),
        logDensityVariance: { value: 0.5, source: 'exact: log f = c − Z²/2 with Z² ~ χ²₁, Var = 2/4' },
        mean: p.mu,
        variance: p.sigma * p.sigma,
      }),
      (z) => p.mu + p.sigma * z,
    ),
  [
    { mu: 0, sigma: 0.01 },
    { mu: 0, sigma: 100 },
  ],
);

const exponentialSpecs = [positive('rate', 'rate λ (1/mean)', 1)];
const exponential = family('exponential', 'exponential; half-bounded, exponential tail', exponentialSpecs, (p) =>
  univariateScenario({
    family: 'exponential',
    specs: exponentialSpecs,
    params: p,
    truth: 1 - Math.log(p.rate),
    truthSource: `1 − log λ; ${CT}`,
    support: 'half',
    tails: 'exponential',
    density: {
      lower: 0,
      upper: Infinity,
      logDensity: (x) => (x >= 0 ? Math.log(p.rate) - p.rate * x : -Infinity),
      cdf: (x) => (x <= 0 ? 0 : -Math.expm1(-p.rate * x)),
      survival: (x) => (x <= 0 ? 1 : Math.exp(-p.rate * x)),
      quantile: (u) => -Math.log1p(-u) / p.rate,
      breakpoints: [1 / p.rate],
    },
    sampler: (rng) => exponentialRandom.factory(p.rate, { prng: rng }),
    logDensityVariance: { value: 1, source: 'exact: log f = log λ − λX, Var(λX) = 1' },
    mean: 1 / p.rate,
    variance: 1 / (p.rate * p.rate),
  }),
);

const laplaceSpecs = [location('mu', 'centre'), positive('b', 'scale', 1)];
const laplace = family('laplace', 'Laplace (double exponential); a kink at the centre', laplaceSpecs, (p) =>
  univariateScenario({
    family: 'laplace',
    specs: laplaceSpecs,
    params: p,
    truth: 1 + logProduct(2, p.b),
    truthSource: `1 + log(2b); ${CT}`,
    support: 'unbounded',
    tails: 'exponential',
    density: {
      lower: -Infinity,
      upper: Infinity,
      logDensity: (x) => -Math.abs(x - p.mu) / p.b - Math.log(2 * p.b),
      cdf: (x) => (x < p.mu ? 0.5 * Math.exp((x - p.mu) / p.b) : 1 - 0.5 * Math.exp(-(x - p.mu) / p.b)),
      survival: (x) => (x < p.mu ? 1 - 0.5 * Math.exp((x - p.mu) / p.b) : 0.5 * Math.exp(-(x - p.mu) / p.b)),
      quantile: (u) => (u < 0.5 ? p.mu + p.b * Math.log(2 * u) : p.mu - p.b * Math.log(2 * (1 - u))),
      breakpoints: [p.mu],
    },
    sampler: (rng) => laplaceRandom.factory(p.mu, p.b, { prng: rng }),
    logDensityVariance: { value: 1, source: 'exact: |X − μ|/b is exponential(1)' },
    mean: p.mu,
    variance: 2 * p.b * p.b,
  }),
);

const logisticSpecs = [location('mu', 'centre'), positive('s', 'scale', 1)];
const logistic = family('logistic', 'logistic; Gaussian-like centre, exponential tails', logisticSpecs, (p) =>
  univariateScenario({
    family: 'logistic',
    specs: logisticSpecs,
    params: p,
    truth: Math.log(p.s) + 2,
    truthSource: `log s + 2; ${LR}`,
    support: 'unbounded',
    tails: 'exponential',
    density: {
      lower: -Infinity,
      upper: Infinity,
      logDensity: (x) => {
        const a = Math.abs((x - p.mu) / p.s);
        return -a - 2 * Math.log1p(Math.exp(-a)) - Math.log(p.s);
      },
      cdf: (x) => 1 / (1 + Math.exp(-(x - p.mu) / p.s)),
      survival: (x) => 1 / (1 + Math.exp((x - p.mu) / p.s)),
      quantile: (u) => p.mu + p.s * (Math.log(u) - Math.log1p(-u)),
      breakpoints: [p.mu],
    },
    sampler: (rng) => logisticRandom.factory(p.mu, p.s, { prng: rng }),
    mean: p.mu,
    variance: (p.s * p.s * Math.PI * Math.PI) / 3,
  }),
);

const cauchySpecs = [location('x0', 'centre (median)'), positive('gamma', 'half width at half maximum', 1)];
const cauchy = family('cauchy', 'Cauchy; very heavy tails, no mean', cauchySpecs, (p) =>
  univariateScenario({
    family: 'cauchy',
    specs: cauchySpecs,
    params: p,
    truth: logProduct(4 * Math.PI, p.gamma),
    truthSource: `log(4πγ); ${CT}`,
    support: 'unbounded',
    tails: 'heavy',
    density: {
      lower: -Infinity,
      upper: Infinity,
      logDensity: (x) => {
        const z = (x - p.x0) / p.gamma;
        return -Math.log(Math.PI * p.gamma) - Math.log1p(z * z);
      },
      cdf: (x) => 0.5 + Math.atan((x - p.x0) / p.gamma) / Math.PI,
      // ½ − atan(z)/π = atan(1/z)/π for z > 0, without the cancellation.
      survival: (x) => (x > p.x0 ? Math.atan(p.gamma / (x - p.x0)) / Math.PI : 0.5 - Math.atan((x - p.x0) / p.gamma) / Math.PI),
      quantile: (u) => p.x0 + p.gamma * Math.tan(Math.PI * (u - 0.5)),
      breakpoints: [p.x0],
    },
    sampler: (rng) => cauchyRandom.factory(p.x0, p.gamma, { prng: rng }),
    logDensityVariance: { value: (Math.PI * Math.PI) / 3, source: 'exact: Var(log(1 + Z²)) = ψ′(½) − ψ′(1) = π²/3 for Z Cauchy' },
  }),
);

/**
 * Var(log f) of the Student t in `dim` dimensions: ((ν+d)/2)²(ψ′(ν/2) − ψ′((ν+d)/2)), since 1/(1 + Q/ν) ~
 * Beta(ν/2, d/2). With x = ν/2, h = d/2 and ψ′(y) = 1/y + 1/(2y²) + t(y) (src/math/stirling.ts) this is
 * h(x+h)/x + h(2x+h)/(2x²) + (x+h)²(t(x) − t(x+h)), written with x²t(x) so that nothing overflows: the difference of two nearly equal trigammas, which lost
 * digits in proportion to ν (1e-8 relative at ν = 1e8), is formed in closed form.
 */
export function studentLogDensityVariance(nu: number, dim: number): number {
  const x = nu / 2;
  const h = dim / 2;
  const half = x + h;
  const ratio = h / x;
  return h + h * ratio + ratio + (ratio * ratio) / 2 + (half / x) ** 2 * trigammaStirlingRemainderScaled(x) - trigammaStirlingRemainderScaled(half);
}

/**
 * Var(log f) of Gamma(k, θ): (k−1)²ψ′(k) + k − 2(k−1), using Cov(log Y, Y) = 1 for Y ~ Gamma(k, 1). Its terms of
 * size k cancel to about ½; with ψ′(k) = 1/k + 1/(2k²) + t(k) it is ½ + 1/(2k²) + (k−1)² t(k), term by term.
 */
export function gammaLogDensityVariance(k: number): number {
  return 0.5 + 0.5 / (k * k) + ((k - 1) / k) ** 2 * trigammaStirlingRemainderScaled(k);
}

/**
 * P(T > |z|) for Student's t with ν degrees of freedom: ½ I_x(ν/2, ½) with x = ν/(ν + z²). Past |z| ≈ 1.3e154, z²
 * overflows and x would read 0, a tail of 0 where small ν still leaves most of the mass (ν = 0.001: 0.34 beyond
 * 1.8e308, which the range check of src/harness/draw-range.ts reads); there x < 1e-308 and I_x(a, ½) =
 * x^a/(a B(a, ½)) to a relative O(x), taken through log x = log ν − 2 log|z|.
 */
function studentTail(z: number, nu: number): number {
  const squared = z * z;
  if (Number.isFinite(squared)) return 0.5 * regularizedBeta(nu / (nu + squared), nu / 2, 0.5);
  const a = nu / 2;
  return 0.5 * Math.exp(a * (Math.log(nu) - 2 * Math.log(Math.abs(z))) - Math.log(a) - logBeta(a, 0.5));
}

const studentSpecs = [positive('nu', 'degrees of freedom', 3), location('mu', 'centre'), positive('sigma', 'scale', 1)];
const student = family(
  'student-t',
  'Student t; heavy tails whose weight ν sets',
  studentSpecs,
  (p) =>
    univariateScenario({
      family: 'student-t',
      specs: studentSpecs,
      params: p,
      truth: studentUsesSeries(p.nu)
        ? studentEntropyLargeNu(p.nu, 1) + Math.log(p.sigma)
        : ((p.nu + 1) / 2) * (digamma((p.nu + 1) / 2) - digamma(p.nu / 2)) + 0.5 * Math.log(p.nu) + logBeta(p.nu / 2, 0.5) + Math.log(p.sigma),
      truthSource: `((ν+1)/2)(ψ((ν+1)/2) − ψ(ν/2)) + log(√ν B(ν/2, ½)) + log σ; ${LR}`,
      support: 'unbounded',
      tails: 'heavy',
      density: {
        lower: -Infinity,
        upper: Infinity,
        logDensity: (x) => {
          const z = (x - p.mu) / p.sigma;
          return -0.5 * Math.log(p.nu) - logBeta(p.nu / 2, 0.5) - Math.log(p.sigma) - ((p.nu + 1) / 2) * Math.log1p((z * z) / p.nu);
        },
        cdf: (x) => {
          const z = (x - p.mu) / p.sigma;
          const tail = studentTail(z, p.nu);
          return z < 0 ? tail : 1 - tail;
        },
        survival: (x) => {
          const z = (x - p.mu) / p.sigma;
          const tail = studentTail(z, p.nu);
          return z > 0 ? tail : 1 - tail;
        },
        breakpoints: [p.mu],
      },
      sampler: (rng) => {
        const draw = tRandom.factory(p.nu, { prng: rng });
        return () => p.mu + p.sigma * draw();
      },
      logDensityVariance: { value: studentLogDensityVariance(p.nu, 1), source: 'exact: ((ν+1)/2)²(ψ′(ν/2) − ψ′((ν+1)/2))' },
      mean: p.nu > 1 ? p.mu : undefined,
      variance: p.nu > 2 ? (p.sigma * p.sigma * p.nu) / (p.nu - 2) : undefined,
    }),
  [
    { nu: 1.5, mu: 0, sigma: 1 },
    { nu: 10, mu: 0, sigma: 1 },
  ],
);

const gammaSpecs = [positive('shape', 'shape k', 2), positive('scale', 'scale θ', 1)];
const gamma = family(
  'gamma',
  'gamma; skewed, half-bounded (shape < 1 has a pole at 0)',
  gammaSpecs,
  (p) => {
    const k = p.shape;
    return univariateScenario({
      family: 'gamma',
      specs: gammaSpecs,
      params: p,
      // Past the series threshold the log Γ and ψ terms of size k log k cancel; gammaEntropyUnitScale avoids them.
      truth: k < STIRLING_SERIES_MIN ? k + Math.log(p.scale) + logGamma(k) + (1 - k) * digamma(k) : gammaEntropyUnitScale(k) + Math.log(p.scale),
      truthSource: `k + log θ + log Γ(k) + (1 − k)ψ(k); ${LR}`,
      support: 'half',
      tails: 'exponential',
      density: {
        lower: 0,
        upper: Infinity,
        logDensity: (x) => (x > 0 ? (k - 1) * Math.log(x) - x / p.scale - logGamma(k) - k * Math.log(p.scale) : -Infinity),
        cdf: (x) => (x <= 0 ? 0 : regularizedGammaP(k, x / p.scale)),
        survival: (x) => (x <= 0 ? 1 : regularizedGammaQ(k, x / p.scale)),
        breakpoints: [Math.max(k - 1, 0.5) * p.scale, k * p.scale],
      },
      sampler: (rng) => gammaRandom.factory(k, 1 / p.scale, { prng: rng }),
      logDensityVariance: {
        value: gammaLogDensityVariance(k),
        source: 'exact: (k−1)²ψ′(k) + k − 2(k−1), using Cov(log Y, Y) = 1 for Y ~ Gamma(k, 1)',
      },
      mean: k * p.scale,
      variance: k * p.scale * p.scale,
    });
  },
  [{ shape: 0.5, scale: 1 }],
);

/**
 * Var(log f) of Beta(a, b): log f = (a−1) log U + (b−1) log(1−U) + c, with Var(log U) = ψ′(a) − ψ′(a+b),
 * Var(log(1−U)) = ψ′(b) − ψ′(a+b) and Cov(log U, log(1−U)) = −ψ′(a+b).
 */
function betaLogDensityVariance(a: number, b: number): number {
  // With s = a + b and ψ′(y) = 1/y + 1/(2y²) + t(y), the terms of size a and b cancel analytically (the sum tends
  // to ½, a normal's value, as a and b grow): ½ − 2/s + (1/a² + 1/b² − 4/s²)/2 + (a−1)²t(a) + (b−1)²t(b) − (s−2)²t(s).
  const s = a + b;
  const squares = 1 / (a * a) + 1 / (b * b) - 4 / (s * s);
  const remainder = (y: number, shift: number) => ((y - shift) / y) ** 2 * trigammaStirlingRemainderScaled(y);
  const remainders = remainder(a, 1) + remainder(b, 1) - remainder(s, 2);
  return 0.5 - 2 / s + squares / 2 + remainders;
}
const BETA_VARIANCE_SOURCE = 'exact: (a−1)²(ψ′(a) − ψ′(a+b)) + (b−1)²(ψ′(b) − ψ′(a+b)) − 2(a−1)(b−1)ψ′(a+b)';

/**
 * With g(x) = x + log Γ(x) + (1 − x)ψ(x), the beta entropy is g(a) + g(b) − g(a + b) − ψ(a + b) exactly (the x
 * terms cancel); g from Stirling remainders has no large terms, unlike log B and the (x − 1)ψ(x) products.
 */
function betaEntropy(a: number, b: number): number {
  if (a + b < STIRLING_SERIES_MIN) return logBeta(a, b) - (a - 1) * digamma(a) - (b - 1) * digamma(b) + (a + b - 2) * digamma(a + b);
  return gammaEntropyUnitScale(a) + gammaEntropyUnitScale(b) - gammaEntropyUnitScale(a + b) - digamma(a + b);
}

const betaSpecs = [positive('a', 'first shape α', 2), positive('b', 'second shape β', 5)];
const beta = family(
  'beta',
  'beta on [0, 1]; bounded, skewed or U-shaped',
  betaSpecs,
  (p) =>
    univariateScenario({
      family: 'beta',
      specs: betaSpecs,
      params: p,
      truth: betaEntropy(p.a, p.b),
      truthSource: `log B(α,β) − (α−1)ψ(α) − (β−1)ψ(β) + (α+β−2)ψ(α+β); ${CT}`,
      support: 'bounded',
      tails: 'light',
      density: {
        lower: 0,
        upper: 1,
        logDensity: (x) => (x > 0 && x < 1 ? (p.a - 1) * Math.log(x) + (p.b - 1) * Math.log1p(-x) - logBeta(p.a, p.b) : -Infinity),
        logDensityNearUpper: (u) => (u > 0 && u < 1 ? (p.a - 1) * Math.log1p(-u) + (p.b - 1) * Math.log(u) - logBeta(p.a, p.b) : -Infinity),
        cdf: (x) => (x <= 0 ? 0 : x >= 1 ? 1 : regularizedBeta(x, p.a, p.b)),
        survival: (x) => (x <= 0 ? 1 : x >= 1 ? 0 : regularizedBetaUpper(x, p.a, p.b)),
        breakpoints: [0.5],
      },
      sampler: (rng) => betaRandom.factory(p.a, p.b, { prng: rng }),
      logDensityVariance: { value: betaLogDensityVariance(p.a, p.b), source: BETA_VARIANCE_SOURCE },
      mean: p.a / (p.a + p.b),
      variance: (p.a * p.b) / ((p.a + p.b) ** 2 * (p.a + p.b + 1)),
    }),
  [{ a: 0.5, b: 0.5 }],
);

const lognormalSpecs = [location('mu', 'mean of log X'), positive('sigma', 'SD of log X', 1)];
const lognormal = family('lognormal', 'lognormal; skewed with a long right tail', lognormalSpecs, (p) =>
  withNormalMap(
    univariateScenario({
      family: 'lognormal',
      specs: lognormalSpecs,
      params: p,
      truth: p.mu + halfLogTimesSquare(2 * Math.PI * Math.E, p.sigma),
      truthSource: `μ + ½ log(2πeσ²); ${CT}`,
      support: 'half',
      tails: 'heavy',
      density: {
        lower: 0,
        upper: Infinity,
        logDensity: (x) => {
          if (!(x > 0)) return -Infinity;
          const z = (Math.log(x) - p.mu) / p.sigma;
          return -Math.log(x) - Math.log(p.sigma) - 0.5 * LOG_2PI - 0.5 * z * z;
        },
        cdf: (x) => (x <= 0 ? 0 : normalCdf((Math.log(x) - p.mu) / p.sigma)),
        survival: (x) => (x <= 0 ? 1 : normalSurvival((Math.log(x) - p.mu) / p.sigma)),
        breakpoints: [Math.exp(p.mu - p.sigma * p.sigma), Math.exp(p.mu)],
      },
      sampler: (rng) => lognormalRandom.factory(p.mu, p.sigma, { prng: rng }),
      // log f(X) = −log X − Z²/2 + c with log X = μ + σZ: Var = σ² + ½ (Cov(Z, Z²) = 0).
      logDensityVariance: { value: p.sigma * p.sigma + 0.5, source: 'exact: Var(σZ + Z²/2) = σ² + ½' },
      mean: Math.exp(p.mu + (p.sigma * p.sigma) / 2),
      variance: Math.expm1(p.sigma * p.sigma) * Math.exp(2 * p.mu + p.sigma * p.sigma),
    }),
    (z) => Math.exp(p.mu + p.sigma * z),
  ),
);

const weibullSpecs = [positive('k', 'shape', 1.5), positive('lambda', 'scale', 1)];
const weibull = family(
  'weibull',
  'Weibull; shape k < 1 has a pole at 0 and a heavier tail',
  weibullSpecs,
  (p) =>
    univariateScenario({
      family: 'weibull',
      specs: weibullSpecs,
      params: p,
      truth: EULER_GAMMA * (1 - 1 / p.k) + logQuotient(p.lambda, p.k) + 1,
      truthSource: `γ(1 − 1/k) + log(λ/k) + 1; ${LR}`,
      support: 'half',
      tails: p.k < 1 ? 'heavy' : p.k < 2 ? 'exponential' : 'light',
      density: {
        lower: 0,
        upper: Infinity,
        logDensity: (x) => {
          if (!(x > 0)) return -Infinity;
          const z = x / p.lambda;
          return Math.log(p.k / p.lambda) + (p.k - 1) * Math.log(z) - Math.pow(z, p.k);
        },
        cdf: (x) => (x <= 0 ? 0 : -Math.expm1(-Math.pow(x / p.lambda, p.k))),
        survival: (x) => (x <= 0 ? 1 : Math.exp(-Math.pow(x / p.lambda, p.k))),
        quantile: (u) => p.lambda * Math.pow(-Math.log1p(-u), 1 / p.k),
        breakpoints: [p.lambda],
      },
      sampler: (rng) => weibullRandom.factory(p.k, p.lambda, { prng: rng }),
      mean: p.lambda * Math.exp(logGamma(1 + 1 / p.k)),
      variance: p.lambda * p.lambda * (Math.exp(logGamma(1 + 2 / p.k)) - Math.exp(2 * logGamma(1 + 1 / p.k))),
    }),
  [{ k: 0.7, lambda: 1 }],
);

const gumbelSpecs = [location('mu', 'mode'), positive('beta', 'scale', 1)];
const gumbel = family('gumbel', 'Gumbel (largest extreme value); skewed right', gumbelSpecs, (p) =>
  univariateScenario({
    family: 'gumbel',
    specs: gumbelSpecs,
    params: p,
    truth: Math.log(p.beta) + EULER_GAMMA + 1,
    truthSource: `log β + γ + 1; ${LR}`,
    support: 'unbounded',
    tails: 'exponential',
    density: {
      lower: -Infinity,
      upper: Infinity,
      logDensity: (x) => {
        const z = (x - p.mu) / p.beta;
        return -Math.log(p.beta) - z - Math.exp(-z);
      },
      cdf: (x) => Math.exp(-Math.exp(-(x - p.mu) / p.beta)),
      survival: (x) => -Math.expm1(-Math.exp(-(x - p.mu) / p.beta)),
      quantile: (u) => p.mu - p.beta * Math.log(-Math.log(u)),
      breakpoints: [p.mu],
    },
    sampler: (rng) => gumbelRandom.factory(p.mu, p.beta, { prng: rng }),
    mean: p.mu + EULER_GAMMA * p.beta,
    variance: (Math.PI * Math.PI * p.beta * p.beta) / 6,
  }),
);

const paretoSpecs = [positive('alpha', 'tail index', 3), positive('xm', 'minimum value (scale)', 1)];
const pareto = family(
  'pareto',
  'Pareto (type I); power-law tail with index α',
  paretoSpecs,
  (p) =>
    univariateScenario({
      family: 'pareto',
      specs: paretoSpecs,
      params: p,
      truth: logQuotient(p.xm, p.alpha) + 1 / p.alpha + 1,
      truthSource: `log(x_m/α) + 1/α + 1; ${LR}`,
      support: 'half',
      tails: 'heavy',
      density: {
        lower: p.xm,
        upper: Infinity,
        logDensity: (x) => (x >= p.xm ? Math.log(p.alpha) + p.alpha * Math.log(p.xm) - (p.alpha + 1) * Math.log(x) : -Infinity),
        cdf: (x) => (x <= p.xm ? 0 : -Math.expm1(p.alpha * Math.log(p.xm / x))),
        survival: (x) => (x <= p.xm ? 1 : Math.exp(p.alpha * Math.log(p.xm / x))),
        quantile: (u) => p.xm * Math.exp(-Math.log1p(-u) / p.alpha),
        breakpoints: [2 * p.xm],
      },
      sampler: (rng) => paretoRandom.factory(p.alpha, p.xm, { prng: rng }),
      // log f = c − (α+1) log X with α log(X/x_m) ~ exponential(1): Var = ((α+1)/α)².
      logDensityVariance: { value: ((p.alpha + 1) / p.alpha) ** 2, source: 'exact: α log(X/x_m) is exponential(1)' },
      mean: p.alpha > 1 ? (p.alpha * p.xm) / (p.alpha - 1) : undefined,
      variance: p.alpha > 2 ? (p.xm * p.xm * p.alpha) / ((p.alpha - 1) ** 2 * (p.alpha - 2)) : undefined,
    }),
  [{ alpha: 1.5, xm: 1 }],
);

const triangularSpecs = [location('a', 'lower end'), location('b', 'upper end', 1), location('c', 'mode', 0.5)];
const triangular = family('triangular', 'triangular on [a, b] with mode c; bounded, kinked', triangularSpecs, (p) => {
  requireOrder('triangular', 'a', p.a, 'b', p.b);
  if (p.c < p.a || p.c > p.b) throw new UsageError(`triangular: needs a ≤ c ≤ b; got a=${p.a}, b=${p.b}, c=${p.c}`);
  const width = p.b - p.a;
  return univariateScenario({
    family: 'triangular',
    specs: triangularSpecs,
    params: p,
    truth: Number.isFinite(width) && fullPrecision(width / 2) ? 0.5 + Math.log(width / 2) : 0.5 + logWidth(p.a, p.b) - Math.LN2,
    truthSource: `½ + log((b − a)/2); ${LR}`,
    support: 'bounded',
    tails: 'light',
    density: {
      lower: p.a,
      upper: p.b,
      logDensity: (x) => {
        if (x < p.a || x > p.b) return -Infinity;
        const rise = x < p.c ? (x - p.a) / (p.c - p.a) : x > p.c ? (p.b - x) / (p.b - p.c) : 1;
        return Math.log(2 / width) + Math.log(rise);
      },
      cdf: (x) => {
        if (x <= p.a) return 0;
        if (x >= p.b) return 1;
        if (x <= p.c) return ((x - p.a) * (x - p.a)) / (width * (p.c - p.a));
        return 1 - ((p.b - x) * (p.b - x)) / (width * (p.b - p.c));
      },
      survival: (x) => {
        if (x <= p.a) return 1;
        if (x >= p.b) return 0;
        if (x >= p.c) return ((p.b - x) * (p.b - x)) / (width * (p.b - p.c));
        return 1 - ((x - p.a) * (x - p.a)) / (width * (p.c - p.a));
      },
      quantile: (u) => (u * width < p.c - p.a ? p.a + Math.sqrt(u * width * (p.c - p.a)) : p.b - Math.sqrt((1 - u) * width * (p.b - p.c))),
      breakpoints: [p.c],
    },
    sampler: (rng) => triangularRandom.factory(p.a, p.b, p.c, { prng: rng }),
    // log f = log(2/w) + log U' with the rise U' uniform-distributed as √U: log U' = ½ log U, Var = ¼.
    logDensityVariance: { value: 0.25, source: 'exact: the rise (x−a)/(c−a) on each side is distributed as √U' },
    mean: (p.a + p.b + p.c) / 3,
    variance: (p.a * p.a + p.b * p.b + p.c * p.c - p.a * p.b - p.a * p.c - p.b * p.c) / 18,
  });
});

const rayleighSpecs = [positive('sigma', 'scale', 1)];
const rayleigh = family('rayleigh', 'Rayleigh: the length of a 2-D Gaussian vector', rayleighSpecs, (p) =>
  univariateScenario({
    family: 'rayleigh',
    specs: rayleighSpecs,
    params: p,
    truth: 1 + logQuotient(p.sigma, Math.SQRT2) + EULER_GAMMA / 2,
    truthSource: `1 + log(σ/√2) + γ/2; ${LR}`,
    support: 'half',
    tails: 'light',
    density: {
      lower: 0,
      upper: Infinity,
      logDensity: (x) => (x > 0 ? Math.log(x / (p.sigma * p.sigma)) - (x * x) / (2 * p.sigma * p.sigma) : -Infinity),
      cdf: (x) => (x <= 0 ? 0 : -Math.expm1(-(x * x) / (2 * p.sigma * p.sigma))),
      survival: (x) => (x <= 0 ? 1 : Math.exp(-(x * x) / (2 * p.sigma * p.sigma))),
      quantile: (u) => p.sigma * Math.sqrt(-2 * Math.log1p(-u)),
      breakpoints: [p.sigma],
    },
    sampler: (rng) => rayleighRandom.factory(p.sigma, { prng: rng }),
    mean: p.sigma * Math.sqrt(Math.PI / 2),
    variance: ((4 - Math.PI) / 2) * p.sigma * p.sigma,
  }),
);

/** Chi with k degrees of freedom, scaled by `scale`; shared by chi and Maxwell–Boltzmann. */
function chiLike(k: number, scale: number) {
  const halfK = k / 2;
  return {
    // g(k/2) − ½ψ(k/2) − ½ log 2 with Stirling remainders: ½ log π + ½ − 1/(2k) + r(k/2) + (½ − k/2)s(k/2).
    truth:
      halfK < STIRLING_SERIES_MIN
        ? logGamma(halfK) + 0.5 * (k - Math.LN2 - (k - 1) * digamma(halfK)) + Math.log(scale)
        : 0.5 * Math.log(Math.PI) + 0.5 - 0.5 / k + logGammaStirlingRemainder(halfK) + (0.5 - halfK) * digammaStirlingRemainder(halfK) + Math.log(scale),
    logDensity: (x: number) => {
      if (!(x > 0)) return -Infinity;
      const z = x / scale;
      return (k - 1) * Math.log(z) - 0.5 * z * z - (halfK - 1) * Math.LN2 - logGamma(halfK) - Math.log(scale);
    },
    cdf: (x: number) => (x <= 0 ? 0 : regularizedGammaP(halfK, (x * x) / (2 * scale * scale))),
    survival: (x: number) => (x <= 0 ? 1 : regularizedGammaQ(halfK, (x * x) / (2 * scale * scale))),
    mean: scale * Math.SQRT2 * Math.exp(logGamma((k + 1) / 2) - logGamma(halfK)),
    secondMoment: scale * scale * k,
  };
}

const maxwellSpecs = [positive('a', 'scale √(kT/m)', 1)];
const maxwell = family('maxwell-boltzmann', 'Maxwell–Boltzmann speed: chi with 3 degrees of freedom', maxwellSpecs, (p) => {
  const chi3 = chiLike(3, p.a);
  return univariateScenario({
    family: 'maxwell-boltzmann',
    specs: maxwellSpecs,
    params: p,
    truth: logProduct(p.a, Math.sqrt(2 * Math.PI)) + EULER_GAMMA - 0.5,
    truthSource: `log(a√(2π)) + γ − ½; ${LR} (chi, 3 degrees of freedom)`,
    support: 'half',
    tails: 'light',
    density: { lower: 0, upper: Infinity, logDensity: chi3.logDensity, cdf: chi3.cdf, survival: chi3.survival, breakpoints: [Math.SQRT2 * p.a] },
    sampler: (rng) => {
      const draw = chiRandom.factory(3, { prng: rng });
      return () => p.a * draw();
    },
    mean: chi3.mean,
    variance: chi3.secondMoment - chi3.mean * chi3.mean,
  });
});

const chiSpecs = [positive('k', 'degrees of freedom', 3)];
const chi = family('chi', 'chi: the length of a k-dimensional standard Gaussian vector', chiSpecs, (p) => {
  const c = chiLike(p.k, 1);
  return univariateScenario({
    family: 'chi',
    specs: chiSpecs,
    params: p,
    truth: c.truth,
    truthSource: `log Γ(k/2) + ½(k − log 2 − (k − 1)ψ(k/2)); ${LR}`,
    support: 'half',
    tails: 'light',
    density: { lower: 0, upper: Infinity, logDensity: c.logDensity, cdf: c.cdf, survival: c.survival, breakpoints: [Math.sqrt(Math.max(p.k - 1, 0.5))] },
    sampler: (rng) => chiRandom.factory(p.k, { prng: rng }),
    mean: c.mean,
    variance: c.secondMoment - c.mean * c.mean,
  });
});

const chisqSpecs = [positive('k', 'degrees of freedom', 4)];
const chiSquared = family(
  'chi-squared',
  'chi-squared: a sum of k squared standard Gaussians',
  chisqSpecs,
  (p) => {
    const halfK = p.k / 2;
    return univariateScenario({
      family: 'chi-squared',
      specs: chisqSpecs,
      params: p,
      truth: halfK < STIRLING_SERIES_MIN ? halfK + Math.log(2) + logGamma(halfK) + (1 - halfK) * digamma(halfK) : Math.LN2 + gammaEntropyUnitScale(halfK),
      truthSource: `k/2 + log(2Γ(k/2)) + (1 − k/2)ψ(k/2); ${LR}`,
      support: 'half',
      tails: 'exponential',
      density: {
        lower: 0,
        upper: Infinity,
        logDensity: (x) => (x > 0 ? (halfK - 1) * Math.log(x) - x / 2 - halfK * Math.LN2 - logGamma(halfK) : -Infinity),
        cdf: (x) => (x <= 0 ? 0 : regularizedGammaP(halfK, x / 2)),
        survival: (x) => (x <= 0 ? 1 : regularizedGammaQ(halfK, x / 2)),
        breakpoints: [Math.max(p.k - 2, 1), p.k],
      },
      sampler: (rng) => chisquareRandom.factory(p.k, { prng: rng }),
      // Gamma(k/2, scale 2): the gamma formula with shape k/2.
      logDensityVariance: {
        value: gammaLogDensityVariance(halfK),
        source: 'exact: gamma with shape k/2, (k/2−1)²ψ′(k/2) + k/2 − 2(k/2−1)',
      },
      mean: p.k,
      variance: 2 * p.k,
    });
  },
  [{ k: 1 }],
);

const halfNormalSpecs = [positive('sigma', 'scale (SD of the folded Gaussian)', 1)];
const halfNormal = family('half-normal', 'half-normal: |Z|σ; half-bounded with the density maximal at 0', halfNormalSpecs, (p) =>
  univariateScenario({
    family: 'half-normal',
    specs: halfNormalSpecs,
    params: p,
    truth: fullPrecision((Math.PI * Math.E * p.sigma * p.sigma) / 2)
      ? 0.5 * Math.log((Math.PI * Math.E * p.sigma * p.sigma) / 2)
      : 0.5 * Math.log((Math.PI * Math.E) / 2) + Math.log(p.sigma),
    truthSource: `½ log(πeσ²/2); folding a Gaussian halves the density support: ½ log(2πeσ²) − log 2 (${CT})`,
    support: 'half',
    tails: 'light',
    density: {
      lower: 0,
      upper: Infinity,
      logDensity: (x) => (x >= 0 ? 0.5 * Math.log(2 / Math.PI) - Math.log(p.sigma) - (x * x) / (2 * p.sigma * p.sigma) : -Infinity),
      cdf: (x) => (x <= 0 ? 0 : erf(x / (p.sigma * Math.SQRT2))),
      survival: (x) => (x <= 0 ? 1 : erfc(x / (p.sigma * Math.SQRT2))),
      breakpoints: [p.sigma],
    },
    sampler: (rng) => {
      const draw = normalRandom.factory(0, p.sigma, { prng: rng });
      return () => Math.abs(draw());
    },
    logDensityVariance: { value: 0.5, source: 'exact: log f = c − Z²/2 as for the Gaussian' },
    mean: p.sigma * Math.sqrt(2 / Math.PI),
    variance: p.sigma * p.sigma * (1 - 2 / Math.PI),
  }),
);

const genNormalSpecs = [location('mu', 'centre'), positive('alpha', 'scale', 1), positive('beta', 'shape (2: Gaussian, 1: Laplace, large: near-uniform)', 4)];
const generalizedNormal = family(
  'generalized-normal',
  'generalized normal (exponential power); flat-topped for β > 2',
  genNormalSpecs,
  (p) => {
    const invBeta = 1 / p.beta;
    return univariateScenario({
      family: 'generalized-normal',
      specs: genNormalSpecs,
      params: p,
      truth: invBeta - logQuotient(p.beta / 2, p.alpha) + logGamma(invBeta),
      truthSource: '1/β − log(β/(2αΓ(1/β))); Nadarajah, J. Appl. Statist. 32(7) (2005)',
      support: 'unbounded',
      tails: p.beta >= 2 ? 'light' : 'exponential',
      density: {
        lower: -Infinity,
        upper: Infinity,
        logDensity: (x) => Math.log(p.beta / (2 * p.alpha)) - logGamma(invBeta) - Math.pow(Math.abs(x - p.mu) / p.alpha, p.beta),
        cdf: (x) => {
          const half = 0.5 * regularizedGammaP(invBeta, Math.pow(Math.abs(x - p.mu) / p.alpha, p.beta));
          return x < p.mu ? 0.5 - half : 0.5 + half;
        },
        survival: (x) => {
          const half = 0.5 * regularizedGammaQ(invBeta, Math.pow(Math.abs(x - p.mu) / p.alpha, p.beta));
          return x > p.mu ? half : 1 - half;
        },
        breakpoints: [p.mu - p.alpha, p.mu, p.mu + p.alpha],
      },
      sampler: (rng) => {
        // |X − μ|/α = G^{1/β} with G ~ Gamma(1/β, 1), and a fair random sign.
        const drawGamma = gammaRandom.factory(invBeta, 1, { prng: rng });
        return () => {
          const magnitude = p.alpha * Math.pow(drawGamma(), invBeta);
          return rng() < 0.5 ? p.mu - magnitude : p.mu + magnitude;
        };
      },
      // log f = c − G with G ~ Gamma(1/β, 1): Var = 1/β.
      logDensityVariance: { value: invBeta, source: 'exact: (|X−μ|/α)^β ~ Gamma(1/β, 1)' },
      mean: p.mu,
      variance: p.alpha * p.alpha * Math.exp(logGamma(3 * invBeta) - logGamma(invBeta)),
    });
  },
  [{ mu: 0, alpha: 1, beta: 1.5 }],
);

const arcsineSpecs = [location('a', 'lower end'), location('b', 'upper end', 1)];
const arcsine = family('arcsine', 'arcsine on [a, b]; poles at both ends', arcsineSpecs, (p) => {
  requireOrder('arcsine', 'a', p.a, 'b', p.b);
  const width = p.b - p.a;
  return univariateScenario({
    family: 'arcsine',
    specs: arcsineSpecs,
    params: p,
    truth: Math.log(Math.PI / 4) + logWidth(p.a, p.b),
    truthSource: 'log(π/4) + log(b − a); the Beta(½, ½) entropy of Cover & Thomas Table 17.1 rescaled',
    support: 'bounded',
    tails: 'light',
    density: {
      lower: p.a,
      upper: p.b,
      logDensity: (x) => (x > p.a && x < p.b ? -Math.log(Math.PI) - 0.5 * Math.log((x - p.a) * (p.b - x)) : -Infinity),
      logDensityNearUpper: (u) => (u > 0 && u < width ? -Math.log(Math.PI) - 0.5 * Math.log((width - u) * u) : -Infinity),
      cdf: (x) => (x <= p.a ? 0 : x >= p.b ? 1 : (2 / Math.PI) * Math.asin(Math.sqrt((x - p.a) / width))),
      survival: (x) => (x <= p.a ? 1 : x >= p.b ? 0 : (2 / Math.PI) * Math.asin(Math.sqrt((p.b - x) / width))),
      quantile: (u) => p.a + width * Math.sin((Math.PI / 2) * u) ** 2,
      breakpoints: [(p.a + p.b) / 2],
    },
    sampler: (rng) => arcsineRandom.factory(p.a, p.b, { prng: rng }),
    logDensityVariance: { value: betaLogDensityVariance(0.5, 0.5), source: `${BETA_VARIANCE_SOURCE}, a = b = ½ (= π²/12)` },
    mean: (p.a + p.b) / 2,
    variance: (width * width) / 8,
  });
});

const levySpecs = [location('mu', 'location (lower end of the support)'), positive('c', 'scale', 1)];
const levy = family('levy', 'Lévy: a stable law with tail index ½; no mean', levySpecs, (p) =>
  univariateScenario({
    family: 'levy',
    specs: levySpecs,
    params: p,
    truth: fullPrecision(16 * Math.PI * p.c * p.c)
      ? (1 + 3 * EULER_GAMMA + Math.log(16 * Math.PI * p.c * p.c)) / 2
      : (1 + 3 * EULER_GAMMA + Math.log(16 * Math.PI)) / 2 + Math.log(p.c),
    truthSource: '(1 + 3γ + log(16πc²))/2; the inverse-gamma entropy of Lazo & Rathie (1978) with α = ½, β = c/2',
    support: 'half',
    tails: 'heavy',
    density: {
      lower: p.mu,
      upper: Infinity,
      logDensity: (x) => {
        const y = x - p.mu;
        return y > 0 ? 0.5 * Math.log(p.c / (2 * Math.PI)) - 1.5 * Math.log(y) - p.c / (2 * y) : -Infinity;
      },
      cdf: (x) => (x <= p.mu ? 0 : erfc(Math.sqrt(p.c / (2 * (x - p.mu))))),
      survival: (x) => (x <= p.mu ? 1 : erf(Math.sqrt(p.c / (2 * (x - p.mu))))),
      breakpoints: [p.mu + p.c / 3, p.mu + p.c],
    },
    sampler: (rng) => levyRandom.factory(p.mu, p.c, { prng: rng }),
    // X − μ = c/Z²: log f = const + 3 log|Z| − Z²/2, Var = 9·π²/8 + ½ − 3·Cov(log|Z|, Z²) with the covariance 1.
    logDensityVariance: { value: (9 * Math.PI * Math.PI) / 8 - 2.5, source: 'exact: X − μ = c/Z², Var(3 log|Z| − Z²/2) = 9π²/8 − 5/2' },
  }),
);

const frechetSpecs = [positive('alpha', 'tail index', 3), positive('s', 'scale', 1), location('m', 'lower end of the support')];
const frechet = family('frechet', 'Fréchet (type II extreme value); power-law right tail', frechetSpecs, (p) =>
  univariateScenario({
    family: 'frechet',
    specs: frechetSpecs,
    params: p,
    truth: 1 + EULER_GAMMA / p.alpha + EULER_GAMMA + logQuotient(p.s, p.alpha),
    truthSource: '1 + γ/α + γ + log(s/α); the Weibull entropy of Lazo & Rathie (1978) under x ↦ 1/x',
    support: 'half',
    tails: 'heavy',
    density: {
      lower: p.m,
      upper: Infinity,
      logDensity: (x) => {
        if (!(x > p.m)) return -Infinity;
        const z = (x - p.m) / p.s;
        return Math.log(p.alpha / p.s) - (1 + p.alpha) * Math.log(z) - Math.pow(z, -p.alpha);
      },
      cdf: (x) => (x <= p.m ? 0 : Math.exp(-Math.pow((x - p.m) / p.s, -p.alpha))),
      survival: (x) => (x <= p.m ? 1 : -Math.expm1(-Math.pow((x - p.m) / p.s, -p.alpha))),
      quantile: (u) => p.m + p.s * Math.pow(-Math.log(u), -1 / p.alpha),
      breakpoints: [p.m + p.s],
    },
    sampler: (rng) => frechetRandom.factory(p.alpha, p.s, p.m, { prng: rng }),
  }),
);

const invGammaSpecs = [positive('alpha', 'shape', 3), positive('beta', 'scale', 1)];
const inverseGamma = family('inverse-gamma', 'inverse gamma: 1/Gamma; power-law right tail', invGammaSpecs, (p) =>
  univariateScenario({
    family: 'inverse-gamma',
    specs: invGammaSpecs,
    params: p,
    // Stirling remainders: ½ log 2π + ½ − (3/2) log α + 1/(2α) + r(α) − (1 + α)s(α), without the α log α terms.
    truth:
      p.alpha < STIRLING_SERIES_MIN
        ? p.alpha + Math.log(p.beta) + logGamma(p.alpha) - (1 + p.alpha) * digamma(p.alpha)
        : 0.5 * LOG_2PI +
          0.5 -
          1.5 * Math.log(p.alpha) +
          0.5 / p.alpha +
          logGammaStirlingRemainder(p.alpha) -
          (1 + p.alpha) * digammaStirlingRemainder(p.alpha) +
          Math.log(p.beta),
    truthSource: `α + log(βΓ(α)) − (1 + α)ψ(α); ${LR}`,
    support: 'half',
    tails: 'heavy',
    density: {
      lower: 0,
      upper: Infinity,
      logDensity: (x) => (x > 0 ? p.alpha * Math.log(p.beta) - logGamma(p.alpha) - (p.alpha + 1) * Math.log(x) - p.beta / x : -Infinity),
      cdf: (x) => (x <= 0 ? 0 : 1 - regularizedGammaP(p.alpha, p.beta / x)),
      survival: (x) => (x <= 0 ? 1 : regularizedGammaP(p.alpha, p.beta / x)),
      breakpoints: [p.beta / (p.alpha + 1), p.beta],
    },
    sampler: (rng) => invgammaRandom.factory(p.alpha, p.beta, { prng: rng }),
  }),
);

const kumaraswamySpecs = [positive('a', 'first shape', 2), positive('b', 'second shape', 5)];
const kumaraswamy = family('kumaraswamy', 'Kumaraswamy on [0, 1]; a beta-like law with a closed-form CDF', kumaraswamySpecs, (p) => {
  const harmonicB = digamma(p.b + 1) + EULER_GAMMA;
  return univariateScenario({
    family: 'kumaraswamy',
    specs: kumaraswamySpecs,
    params: p,
    truth: 1 - 1 / p.b + (1 - 1 / p.a) * harmonicB - logProduct(p.a, p.b),
    truthSource: '(1 − 1/b) + (1 − 1/a)H_b − log(ab), H_b = ψ(b+1) + γ; Jones, Statist. Methodol. 6(1) (2009)',
    support: 'bounded',
    tails: 'light',
    density: {
      lower: 0,
      upper: 1,
      logDensity: (x) => (x > 0 && x < 1 ? Math.log(p.a * p.b) + (p.a - 1) * Math.log(x) + (p.b - 1) * Math.log1p(-Math.pow(x, p.a)) : -Infinity),
      // 1 − (1 − u)^a = −expm1(a·log1p(−u)) keeps the distance u to the upper end.
      logDensityNearUpper: (u) =>
        u > 0 && u < 1 ? Math.log(p.a * p.b) + (p.a - 1) * Math.log1p(-u) + (p.b - 1) * Math.log(-Math.expm1(p.a * Math.log1p(-u))) : -Infinity,
      cdf: (x) => (x <= 0 ? 0 : x >= 1 ? 1 : -Math.expm1(p.b * Math.log1p(-Math.pow(x, p.a)))),
      survival: (x) => (x <= 0 ? 1 : x >= 1 ? 0 : Math.exp(p.b * Math.log1p(-Math.pow(x, p.a)))),
      quantile: (u) => Math.pow(-Math.expm1(Math.log1p(-u) / p.b), 1 / p.a),
      breakpoints: [0.5],
    },
    sampler: (rng) => kumaraswamyRandom.factory(p.a, p.b, { prng: rng }),
  });
});

export const univariateFamilies: ScenarioFamily[] = [
  uniform,
  normal,
  exponential,
  laplace,
  logistic,
  cauchy,
  student,
  gamma,
  beta,
  lognormal,
  weibull,
  gumbel,
  pareto,
  triangular,
  rayleigh,
  maxwell,
  chi,
  chiSquared,
  halfNormal,
  generalizedNormal,
  arcsine,
  levy,
  frechet,
  inverseGamma,
  kumaraswamy,
];

/** The density of a univariate family at given params, e.g. the marginals of multivariate, MI and divergence laws. */
export function univariateDensity(familyId: string, params: Record<string, number>): UnivariateDensity {
  return univariateFamilies.find((f) => f.id === familyId)!.create(params).univariate!;
}
