/**
 * Serial dependence with exact marginals: `autocorrelated[phi=0.9;SPEC]` draws, for each independent standard
 * normal of SPEC's normal representation (scenarios/build.ts, normalRepresentation), its own stationary Gaussian
 * AR(1) series
 *
 *   Z_0 ~ N(0, 1),   Z_t = φ Z_{t−1} + √(1 − φ²) ε_t,   ε_t iid N(0, 1),
 *
 * so every Z_t is N(0, 1) and Corr(Z_t, Z_{t+k}) = φ^k (Box, Jenkins & Reinsel, Time Series Analysis, 4th ed.,
 * §3.2.4), and maps row t through the base's own map. Each row therefore has exactly the base law (its truth,
 * support and tails are the base's); only the rows are no longer independent: row order is time order.
 */
import type { Rng, Sample, Scenario, SerialDependence } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { formatNumber, parseNumber } from '../src/core/spec.js';
import { normalRepresentation } from './build.js';
import { loadPackage } from '../src/core/vendor.js';

const normalRandom = loadPackage<typeof import('@stdlib/random-base-normal')>('@stdlib/random-base-normal');

export const AUTOCORRELATED_FAMILY = 'autocorrelated';
export const AUTOCORRELATED_USAGE = 'autocorrelated[phi=φ;SPEC], −1 < φ < 1';
export const AUTOCORRELATED_SUMMARY =
  'rows as a stationary Gaussian AR(1) series mapped to SPEC’s law (1-D laws by their quantile; Gaussian laws, their monotone maps and products of such); marginals and truth are SPEC’s';

/** What can be wrapped, for the refusal. */
const WRAPPABLE =
  'a one-dimensional entropy scenario, a Gaussian (gaussian, gaussian-covariance, mi-gaussian), lognormal-mv, a transformed[...] of a wrappable base, or a product[...] of such';

/** Reads `phi=0.9` (the first argument of autocorrelated[...]). */
export function parseAutocorrelatedArgument(args: string[], text: string): { phi: number; base: string } {
  if (args.length !== 2) throw new UsageError(`autocorrelated[...] takes phi and a base: ${AUTOCORRELATED_USAGE}; got "${text}"`);
  const match = /^phi\s*=\s*(.+)$/.exec(args[0]);
  const phi = match ? parseNumber(match[1]) : undefined;
  if (phi === undefined || !(phi > -1 && phi < 1)) {
    throw new UsageError(`autocorrelated[...]: "${args[0]}" is not allowed; the first argument must be phi=φ with −1 < φ < 1 (e.g. phi=0.9)`);
  }
  return { phi, base: args[1] };
}

/** The facts of an AR(1) latent series with coefficient φ. */
export function serialDependence(phi: number): SerialDependence {
  const tau = (1 + phi) / (1 - phi);
  return {
    kind: 'gaussian-ar1',
    phi,
    lag1Autocorrelation: phi,
    integratedAutocorrelationTime: tau,
    effectiveSampleSizeFraction: 1 / tau,
    note:
      `of the latent normal scores Z_t (Corr(Z_t, Z_t+k) = φ^k): τ = 1 + 2Σφ^k = (1 + φ)/(1 − φ) = ${tau.toPrecision(4)}, ` +
      `so n rows carry about n/τ = ${(1 / tau).toPrecision(4)}·n independent rows' worth for the mean of Z; ` +
      'a nonlinear map of Z has a lag-1 autocorrelation no larger in size than φ (Gaussian maximal correlation)',
  };
}

export function autocorrelatedScenario(phi: number, base: Scenario): Scenario {
  if (base.dependence) throw new UsageError(`autocorrelated[...]: the base ${base.id} is already autocorrelated; wrap ${WRAPPABLE}`);
  const representation = normalRepresentation(base);
  if (!representation || base.quantity === 'divergence') {
    throw new UsageError(`autocorrelated[...] cannot wrap ${base.id}: it needs ${WRAPPABLE}`);
  }
  const { width } = representation;
  const innovationScale = Math.sqrt(1 - phi * phi);
  const sample = (rng: Rng, n: number): Sample => {
    const draw = normalRandom.factory(0, 1, { prng: rng });
    const normals = new Float64Array(n * width);
    for (let j = 0; j < width; j++) normals[j] = draw();
    for (let t = 1; t < n; t++) {
      const row = t * width;
      for (let j = 0; j < width; j++) normals[row + j] = phi * normals[row - width + j] + innovationScale * draw();
    }
    const drawn = representation.map(normals, n);
    // Mutual information: the first xDim columns are X (then yDim of Y, for a conditional one), as on the base's samples.
    if (base.xDim !== undefined) drawn.xDim = base.xDim;
    if (base.yDim !== undefined) drawn.yDim = base.yDim;
    return drawn;
  };
  // Everything that describes one row is the base's: the marginal law is unchanged. (Not a spread: that would
  // evaluate the base's lazy Var(log f) now.)
  const scenario: Scenario = {
    id: `${AUTOCORRELATED_FAMILY}[phi=${formatNumber(phi)};${base.id}]`,
    family: AUTOCORRELATED_FAMILY,
    quantity: base.quantity,
    dim: base.dim,
    params: { phi },
    sample,
    truth: base.truth,
    truthSource: base.truthSource,
    support: base.support,
    tails: base.tails,
    get logDensityVariance() {
      return base.logDensityVariance;
    },
    get logDensityVarianceSource() {
      return base.logDensityVarianceSource;
    },
    dependence: serialDependence(phi),
  };
  if (base.univariate) scenario.univariate = base.univariate;
  if (base.marginals) scenario.marginals = base.marginals;
  if (base.logDensity) scenario.logDensity = base.logDensity;
  if (base.moments) scenario.moments = base.moments;
  if (base.xDim !== undefined) scenario.xDim = base.xDim;
  if (base.yDim !== undefined) scenario.yDim = base.yDim;
  return scenario;
}
