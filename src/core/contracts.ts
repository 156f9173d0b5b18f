/**
 * The contracts shared by scenarios, estimators and the harness. Estimators and scenarios depend only on
 * this file and the math helpers; the harness reaches them only through their registries.
 */

export type Quantity = 'entropy' | 'mutual-information' | 'conditional-mutual-information' | 'transfer-entropy' | 'divergence';
export type Support = 'bounded' | 'half' | 'unbounded';
export type Tails = 'light' | 'exponential' | 'heavy';

/** n points in `dim` dimensions, row-major: point i is data[i*dim .. i*dim+dim-1]. */
export interface Sample {
  n: number;
  dim: number;
  data: Float64Array;
  /**
   * For mutual information: the first `xDim` columns are X, the rest are Y. For conditional mutual information
   * I(X; Y | Z): the first `xDim` columns are X, the next `yDim` are Y and the remaining dim − xDim − yDim are Z.
   */
  xDim?: number;
  /** For conditional mutual information only: the number of Y columns (after X's); Z takes the rest. */
  yDim?: number;
  /*
   * For transfer entropy TE(X → Y): a bivariate time series, rows in time order, column 0 the source X and
   * column 1 the target Y (dim = 2, xDim = 1).
   */
  /** For a divergence D(P || Q): this sample is from P and `q` is the sample from Q (same dim, own size). */
  q?: Sample;
}

/** A uniform stream on [0, 1) with 53-bit resolution. */
export type Rng = () => number;

/** A tuning value: a number, or a keyword such as a bin rule. */
export type SettingValue = number | string;
export type Settings = Record<string, SettingValue>;

export type SettingKind = 'integer' | 'number' | 'choice' | 'choice-or-integer' | 'choice-or-number';

/**
 * One setting of an estimator, declared once: the registry validates every value against it (src/spec.ts,
 * validateSettings) before the estimator sees it, whether it comes from the command line, a plan, a tuning
 * grid or a default set, so `estimate` never re-checks what the declaration says.
 */
export interface SettingSpec {
  name: string;
  /** One line: what the setting does. */
  meaning: string;
  /** The default; a keyword such as 'auto' is resolved per sample by the estimator's `resolve`. */
  default: SettingValue;
  /** integer / number: numeric with optional bounds; choice: one of `choices`; the or-forms take either. */
  kind: SettingKind;
  choices?: readonly string[];
  min?: number;
  max?: number;
  /** When true, `min` itself is not allowed (a strict lower bound). */
  minExclusive?: boolean;
}

/** The keywords a setting accepts: its choices, and its default when that is a keyword. */
type KeywordOf<S extends SettingSpec> =
  (S extends { choices: readonly (infer C extends string)[] } ? C : never) | (S['default'] extends string ? S['default'] : never);

/** The type of a validated value of setting S: a number, one of its keywords, or either, as its kind says. */
export type SettingValueOf<S extends SettingSpec> = S['kind'] extends 'integer' | 'number'
  ? number
  : S['kind'] extends 'choice'
    ? KeywordOf<S>
    : KeywordOf<S> | number;

/** Validated settings of a declaration: every declared name present, each with its value's type. */
export type SettingsOf<L extends readonly SettingSpec[]> = { [S in L[number] as S['name']]: SettingValueOf<S> };

/** One axis of a tuning grid: a setting and the values it takes, every other setting kept as in the base. */
export type TuningAxis<S extends Settings = Settings> = { [K in keyof S & string]: { setting: K; values: readonly S[K][] } }[keyof S & string];

/** Where an estimator stands in a default set (see DefaultSets). */
export interface DefaultEntry {
  /** Place in the set: lower first; equal places keep registry order. Default 0. */
  order?: number;
  /** Settings other than the defaults, validated like any others (e.g. { bins: 'sturges' }). */
  settings?: Settings;
}

/** An entry of the `hhat estimate` default set, which is chosen per dimension of the data. */
export interface EstimateDefaultEntry extends DefaultEntry {
  /** Only for data of these dimensions (within the estimator's own `dims`; default: all of those). */
  dims?: readonly [min: number, max: number];
}

