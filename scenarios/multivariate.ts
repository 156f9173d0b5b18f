/**
 * Multivariate scenarios with closed-form differential entropy.
 */
import type { ParamSpec, Rng, Sample, Scenario, ScenarioFamily } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { cholesky, solveLower, type CholeskyFactor } from '../src/math/linalg.js';
import { digamma, fullPrecision, logGamma, logUnitBallVolume } from '../src/math/special.js';
import { formatNumber } from '../src/core/spec.js';
import { gaussianFromNormals, gaussianRows, normalRepresentation, scenarioId } from './build.js';
import { studentEntropyLargeNu, studentLogDensityVariance, studentUsesSeries, univariateDensity } from './univariate.js';
import { loadPackage } from '../src/core/vendor.js';

const chisquareRandom = loadPackage<typeof import('@stdlib/random-base-chisquare')>('@stdlib/random-base-chisquare');
const normalRandom = loadPackage<typeof import('@stdlib/random-base-normal')>('@stdlib/random-base-normal');

const LOG_2PI_E = Math.log(2 * Math.PI * Math.E);
const CT = 'Cover & Thomas, Elements of Information Theory, 2nd ed. (2006)';

const dimSpec = (def: number): ParamSpec => ({ name: 'dim', meaning: 'dimension d', default: def, min: 1, max: 1000, integer: true });
const rhoSpec: ParamSpec = {
  name: 'rho',
  meaning: 'correlation between every pair of coordinates',
  default: 0.5,
  min: -1,
  max: 1,
  minExclusive: true,
  maxExclusive: true,
};
const positive = (name: string, meaning: string, def: number): ParamSpec => ({ name, meaning, default: def, min: 0, minExclusive: true });

/** Standard deviations σ·spread^{i/(d−1)}, i = 0..d−1: log-spaced so `spread` is the largest/smallest ratio. */
function spreadScales(dim: number, sigma: number, spread: number): number[] {
  return Array.from({ length: dim }, (_, i) => sigma * (dim === 1 ? 1 : Math.pow(spread, i / (dim - 1))));
}

/** Equicorrelated covariance D R D; R is positive definite iff −1/(d−1) < ρ < 1. */
export function equicorrelated(owner: string, dim: number, rho: number, scales: number[]): number[][] {
  if (dim > 1 && !(rho > -1 / (dim - 1))) {
    throw new UsageError(`${owner}: rho=${formatNumber(rho)} is not allowed for dim=${dim}; rho must be > ${formatNumber(-1 / (dim - 1))} and < 1`);
  }
  // The covariance holds products of two SDs: an SD near 1e200 or 1e-170 would make it infinite or lose its digits.
  const [smallest, largest] = [Math.min(...scales), Math.max(...scales)];
  if (!fullPrecision(smallest * smallest) || !fullPrecision(largest * largest)) {
    throw new UsageError(
      `${owner}: standard deviations from ${formatNumber(smallest)} to ${formatNumber(largest)} are not allowed: a covariance needs their squares within the double range; keep every SD between 1e-150 and 1e150`,
    );
  }
  return scales.map((si, i) => scales.map((sj, j) => si * sj * (i === j ? 1 : rho)));
}

function factor(owner: string, covariance: number[][]): CholeskyFactor {
  const f = cholesky(covariance);
  if (!f) throw new UsageError(`${owner}: the covariance matrix is not positive definite`);
  return f;
}

/** Draws n points of N(mean, LLᵀ) into a row-major array, then maps each point in place if asked. */
function gaussianDraws(rng: Rng, n: number, mean: readonly number[], chol: CholeskyFactor, eachPoint?: (row: Float64Array, offset: number) => void): Sample {
  const dim = chol.dim;
  const data = gaussianRows(rng, n, chol, (rows, offset) => {
    for (let j = 0; j < dim; j++) rows[offset + j] += mean[j];
    if (eachPoint) eachPoint(rows, offset);
  });
  return { n, dim, data };
}

