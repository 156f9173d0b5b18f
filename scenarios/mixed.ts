/**
 * Mutual information with a discrete or mixed variable (for mi-mixed and mi-discrete-continuous), exact truths:
 *
 *   mi-uniform-window   X uniform on {0, …, m−1}, Y | X uniform on [X, X + 2]. Y's density is 1/(2m) on [0, 1) and
 *                       [m, m + 1), 1/m on [1, m), so h(Y) = (1/m) log(2m) + ((m − 1)/m) log m, and h(Y | X) = log 2:
 *                       I = h(Y) − log 2 = log m − ((m − 1)/m) log 2 (0 at m = 1; checked against SciPy's quad in
 *                       test/fixtures/make_mixed_mi_fixture.py).
 *   mi-zero-inflated    X ~ N(0, 1); with probability p, independent of X, Y = 0, else Y = X + σε, ε ~ N(0, 1). The
 *                       indicator Z of Y = 0 is a function of Y almost surely and independent of X, so
 *                       I(X; Y) = I(X; Y, Z) = I(X; Z) + I(X; Y | Z) = 0 + (1 − p) · ½ log(1 + 1/σ²).
 */
import { normalRandom } from '../src/math/random.js';
import type { ParamSpec, ScenarioFamily } from '../src/core/contracts.js';
import { mutualInformationScenario } from './dependence.js';

const windowSpecs: ParamSpec[] = [{ name: 'm', meaning: 'number of values of X (0, …, m − 1)', default: 4, min: 1, max: 1000, integer: true }];

const miUniformWindow: ScenarioFamily = {
  id: 'mi-uniform-window',
  quantity: 'mutual-information',
  summary: 'X uniform on {0, …, m−1} (discrete), Y | X uniform on [X, X + 2]: I = log m − ((m − 1)/m) log 2',
  params: windowSpecs,
  create: (p) =>
    mutualInformationScenario({
      family: 'mi-uniform-window',
      specs: windowSpecs,
      params: p,
      xDim: 1,
      yDim: 1,
      truth: Math.log(p.m) - ((p.m - 1) / p.m) * Math.log(2),
      truthSource: 'h(Y) − h(Y | X) with Y’s piecewise-constant density: log m − ((m − 1)/m) log 2 (derived in scenarios/mixed.ts)',
      support: 'bounded',
      tails: 'light',
      draw: (rng, n) => {
        const data = new Float64Array(2 * n);
        for (let i = 0; i < n; i++) {
          const x = Math.min(p.m - 1, Math.floor(rng() * p.m));
          data[2 * i] = x;
          data[2 * i + 1] = x + 2 * rng();
        }
        return data;
      },
    }),
  examples: [{ m: 2 }, { m: 10 }],
};

const zeroSpecs: ParamSpec[] = [
  { name: 'p', meaning: 'probability that Y is exactly 0', default: 0.3, min: 0, max: 1, maxExclusive: true },
  { name: 'sigma', meaning: 'noise SD of Y = X + σε when Y is not 0', default: 1, min: 0, minExclusive: true },
];

const miZeroInflated: ScenarioFamily = {
  id: 'mi-zero-inflated',
  quantity: 'mutual-information',
  summary: 'X ~ N(0,1); Y = 0 with probability p, else X + σε: I = (1 − p) · ½ log(1 + 1/σ²)',
  params: zeroSpecs,
  create: (p) =>
    mutualInformationScenario({
      family: 'mi-zero-inflated',
      specs: zeroSpecs,
      params: p,
      xDim: 1,
      yDim: 1,
      truth: (1 - p.p) * 0.5 * Math.log(1 + 1 / (p.sigma * p.sigma)),
      truthSource: 'I(X; Y, Z) with Z = 1{Y = 0} independent of X: (1 − p) · ½ log(1 + 1/σ²) (derived in scenarios/mixed.ts)',
      support: 'unbounded',
      tails: 'light',
      draw: (rng, n) => {
        const normal = normalRandom.factory(0, 1, { prng: rng });
        const data = new Float64Array(2 * n);
        for (let i = 0; i < n; i++) {
          const x = normal();
          const noise = normal();
          const zero = rng() < p.p;
          data[2 * i] = x;
          data[2 * i + 1] = zero ? 0 : x + p.sigma * noise;
        }
        return data;
      },
    }),
  examples: [{ p: 0.5, sigma: 0.5 }],
};

export const mixedFamilies: ScenarioFamily[] = [miUniformWindow, miZeroInflated];
