/**
 * Transfer-entropy scenarios: stationary bivariate Gaussian VAR(1) processes whose transfer entropy
 * TE(X → Y) = I(Y_{t+1}; X_t..X_{t−l+1} | Y_t..Y_{t−k+1}) (Schreiber 2000) is exact, for the history lengths
 * k = `history` and l = `sourceHistory` the scenario names (default 1, left out of the id). A sample is one
 * stretch of the process: n rows in time order, column 0 the source, column 1 the target (`xDim` = 1).
 *
 *   const s = parseScenario('te-var1:a=0.5,b=0.5,cXY=0.4,cYX=0');
 *   const sample = s.sample(rng, 1000);   // rows (X_t, Y_t), t = 0..999; s.truth = TE(X → Y), k = l = 1
 *
 * The process: X_{t+1} = a X_t + cYX Y_t + e_x, Y_{t+1} = b Y_t + cXY X_t + e_y, with independent standard
 * normal innovations, i.e. s_{t+1} = A s_t + e with A = [[a, cYX], [cXY, b]]. The first state is drawn from the
 * stationary law N(0, Σ), Σ = A Σ Aᵀ + I (the discrete Lyapunov equation), so every row has that law.
 *
 * Families:
 *   te-var1          columns (X, Y): the truth is TE(X → Y);
 *   te-var1-reverse  the same process with the columns swapped, (Y, X): the truth is TE(Y → X). A separate
 *                    family rather than a setting because scenario parameters are numbers, and because a
 *                    benchmark of the "no coupling" direction then reads like any other cell (truth, bias, RMSE).
 */
import type { ParamSpec, Rng, Scenario, ScenarioFamily } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { formatNumber, formatSpec } from '../src/core/spec.js';
import { cholesky } from '../src/math/linalg.js';
import { scenarioFromFacts } from './build.js';
import { univariateDensity } from './univariate.js';
import { loadPackage } from '../src/core/vendor.js';

const normalRandom = loadPackage<typeof import('@stdlib/random-base-normal')>('@stdlib/random-base-normal');

const SCHREIBER = 'Schreiber, T. (2000). Measuring information transfer. Physical Review Letters 85, 461–464';

const coefficient = (name: string, meaning: string, def: number): ParamSpec => ({ name, meaning, default: def, min: -5, max: 5 });

const coefficientSpecs: ParamSpec[] = [
  coefficient('a', 'X_{t+1} on X_t (source memory)', 0.5),
  coefficient('b', 'Y_{t+1} on Y_t (target memory)', 0.5),
  coefficient('cXY', 'coupling X → Y: Y_{t+1} on X_t', 0.4),
  coefficient('cYX', 'coupling Y → X: X_{t+1} on Y_t', 0),
];
/** The histories the truth is stated for, as an estimator's `history` and `sourceHistory` settings name them. */
const historySpecs: ParamSpec[] = [
  { name: 'history', meaning: 'k: past values of the target the truth conditions on', default: 1, min: 1, max: 50, integer: true },
  { name: 'sourceHistory', meaning: 'l: past values of the source the truth conditions on', default: 1, min: 1, max: 50, integer: true },
];
const var1Specs: ParamSpec[] = [...coefficientSpecs, ...historySpecs];

/** The coefficient matrix A of s_{t+1} = A s_t + e, row-major [[a, cYX], [cXY, b]]. */
export function var1Matrix(p: { a: number; b: number; cXY: number; cYX: number }): [number, number, number, number] {
  return [p.a, p.cYX, p.cXY, p.b];
}

/** The largest |eigenvalue| of a 2 × 2 matrix (row-major). */
export function spectralRadius2([a11, a12, a21, a22]: readonly number[]): number {
  const half = (a11 + a22) / 2;
  const det = a11 * a22 - a12 * a21;
  const discriminant = half * half - det;
  // Complex pair: both have modulus sqrt(det).
  if (discriminant < 0) return Math.sqrt(det);
  const root = Math.sqrt(discriminant);
  return Math.max(Math.abs(half + root), Math.abs(half - root));
}

