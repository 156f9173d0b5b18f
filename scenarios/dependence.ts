/**
 * Mutual-information scenarios: joint laws of (X, Y) whose mutual information I(X; Y) is known in closed form.
 * A sample holds n rows of dimX + dimY columns; the first `xDim` = dimX columns are X, the rest Y.
 *
 *   const s = parseScenario('mi-gaussian:dimX=2,dimY=3,rho=0.6');
 *   const sample = s.sample(rng, 1000);      // sample.xDim === 2, sample.dim === 5
 *
 * Families (truths in nats):
 *   mi-gaussian              jointly Gaussian, unit variances; X_i and Y_i correlated rho for i ≤ min(dimX, dimY),
 *                            coordinates inside each group correlated `within`, every other pair uncorrelated:
 *                            I = ½ log(det Σx det Σy / det Σ), which is −(m/2) log(1 − ρ²) when within = 0.
 *   mi-transformed-gaussian  the same law after exp on every X coordinate and a cube on every Y coordinate:
 *                            the same I, with skewed, heavy-tailed and (for the cube) pole-at-zero marginals.
 *   mi-student-t             multivariate Student t with the same shape matrix: I from the closed-form entropies.
 *                            Dependent even when rho = 0 (the coordinates share the χ² scale).
 *   mi-uniform-noise         X ~ U(0, 1), Y = X + W with W ~ U(0, a) independent: I = a/2 − log a (a ≤ 1),
 *                            1/(2a) (a ≥ 1).
 *   mi-independent           X ~ N(0, I), Y with independent Exp(1) coordinates: I = 0.
 *
 * `logDensityVariance` holds Var(i(X; Y)) of the information density i = log f(x, y)/(f(x) f(y)) where it is
 * known: the asymptotic variance bound Var(i)/n for MI estimators, the analogue of Var(log f)/n for entropy.
 */
import { chisquareRandom, exponentialRandom, normalRandom } from '../src/math/random.js';
import type { ParamSpec, Rng, Scenario, ScenarioFamily, UnivariateDensity } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { cholesky, solveLower, type CholeskyFactor } from '../src/math/linalg.js';
import { digamma, logGamma } from '../src/math/special.js';
import { STIRLING_SERIES_MIN, logGammaMinusXDigammaPlusX, stirlingSecondDifference } from '../src/math/stirling.js';
import { formatNumber } from '../src/core/spec.js';
import { gaussianFromNormals, gaussianRows, scenarioFromFacts, type ScenarioFacts } from './build.js';
import { univariateDensity } from './univariate.js';

const CT = 'Cover & Thomas, Elements of Information Theory, 2nd ed. (2006)';

const dimSpec = (name: string, meaning: string): ParamSpec => ({ name, meaning, default: 1, min: 1, max: 100, integer: true });
const correlationSpec = (name: string, meaning: string, def: number): ParamSpec => ({
  name,
  meaning,
  default: def,
  min: -1,
  max: 1,
  minExclusive: true,
  maxExclusive: true,
});

const groupSpecs: ParamSpec[] = [
  dimSpec('dimX', 'dimension of X'),
  dimSpec('dimY', 'dimension of Y'),
  correlationSpec('rho', 'correlation of X_i with Y_i for i ≤ min(dimX, dimY) (other X–Y pairs uncorrelated)', 0.5),
  correlationSpec('within', 'correlation between coordinates inside X and inside Y', 0),
];

/** What a mutual-information scenario needs beyond its sampler. */
export interface MutualInformationDefinition extends ScenarioFacts {
  xDim: number;
  yDim: number;
  /** Writes n rows of xDim + yDim values, row-major, consuming only `rng`. */
  draw(rng: Rng, n: number): Float64Array;
  informationDensityVariance?: { value: number; source: string };
}

export function mutualInformationScenario(def: MutualInformationDefinition): Scenario {
  const dim = def.xDim + def.yDim;
  const scenario = scenarioFromFacts(def, 'mutual-information', dim, (rng, n) => ({ n, dim, data: def.draw(rng, n), xDim: def.xDim }));
  scenario.xDim = def.xDim;
  if (def.informationDensityVariance) {
    scenario.logDensityVariance = def.informationDensityVariance.value;
    scenario.logDensityVarianceSource = `Var of the information density log f(x,y)/(f(x)f(y)) (the bound for MI): ${def.informationDensityVariance.source}`;
  }
  return scenario;
}