/**
 * The default sets an estimator belongs to, declared by the estimator itself: `true` for "with default settings,
 * at order 0" (every dimension it supports, for `estimate`), or entries saying where, for which dimensions and
 * with which settings. Sets are per quantity: an estimator joins those of its own quantity.
 * Orders of the built-in entropy `estimate` set: 5 weighted k-NN (d ≥ 4), 10 k-NN, 15 weighted k-NN (d = 2, 3),
 * 20 Ebrahimi, 30 Vasicek, 40 kernel, 50 histogram, 60 Gaussian.
 */
export interface DefaultSets {
  /** `hhat estimate` without --estimator. */
  estimate?: true | readonly EstimateDefaultEntry[];
  /**
   * The default plan of the estimator's quantity (`hhat bench` without a plan, `npm run track`). The plan is
   * chosen before `--estimator-module` files load, so it holds built-in estimators only (a module replacing
   * one runs in its place).
   */
  bench?: true | readonly DefaultEntry[];
}

/**
 * The invariances the conformance suite (src/conformance.ts) checks, as an estimator declares the ones its
 * method lacks:
 *   rowOrder       the estimate does not depend on the order of the rows;
 *   scale          entropy: Ĥ(c·x) = Ĥ(x) + d·log|c|; mutual information and divergence: unchanged when every
 *                  coordinate (of both samples) is multiplied by one factor c;
 *   separateScale  mutual information: unchanged when X and Y (and Z, conditional MI) are each multiplied by a
 *                  factor of their own;
 *   translation    unchanged by x → x + b (X and Y each shifted; P and Q shifted alike);
 *   symmetry       mutual information: Î(X; Y) = Î(Y; X); conditional: Î(X; Y | Z) = Î(Y; X | Z);
 *   affine         divergence: unchanged when P and Q go through one invertible affine map x → Ax + b.
 */
export type InvarianceName = 'rowOrder' | 'scale' | 'separateScale' | 'translation' | 'symmetry' | 'affine';

/**
 * Why a method lacks an invariance: one line, or a function of the settings (validated, keywords unresolved)
 * and the dimension that gives the line where the invariance fails and undefined where it holds (a histogram
 * lacks scale equivariance only with a fixed bin width in data units).
 */
export type InvarianceException = string | ((settings: Settings, dim: number) => string | undefined);

/**
 * An estimator. `S` types its validated settings; the registry holds them as `Estimator` (plain Settings), and
 * `defineEstimator` infers `S` from the `settings` declaration.
 */
export interface Estimator<S extends Settings = Settings> {
  id: string;
  /**
   * The method, whatever the quantity: 'histogram', 'spacing', 'nearest-neighbour', 'kernel', 'parametric',
   * 'entropy-combination' (a quantity from entropy estimates). The quantity is `quantity`, never the family.
   */
  family: string;
  quantity: Quantity;
  /** One line for catalogs. */
  summary: string;
  settings: readonly SettingSpec[];
  /** Smallest and largest dimension supported (Infinity for any); the registry checks it before `estimate`. */
  dims: readonly [number, number];
  /** The paper or book that defines the method. */
  reference: string;
  /**
   * The reasonable settings around `base` at sample size n, which a robustness run measures the estimate's
   * spread over (the tuning spread): one axis per setting varied, each value validated like any setting. Values
   * that cannot work at this n (k ≥ n) are left out here. Absent or []: no tuning grid.
   */
  tuning?(base: S, n: number): readonly TuningAxis<S>[];
  /** Which default sets list this estimator. Absent: none. */
  defaultFor?: DefaultSets;
  /** Replace sample-dependent defaults (keywords such as 'auto') with the values actually used, for reports. */
  resolve?(sample: Sample, settings: S): Settings;
  /**
   * The estimate in nats, from validated settings as configured (keywords included) or as `resolve` returned
   * them: both must give the same value. Throws an EstimateError on data the method cannot handle (too few
   * points for k, ties, ...); the settings themselves are already valid and the dimension within `dims`.
   */
  estimate(sample: Sample, settings: S): number;
  /**
   * The invariances of the quantity that the method lacks by design, each with its reason: the conformance
   * suite reports those checks as not applicable, with the reason, instead of failing them. Leave it out when
   * the method has them all. Declare only what the method truly lacks; `hhat check` still measures the
   * difference and shows it beside the reason.
   *
   *   lacks: { scale: (settings) => (typeof settings.width === 'number' ? 'a fixed bin width is in data units' : undefined) }
   */
  lacks?: Partial<Record<InvarianceName, InvarianceException>>;
  /**
   * The scenario the conformance suite draws from (a spec in the estimator's smallest dimension, with a known
   * truth of its quantity), for a method that takes data of a kind the quantity's usual draws are not: values on
   * a lattice, an X of labels. Leave it out otherwise: the suite's own law for the quantity is used.
   *
   *   conformanceLaw: 'recorded[step=0.1;normal:mu=0,sigma=1]'
   */
  conformanceLaw?: string;
}

