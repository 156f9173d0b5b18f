/**
 * The @stdlib CDF of each univariate family that has one, with our parameters mapped onto @stdlib's (a gamma
 * takes a rate there; Maxwell–Boltzmann is chi with 3 degrees of freedom scaled by a). Shared by the KS tests of
 * the samplers (test/scenarios.test.ts) and of autocorrelated[...] (test/autocorrelated.test.ts).
 */
import arcsineCdf from '@stdlib/stats-base-dists-arcsine-cdf';
import betaCdf from '@stdlib/stats-base-dists-beta-cdf';
import cauchyCdf from '@stdlib/stats-base-dists-cauchy-cdf';
import chiCdf from '@stdlib/stats-base-dists-chi-cdf';
import chisquareCdf from '@stdlib/stats-base-dists-chisquare-cdf';
import exponentialCdf from '@stdlib/stats-base-dists-exponential-cdf';
import frechetCdf from '@stdlib/stats-base-dists-frechet-cdf';
import gammaCdf from '@stdlib/stats-base-dists-gamma-cdf';
import gumbelCdf from '@stdlib/stats-base-dists-gumbel-cdf';
import invgammaCdf from '@stdlib/stats-base-dists-invgamma-cdf';
import kumaraswamyCdf from '@stdlib/stats-base-dists-kumaraswamy-cdf';
import laplaceCdf from '@stdlib/stats-base-dists-laplace-cdf';
import levyCdf from '@stdlib/stats-base-dists-levy-cdf';
import logisticCdf from '@stdlib/stats-base-dists-logistic-cdf';
import lognormalCdf from '@stdlib/stats-base-dists-lognormal-cdf';
import normalCdf from '@stdlib/stats-base-dists-normal-cdf';
import paretoCdf from '@stdlib/stats-base-dists-pareto-type1-cdf';
import rayleighCdf from '@stdlib/stats-base-dists-rayleigh-cdf';
import tCdf from '@stdlib/stats-base-dists-t-cdf';
import triangularCdf from '@stdlib/stats-base-dists-triangular-cdf';
import uniformCdf from '@stdlib/stats-base-dists-uniform-cdf';
import weibullCdf from '@stdlib/stats-base-dists-weibull-cdf';

/** @stdlib CDFs for the KS tests; families without one use their own CDF, itself checked against SciPy below. */
export const stdlibCdf: Record<string, (p: Record<string, number>) => (x: number) => number> = {
  uniform: (p) => (x) => uniformCdf(x, p.a, p.b),
  normal: (p) => (x) => normalCdf(x, p.mu, p.sigma),
  exponential: (p) => (x) => exponentialCdf(x, p.rate),
  laplace: (p) => (x) => laplaceCdf(x, p.mu, p.b),
  logistic: (p) => (x) => logisticCdf(x, p.mu, p.s),
  cauchy: (p) => (x) => cauchyCdf(x, p.x0, p.gamma),
  'student-t': (p) => (x) => tCdf((x - p.mu) / p.sigma, p.nu),
  gamma: (p) => (x) => gammaCdf(x, p.shape, 1 / p.scale),
  beta: (p) => (x) => betaCdf(x, p.a, p.b),
  lognormal: (p) => (x) => lognormalCdf(x, p.mu, p.sigma),
  weibull: (p) => (x) => weibullCdf(x, p.k, p.lambda),
  gumbel: (p) => (x) => gumbelCdf(x, p.mu, p.beta),
  pareto: (p) => (x) => paretoCdf(x, p.alpha, p.xm),
  triangular: (p) => (x) => triangularCdf(x, p.a, p.b, p.c),
  rayleigh: (p) => (x) => rayleighCdf(x, p.sigma),
  'maxwell-boltzmann': (p) => (x) => chiCdf(x / p.a, 3),
  chi: (p) => (x) => chiCdf(x, p.k),
  'chi-squared': (p) => (x) => chisquareCdf(x, p.k),
  arcsine: (p) => (x) => arcsineCdf(x, p.a, p.b),
  levy: (p) => (x) => levyCdf(x, p.mu, p.c),
  frechet: (p) => (x) => frechetCdf(x, p.alpha, p.s, p.m),
  'inverse-gamma': (p) => (x) => invgammaCdf(x, p.alpha, p.beta),
  kumaraswamy: (p) => (x) => kumaraswamyCdf(x, p.a, p.b),
};
