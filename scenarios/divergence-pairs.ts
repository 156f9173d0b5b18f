/**
 * Divergence scenarios: pairs of laws P and Q whose Kullback–Leibler divergence D(P ‖ Q) = E_P log(p/q) is
 * known in closed form. `sample(rng, n)` draws n points from P and then, from the same stream, n points from Q,
 * returned as the P sample with `.q` set.
 *
 *   const s = parseScenario('kl-gamma:shapeP=2,scaleP=1,shapeQ=3,scaleQ=1');
 *   const p = s.sample(rng, 1000);          // p.q holds the 1000 draws from Q
 *
 * Facts (`support`, `tails`) describe the harder of the two laws; `moments` and `marginals` describe P.
 */
import { exponentialRandom, gammaRandom, laplaceRandom, normalRandom } from '../src/math/random.js';
import type { ParamSpec, Rng, Scenario, ScenarioFamily } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { cholesky, solveLower, type CholeskyFactor } from '../src/math/linalg.js';
import { digamma, logGamma, logQuotient, logWidth } from '../src/math/special.js';
import { STIRLING_SERIES_MIN, digammaStirlingRemainder, log1pMinusIdentity, logGammaStirlingRemainder } from '../src/math/stirling.js';
import { formatNumber } from '../src/core/spec.js';
import { gaussianRows, scenarioFromFacts, type ScenarioFacts } from './build.js';
import { equicorrelated } from './multivariate.js';
import { univariateDensity } from './univariate.js';

const PENNY =
  'Penny, KL-divergences of Normal, Gamma, Dirichlet and Wishart densities, tech. report, Wellcome Department of Cognitive Neurology, University College London (2001)';

export interface DivergenceDefinition extends ScenarioFacts {
  dim: number;
  /** n rows from P, row-major; then `drawQ` is called on the same stream. */
  drawP(rng: Rng, n: number): Float64Array;
  drawQ(rng: Rng, n: number): Float64Array;
}

export function divergenceScenario(def: DivergenceDefinition): Scenario {
  const { dim } = def;
  return scenarioFromFacts(def, 'divergence', dim, (rng, n) => {
    const p = def.drawP(rng, n);
    const q = def.drawQ(rng, n);
    return { n, dim, data: p, q: { n, dim, data: q } };
  });
}

/** n draws of a univariate sampler. */
function draws(draw: () => number, n: number): Float64Array {
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) out[i] = draw();
  return out;
}

const positive = (name: string, meaning: string, def: number): ParamSpec => ({ name, meaning, default: def, min: 0, minExclusive: true });
const location = (name: string, meaning: string, def: number): ParamSpec => ({ name, meaning, default: def });

// ---------------------------------------------------------------------------------------------------------
// Gaussian pairs

/**
 * D(N(μp, Σp) ‖ N(μq, Σq)) = ½ [tr(Σq⁻¹Σp) + (μq − μp)ᵀ Σq⁻¹ (μq − μp) − d + log det Σq − log det Σp],
 * with tr(Σq⁻¹Σp) = ‖Lq⁻¹ Lp‖²_F and the quadratic form ‖Lq⁻¹(μq − μp)‖² (Cholesky factors L).
 */
export function gaussianDivergence(meanP: readonly number[], cholP: CholeskyFactor, meanQ: readonly number[], cholQ: CholeskyFactor): number {
  const d = cholP.dim;
  let trace = 0;
  const column = new Float64Array(d);
  for (let c = 0; c < d; c++) {
    for (let r = 0; r < d; r++) column[r] = cholP.lower[r * d + c];
    solveLower(cholQ.lower, d, column);
    for (let r = 0; r < d; r++) trace += column[r] * column[r];
  }
  const shift = Float64Array.from({ length: d }, (_, j) => meanQ[j] - meanP[j]);
  solveLower(cholQ.lower, d, shift);
  let quadratic = 0;
  for (let j = 0; j < d; j++) quadratic += shift[j] * shift[j];
  return 0.5 * (trace + quadratic - d + cholQ.logDeterminant - cholP.logDeterminant);
}

