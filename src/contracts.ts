/**
 * The contracts shared by scenarios, estimators and the harness. Estimators and scenarios depend only on
 * this file and the math helpers; the harness reaches them only through their registries.
 */

export type Quantity = 'entropy' | 'mutual-information' | 'divergence';
export type Support = 'bounded' | 'half' | 'unbounded';
export type Tails = 'light' | 'exponential' | 'heavy';

/** n points in `dim` dimensions, row-major: point i is data[i*dim .. i*dim+dim-1]. */
export interface Sample {
  n: number;
  dim: number;
  data: Float64Array;
  /** For mutual information: the first `xDim` columns are X, the rest are Y. */
  xDim?: number;
  /** For a divergence D(P || Q): this sample is from P and `q` is the sample from Q (same dim, own size). */
  q?: Sample;
}

/** Two samples, from P and from Q, for a divergence D(P || Q). */
export interface SamplePair {
  p: Sample;
  q: Sample;
}

/** A uniform stream on [0, 1) with 53-bit resolution. */
export type Rng = () => number;

/** A tuning value: a number, or a keyword such as a bin rule. */
export type SettingValue = number | string;
export type Settings = Record<string, SettingValue>;

export interface SettingSpec {
  name: string;
  /** One line: what the setting does. */
  meaning: string;
  /** The default; a keyword such as 'auto' is resolved per sample by the estimator's `resolve`. */
  default: SettingValue;
  /** integer / number: numeric with optional bounds; choice: one of `choices`; the or-forms take either. */
  kind: 'integer' | 'number' | 'choice' | 'choice-or-integer' | 'choice-or-number';
  choices?: readonly string[];
  min?: number;
  max?: number;
  /** When true, `min` itself is not allowed (a strict lower bound). */
  minExclusive?: boolean;
}

/**
 * The invariances the conformance suite (src/conformance.ts) checks, as an estimator declares the ones its
 * method lacks:
 *   rowOrder       the estimate does not depend on the order of the rows;
 *   scale          entropy: Ĥ(c·x) = Ĥ(x) + d·log|c|; mutual information and divergence: unchanged when every
 *                  coordinate (of both samples) is multiplied by one factor c;
 *   separateScale  mutual information: unchanged when X and Y are each multiplied by a factor of their own;
 *   translation    unchanged by x → x + b (X and Y each shifted; P and Q shifted alike);
 *   symmetry       mutual information: Î(X; Y) = Î(Y; X);
 *   affine         divergence: unchanged when P and Q go through one invertible affine map x → Ax + b.
 */
export type InvarianceName = 'rowOrder' | 'scale' | 'separateScale' | 'translation' | 'symmetry' | 'affine';

/**
 * Why a method lacks an invariance: one line, or a function of the settings (validated, keywords unresolved)
 * and the dimension that gives the line where the invariance fails and undefined where it holds (a histogram
 * lacks scale equivariance only with a fixed bin width in data units).
 */
export type InvarianceException = string | ((settings: Settings, dim: number) => string | undefined);

export interface Estimator {
  id: string;
  family: string;
  quantity: Quantity;
  /** One line for catalogs. */
  summary: string;
  settings: readonly SettingSpec[];
  /** Smallest and largest dimension supported (Infinity for any). */
  dims: readonly [number, number];
  /** The paper or book that defines the method. */
  reference: string;
  /** Replace sample-dependent defaults (keywords such as 'auto') with the values actually used, for reports. */
  resolve?(sample: Sample, settings: Settings): Settings;
  /**
   * The estimate in nats, from the settings as configured (keywords included) or as `resolve` returned them:
   * both must give the same value. Throws an EstimateError on input the method cannot handle.
   */
  estimate(sample: Sample, settings: Settings): number;
  /**
   * The invariances of the quantity that the method lacks by design, each with its reason: the conformance
   * suite reports those checks as not applicable, with the reason, instead of failing them. Leave it out when
   * the method has them all. Declare only what the method truly lacks; `hhat check` still measures the
   * difference and shows it beside the reason.
   *
   *   lacks: { scale: (settings) => (typeof settings.width === 'number' ? 'a fixed bin width is in data units' : undefined) }
   */
  lacks?: Partial<Record<InvarianceName, InvarianceException>>;
}

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
