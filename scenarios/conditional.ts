/**
 * Conditional mutual-information scenarios: joint laws of (X, Y, Z) whose I(X; Y | Z) is known in closed form.
 * A sample holds n rows of dimX + dimY + dimZ columns: X first (`xDim` = dimX), then Y (`yDim` = dimY), then Z.
 *
 *   const s = parseScenario('cmi-gaussian:dimX=1,dimY=1,dimZ=1,rhoXY=0.7,rhoXZ=0.5,rhoYZ=0.5');
 *   const sample = s.sample(rng, 1000);      // sample.xDim === 1, sample.yDim === 1, sample.dim === 3
 *
 * Families (truths in nats):
 *   cmi-gaussian              jointly Gaussian, unit variances; X_i, Y_i and Z_i correlated pairwise (rhoXY,
 *                             rhoXZ, rhoYZ) for every index i the groups share, every other pair uncorrelated:
 *                             I = ½ log(det Σ_XZ · det Σ_YZ / (det Σ_Z · det Σ_XYZ)). For 1 + 1 + 1 that is
 *                             −½ log(1 − r²) with r the partial correlation of X and Y given Z.
 *   cmi-gaussian-covariance[DIMX,DIMY;ROW;...]  any positive-definite covariance, the same formula.
 *   cmi-transformed-gaussian  the same law after exp on every X coordinate, a cube on every Y coordinate and
 *                             x ↦ x + x³ on every Z coordinate: exactly the same I.
 */
import { inverse, Matrix } from 'ml-matrix';
import type { ParamSpec, Rng, Scenario, ScenarioFamily } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { cholesky, type CholeskyFactor } from '../src/math/linalg.js';
import { formatNumber } from '../src/core/spec.js';
import { gaussianRows, scenarioFromFacts, type ScenarioFacts } from './build.js';
import { parseCovarianceArgument } from './multivariate.js';
import { univariateDensity } from './univariate.js';

const CT = 'Cover & Thomas, Elements of Information Theory, 2nd ed. (2006)';

const dimSpec = (name: string, meaning: string, def = 1): ParamSpec => ({ name, meaning, default: def, min: 1, max: 100, integer: true });
const correlationSpec = (name: string, meaning: string, def: number): ParamSpec => ({
  name,
  meaning,
  default: def,
  min: -1,
  max: 1,
  minExclusive: true,
  maxExclusive: true,
});

const tripleSpecs: ParamSpec[] = [
  dimSpec('dimX', 'dimension of X'),
  dimSpec('dimY', 'dimension of Y'),
  dimSpec('dimZ', 'dimension of Z, the conditioning variable'),
  correlationSpec('rhoXY', 'correlation of X_i with Y_i (for each i that both have)', 0.7),
  correlationSpec('rhoXZ', 'correlation of X_i with Z_i (for each i that both have)', 0.5),
  correlationSpec('rhoYZ', 'correlation of Y_i with Z_i (for each i that both have)', 0.5),
];

/** What a conditional-MI scenario needs beyond its sampler. */
export interface ConditionalDefinition extends ScenarioFacts {
  xDim: number;
  yDim: number;
  zDim: number;
  /** Writes n rows of xDim + yDim + zDim values (X, Y, Z), row-major, consuming only `rng`. */
  draw(rng: Rng, n: number): Float64Array;
  informationDensityVariance?: { value: number; source: string };
}

export function conditionalScenario(def: ConditionalDefinition): Scenario {
  const dim = def.xDim + def.yDim + def.zDim;
  const scenario = scenarioFromFacts(def, 'conditional-mutual-information', dim, (rng, n) => ({
    n,
    dim,
    data: def.draw(rng, n),
    xDim: def.xDim,
    yDim: def.yDim,
  }));
  scenario.xDim = def.xDim;
  scenario.yDim = def.yDim;
  if (def.informationDensityVariance) {
    scenario.logDensityVariance = def.informationDensityVariance.value;
    scenario.logDensityVarianceSource = `Var of the conditional information density log f(x,y,z)f(z)/(f(x,z)f(y,z)) (the bound for CMI): ${def.informationDensityVariance.source}`;
  }
  return scenario;
}

/**
 * Var(i) of the conditional information density i = log f(x,y,z) + log f(z) − log f(x,z) − log f(y,z) of a
 * centred Gaussian: i = c − ½ wᵀAw with A = Σ⁻¹ + P_Z − P_XZ − P_YZ (P_S: the inverse of Σ_S placed in the rows
 * and columns of S, zero elsewhere), and Var(wᵀAw) = 2 tr((AΣ)²) for w ~ N(0, Σ), so Var(i) = ½ tr((AΣ)²).
 * It is 0 exactly when X and Y are independent given Z (A = 0). Unchanged by invertible maps of each variable.
 */