const gaussianPairSpecs: ParamSpec[] = [
  { name: 'dim', meaning: 'dimension d', default: 1, min: 1, max: 1000, integer: true },
  location('shift', 'mean of every coordinate of Q (P has mean 0)', 1),
  positive('sigma', 'standard deviation of every coordinate of Q (Q has independent coordinates)', 1),
  {
    name: 'rho',
    meaning: 'correlation between every pair of coordinates of P (unit variances)',
    default: 0,
    min: -1,
    max: 1,
    minExclusive: true,
    maxExclusive: true,
  },
];

const gaussianSource = `½[tr(Σq⁻¹Σp) + (μq−μp)ᵀΣq⁻¹(μq−μp) − d + log(det Σq/det Σp)]; Kullback, Information Theory and Statistics (1959); ${PENNY}`;

/** P = N(0, R_ρ) equicorrelated, Q = N(shift·1, σ² I): the two laws and D(P‖Q). */
function gaussianPair(owner: string, p: Record<string, number>) {
  const d = p.dim;
  const covarianceP = equicorrelated(owner, d, p.rho, new Array<number>(d).fill(1));
  const cholP = cholesky(covarianceP);
  if (!cholP) throw new UsageError(`${owner}: the covariance of P is not positive definite for rho=${formatNumber(p.rho)}, dim=${d}`);
  const diagonalQ = new Float64Array(d * d);
  for (let j = 0; j < d; j++) diagonalQ[j * d + j] = p.sigma;
  const cholQ: CholeskyFactor = { dim: d, lower: diagonalQ, logDeterminant: 2 * d * Math.log(p.sigma) };
  const meanP = new Array<number>(d).fill(0);
  const meanQ = new Array<number>(d).fill(p.shift);
  const truth = gaussianDivergence(meanP, cholP, meanQ, cholQ);
  const drawQ = (rng: Rng, n: number): Float64Array => {
    const normal = normalRandom.factory(p.shift, p.sigma, { prng: rng });
    return draws(normal, n * d);
  };
  return { covarianceP, cholP, truth, drawQ };
}

const klGaussian: ScenarioFamily = {
  id: 'kl-gaussian',
  quantity: 'divergence',
  summary: 'P = N(0, equicorrelated R), Q = N(shift·1, σ²I) in any dimension; closed form',
  params: gaussianPairSpecs,
  create: (p) => {
    const pair = gaussianPair('kl-gaussian', p);
    return divergenceScenario({
      family: 'kl-gaussian',
      specs: gaussianPairSpecs,
      params: p,
      dim: p.dim,
      truth: pair.truth,
      truthSource: gaussianSource,
      support: 'unbounded',
      tails: 'light',
      drawP: (rng, n) => gaussianRows(rng, n, pair.cholP),
      drawQ: pair.drawQ,
      marginals: pair.covarianceP.map(() => univariateDensity('normal', { mu: 0, sigma: 1 })),
      moments: { mean: pair.covarianceP.map(() => 0), covariance: pair.covarianceP },
    });
  },
  examples: [
    { dim: 1, shift: 0, sigma: 2, rho: 0 },
    { dim: 3, shift: 0.5, sigma: 2, rho: 0.5 },
    { dim: 5, shift: 1, sigma: 1, rho: 0 },
  ],
};

const klTransformed: ScenarioFamily = {
  id: 'kl-transformed',
  quantity: 'divergence',
  summary: 'the kl-gaussian pair after exp on every coordinate of both samples (lognormal pair): the same divergence',
  params: gaussianPairSpecs,
  create: (p) => {
    const pair = gaussianPair('kl-transformed', p);
    const expInPlace = (data: Float64Array): Float64Array => {
      for (let i = 0; i < data.length; i++) data[i] = Math.exp(data[i]);
      return data;
    };
    return divergenceScenario({
      family: 'kl-transformed',
      specs: gaussianPairSpecs,
      params: p,
      dim: p.dim,
      truth: pair.truth,
      truthSource: `the kl-gaussian value: D(P‖Q) is unchanged when one invertible map is applied to both laws (the Jacobian cancels in p/q; Kullback 1959); ${gaussianSource}`,
      support: 'half',
      tails: 'heavy',
      drawP: (rng, n) => expInPlace(gaussianRows(rng, n, pair.cholP)),
      drawQ: (rng, n) => expInPlace(pair.drawQ(rng, n)),
      marginals: pair.covarianceP.map(() => univariateDensity('lognormal', { mu: 0, sigma: 1 })),
    });
  },
  examples: [{ dim: 2, shift: 0.5, sigma: 1.5, rho: 0.3 }],
};