/** Log density of N(mean, LLᵀ) at x. */
function gaussianLogDensity(chol: CholeskyFactor, mean: readonly number[], x: ArrayLike<number>): number {
  const dim = chol.dim;
  const r = new Float64Array(dim);
  for (let j = 0; j < dim; j++) r[j] = x[j] - mean[j];
  solveLower(chol.lower, dim, r);
  let q = 0;
  for (let j = 0; j < dim; j++) q += r[j] * r[j];
  return -0.5 * q - 0.5 * chol.logDeterminant - 0.5 * dim * Math.log(2 * Math.PI);
}

/** A Gaussian scenario for any covariance; `id`/`family`/`params` name it. */
export function gaussianScenario(
  id: string,
  familyId: string,
  params: Record<string, number>,
  covariance: number[][],
  mean: number[] = covariance.map(() => 0),
): Scenario {
  const chol = factor(familyId, covariance);
  const dim = covariance.length;
  return {
    id,
    family: familyId,
    quantity: 'entropy',
    dim,
    params,
    truth: 0.5 * (dim * LOG_2PI_E + chol.logDeterminant),
    truthSource: `½ log((2πe)^d det Σ); ${CT}, Theorem 8.4.1`,
    logDensityVariance: dim / 2,
    logDensityVarianceSource: 'exact: log f = c − Q/2 with Q ~ χ²_d',
    support: 'unbounded',
    tails: 'light',
    sample: (rng, n) => gaussianDraws(rng, n, mean, chol),
    fromNormals: gaussianFromNormals(chol, mean),
    logDensity: (x) => gaussianLogDensity(chol, mean, x),
    moments: { mean: [...mean], covariance: covariance.map((r) => [...r]) },
    marginals: mean.map((m, j) => univariateDensity('normal', { mu: m, sigma: Math.sqrt(covariance[j][j]) })),
  };
}

const gaussianSpecs: ParamSpec[] = [
  dimSpec(2),
  rhoSpec,
  { name: 'spread', meaning: 'ratio of the largest to the smallest standard deviation (log-spaced)', default: 1, min: 1 },
  positive('sigma', 'smallest standard deviation', 1),
];
const gaussian: ScenarioFamily = {
  id: 'gaussian',
  quantity: 'entropy',
  summary: 'd-dimensional Gaussian, equicorrelated, optionally anisotropic (any covariance: gaussian-covariance[...])',
  params: gaussianSpecs,
  create: (p) => {
    const covariance = equicorrelated('gaussian', p.dim, p.rho, spreadScales(p.dim, p.sigma, p.spread));
    return gaussianScenario(scenarioId('gaussian', p, gaussianSpecs), 'gaussian', p, covariance);
  },
  examples: [
    { dim: 3, rho: 0.5, spread: 1, sigma: 1 },
    { dim: 5, rho: 0.3, spread: 10, sigma: 1 },
    { dim: 10, rho: 0, spread: 1, sigma: 1 },
  ],
};

/** `gaussian-covariance[1,0.5;0.5,2]`: rows separated by ';', entries by ','. */
export function parseCovarianceArgument(text: string): number[][] {
  const rows = text.split(';').map((row) =>
    row.split(',').map((cell) => {
      const value = Number(cell.trim());
      if (cell.trim() === '' || !Number.isFinite(value)) {
        throw new UsageError(`gaussian-covariance: "${cell.trim()}" is not a number; write rows as a,b;c,d`);
      }
      return value;
    }),
  );
  const dim = rows.length;
  rows.forEach((row, i) => {
    if (row.length !== dim)
      throw new UsageError(
        `gaussian-covariance: row ${i + 1} has ${row.length} ${row.length === 1 ? 'entry' : 'entries'}; a ${dim}×${dim} matrix needs ${dim}`,
      );
  });
  for (let i = 0; i < dim; i++) {
    for (let j = 0; j < i; j++) {
      if (rows[i][j] !== rows[j][i])
        throw new UsageError(`gaussian-covariance: entries (${i + 1},${j + 1}) and (${j + 1},${i + 1}) differ; the matrix must be symmetric`);
    }
  }
  return rows;
}