export function gaussianConditionalDensityVariance(covariance: readonly (readonly number[])[], xDim: number, yDim: number): number {
  const dim = covariance.length;
  const sigma = new Matrix(covariance.map((row) => [...row]));
  const a = inverse(sigma);
  const range = (from: number, to: number) => Array.from({ length: to - from }, (_, j) => from + j);
  const z = range(xDim + yDim, dim);
  const place = (keep: number[], sign: number) => {
    const part = inverse(new Matrix(principal(covariance, keep)));
    keep.forEach((r, i) => keep.forEach((c, j) => a.set(r, c, a.get(r, c) + sign * part.get(i, j))));
  };
  place(z, 1);
  place([...range(0, xDim), ...z], -1);
  place(range(xDim, dim), -1);
  const product = a.mmul(sigma);
  const variance = 0.5 * product.mmul(product).trace();
  // Where X and Y are independent given Z, A is 0 up to rounding (1e-32 here), which would make the efficiency
  // bound Var(i)/n absurdly small: below 1e-12 it is that rounding, not a variance.
  return variance < 1e-12 ? 0 : variance;
}

const densityVarianceSource = 'exact: ½ tr((AΣ)²), A = Σ⁻¹ + P_Z − P_XZ − P_YZ (derived in scenarios/conditional.ts)';

/**
 * The correlation matrix of (X, Y, Z) with unit diagonal, `rhoXY` between X_i and Y_i, `rhoXZ` between X_i and
 * Z_i, `rhoYZ` between Y_i and Z_i (i counted from 0 inside each group), zero elsewhere.
 */
export function tripleCorrelation(p: Record<string, number>): number[][] {
  const groups = [p.dimX, p.dimY, p.dimZ];
  const dim = groups[0] + groups[1] + groups[2];
  const groupOf = (j: number): [number, number] => (j < groups[0] ? [0, j] : j < groups[0] + groups[1] ? [1, j - groups[0]] : [2, j - groups[0] - groups[1]]);
  const between = [
    [1, p.rhoXY, p.rhoXZ],
    [p.rhoXY, 1, p.rhoYZ],
    [p.rhoXZ, p.rhoYZ, 1],
  ];
  return Array.from({ length: dim }, (_, i) =>
    Array.from({ length: dim }, (_, j) => {
      if (i === j) return 1;
      const [gi, ai] = groupOf(i);
      const [gj, aj] = groupOf(j);
      return gi !== gj && ai === aj ? between[gi][gj] : 0;
    }),
  );
}

/** The principal submatrix of rows and columns `keep`. */
export function principal(matrix: readonly (readonly number[])[], keep: readonly number[]): number[][] {
  return keep.map((r) => keep.map((c) => matrix[r][c]));
}

/**
 * I(X; Y | Z) of a Gaussian with covariance Σ over (X, Y, Z) (X the first xDim coordinates, Y the next yDim):
 * h(X,Z) + h(Y,Z) − h(Z) − h(X,Y,Z) (the chain rule, Cover & Thomas Sec. 2.5 and 8.6) with the Gaussian
 * entropy h = ½ log((2πe)^d det Σ) (Theorem 8.4.1); the 2πe terms cancel. Undefined when Σ is not positive
 * definite. zDim = 0 gives the unconditional I(X; Y).
 */
export function gaussianConditionalInformation(covariance: readonly (readonly number[])[], xDim: number, yDim: number): number | undefined {
  const dim = covariance.length;
  const range = (from: number, to: number) => Array.from({ length: to - from }, (_, j) => from + j);
  const x = range(0, xDim);
  const y = range(xDim, xDim + yDim);
  const z = range(xDim + yDim, dim);
  const logDet = (keep: number[]): number | undefined => (keep.length === 0 ? 0 : cholesky(principal(covariance, keep))?.logDeterminant);
  const joint = logDet(range(0, dim));
  if (joint === undefined) return undefined;
  // Principal submatrices of a positive-definite matrix are positive definite.
  return 0.5 * (logDet([...x, ...z])! + logDet([...y, ...z])! - logDet(z)! - joint);
}

