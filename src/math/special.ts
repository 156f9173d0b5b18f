/** Special functions, from the @stdlib/math-base-special-* packages, behind one import. */
import { loadPackage } from '../core/vendor.js';

const digammaImpl = loadPackage<typeof import('@stdlib/math-base-special-digamma')>('@stdlib/math-base-special-digamma');
const trigammaImpl = loadPackage<typeof import('@stdlib/math-base-special-trigamma')>('@stdlib/math-base-special-trigamma');
const gammalnImpl = loadPackage<typeof import('@stdlib/math-base-special-gammaln')>('@stdlib/math-base-special-gammaln');
const betalnImpl = loadPackage<typeof import('@stdlib/math-base-special-betaln')>('@stdlib/math-base-special-betaln');
const gammaincImpl = loadPackage<typeof import('@stdlib/math-base-special-gammainc')>('@stdlib/math-base-special-gammainc');

export const digamma: (x: number) => number = digammaImpl;
export const trigamma: (x: number) => number = trigammaImpl;
export const logGamma: (x: number) => number = gammalnImpl;
export const logBeta: (a: number, b: number) => number = betalnImpl;
/** Regularized lower incomplete gamma P(a, x). */
export const regularizedGammaP = (a: number, x: number): number => gammaincImpl(x, a);
/** Regularized upper incomplete gamma Q(a, x) = 1 − P(a, x), accurate where P rounds to 1. */
export const regularizedGammaQ = (a: number, x: number): number => gammaincImpl(x, a, true, true);

/** The Euler–Mascheroni constant. */
export const EULER_GAMMA = 0.5772156649015329;

/** log of the volume of the d-dimensional Euclidean unit ball: (d/2) log π − log Γ(d/2 + 1). */
export function logUnitBallVolume(d: number): number {
  return (d / 2) * Math.log(Math.PI) - logGamma(d / 2 + 1);
}

const erfImpl = loadPackage<typeof import('@stdlib/math-base-special-erf')>('@stdlib/math-base-special-erf');
const erfcImpl = loadPackage<typeof import('@stdlib/math-base-special-erfc')>('@stdlib/math-base-special-erfc');
const betaincImpl = loadPackage<typeof import('@stdlib/math-base-special-betainc')>('@stdlib/math-base-special-betainc');

export const erf: (x: number) => number = erfImpl;
export const erfc: (x: number) => number = erfcImpl;
/** Regularized incomplete beta I_x(a, b). */
export const regularizedBeta = (x: number, a: number, b: number): number => betaincImpl(x, a, b);
/** 1 − I_x(a, b), accurate where I_x rounds to 1. */
export const regularizedBetaUpper = (x: number, a: number, b: number): number => betaincImpl(x, a, b, true, true);

const normalQuantileImpl = loadPackage<typeof import('@stdlib/stats-base-dists-normal-quantile')>('@stdlib/stats-base-dists-normal-quantile');

/** Standard normal quantile Φ⁻¹(p): 1.959963984540054 at 0.975. */
export const normalQuantile = (p: number): number => normalQuantileImpl(p, 0, 1);

/** Standard normal survival function 1 − Φ(z), accurate in the upper tail. */
export function normalSurvival(z: number): number {
  return 0.5 * erfc(z / Math.SQRT2);
}

/** Standard normal CDF Φ(z), accurate in both tails. */
export function normalCdf(z: number): number {
  return 0.5 * erfc(-z / Math.SQRT2);
}

const MIN_NORMAL = 2.2250738585072014e-308;

/** Whether v is finite, non-zero and not subnormal, i.e. carries a full 53-bit significand. */
export function fullPrecision(v: number): boolean {
  return Number.isFinite(v) && Math.abs(v) >= MIN_NORMAL;
}

/**
 * log(x·y) for x, y > 0: the product's log where the product is an ordinary double (so a formula that always
 * formed it keeps its value), the sum of logs where the product would overflow or lose digits as a subnormal.
 */
export function logProduct(x: number, y: number): number {
  const v = x * y;
  return fullPrecision(v) ? Math.log(v) : Math.log(x) + Math.log(y);
}

/** log(x/y) for x, y > 0, falling back on log x − log y as logProduct does. */
export function logQuotient(x: number, y: number): number {
  const v = x / y;
  return fullPrecision(v) ? Math.log(v) : Math.log(x) - Math.log(y);
}

/** log(b − a) for a < b, through the half-width where b − a overflows (b/2 − a/2 cannot). */
export function logWidth(a: number, b: number): number {
  const width = b - a;
  return Number.isFinite(width) ? Math.log(width) : Math.log(b / 2 - a / 2) + Math.LN2;
}