/**
 * The correlation matrix of the group structure: unit diagonal, `within` inside each group, `rho` between
 * X_i and Y_i for i < min(dimX, dimY), zero elsewhere.
 */
export function groupCorrelation(dimX: number, dimY: number, rho: number, within: number): number[][] {
  const dim = dimX + dimY;
  const matrix = Array.from({ length: dim }, () => new Array<number>(dim).fill(0));
  for (let i = 0; i < dim; i++) {
    for (let j = 0; j < dim; j++) {
      const iX = i < dimX;
      const jX = j < dimX;
      if (i === j) matrix[i][j] = 1;
      else if (iX === jX) matrix[i][j] = within;
      else {
        const a = iX ? i : i - dimX;
        const b = jX ? j : j - dimX;
        if (a === b) matrix[i][j] = rho;
      }
    }
  }
  return matrix;
}

function subMatrix(matrix: number[][], from: number, to: number): number[][] {
  return matrix.slice(from, to).map((row) => row.slice(from, to));
}

function factorOrFail(owner: string, matrix: number[][], what: string): CholeskyFactor {
  const f = cholesky(matrix);
  if (!f) throw new UsageError(`${owner}: ${what} is not positive definite; with within = 0 every |rho| < 1 is allowed`);
  return f;
}

/** The three Cholesky factors of a joint covariance split after xDim columns. */
export interface SplitFactors {
  joint: CholeskyFactor;
  x: CholeskyFactor;
  y: CholeskyFactor;
}

export function splitFactors(owner: string, covariance: number[][], xDim: number, params: Record<string, number>): SplitFactors {
  const shown = Object.entries(params)
    .map(([k, v]) => `${k}=${formatNumber(v)}`)
    .join(', ');
  const joint = factorOrFail(owner, covariance, `the covariance for ${shown}`);
  // Principal submatrices of a positive-definite matrix are positive definite.
  const x = factorOrFail(owner, subMatrix(covariance, 0, xDim), 'the X covariance');
  const y = factorOrFail(owner, subMatrix(covariance, xDim, covariance.length), 'the Y covariance');
  return { joint, x, y };
}

/** ½ log(det Σx det Σy / det Σ) from the Cholesky factors: the Gaussian MI (Cover & Thomas, Sec. 8.5 and Thm 8.4.1). */
export function gaussianMutualInformation(factors: SplitFactors): number {
  return 0.5 * (factors.x.logDeterminant + factors.y.logDeterminant - factors.joint.logDeterminant);
}

/**
 * Var(i) for a Gaussian: i = c − ½ zᵀ(Σ⁻¹ − D⁻¹)z with D = diag(Σx, Σy), so Var(i) = ½ tr((I − D⁻¹Σ)²)
 * = tr(Σx⁻¹ Σxy Σy⁻¹ Σyx) = ‖Lx⁻¹ Σxy Ly⁻ᵀ‖²_F, the sum of the squared canonical correlations.
 */
export function gaussianInformationDensityVariance(covariance: number[][], xDim: number, factors: SplitFactors): number {
  const yDim = covariance.length - xDim;
  // M = Lx⁻¹ Σxy, column by column.
  const m = Array.from({ length: yDim }, (_, c) => {
    const column = Float64Array.from({ length: xDim }, (_, r) => covariance[r][xDim + c]);
    solveLower(factors.x.lower, xDim, column);
    return column;
  });
  // N = M Ly⁻ᵀ: each row of M solved against Ly.
  let sumSquares = 0;
  for (let r = 0; r < xDim; r++) {
    const row = Float64Array.from({ length: yDim }, (_, c) => m[c][r]);
    solveLower(factors.y.lower, yDim, row);
    for (let c = 0; c < yDim; c++) sumSquares += row[c] * row[c];
  }
  return sumSquares;
}

function gaussianGroupLaw(owner: string, p: Record<string, number>) {
  const covariance = groupCorrelation(p.dimX, p.dimY, p.rho, p.within);
  const factors = splitFactors(owner, covariance, p.dimX, p);
  const pairs = Math.min(p.dimX, p.dimY);
  // With within = 0 the pairs are independent 2×2 blocks: I = −(m/2) log(1 − ρ²), computed with log1p.
  const truth = p.within === 0 ? -0.5 * pairs * Math.log1p(-p.rho * p.rho) : gaussianMutualInformation(factors);
  const variance =
    p.within === 0
      ? { value: pairs * p.rho * p.rho, source: 'exact: m·ρ² (½ tr((I − D⁻¹Σ)²) for m independent correlated pairs)' }
      : {
          value: gaussianInformationDensityVariance(covariance, p.dimX, factors),
          source: 'exact: tr(Σx⁻¹ Σxy Σy⁻¹ Σyx), the sum of squared canonical correlations',
        };
  return { covariance, factors, truth, variance };
}