// ---------------------------------------------------------------------------------------------------------
// Univariate pairs

const exponentialSpecs: ParamSpec[] = [positive('rateP', 'rate of P', 1), positive('rateQ', 'rate of Q', 2)];
const klExponential: ScenarioFamily = {
  id: 'kl-exponential',
  quantity: 'divergence',
  summary: 'exponential P vs exponential Q: log(λp/λq) + λq/λp − 1',
  params: exponentialSpecs,
  create: (p) =>
    divergenceScenario({
      family: 'kl-exponential',
      specs: exponentialSpecs,
      params: p,
      dim: 1,
      // E_P[log λp − λp X − log λq + λq X] with E_P X = 1/λp.
      truth: logQuotient(p.rateP, p.rateQ) + p.rateQ / p.rateP - 1,
      truthSource: `log(λp/λq) + λq/λp − 1: E_P[log p − log q] with E_P X = 1/λp; the gamma case of ${PENNY}`,
      support: 'half',
      tails: 'exponential',
      drawP: (rng, n) => draws(exponentialRandom.factory(p.rateP, { prng: rng }), n),
      drawQ: (rng, n) => draws(exponentialRandom.factory(p.rateQ, { prng: rng }), n),
      marginals: [univariateDensity('exponential', { rate: p.rateP })],
      moments: { mean: [1 / p.rateP], covariance: [[1 / (p.rateP * p.rateP)]] },
    }),
  examples: [{ rateP: 1, rateQ: 0.25 }],
};

const gammaSpecs: ParamSpec[] = [
  positive('shapeP', 'shape of P', 2),
  positive('scaleP', 'scale of P', 1),
  positive('shapeQ', 'shape of Q', 3),
  positive('scaleQ', 'scale of Q', 1),
];

/**
 * D(Gamma(kp, θp) ‖ Gamma(kq, θq)) (shape k, scale θ)
 *   = (kp − kq) ψ(kp) − log Γ(kp) + log Γ(kq) + kq (log θq − log θp) + kp (θp − θq)/θq
 * (Penny 2001, in rate form): E_P log X = ψ(kp) + log θp and E_P X = kp θp.
 */
export function gammaDivergence(kp: number, thetaP: number, kq: number, thetaQ: number): number {
  if (kp >= STIRLING_SERIES_MIN && kq >= STIRLING_SERIES_MIN) return gammaDivergenceLargeShapes(kp, thetaP, kq, thetaQ);
  const shapePart = kp < STIRLING_SERIES_MIN && kq < STIRLING_SERIES_MIN ? (kp - kq) * digamma(kp) - logGamma(kp) + logGamma(kq) : gammaShapeBregman(kp, kq);
  // e = θp/θq − 1; near e = 0 the scale part kq(e − log1p e) + (kp − kq)e is formed without its cancelling logs.
  const e = (thetaP - thetaQ) / thetaQ;
  if (Math.abs(e) < 0.25) return shapePart - kq * log1pMinusIdentity(e) + (kp - kq) * e;
  return shapePart + kq * (Math.log(thetaQ) - Math.log(thetaP)) + (kp * (thetaP - thetaQ)) / thetaQ;
}