function gaussianTripleLaw(owner: string, p: Record<string, number>): { covariance: number[][]; factor: CholeskyFactor; truth: number; variance: number } {
  const covariance = tripleCorrelation(p);
  const factor = cholesky(covariance);
  let truth = gaussianConditionalInformation(covariance, p.dimX, p.dimY);
  if (!factor || truth === undefined) {
    const shown = ['rhoXY', 'rhoXZ', 'rhoYZ'].map((k) => `${k}=${formatNumber(p[k])}`).join(', ');
    throw new UsageError(
      `${owner}: the correlations ${shown} do not form a positive-definite covariance; they must satisfy 1 − rhoXY² − rhoXZ² − rhoYZ² + 2·rhoXY·rhoXZ·rhoYZ > 0`,
    );
  }
  if (p.dimX === 1 && p.dimY === 1 && p.dimZ === 1) {
    // The same value as −½ log(1 − r²) with r the partial correlation of X and Y given Z (Cover & Thomas
    // Sec. 8.5 applied to the conditional law), which is exactly 0 when rhoXY = rhoXZ·rhoYZ.
    const r = (p.rhoXY - p.rhoXZ * p.rhoYZ) / Math.sqrt((1 - p.rhoXZ * p.rhoXZ) * (1 - p.rhoYZ * p.rhoYZ));
    truth = -0.5 * Math.log1p(-r * r);
  }
  return { covariance, factor, truth, variance: gaussianConditionalDensityVariance(covariance, p.dimX, p.dimY) };
}

const gaussianTruthSource =
  `½ log(det Σ_XZ · det Σ_YZ / (det Σ_Z · det Σ_XYZ)) = h(X,Z) + h(Y,Z) − h(Z) − h(X,Y,Z) (chain rule, ${CT}, Secs. 2.5 and 8.6) ` +
  'with the Gaussian entropy h = ½ log((2πe)^d det Σ) (Theorem 8.4.1); determinants by Cholesky';

const cmiGaussian: ScenarioFamily = {
  id: 'cmi-gaussian',
  quantity: 'conditional-mutual-information',
  summary: 'jointly Gaussian X, Y, Z with pairwise correlations; I(X;Y|Z) = ½ log(det Σ_XZ det Σ_YZ / (det Σ_Z det Σ_XYZ))',
  params: tripleSpecs,
  create: (p) => {
    const law = gaussianTripleLaw('cmi-gaussian', p);
    return conditionalScenario({
      family: 'cmi-gaussian',
      specs: tripleSpecs,
      params: p,
      xDim: p.dimX,
      yDim: p.dimY,
      zDim: p.dimZ,
      truth: law.truth,
      truthSource: gaussianTruthSource,
      support: 'unbounded',
      tails: 'light',
      draw: (rng, n) => gaussianRows(rng, n, law.factor),
      informationDensityVariance: { value: law.variance, source: densityVarianceSource },
      marginals: law.covariance.map(() => univariateDensity('normal', { mu: 0, sigma: 1 })),
      moments: { mean: law.covariance.map(() => 0), covariance: law.covariance },
    });
  },
  examples: [
    // X and Y independent given Z although correlated (0.25) without it: I = 0.
    { dimX: 1, dimY: 1, dimZ: 1, rhoXY: 0.25, rhoXZ: 0.5, rhoYZ: 0.5 },
    { dimX: 2, dimY: 1, dimZ: 2, rhoXY: 0.6, rhoXZ: 0.4, rhoYZ: 0.3 },
  ],
};

const cmiTransformedGaussian: ScenarioFamily = {
  id: 'cmi-transformed-gaussian',
  quantity: 'conditional-mutual-information',
  summary: 'cmi-gaussian after exp on X, a cube on Y and z + z³ on Z: the same I(X;Y|Z), very non-Gaussian marginals',
  params: tripleSpecs,
  create: (p) => {
    const law = gaussianTripleLaw('cmi-transformed-gaussian', p);
    const xEnd = p.dimX;
    const yEnd = p.dimX + p.dimY;
    const dim = yEnd + p.dimZ;
    return conditionalScenario({
      family: 'cmi-transformed-gaussian',
      specs: tripleSpecs,
      params: p,
      xDim: p.dimX,
      yDim: p.dimY,
      zDim: p.dimZ,
      truth: law.truth,
      truthSource:
        `exactly the cmi-gaussian value: I(X; Y | Z) = I(X; (Y, Z)) − I(X; Z) (chain rule, ${CT}, Sec. 2.5), and mutual information is unchanged ` +
        `by an invertible map of each argument (the Jacobians cancel in the density ratio; Kraskov, Stögbauer & Grassberger, Phys. Rev. E 69, 066138 (2004), Sec. II); ${gaussianTruthSource}`,
      support: 'unbounded',
      tails: 'heavy',
      informationDensityVariance: { value: law.variance, source: `unchanged by the maps; ${densityVarianceSource}` },
      draw: (rng, n) =>
        gaussianRows(rng, n, law.factor, (data, offset) => {
          for (let j = 0; j < xEnd; j++) data[offset + j] = Math.exp(data[offset + j]);
          for (let j = xEnd; j < yEnd; j++) {
            const y = data[offset + j];
            data[offset + j] = y * y * y;
          }
          for (let j = yEnd; j < dim; j++) {
            const z = data[offset + j];
            data[offset + j] = z + z * z * z;
          }
        }),
    });
  },
  examples: [{ dimX: 1, dimY: 1, dimZ: 2, rhoXY: 0.6, rhoXZ: 0.4, rhoYZ: 0.3 }],
};