/** An estimator declaration whose settings' types are inferred from `settings`. */
export type EstimatorDefinition<L extends readonly SettingSpec[]> = Omit<Estimator<SettingsOf<L>>, 'settings'> & { settings: L };

/**
 * Declares an estimator: `estimate`, `resolve` and `tuning` get settings typed from the declaration (k a number,
 * norm 'euclidean' | 'max', ...), which the registry has validated.
 *
 *   export const mine = defineEstimator({ id: 'my-method', settings: [{ name: 'k', kind: 'integer', min: 1, default: 3, meaning: '...' }], ...,
 *     estimate(sample, { k }) { ... } });
 */
export function defineEstimator<const L extends readonly SettingSpec[]>(definition: EstimatorDefinition<L>): Estimator {
  return definition as unknown as Estimator;
}

/**
 * What every file directly in estimators/ exports as `registration`: its estimators, and where they go in the
 * registry (files by increasing `catalogOrder`, each file's estimators in their own order). The registry order
 * is the order of catalogs, of the default plans and of the default sets at equal `order`.
 */
export interface EstimatorFile {
  catalogOrder: number;
  estimators: readonly Estimator[];
}

/** Multipliers of a `scale` setting in tuning grids: a factor of 2 either way, in steps of about √2. */
export const TUNING_SCALE_FACTORS: readonly number[] = [0.5, 0.71, 1, 1.41, 2];

export interface ParamSpec {
  name: string;
  meaning: string;
  default: number;
  min?: number;
  max?: number;
  minExclusive?: boolean;
  maxExclusive?: boolean;
  integer?: boolean;
}

/** What a univariate scenario exposes for quadrature and goodness-of-fit checks. */
export interface UnivariateDensity {
  /** Support endpoints (may be infinite). */
  lower: number;
  upper: number;
  logDensity(x: number): number;
  cdf(x: number): number;
  /**
   * The survival function 1 − F(x) computed without forming 1 − F, where it is known: F rounds to 1 far in the
   * upper tail, so 1 − F loses every digit there (recorded[...] sums cell masses in the upper tail with it).
   * Absent: scenarios/build.ts, survivalOf, falls back to 1 − cdf and says so.
   */
  survival?(x: number): number;
  /**
   * The inverse CDF in closed form, where one exists (absent: scenarios/build.ts, quantileOf, inverts `cdf`
   * numerically). autocorrelated[...] maps normal scores through it.
   */
  quantile?(p: number): number;
  /** Points where the density has kinks or peaks, to help quadrature. */
  breakpoints?: readonly number[];
  /**
   * log f(upper − u) computed from the distance u itself, for densities with a pole at a finite upper end:
   * x = upper − u rounds u away once u < 1e-16, which loses mass that such a pole still carries.
   */
  logDensityNearUpper?(u: number): number;
}