/**
 * Both shapes past the series threshold: with t = kq/kp − 1, e = θp/θq − 1 and w = (e − t)/(1 + t) = μp/μq − 1
 * (the ratio of the means less 1), the terms of size k in the shape and scale parts combine into
 * −kq(log1p w − w), leaving D = −kq(log1p w − w) − ½(log1p t − t) + r(kq) − r(kp) − kp·t·s(kp): laws with nearly
 * equal means no longer subtract two numbers of size k.
 */
function gammaDivergenceLargeShapes(kp: number, thetaP: number, kq: number, thetaQ: number): number {
  const t = (kq - kp) / kp;
  const e = (thetaP - thetaQ) / thetaQ;
  const w = Number.isFinite(e) ? (e - t) / (1 + t) : (kp / kq) * (thetaP / thetaQ) - 1;
  return (
    -kq * log1pMinusIdentity(w) -
    0.5 * log1pMinusIdentity(t) +
    logGammaStirlingRemainder(kq) -
    logGammaStirlingRemainder(kp) -
    kp * t * digammaStirlingRemainder(kp)
  );
}

/**
 * log Γ(kq) − log Γ(kp) − (kq − kp)ψ(kp) ≥ 0, the gap of log Γ under its tangent at kp. With t = kq/kp − 1 and
 * Stirling remainders r, s it is kp((1 + t) log1p t − t) − ½(log1p t − t) + r(kq) − r(kp) − kp·t·s(kp): every
 * term is of the size of the result (kp t²/2 for small t), where log Γ(kq) and log Γ(kp) are of size kp log kp.
 */
function gammaShapeBregman(kp: number, kq: number): number {
  const t = (kq - kp) / kp;
  const log1pT = Math.log1p(t);
  const tangentGap = log1pMinusIdentity(t) + t * log1pT;
  return kp * tangentGap - 0.5 * log1pMinusIdentity(t) + logGammaStirlingRemainder(kq) - logGammaStirlingRemainder(kp) - kp * t * digammaStirlingRemainder(kp);
}

const klGamma: ScenarioFamily = {
  id: 'kl-gamma',
  quantity: 'divergence',
  summary: 'gamma P vs gamma Q (shape, scale); digamma closed form',
  params: gammaSpecs,
  create: (p) =>
    divergenceScenario({
      family: 'kl-gamma',
      specs: gammaSpecs,
      params: p,
      dim: 1,
      truth: gammaDivergence(p.shapeP, p.scaleP, p.shapeQ, p.scaleQ),
      truthSource: `(kp − kq)ψ(kp) − log Γ(kp) + log Γ(kq) + kq log(θq/θp) + kp(θp − θq)/θq; ${PENNY}`,
      support: 'half',
      tails: 'exponential',
      drawP: (rng, n) => draws(gammaRandom.factory(p.shapeP, 1 / p.scaleP, { prng: rng }), n),
      drawQ: (rng, n) => draws(gammaRandom.factory(p.shapeQ, 1 / p.scaleQ, { prng: rng }), n),
      marginals: [univariateDensity('gamma', { shape: p.shapeP, scale: p.scaleP })],
      moments: { mean: [p.shapeP * p.scaleP], covariance: [[p.shapeP * p.scaleP * p.scaleP]] },
    }),
  examples: [{ shapeP: 0.5, scaleP: 2, shapeQ: 1, scaleQ: 1 }],
};

const laplaceSpecs: ParamSpec[] = [
  location('muP', 'centre of P', 0),
  positive('bP', 'scale of P', 1),
  location('muQ', 'centre of Q', 1),
  positive('bQ', 'scale of Q', 2),
];

/**
 * D(Laplace(μp, bp) ‖ Laplace(μq, bq)) = log(bq/bp) − 1 + (δ + bp e^{−δ/bp})/bq, δ = |μp − μq|: from
 * E_P[log p − log q] = log(bq/bp) − E_P|X − μp|/bp + E_P|X − μq|/bq, E_P|X − μp| = bp, and
 * E_P|X − c| = δ + bp e^{−δ/bp} for a point c at distance δ from μp.
 */
