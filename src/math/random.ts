/**
 * The @stdlib random-variate generators, each loaded on its first use: loading all of them costs more start-up
 * time than most commands take to run, and a plan uses a few.
 *
 *   const draw = normalRandom.factory(0, 1, { prng: rng });   // as the @stdlib package's own factory
 */
import { loadPackage } from '../core/vendor.js';

type Argument = number | { prng: () => number };
export interface RandomFactory {
  factory(...args: Argument[]): () => number;
}

function lazy(name: string): RandomFactory {
  let loaded: RandomFactory | undefined;
  return { factory: (...args) => (loaded ??= loadPackage<RandomFactory>(name)).factory(...args) };
}

export const arcsineRandom = lazy('@stdlib/random-base-arcsine');
export const betaRandom = lazy('@stdlib/random-base-beta');
export const cauchyRandom = lazy('@stdlib/random-base-cauchy');
export const chiRandom = lazy('@stdlib/random-base-chi');
export const chisquareRandom = lazy('@stdlib/random-base-chisquare');
export const exponentialRandom = lazy('@stdlib/random-base-exponential');
export const frechetRandom = lazy('@stdlib/random-base-frechet');
export const gammaRandom = lazy('@stdlib/random-base-gamma');
export const gumbelRandom = lazy('@stdlib/random-base-gumbel');
export const invgammaRandom = lazy('@stdlib/random-base-invgamma');
export const kumaraswamyRandom = lazy('@stdlib/random-base-kumaraswamy');
export const laplaceRandom = lazy('@stdlib/random-base-laplace');
export const levyRandom = lazy('@stdlib/random-base-levy');
export const logisticRandom = lazy('@stdlib/random-base-logistic');
export const lognormalRandom = lazy('@stdlib/random-base-lognormal');
export const normalRandom = lazy('@stdlib/random-base-normal');
export const paretoRandom = lazy('@stdlib/random-base-pareto-type1');
export const rayleighRandom = lazy('@stdlib/random-base-rayleigh');
export const tRandom = lazy('@stdlib/random-base-t');
export const triangularRandom = lazy('@stdlib/random-base-triangular');
export const uniformRandom = lazy('@stdlib/random-base-uniform');
export const weibullRandom = lazy('@stdlib/random-base-weibull');