const gaussianTruthSource = `½ log(det Σx det Σy / det Σ) = h(X) + h(Y) − h(X,Y) with h = ½ log((2πe)^d det Σ); ${CT}, Theorem 8.4.1 and Sec. 8.5; −(m/2) log(1 − ρ²) for within = 0`;

const miGaussian: ScenarioFamily = {
  id: 'mi-gaussian',
  quantity: 'mutual-information',
  summary: 'jointly Gaussian X and Y with paired cross-correlation rho; I = −(m/2) log(1 − ρ²) for within = 0',
  params: groupSpecs,
  create: (p) => {
    const law = gaussianGroupLaw('mi-gaussian', p);
    const scenario = mutualInformationScenario({
      family: 'mi-gaussian',
      specs: groupSpecs,
      params: p,
      xDim: p.dimX,
      yDim: p.dimY,
      truth: law.truth,
      truthSource: gaussianTruthSource,
      support: 'unbounded',
      tails: 'light',
      draw: (rng, n) => gaussianRows(rng, n, law.factors.joint),
      informationDensityVariance: law.variance,
      marginals: law.covariance.map(() => univariateDensity('normal', { mu: 0, sigma: 1 })),
      moments: { mean: law.covariance.map(() => 0), covariance: law.covariance },
    });
    // A map of independent normals, so autocorrelated[...] can make its rows a series (each row keeps the joint law and I).
    scenario.fromNormals = gaussianFromNormals(
      law.factors.joint,
      law.covariance.map(() => 0),
    );
    return scenario;
  },
  examples: [
    { dimX: 1, dimY: 1, rho: 0.9, within: 0 },
    { dimX: 1, dimY: 1, rho: 0.999, within: 0 },
    { dimX: 2, dimY: 3, rho: 0.6, within: 0 },
    { dimX: 2, dimY: 2, rho: 0.5, within: 0.3 },
  ],
};

/**
 * Mean and covariance of (exp X, Y³) for a standard-marginal Gaussian (X, Y) with correlations c:
 * E e^X = e^{1/2}, cov(e^{X_i}, e^{X_j}) = e(e^c − 1) (lognormal); E Y³ = 0, cov(Y_i³, Y_j³) = 9c + 6c³
 * (Isserlis); cov(e^{X_i}, Y_j³) = e^{1/2} E(Y_j + c)³ = e^{1/2}(3c + c³) (the e^X-tilted law shifts Y_j by c).
 */
function transformedMoments(correlation: number[][], xDim: number): { mean: number[]; covariance: number[][] } {
  const isX = (i: number) => i < xDim;
  const mean = correlation.map((_, i) => (isX(i) ? Math.exp(0.5) : 0));
  const covariance = correlation.map((row, i) =>
    row.map((c, j) => {
      if (isX(i) && isX(j)) return Math.E * Math.expm1(c);
      if (!isX(i) && !isX(j)) return 9 * c + 6 * c * c * c;
      return Math.exp(0.5) * (3 * c + c * c * c);
    }),
  );
  return { mean, covariance };
}

const miTransformedGaussian: ScenarioFamily = {
  id: 'mi-transformed-gaussian',
  quantity: 'mutual-information',
  summary: 'mi-gaussian after exp on every X coordinate and a cube on every Y coordinate: same I, very non-Gaussian marginals',
  params: groupSpecs,
  create: (p) => {
    const law = gaussianGroupLaw('mi-transformed-gaussian', p);
    const dim = p.dimX + p.dimY;
    return mutualInformationScenario({
      family: 'mi-transformed-gaussian',
      specs: groupSpecs,
      params: p,
      xDim: p.dimX,
      yDim: p.dimY,
      truth: law.truth,
      truthSource:
        `the mi-gaussian value: I is unchanged by invertible maps of X and of Y (the Jacobians cancel in f(x,y)/(f(x)f(y)); ` +
        `Kraskov, Stögbauer & Grassberger, Phys. Rev. E 69, 066138 (2004), Sec. II); ${gaussianTruthSource}`,
      support: 'unbounded',
      tails: 'heavy',
      draw: (rng, n) =>
        gaussianRows(rng, n, law.factors.joint, (data, offset) => {
          for (let j = 0; j < p.dimX; j++) data[offset + j] = Math.exp(data[offset + j]);
          for (let j = p.dimX; j < dim; j++) {
            const y = data[offset + j];
            data[offset + j] = y * y * y;
          }
        }),
      informationDensityVariance: { value: law.variance.value, source: `unchanged by the maps; ${law.variance.source}` },
      moments: transformedMoments(law.covariance, p.dimX),
    });
  },
  examples: [{ dimX: 2, dimY: 2, rho: 0.6, within: 0 }],
};