export function gaussianCovarianceScenario(covariance: number[][]): Scenario {
  const text = covariance.map((row) => row.map(formatNumber).join(',')).join(';');
  const params: Record<string, number> = { dim: covariance.length };
  return gaussianScenario(`gaussian-covariance[${text}]`, 'gaussian-covariance', params, covariance);
}

const boxSpecs: ParamSpec[] = [
  dimSpec(2),
  positive('width', 'side length along the first axis', 1),
  { name: 'aspect', meaning: 'ratio of the last side to the first (log-spaced between)', default: 1, min: 0, minExclusive: true },
];
const uniformBox: ScenarioFamily = {
  id: 'uniform-box',
  quantity: 'entropy',
  summary: 'uniform on an axis-aligned box; bounded support in every coordinate',
  params: boxSpecs,
  create: (p) => {
    const sides = Array.from({ length: p.dim }, (_, i) => p.width * (p.dim === 1 ? 1 : Math.pow(p.aspect, i / (p.dim - 1))));
    const logVolume = sides.reduce((s, w) => s + Math.log(w), 0);
    return {
      id: scenarioId('uniform-box', p, boxSpecs),
      family: 'uniform-box',
      quantity: 'entropy',
      dim: p.dim,
      params: p,
      truth: logVolume,
      truthSource: `Σ log wᵢ (log of the volume); ${CT}`,
      logDensityVariance: 0,
      logDensityVarianceSource: 'exact: log f is constant on the support',
      support: 'bounded',
      tails: 'light',
      sample: (rng, n) => {
        const data = new Float64Array(n * p.dim);
        for (let i = 0; i < data.length; i++) data[i] = rng() * sides[i % p.dim];
        return { n, dim: p.dim, data };
      },
      logDensity: (x) => {
        for (let j = 0; j < p.dim; j++) if (x[j] < 0 || x[j] > sides[j]) return -Infinity;
        return -logVolume;
      },
      marginals: sides.map((w) => univariateDensity('uniform', { a: 0, b: w })),
      moments: {
        mean: sides.map((w) => w / 2),
        covariance: sides.map((wi, i) => sides.map((_, j) => (i === j ? (wi * wi) / 12 : 0))),
      },
    };
  },
  examples: [{ dim: 3, width: 1, aspect: 4 }],
};

const ballSpecs: ParamSpec[] = [dimSpec(3), positive('radius', 'radius', 1)];
const uniformBall: ScenarioFamily = {
  id: 'uniform-ball',
  quantity: 'entropy',
  summary: 'uniform on a Euclidean ball; bounded, round support',
  params: ballSpecs,
  create: (p) => {
    const logVolume = logUnitBallVolume(p.dim) + p.dim * Math.log(p.radius);
    return {
      id: scenarioId('uniform-ball', p, ballSpecs),
      family: 'uniform-ball',
      quantity: 'entropy',
      dim: p.dim,
      params: p,
      truth: logVolume,
      truthSource: `log(π^{d/2} r^d / Γ(d/2 + 1)), the log volume of the ball; ${CT}`,
      logDensityVariance: 0,
      logDensityVarianceSource: 'exact: log f is constant on the support',
      support: 'bounded',
      tails: 'light',
      sample: (rng, n) => {
        // A Gaussian direction and radius r·U^{1/d} give the uniform law on the ball.
        const draw = normalRandom.factory(0, 1, { prng: rng });
        const data = new Float64Array(n * p.dim);
        for (let i = 0; i < n; i++) {
          let norm2 = 0;
          for (let j = 0; j < p.dim; j++) {
            const g = draw();
            data[i * p.dim + j] = g;
            norm2 += g * g;
          }
          const scale = (p.radius * Math.pow(rng(), 1 / p.dim)) / Math.sqrt(norm2);
          for (let j = 0; j < p.dim; j++) data[i * p.dim + j] *= scale;
        }
        return { n, dim: p.dim, data };
      },
      logDensity: (x) => {
        let r2 = 0;
        for (let j = 0; j < p.dim; j++) r2 += x[j] * x[j];
        return r2 <= p.radius * p.radius ? -logVolume : -Infinity;
      },
      moments: {
        mean: new Array<number>(p.dim).fill(0),
        covariance: Array.from({ length: p.dim }, (_, i) => Array.from({ length: p.dim }, (_, j) => (i === j ? (p.radius * p.radius) / (p.dim + 2) : 0))),
      },
    };
  },
  examples: [
    { dim: 2, radius: 1 },
    { dim: 5, radius: 1 },
  ],
};