/**
 * The solution Σ of Σ = A Σ Aᵀ + Q for a 2 × 2 A with spectral radius < 1 (unique then) and symmetric Q, as
 * [Sxx, Sxy, Syy]. Written out, the three distinct entries satisfy a 3 × 3 linear system, solved by Cramer's rule.
 */
export function discreteLyapunov2(matrix: readonly number[], q: readonly [number, number, number] = [1, 0, 1]): [number, number, number] {
  const [a, c, d, b] = matrix;
  // Rows: the xx, xy and yy entries of Σ − A Σ Aᵀ, as coefficients of (Sxx, Sxy, Syy).
  const m = [
    [1 - a * a, -2 * a * c, -c * c],
    [-a * d, 1 - (a * b + c * d), -c * b],
    [-d * d, -2 * d * b, 1 - b * b],
  ];
  const det3 = (r: number[][]): number =>
    r[0][0] * (r[1][1] * r[2][2] - r[1][2] * r[2][1]) - r[0][1] * (r[1][0] * r[2][2] - r[1][2] * r[2][0]) + r[0][2] * (r[1][0] * r[2][1] - r[1][1] * r[2][0]);
  const whole = det3(m);
  const column = (j: number): number => det3(m.map((row, i) => row.map((v, k) => (k === j ? q[i] : v))));
  return [column(0) / whole, column(1) / whole, column(2) / whole];
}

export interface Var1Law {
  matrix: [number, number, number, number];
  spectralRadius: number;
  covariance: [number, number, number];
  /** TE(X → Y) and TE(Y → X) for k = l = 1, nats. */
  xToY: number;
  yToX: number;
}

/**
 * The stationary law of the VAR(1) and its two transfer entropies for k = l = 1:
 * TE(X → Y) = ½ log(Var(Y_{t+1} | Y_t) / Var(Y_{t+1} | Y_t, X_t)). Var(Y_{t+1} | Y_t, X_t) = 1 (the innovation:
 * Y_{t+1} − b Y_t − cXY X_t = e_y is independent of the past), and Var(Y_{t+1} | Y_t) = Syy − C²/Syy with
 * C = Cov(Y_{t+1}, Y_t) = (AΣ)_yy = cXY Sxy + b Syy (Gaussian conditioning). Likewise for Y → X with (AΣ)_xx.
 */
export function var1Law(owner: string, p: { a: number; b: number; cXY: number; cYX: number }): Var1Law {
  const matrix = var1Matrix(p);
  const radius = spectralRadius2(matrix);
  if (!(radius < 1)) {
    const shown = (['a', 'b', 'cXY', 'cYX'] as const).map((k) => `${k}=${formatNumber(p[k])}`).join(', ');
    throw new UsageError(
      `${owner}: ${shown} give a non-stationary process (spectral radius of [[a, cYX], [cXY, b]] = ${formatNumber(radius)}); the spectral radius must be below 1`,
    );
  }
  const covariance = discreteLyapunov2(matrix);
  const [sxx, sxy, syy] = covariance;
  const lagY = p.cXY * sxy + p.b * syy;
  const lagX = p.a * sxx + p.cYX * sxy;
  const xToY = 0.5 * Math.log(syy - (lagY * lagY) / syy);
  const yToX = 0.5 * Math.log(sxx - (lagX * lagX) / sxx);
  // Without coupling into a series it is an autonomous AR(1): its next value is independent of the other's past
  // given its own, so that direction's TE is exactly 0 (the formula would leave rounding of order 1e-16).
  return { matrix, spectralRadius: radius, covariance, xToY: p.cXY === 0 ? 0 : Math.max(0, xToY), yToX: p.cYX === 0 ? 0 : Math.max(0, yToX) };
}