const studentSpecs: ParamSpec[] = [
  dimSpec('dimX', 'dimension of X'),
  dimSpec('dimY', 'dimension of Y'),
  { name: 'nu', meaning: 'degrees of freedom', default: 4, min: 0, minExclusive: true },
  correlationSpec('rho', 'shape-matrix correlation of X_i with Y_i for i ≤ min(dimX, dimY)', 0.5),
];

/**
 * The part of the Student-t MI that does not depend on the shape matrix. With
 * h(t_{ν,d}) = ½ log det Σ + (d/2) log(νπ) + log Γ(ν/2) − log Γ((ν+d)/2) + ((ν+d)/2)(ψ((ν+d)/2) − ψ(ν/2))
 * (Kotz & Nadarajah 2004) and the marginals of a t being t with the same ν and the sub-shape matrix,
 * I = h(X) + h(Y) − h(X,Y) = ½ log(det Σx det Σy / det Σ) + c, where the (d/2) log(νπ) terms cancel and
 *   c = log Γ(ν/2) + log Γ((ν+d)/2) − log Γ((ν+dX)/2) − log Γ((ν+dY)/2)
 *       + ((ν+dX)/2) ψ((ν+dX)/2) + ((ν+dY)/2) ψ((ν+dY)/2) − ((ν+d)/2) ψ((ν+d)/2) − (ν/2) ψ(ν/2).
 */
export function studentScaleInformation(nu: number, xDim: number, yDim: number): number {
  const d = xDim + yDim;
  const hx = (nu + xDim) / 2;
  const hy = (nu + yDim) / 2;
  const hd = (nu + d) / 2;
  const h0 = nu / 2;
  // With F(x) = log Γ(x) − xψ(x) + x the x terms cancel in c = F(h0) + F(hd) − F(hx) − F(hy), and Stirling's
  // series gives F(x) = −½ log x + ½ log 2π + ½ + u(x): c = ½ log1p(dX·dY/(ν(ν + d))) + the second difference of
  // u, both computed without the terms of size ν log ν that cancel in the form below.
  if (h0 >= STIRLING_SERIES_MIN) return 0.5 * Math.log1p((xDim * yDim) / nu / (nu + d)) + stirlingSecondDifference(h0, xDim / 2, yDim / 2);
  if (hd >= STIRLING_SERIES_MIN) {
    return logGammaMinusXDigammaPlusX(h0) + logGammaMinusXDigammaPlusX(hd) - logGammaMinusXDigammaPlusX(hx) - logGammaMinusXDigammaPlusX(hy);
  }
  return logGamma(h0) + logGamma(hd) - logGamma(hx) - logGamma(hy) + hx * digamma(hx) + hy * digamma(hy) - hd * digamma(hd) - h0 * digamma(h0);
}