const tSpecs: ParamSpec[] = [dimSpec(2), positive('nu', 'degrees of freedom', 4), { ...rhoSpec, default: 0 }, positive('sigma', 'scale of each coordinate', 1)];
const studentTMv: ScenarioFamily = {
  id: 'student-t-mv',
  quantity: 'entropy',
  summary: 'multivariate Student t (equicorrelated shape); heavy tails shared by all coordinates',
  params: tSpecs,
  create: (p) => {
    const shape = equicorrelated('student-t-mv', p.dim, p.rho, new Array<number>(p.dim).fill(p.sigma));
    const chol = factor('student-t-mv', shape);
    const d = p.dim;
    const nu = p.nu;
    const half = (nu + d) / 2;
    const logNormaliser = logGamma(half) - logGamma(nu / 2) - (d / 2) * Math.log(nu * Math.PI) - 0.5 * chol.logDeterminant;
    return {
      id: scenarioId('student-t-mv', p, tSpecs),
      family: 'student-t-mv',
      quantity: 'entropy',
      dim: d,
      params: p,
      truth: studentUsesSeries(nu)
        ? 0.5 * chol.logDeterminant + studentEntropyLargeNu(nu, d)
        : 0.5 * chol.logDeterminant + (d / 2) * Math.log(nu * Math.PI) + logGamma(nu / 2) - logGamma(half) + half * (digamma(half) - digamma(nu / 2)),
      truthSource:
        '½ log det Σ + log((νπ)^{d/2} Γ(ν/2)/Γ((ν+d)/2)) + ((ν+d)/2)(ψ((ν+d)/2) − ψ(ν/2)); Kotz & Nadarajah, Multivariate t Distributions and Their Applications (2004)',
      logDensityVariance: studentLogDensityVariance(nu, d),
      logDensityVarianceSource: 'exact: ((ν+d)/2)²(ψ′(ν/2) − ψ′((ν+d)/2)), since 1/(1 + Q/ν) ~ Beta(ν/2, d/2)',
      support: 'unbounded',
      tails: 'heavy',
      sample: (rng, n) => {
        // X = L·Z·√(ν/W), W ~ χ²_ν independent of Z. The χ² draws share the replicate's stream.
        const drawChi2 = chisquareRandom.factory(nu, { prng: rng });
        const zeroMean = Array(d).fill(0);
        return gaussianDraws(rng, n, zeroMean, chol, (data, offset) => {
          const scale = Math.sqrt(nu / drawChi2());
          for (let j = 0; j < d; j++) data[offset + j] *= scale;
        });
      },
      logDensity: (x) => {
        const r = Float64Array.from({ length: d }, (_, j) => x[j]);
        solveLower(chol.lower, d, r);
        let q = 0;
        for (let j = 0; j < d; j++) q += r[j] * r[j];
        return logNormaliser - half * Math.log1p(q / nu);
      },
      marginals: Array.from({ length: d }, () => univariateDensity('student-t', { nu, mu: 0, sigma: p.sigma })),
      moments: nu > 2 ? { mean: new Array<number>(d).fill(0), covariance: shape.map((row) => row.map((v) => (v * nu) / (nu - 2))) } : undefined,
    };
  },
  examples: [{ dim: 3, nu: 3, rho: 0.3, sigma: 1 }],
};