/** n rows of the stationary process, in time order, columns (X, Y) or, `swap`, (Y, X). */
export function drawVar1(rng: Rng, n: number, law: Var1Law, swap: boolean): Float64Array {
  const [sxx, sxy, syy] = law.covariance;
  const factor = cholesky([
    [sxx, sxy],
    [sxy, syy],
  ])!;
  const normal = normalRandom.factory(0, 1, { prng: rng });
  const [a, c, d, b] = law.matrix;
  const out = new Float64Array(2 * n);
  if (n === 0) return out;
  const z0 = normal();
  const z1 = normal();
  let x = factor.lower[0] * z0;
  let y = factor.lower[2] * z0 + factor.lower[3] * z1;
  const [source, target] = swap ? [1, 0] : [0, 1];
  for (let t = 0; t < n; t++) {
    out[2 * t + source] = x;
    out[2 * t + target] = y;
    const ex = normal();
    const ey = normal();
    const nextX = a * x + c * y + ex;
    y = d * x + b * y + ey;
    x = nextX;
  }
  return out;
}

/**
 * TE(source → target) with k past values of the target and l ≥ 1 of the source. The denominator
 * Var(T_{t+1} | T_t..T_{t−k+1}, S_t..S_{t−l+1}) is 1 for every k, l ≥ 1: T_{t+1} minus its regression on (T_t, S_t)
 * is the unit innovation, independent of the whole past. The numerator is the k-step linear prediction error of
 * the target alone, from its autocovariances γ(h) = (A^h Σ)_TT by the Durbin–Levinson recursion (Brockwell &
 * Davis, Time Series: Theory and Methods, 2nd ed. (1991), Proposition 5.2.1). So l does not change the value,
 * and k does unless the target is autonomous (no coupling into it: TE = 0 for every k).
 */
export function var1TransferEntropy(law: Var1Law, intoY: boolean, history: number): number {
  const coupling = intoY ? law.matrix[2] : law.matrix[1];
  if (coupling === 0) return 0;
  if (history === 1) return intoY ? law.xToY : law.yToX;
  const [a, c, d, b] = law.matrix;
  const [sxx, sxy, syy] = law.covariance;
  // M = A^h Σ, advanced one lag at a time; γ(h) is its target-target entry.
  let m = [sxx, sxy, sxy, syy];
  const gamma: number[] = [];
  for (let h = 0; h <= history; h++) {
    gamma.push(intoY ? m[3] : m[0]);
    m = [a * m[0] + c * m[2], a * m[1] + c * m[3], d * m[0] + b * m[2], d * m[1] + b * m[3]];
  }
  let phi: number[] = [];
  let v = gamma[0];
  for (let j = 1; j <= history; j++) {
    let num = gamma[j];
    for (let i = 0; i < j - 1; i++) num -= phi[i] * gamma[j - 1 - i];
    const reflection = num / v;
    phi = [...phi.map((p, i) => p - reflection * phi[j - 2 - i]), reflection];
    v *= 1 - reflection * reflection;
  }
  return Math.max(0, 0.5 * Math.log(v));
}

/**
 * The spec of the same process with the truth stated at other history lengths, or null for a scenario that is
 * not a te-var1 one. The plan notes (src/harness/target-notes.ts) and the conformance suite's known value use it.
 */
export function atHistories(scenario: Scenario, history: number, sourceHistory = 1): string | null {
  if (!scenario.transfer || scenario.params.history === undefined) return null;
  return formatSpec(scenario.family, { ...scenario.params, history, sourceHistory });
}

