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
 *   mi-label-gaussian   X uniform on {0, …, m−1} (a class label), Y | X ~ N(X·gap, 1): I = h(Y) − ½ log(2πe), h of
 *                       the equal-weight Gaussian mixture by adaptive quadrature (error stated in truthSource).
 */
import { normalRandom } from '../src/math/random.js';
import type { ParamSpec, ScenarioFamily, UnivariateDensity } from '../src/core/contracts.js';
import { mutualInformationScenario } from './dependence.js';
import { entropyByQuadrature, formatError } from './build.js';
import { normalCdf } from '../src/math/special.js';

/** A class label uniform on {0, …, m − 1} from one uniform draw (the min guards u·m rounding up to m). */
function drawLabel(rng: () => number, m: number): number {
  return Math.min(m - 1, Math.floor(rng() * m));
}

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
          const x = drawLabel(rng, p.m);
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

const labelSpecs: ParamSpec[] = [
  { name: 'm', meaning: 'number of classes (X = 0, …, m − 1)', default: 3, min: 2, max: 50, integer: true },
  { name: 'gap', meaning: 'distance between neighbouring class means of Y (in SDs)', default: 1, min: 0, minExclusive: true, max: 20 },
];

/**
 * Y's law for the quadrature: the equal-weight mixture of N(j·gap, 1), j = 0..m−1, on [−40, (m − 1)·gap + 40]
 * (the mass outside is below e^−800: nothing in double precision).
 */
function labelMixture(m: number, gap: number): UnivariateDensity {
  const logNorm = -0.5 * Math.log(2 * Math.PI) - Math.log(m);
  return {
    lower: -40,
    upper: (m - 1) * gap + 40,
    breakpoints: Array.from({ length: m }, (_, j) => j * gap),
    logDensity: (y) => {
      let top = -Infinity;
      for (let j = 0; j < m; j++) top = Math.max(top, -0.5 * (y - j * gap) ** 2);
      let sum = 0;
      for (let j = 0; j < m; j++) sum += Math.exp(-0.5 * (y - j * gap) ** 2 - top);
      return logNorm + top + Math.log(sum);
    },
    cdf: (y) => {
      let sum = 0;
      for (let j = 0; j < m; j++) sum += normalCdf(y - j * gap);
      return sum / m;
    },
  };
}

const miLabelGaussian: ScenarioFamily = {
  id: 'mi-label-gaussian',
  quantity: 'mutual-information',
  summary: 'X a class label uniform on {0, …, m−1}, Y | X ~ N(X·gap, 1): I = h(Y) − ½ log(2πe), h by quadrature',
  params: labelSpecs,
  create: (p) => {
    const entropy = entropyByQuadrature(labelMixture(p.m, p.gap));
    return mutualInformationScenario({
      family: 'mi-label-gaussian',
      specs: labelSpecs,
      params: p,
      xDim: 1,
      yDim: 1,
      truth: entropy.value - 0.5 * Math.log(2 * Math.PI * Math.E),
      truthSource: `numeric: h(Y) − ½ log(2πe), h of the class mixture by adaptive Gauss–Legendre quadrature on [−40, (m − 1)·gap + 40], error estimate ${formatError(entropy.error)}`,
      support: 'unbounded',
      tails: 'light',
      draw: (rng, n) => {
        const normal = normalRandom.factory(0, 1, { prng: rng });
        const data = new Float64Array(2 * n);
        for (let i = 0; i < n; i++) {
          const x = drawLabel(rng, p.m);
          data[2 * i] = x;
          data[2 * i + 1] = x * p.gap + normal();
        }
        return data;
      },
    });
  },
  examples: [{ m: 2, gap: 2 }],
};

export const mixedFamilies: ScenarioFamily[] = [miUniformWindow, miZeroInflated, miLabelGaussian];