const lognormalSpecs: ParamSpec[] = [
  dimSpec(2),
  { name: 'mu', meaning: 'mean of each log-coordinate', default: 0 },
  positive('sigma', 'SD of each log-coordinate', 0.5),
  rhoSpec,
];
const lognormalMv: ScenarioFamily = {
  id: 'lognormal-mv',
  quantity: 'entropy',
  summary: 'multivariate lognormal: exp of an equicorrelated Gaussian; skewed, half-bounded',
  params: lognormalSpecs,
  create: (p) => {
    const d = p.dim;
    const covariance = equicorrelated('lognormal-mv', d, p.rho, new Array<number>(d).fill(p.sigma));
    const chol = factor('lognormal-mv', covariance);
    const mean = Array(d).fill(p.mu);
    let oneSigmaOne = 0;
    for (const row of covariance) for (const v of row) oneSigmaOne += v;
    const m = Math.exp(p.mu + (p.sigma * p.sigma) / 2);
    const exponentiate = (data: Float64Array, offset: number) => {
      for (let j = 0; j < d; j++) data[offset + j] = Math.exp(data[offset + j]);
    };
    return {
      id: scenarioId('lognormal-mv', p, lognormalSpecs),
      family: 'lognormal-mv',
      quantity: 'entropy',
      dim: d,
      params: p,
      // h(exp X) = h(X) + E[Σ Xᵢ] (the log-Jacobian of y = exp x is Σ xᵢ).
      truth: 0.5 * (d * LOG_2PI_E + chol.logDeterminant) + d * p.mu,
      truthSource: `½ log((2πe)^d det Σ) + Σ μᵢ: the Gaussian entropy (${CT}) plus the mean log-Jacobian of exp`,
      logDensityVariance: d / 2 + oneSigmaOne,
      logDensityVarianceSource: 'exact: Var(Q/2 + 1ᵀX) = d/2 + 1ᵀΣ1, Q ~ χ²_d uncorrelated with 1ᵀX',
      support: 'half',
      tails: 'heavy',
      sample: (rng, n) => gaussianDraws(rng, n, mean, chol, exponentiate),
      fromNormals: gaussianFromNormals(chol, mean, exponentiate),
      logDensity: (y) => {
        let sumLog = 0;
        const x = new Float64Array(d);
        for (let j = 0; j < d; j++) {
          if (!(y[j] > 0)) return -Infinity;
          x[j] = Math.log(y[j]);
          sumLog += x[j];
        }
        return gaussianLogDensity(chol, mean, x) - sumLog;
      },
      marginals: Array.from({ length: d }, () => univariateDensity('lognormal', { mu: p.mu, sigma: p.sigma })),
      moments: {
        mean: new Array<number>(d).fill(m),
        covariance: covariance.map((row) => row.map((v) => Math.exp(2 * p.mu + p.sigma * p.sigma) * Math.expm1(v))),
      },
    };
  },
  examples: [{ dim: 3, mu: 0, sigma: 1, rho: 0.5 }],
};

export const multivariateFamilies: ScenarioFamily[] = [gaussian, uniformBox, uniformBall, studentTMv, lognormalMv];