const miStudentT: ScenarioFamily = {
  id: 'mi-student-t',
  quantity: 'mutual-information',
  summary: 'multivariate Student t split into X and Y; heavy tails, dependent through the shared scale even at rho = 0',
  params: studentSpecs,
  create: (p) => {
    const shape = groupCorrelation(p.dimX, p.dimY, p.rho, 0);
    const factors = splitFactors('mi-student-t', shape, p.dimX, p);
    const pairs = Math.min(p.dimX, p.dimY);
    const dim = p.dimX + p.dimY;
    const nu = p.nu;
    return mutualInformationScenario({
      family: 'mi-student-t',
      specs: studentSpecs,
      params: p,
      xDim: p.dimX,
      yDim: p.dimY,
      truth: -0.5 * pairs * Math.log1p(-p.rho * p.rho) + studentScaleInformation(nu, p.dimX, p.dimY),
      truthSource:
        'h(X) + h(Y) − h(X,Y) with the multivariate t entropy ½ log det Σ + log((νπ)^{d/2} Γ(ν/2)/Γ((ν+d)/2)) + ((ν+d)/2)(ψ((ν+d)/2) − ψ(ν/2)) ' +
        '(Kotz & Nadarajah, Multivariate t Distributions and Their Applications, 2004) and t marginals: ' +
        '−(m/2) log(1 − ρ²) + log Γ(ν/2) + log Γ((ν+d)/2) − log Γ((ν+dX)/2) − log Γ((ν+dY)/2) + Σ_{a∈{dX,dY}} ((ν+a)/2)ψ((ν+a)/2) − ((ν+d)/2)ψ((ν+d)/2) − (ν/2)ψ(ν/2)',
      support: 'unbounded',
      tails: 'heavy',
      draw: (rng, n) => {
        // X = L·Z·√(ν/W), W ~ χ²_ν after each row's Gaussian draws, from the same stream.
        const drawChi2 = chisquareRandom.factory(nu, { prng: rng });
        return gaussianRows(rng, n, factors.joint, (data, offset) => {
          const scale = Math.sqrt(nu / drawChi2());
          for (let j = 0; j < dim; j++) data[offset + j] *= scale;
        });
      },
      marginals: shape.map(() => univariateDensity('student-t', { nu, mu: 0, sigma: 1 })),
      // Covariance ν/(ν−2)·R; only stated when fourth moments exist (ν > 4), so its sample check has an SE.
      moments: nu > 4 ? { mean: shape.map(() => 0), covariance: shape.map((row) => row.map((v) => (v * nu) / (nu - 2))) } : undefined,
    });
  },
  examples: [
    { dimX: 1, dimY: 1, nu: 3, rho: 0 },
    { dimX: 2, dimY: 2, nu: 5, rho: 0.3 },
  ],
};

const uniformNoiseSpecs: ParamSpec[] = [
  { name: 'a', meaning: 'width of the uniform noise W ~ U(0, a) added to X ~ U(0, 1)', default: 0.5, min: 0, minExclusive: true },
];

/**
 * I(X; X + W) for X ~ U(0,1), W ~ U(0,a). I = h(Y) − h(Y|X) = h(Y) − log a. The density of Y is the
 * trapezoid U(0,1) ∗ U(0,a): for a ≤ 1 it rises as y/a on [0, a], is 1 on [a, 1], falls on [1, 1 + a];
 * the flat part adds nothing to −∫ f log f and each ramp adds −a∫₀¹ t log t dt = a/4, so h(Y) = a/2. For
 * a ≥ 1 the ramps have height 1/a over width 1 and the flat part 1/a over width a − 1:
 * h(Y) = ((a−1)/a) log a + 2(1/(4a) + log a/(2a)) = log a + 1/(2a). Hence I = a/2 − log a (a ≤ 1),
 * 1/(2a) (a ≥ 1); both give ½ at a = 1.
 * Var(i): i = −log a − log f_Y(Y); a fraction min(a, 1/a) of Y falls on the ramps, where log f_Y = log T (+
 * const) with T of density 2t on [0,1] (E log T = −½, E log² T = ½), so Var(i) = s/2 − s²/4, s = min(a, 1/a).
 */
export function uniformNoiseInformation(a: number): { truth: number; variance: number } {
  const s = Math.min(a, 1 / a);
  return { truth: a <= 1 ? a / 2 - Math.log(a) : 1 / (2 * a), variance: s / 2 - (s * s) / 4 };
}

/** The law of Y = X + W, X ~ U(0,1), W ~ U(0,a): the trapezoid U(0,1) ∗ U(0,a). */
function trapezoidDensity(a: number): UnivariateDensity {
  const low = Math.min(a, 1);
  const high = Math.max(a, 1);
  // Density: rises linearly to 1/high on [0, low], flat on [low, high], falls to 0 on [high, 1 + a].
  const height = 1 / high;
  const rampMass = (low * height) / 2;
  return {
    lower: 0,
    upper: 1 + a,
    breakpoints: [low, high],
    logDensity: (y) => {
      if (!(y > 0 && y < 1 + a)) return -Infinity;
      if (y < low) return Math.log((y / low) * height);
      if (y <= high) return Math.log(height);
      return Math.log(((1 + a - y) / low) * height);
    },
    cdf: (y) => {
      if (y <= 0) return 0;
      if (y >= 1 + a) return 1;
      if (y < low) return (y * y * height) / (2 * low);
      if (y <= high) return rampMass + (y - low) * height;
      const rest = 1 + a - y;
      return 1 - (rest * rest * height) / (2 * low);
    },
  };
}