function var1Scenario(family: string, p: Record<string, number>, swap: boolean): Scenario {
  const law = var1Law(family, { a: p.a, b: p.b, cXY: p.cXY, cYX: p.cYX });
  const history = p.history ?? 1;
  const sourceHistory = p.sourceHistory ?? 1;
  const [sxx, sxy, syy] = law.covariance;
  const [a, c, d, b] = law.matrix;
  const forward = var1TransferEntropy(law, !swap, history);
  const reverse = var1TransferEntropy(law, swap, history);
  const histories = `k = ${history}, l = ${sourceHistory}`;
  const direction = swap ? 'TE(Y → X): source column 1 is the process’s Y, target column 2 its X' : 'TE(X → Y): source column 1 is X, target column 2 is Y';
  const rowCovariance = swap
    ? [
        [syy, sxy],
        [sxy, sxx],
      ]
    : [
        [sxx, sxy],
        [sxy, syy],
      ];
  const scenario = scenarioFromFacts(
    {
      family,
      // The histories join the id only where they differ from 1, so the k = l = 1 scenarios keep their ids.
      specs: var1Specs.filter((s) => !((s.name === 'history' || s.name === 'sourceHistory') && (p[s.name] ?? 1) === 1)),
      params: { ...p, history, sourceHistory },
      truth: forward,
      truthSource:
        `exact for history lengths ${histories}: ${direction} = ½ log(Var(target_{t+1} | its last ${history}) / Var(target_{t+1} | its last ${history}, the source's last ${sourceHistory})) ` +
        `(${SCHREIBER}; Gaussian conditioning). The numerator is the target's ${history}-step linear prediction error from its autocovariances A^h Σ ` +
        '(Σ = AΣAᵀ + I, the discrete Lyapunov equation, solved exactly; for k > 1 by the Durbin–Levinson recursion, Brockwell & Davis 1991, Proposition 5.2.1), ' +
        'the denominator 1 (the unit innovation). Other histories give other values (the target alone is not Markov): set history and sourceHistory to match the estimator',
      support: 'unbounded',
      tails: 'light',
      marginals: rowCovariance.map((row, j) => univariateDensity('normal', { mu: 0, sigma: Math.sqrt(row[j]) })),
      moments: { mean: [0, 0], covariance: rowCovariance },
    },
    'transfer-entropy',
    2,
    (rng, n) => ({ n, dim: 2, data: drawVar1(rng, n, law, swap), xDim: 1 }),
  );
  scenario.xDim = 1;
  scenario.transfer = {
    forward,
    reverse,
    spectralRadius: law.spectralRadius,
    stationaryCovariance: [
      [sxx, sxy],
      [sxy, syy],
    ],
    lag1Covariance: [
      [a * sxx + c * sxy, a * sxy + c * syy],
      [d * sxx + b * sxy, d * sxy + b * syy],
    ],
    note: `rows are a time series (order matters); truth ${swap ? 'TE(Y → X)' : 'TE(X → Y)'} and reverse ${swap ? 'TE(X → Y)' : 'TE(Y → X)'} for ${histories}; covariances in process order (X, Y)`,
  };
  return scenario;
}

const teVar1: ScenarioFamily = {
  id: 'te-var1',
  quantity: 'transfer-entropy',
  summary:
    'bivariate Gaussian VAR(1), stationary start; truth TE(X→Y) for histories k = history, l = sourceHistory (default 1), exact from the Lyapunov covariance',
  params: var1Specs,
  create: (p) => var1Scenario('te-var1', p, false),
  examples: [
    // No coupling at all: TE = 0 both ways although each series has memory.
    { a: 0.5, b: 0.5, cXY: 0, cYX: 0 },
    // Both directions coupled, unequally.
    { a: 0.3, b: 0.6, cXY: 0.5, cYX: 0.2 },
  ],
};

const teVar1Reverse: ScenarioFamily = {
  id: 'te-var1-reverse',
  quantity: 'transfer-entropy',
  summary: 'te-var1 with its columns swapped (Y first): truth TE(Y→X) for k = history, l = sourceHistory, the other direction of the same process',
  params: var1Specs,
  create: (p) => var1Scenario('te-var1-reverse', p, true),
};

export const transferFamilies: ScenarioFamily[] = [teVar1, teVar1Reverse];