/** Independent product of scenarios: dimensions add, entropies add (Cover & Thomas, Theorem 8.6.2 with equality). */
export function productScenario(components: Scenario[]): Scenario {
  if (components.length < 2) throw new UsageError('product[...] needs at least two components, e.g. product[normal;exponential:rate=2]');
  for (const c of components) {
    if (c.quantity !== 'entropy') throw new UsageError(`product[...]: component ${c.id} is a ${c.quantity} scenario; only entropy scenarios combine`);
  }
  const dim = components.reduce((s, c) => s + c.dim, 0);
  const supportRank = { bounded: 0, half: 1, unbounded: 2 } as const;
  const tailRank = { light: 0, exponential: 1, heavy: 2 } as const;
  // How far the law extends, as for a data file's columns in advise (profile.ts): the least bounded factor's
  // class, so a bounded factor's hard edges do not show in it (README, "Scenarios").
  const support = components.reduce((worst, c) => (supportRank[c.support] > supportRank[worst] ? c.support : worst), components[0].support);
  const tails = components.reduce((worst, c) => (tailRank[c.tails] > tailRank[worst] ? c.tails : worst), components[0].tails);
  const offsets: number[] = [];
  let offset = 0;
  for (const c of components) {
    offsets.push(offset);
    offset += c.dim;
  }
  const params: Record<string, number> = { dim };
  const scenario: Scenario = {
    id: `product[${components.map((c) => c.id).join(';')}]`,
    family: 'product',
    quantity: 'entropy',
    dim,
    params,
    truth: components.reduce((s, c) => s + c.truth, 0),
    truthSource: `sum of the components' entropies (independence; ${CT}, Theorem 8.6.2): ${components.map((c) => c.truthSource).join(' | ')}`,
    support,
    tails,
    sample: (rng, n) => {
      const data = new Float64Array(n * dim);
      components.forEach((c, k) => {
        // Components draw one after the other from the same stream: deterministic given the seed.
        const part = c.sample(rng, n);
        for (let i = 0; i < n; i++) for (let j = 0; j < c.dim; j++) data[i * dim + offsets[k] + j] = part.data[i * c.dim + j];
      });
      return { n, dim, data };
    },
    get logDensityVariance() {
      let total = 0;
      for (const c of components) {
        const v = c.logDensityVariance;
        if (v === undefined) return undefined;
        total += v;
      }
      return total;
    },
    logDensityVarianceSource: "sum of the components' Var(log f) (independence)",
  };
  if (components.every((c) => c.logDensity)) {
    scenario.logDensity = (x) => components.reduce((s, c, k) => s + c.logDensity!(Array.from({ length: c.dim }, (_, j) => x[offsets[k] + j])), 0);
  }
  const representations = components.map(normalRepresentation);
  if (representations.every((r) => r !== undefined)) {
    const widthOffsets: number[] = [];
    let width = 0;
    for (const r of representations) {
      widthOffsets.push(width);
      width += r.width;
    }
    scenario.fromNormals = {
      width,
      map(normals, n) {
        const data = new Float64Array(n * dim);
        representations.forEach((r, k) => {
          const own = new Float64Array(n * r.width);
          for (let i = 0; i < n; i++) for (let j = 0; j < r.width; j++) own[i * r.width + j] = normals[i * width + widthOffsets[k] + j];
          const part = r.map(own, n);
          const c = components[k];
          for (let i = 0; i < n; i++) for (let j = 0; j < c.dim; j++) data[i * dim + offsets[k] + j] = part.data[i * c.dim + j];
        });
        return { n, dim, data };
      },
    };
  }
  if (components.every((c) => c.marginals)) scenario.marginals = components.flatMap((c) => c.marginals!);
  if (components.every((c) => c.moments)) {
    const mean = components.flatMap((c) => c.moments!.mean);
    const covariance = Array.from({ length: dim }, () => Array(dim).fill(0) as number[]);
    components.forEach((c, k) => {
      c.moments!.covariance.forEach((row, i) => row.forEach((v, j) => (covariance[offsets[k] + i][offsets[k] + j] = v)));
    });
    scenario.moments = { mean, covariance };
  }
  return scenario;
}