export interface Scenario {
  /** Canonical spec, e.g. `gamma:shape=2,scale=1`; the same string always names the same distribution. */
  id: string;
  family: string;
  quantity: Quantity;
  dim: number;
  params: Record<string, number>;
  /** For mutual information: the first `xDim` columns are X, the rest are Y (as on each drawn sample). */
  xDim?: number;
  /** For conditional mutual information: X, then `yDim` columns of Y, then Z (as on each drawn sample). */
  yDim?: number;
  /** Draws n independent points. Consumes `rng` only. */
  sample(rng: Rng, n: number): Sample;
  /** The true value in nats. */
  truth: number;
  /** Where the true value comes from: a book or paper for closed forms, "numeric: method, error bound" otherwise. */
  truthSource: string;
  /** Var(log f(X)) when known, for the efficiency bound Var(log f)/n. */
  logDensityVariance?: number;
  /** Where Var(log f(X)) comes from. */
  logDensityVarianceSource?: string;
  support: Support;
  tails: Tails;
  /** Present on one-dimensional scenarios. */
  univariate?: UnivariateDensity;
  /** The marginal law of each coordinate, when known (needed for coordinate-wise monotone perturbations). */
  marginals?: UnivariateDensity[];
  /** Log density at one point (length dim), when it has a closed form. */
  logDensity?(x: ArrayLike<number>): number;
  /** Exact mean and covariance when finite, for sampler checks. */
  moments?: { mean: number[]; covariance: number[][] };
  /**
   * The law as a map of independent standard normals, `width` of them per row: `map` turns n rows of them
   * (row-major, n × width) into n rows each of the scenario's law. autocorrelated[...] feeds it AR(1) series in
   * place of independent normals. One-dimensional scenarios get it from their quantile (scenarios/build.ts,
   * normalRepresentation); Gaussian laws, their monotone maps and products of such declare it.
   */
  fromNormals?: NormalRepresentation;
  /** Serial dependence between rows (autocorrelated[...]); absent: rows are independent. */
  dependence?: SerialDependence;
  /** Transfer-entropy scenarios: the process facts, including the other direction's value. */
  transfer?: TransferFacts;
  /** recorded[...]: the lattice the values are rounded to, and the lattice estimator's own target. */
  recorded?: RecordedFacts;
}

/** What a recorded[...] scenario states besides its truth (the underlying law's). */
export interface RecordedFacts {
  /** The step of each coordinate (0: left as drawn). */
  steps: number[];
  /** The base scenario's id (the underlying continuous law). */
  base: string;
  /** Exact Shannon entropy −Σ p_k log p_k of the recorded values in nats (1-D entropy laws with a CDF; null otherwise, `source` says why). */
  discreteEntropy: number | null;
  /** discreteEntropy + log Δ: what the lattice estimator estimates (tends to the base's truth as Δ → 0). */
  latticeEntropy: number | null;
  /** How the two were computed and their error bound, or why they are null. */
  source: string;
}

/** What a transfer-entropy scenario (te-var1) states besides its truth (`hhat scenarios --json`). */
export interface TransferFacts {
  /** TE(source → target) of the columns as drawn, at the scenario's history lengths (its truth). */
  forward: number;
  /** TE(target → source), at the same history lengths. */
  reverse: number;
  spectralRadius: number;
  /** Stationary lag-0 covariance of (X, Y) and lag-1 covariance Cov(s_{t+1}, s_t) = AΣ, in process order (X, Y). */
  stationaryCovariance: number[][];
  lag1Covariance: number[][];
  note: string;
}

export interface NormalRepresentation {
  width: number;
  map(normals: Float64Array, n: number): Sample;
}

/** What autocorrelated[...] states about its rows, for `hhat scenarios --json` and reports. */
export interface SerialDependence {
  kind: 'gaussian-ar1';
  phi: number;
  /** Lag-1 autocorrelation of the latent normal scores (= φ). */
  lag1Autocorrelation: number;
  /** τ = 1 + 2 Σ_k φ^k = (1 + φ)/(1 − φ), of the latent normal scores. */
  integratedAutocorrelationTime: number;
  /** 1/τ: the effective sample size of the latent series is n/τ. */
  effectiveSampleSizeFraction: number;
  note: string;
}

export interface ScenarioFamily {
  id: string;
  quantity: Quantity;
  /** One line for catalogs. */
  summary: string;
  params: readonly ParamSpec[];
  /** Builds a scenario from validated parameters (every spec'd name present). */
  create(params: Record<string, number>): Scenario;
  /** Parameter sets listed in the catalog besides the defaults. */
  examples?: readonly Record<string, number>[];
}