export const conditionalFamilies: ScenarioFamily[] = [cmiGaussian, cmiTransformedGaussian];

export const CMI_COVARIANCE_FAMILY = 'cmi-gaussian-covariance';
export const CMI_COVARIANCE_USAGE = `${CMI_COVARIANCE_FAMILY}[DIMX,DIMY;ROW;ROW;...], X the first DIMX coordinates, Y the next DIMY, Z the rest`;

/**
 * `cmi-gaussian-covariance[1,1;1,0.5,0.3;0.5,1,0.4;0.3,0.4,1]`: a Gaussian (X, Y, Z) with any positive-definite
 * covariance; the first argument gives dimX and dimY, the rows the covariance (Z takes the coordinates after
 * X's and Y's, at least one).
 */
export function parseConditionalCovarianceArgument(args: readonly string[]): { xDim: number; yDim: number; covariance: number[][] } {
  const owner = CMI_COVARIANCE_FAMILY;
  if (args.length < 2) throw new UsageError(`${owner} takes dimensions and rows: ${CMI_COVARIANCE_USAGE}`);
  const dims = args[0].split(',').map((t) => Number(t.trim()));
  if (dims.length !== 2 || !dims.every((d) => Number.isInteger(d) && d >= 1)) {
    throw new UsageError(`${owner}: "${args[0]}" is not allowed as DIMX,DIMY; give two whole numbers ≥ 1, e.g. ${owner}[1,1;1,0.5,0.3;0.5,1,0.4;0.3,0.4,1]`);
  }
  let covariance: number[][];
  try {
    covariance = parseCovarianceArgument(args.slice(1).join(';'));
  } catch (error) {
    if (error instanceof UsageError) throw new UsageError(error.message.replace(/^gaussian-covariance:/, `${owner}:`));
    throw error;
  }
  const [xDim, yDim] = dims;
  if (xDim + yDim >= covariance.length) {
    throw new UsageError(
      `${owner}: dimX + dimY = ${xDim + yDim} leaves no Z coordinate in a ${covariance.length}×${covariance.length} covariance; Z needs at least one`,
    );
  }
  return { xDim, yDim, covariance };
}

export function conditionalCovarianceScenario({ xDim, yDim, covariance }: { xDim: number; yDim: number; covariance: number[][] }): Scenario {
  const owner = CMI_COVARIANCE_FAMILY;
  const factor = cholesky(covariance);
  const truth = gaussianConditionalInformation(covariance, xDim, yDim);
  if (!factor || truth === undefined) throw new UsageError(`${owner}: the covariance is not positive definite; give a symmetric positive-definite matrix`);
  const dim = covariance.length;
  const rows = covariance.map((row) => row.map(formatNumber).join(',')).join(';');
  const specs: ParamSpec[] = ['dimX', 'dimY', 'dimZ'].map((name) => dimSpec(name, name));
  const scenario = conditionalScenario({
    family: owner,
    specs,
    params: { dimX: xDim, dimY: yDim, dimZ: dim - xDim - yDim },
    xDim,
    yDim,
    zDim: dim - xDim - yDim,
    truth,
    truthSource: gaussianTruthSource,
    support: 'unbounded',
    tails: 'light',
    draw: (rng, n) => gaussianRows(rng, n, factor),
    informationDensityVariance: { value: gaussianConditionalDensityVariance(covariance, xDim, yDim), source: densityVarianceSource },
    marginals: covariance.map((row, j) => univariateDensity('normal', { mu: 0, sigma: Math.sqrt(row[j]) })),
    moments: { mean: covariance.map(() => 0), covariance },
  });
  // The canonical spec is the bracketed form, with every number as String(x) writes it.
  scenario.id = `${owner}[${xDim},${yDim};${rows}]`;
  return scenario;
}