const miUniformNoise: ScenarioFamily = {
  id: 'mi-uniform-noise',
  quantity: 'mutual-information',
  summary: 'X ~ U(0,1), Y = X + W with W ~ U(0,a): bounded support, I = a/2 − log a (a ≤ 1) or 1/(2a)',
  params: uniformNoiseSpecs,
  create: (p) => {
    const { truth, variance } = uniformNoiseInformation(p.a);
    return mutualInformationScenario({
      family: 'mi-uniform-noise',
      specs: uniformNoiseSpecs,
      params: p,
      xDim: 1,
      yDim: 1,
      truth,
      truthSource: 'h(X + W) − log a with the trapezoid density of X + W: a/2 − log a for a ≤ 1, 1/(2a) for a ≥ 1 (derived in scenarios/dependence.ts)',
      support: 'bounded',
      tails: 'light',
      draw: (rng, n) => {
        const data = new Float64Array(2 * n);
        for (let i = 0; i < n; i++) {
          const x = rng();
          data[2 * i] = x;
          data[2 * i + 1] = x + p.a * rng();
        }
        return data;
      },
      informationDensityVariance: { value: variance, source: 'exact: s/2 − s²/4 with s = min(a, 1/a) (derived in scenarios/dependence.ts)' },
      // Var X = 1/12, Var Y = (1 + a²)/12, cov(X, Y) = Var X.
      moments: {
        mean: [0.5, (1 + p.a) / 2],
        covariance: [
          [1 / 12, 1 / 12],
          [1 / 12, (1 + p.a * p.a) / 12],
        ],
      },
      marginals: [univariateDensity('uniform', { a: 0, b: 1 }), trapezoidDensity(p.a)],
    });
  },
  examples: [{ a: 0.1 }, { a: 2 }],
};

const independentSpecs: ParamSpec[] = [dimSpec('dimX', 'dimension of X (standard normal coordinates)'), dimSpec('dimY', 'dimension of Y (Exp(1) coordinates)')];

const miIndependent: ScenarioFamily = {
  id: 'mi-independent',
  quantity: 'mutual-information',
  summary: 'independent X ~ N(0, I) and Y with Exp(1) coordinates: I = 0',
  params: independentSpecs,
  create: (p) => {
    const dim = p.dimX + p.dimY;
    return mutualInformationScenario({
      family: 'mi-independent',
      specs: independentSpecs,
      params: p,
      xDim: p.dimX,
      yDim: p.dimY,
      truth: 0,
      truthSource: `0: X and Y are independent, so f(x,y) = f(x)f(y); ${CT}, Corollary of Theorem 8.6.1 (I = 0 iff independent)`,
      support: 'half',
      tails: 'exponential',
      draw: (rng, n) => {
        // All X coordinates of all rows first, then all Y coordinates: one factory per law.
        const data = new Float64Array(n * dim);
        const normal = normalRandom.factory(0, 1, { prng: rng });
        for (let i = 0; i < n; i++) for (let j = 0; j < p.dimX; j++) data[i * dim + j] = normal();
        const exponential = exponentialRandom.factory(1, { prng: rng });
        for (let i = 0; i < n; i++) for (let j = p.dimX; j < dim; j++) data[i * dim + j] = exponential();
        return data;
      },
      informationDensityVariance: { value: 0, source: 'exact: i(x, y) = 0 everywhere' },
      marginals: [
        ...Array.from({ length: p.dimX }, () => univariateDensity('normal', { mu: 0, sigma: 1 })),
        ...Array.from({ length: p.dimY }, () => univariateDensity('exponential', { rate: 1 })),
      ],
      moments: {
        mean: Array.from({ length: dim }, (_, j) => (j < p.dimX ? 0 : 1)),
        covariance: Array.from({ length: dim }, (_, i) => Array.from({ length: dim }, (_, j) => (i === j ? 1 : 0))),
      },
    });
  },
  examples: [{ dimX: 2, dimY: 3 }],
};

export const dependenceFamilies: ScenarioFamily[] = [miGaussian, miTransformedGaussian, miStudentT, miUniformNoise, miIndependent];