export function laplaceDivergence(muP: number, bP: number, muQ: number, bQ: number): number {
  const delta = Math.abs(muP - muQ);
  return Math.log(bQ / bP) - 1 + (delta + bP * Math.exp(-delta / bP)) / bQ;
}

const klLaplace: ScenarioFamily = {
  id: 'kl-laplace',
  quantity: 'divergence',
  summary: 'Laplace P vs Laplace Q: log(bq/bp) − 1 + (δ + bp e^{−δ/bp})/bq',
  params: laplaceSpecs,
  create: (p) =>
    divergenceScenario({
      family: 'kl-laplace',
      specs: laplaceSpecs,
      params: p,
      dim: 1,
      truth: laplaceDivergence(p.muP, p.bP, p.muQ, p.bQ),
      truthSource:
        'log(bq/bp) − 1 + (δ + bp e^{−δ/bp})/bq with δ = |μp − μq|: E_P[log p − log q] using E_P|X − c| = δ + bp e^{−δ/bp} (derived in scenarios/divergence-pairs.ts)',
      support: 'unbounded',
      tails: 'exponential',
      drawP: (rng, n) => draws(laplaceRandom.factory(p.muP, p.bP, { prng: rng }), n),
      drawQ: (rng, n) => draws(laplaceRandom.factory(p.muQ, p.bQ, { prng: rng }), n),
      marginals: [univariateDensity('laplace', { mu: p.muP, b: p.bP })],
      moments: { mean: [p.muP], covariance: [[2 * p.bP * p.bP]] },
    }),
  examples: [{ muP: 0, bP: 1, muQ: 0, bQ: 1.5 }],
};

const uniformSpecs: ParamSpec[] = [
  location('a', 'lower end of P', 0),
  location('b', 'upper end of P', 1),
  location('c', 'lower end of Q (≤ a)', -0.5),
  location('d', 'upper end of Q (≥ b)', 1.5),
];

const klUniform: ScenarioFamily = {
  id: 'kl-uniform',
  quantity: 'divergence',
  summary: 'uniform P = U(a, b) vs a wider uniform Q = U(c, d): log((d − c)/(b − a))',
  params: uniformSpecs,
  create: (p) => {
    if (!(p.a < p.b)) throw new UsageError(`kl-uniform: needs a < b; got a=${formatNumber(p.a)}, b=${formatNumber(p.b)}`);
    if (!(p.c <= p.a && p.b <= p.d)) {
      throw new UsageError(
        `kl-uniform: Q = U(c, d) must contain P = U(a, b) (c ≤ a and b ≤ d), otherwise the divergence is infinite; got a=${formatNumber(p.a)}, b=${formatNumber(p.b)}, c=${formatNumber(p.c)}, d=${formatNumber(p.d)}`,
      );
    }
    const widthP = p.b - p.a;
    const widthQ = p.d - p.c;
    // Widths past the largest double are compared as half-widths, which b/2 − a/2 forms without overflow.
    const ratio = Number.isFinite(widthQ) ? widthQ / widthP : (p.d / 2 - p.c / 2) / (p.b / 2 - p.a / 2);
    return divergenceScenario({
      family: 'kl-uniform',
      specs: uniformSpecs,
      params: p,
      dim: 1,
      truth: Number.isFinite(ratio) && ratio > 0 ? Math.log(ratio) : logWidth(p.c, p.d) - logWidth(p.a, p.b),
      truthSource: 'log((d − c)/(b − a)): log p − log q is constant on the support of P',
      support: 'bounded',
      tails: 'light',
      drawP: (rng, n) => draws(() => p.a + widthP * rng(), n),
      drawQ: (rng, n) => draws(() => p.c + widthQ * rng(), n),
      marginals: [univariateDensity('uniform', { a: p.a, b: p.b })],
      moments: { mean: [(p.a + p.b) / 2], covariance: [[(widthP * widthP) / 12]] },
    });
  },
  examples: [{ a: 0, b: 1, c: 0, d: 10 }],
};

export const divergenceFamilies: ScenarioFamily[] = [klGaussian, klExponential, klGamma, klLaplace, klUniform, klTransformed];
