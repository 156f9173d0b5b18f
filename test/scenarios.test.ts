/**
 * The scenario catalog checked against sources outside the project: the @stdlib entropy packages, SciPy
 * (test/fixtures/scenarios.json, made by test/fixtures/make_scenario_fixture.py; SciPy version recorded in
 * it), and closed forms derived in the comments. Samplers are checked by Kolmogorov–Smirnov tests against
 * @stdlib's CDFs (or SciPy-checked CDFs where @stdlib has none).
 */
import { describe, expect, it } from 'vitest';
import arcsineEntropy from '@stdlib/stats-base-dists-arcsine-entropy';
import betaEntropy from '@stdlib/stats-base-dists-beta-entropy';
import cauchyEntropy from '@stdlib/stats-base-dists-cauchy-entropy';
import chiEntropy from '@stdlib/stats-base-dists-chi-entropy';
import chisquareEntropy from '@stdlib/stats-base-dists-chisquare-entropy';
import exponentialEntropy from '@stdlib/stats-base-dists-exponential-entropy';
import frechetEntropy from '@stdlib/stats-base-dists-frechet-entropy';
import gammaEntropy from '@stdlib/stats-base-dists-gamma-entropy';
import gumbelEntropy from '@stdlib/stats-base-dists-gumbel-entropy';
import invgammaEntropy from '@stdlib/stats-base-dists-invgamma-entropy';
import laplaceEntropy from '@stdlib/stats-base-dists-laplace-entropy';
import levyEntropy from '@stdlib/stats-base-dists-levy-entropy';
import logisticEntropy from '@stdlib/stats-base-dists-logistic-entropy';
import lognormalEntropy from '@stdlib/stats-base-dists-lognormal-entropy';
import normalEntropy from '@stdlib/stats-base-dists-normal-entropy';
import paretoEntropy from '@stdlib/stats-base-dists-pareto-type1-entropy';
import rayleighEntropy from '@stdlib/stats-base-dists-rayleigh-entropy';
import tEntropy from '@stdlib/stats-base-dists-t-entropy';
import triangularEntropy from '@stdlib/stats-base-dists-triangular-entropy';
import uniformEntropy from '@stdlib/stats-base-dists-uniform-entropy';
import weibullEntropy from '@stdlib/stats-base-dists-weibull-entropy';
import type { Scenario } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { DEFAULT_SEED, replicateRng, replicateSeed } from '../src/core/rng.js';
import { digamma, logGamma } from '../src/math/special.js';
import { catalog, isNumericTruth, listFamilies, parseScenario } from '../scenarios/index.js';
import { NUMERIC_TRUTH_BOUND } from '../scenarios/mixtures-and-transforms.js';
import { entropyByQuadrature } from '../scenarios/build.js';
import { integrate } from '../src/math/quadrature.js';
import fixture from './fixtures/scenarios.json' with { type: 'json' };
import extremeTruths from './fixtures/extreme-truths.json' with { type: 'json' };
import { kolmogorovQ, ksPValue } from './helpers/ks.js';
import { stdlibCdf } from './helpers/stdlib-cdf.js';
import normalCdf from '@stdlib/stats-base-dists-normal-cdf';

type FixtureEntry = { entropy: number; entropy_source: string; entropy_quad?: number; var_log_f?: number; cdf?: number[][] };
const scipy = fixture.scenarios as Record<string, FixtureEntry>;

function relativeError(actual: number, expected: number): number {
  // Relative to max(1, |expected|): entropies near zero (uniform on [0,1]) are compared absolutely.
  return Math.abs(actual - expected) / Math.max(1, Math.abs(expected));
}

// Mutual-information and divergence scenarios have their own tests.
const all = catalog().filter((s) => s.quantity === 'entropy');
const univariateClosed = all.filter((s) => s.dim === 1 && !isNumericTruth(s) && s.family !== 'product');

/** The @stdlib entropy package for each family that has one, with our parameters mapped onto its own. */
const stdlibEntropy: Record<string, { pkg: string; value: (p: Record<string, number>) => number }> = {
  uniform: { pkg: '@stdlib/stats-base-dists-uniform-entropy', value: (p) => uniformEntropy(p.a, p.b) },
  normal: { pkg: '@stdlib/stats-base-dists-normal-entropy', value: (p) => normalEntropy(p.mu, p.sigma) },
  exponential: { pkg: '@stdlib/stats-base-dists-exponential-entropy', value: (p) => exponentialEntropy(p.rate) },
  laplace: { pkg: '@stdlib/stats-base-dists-laplace-entropy', value: (p) => laplaceEntropy(p.mu, p.b) },
  logistic: { pkg: '@stdlib/stats-base-dists-logistic-entropy', value: (p) => logisticEntropy(p.mu, p.s) },
  cauchy: { pkg: '@stdlib/stats-base-dists-cauchy-entropy', value: (p) => cauchyEntropy(p.x0, p.gamma) },
  // @stdlib's t is the standard one; a scale σ adds log σ.
  'student-t': { pkg: '@stdlib/stats-base-dists-t-entropy', value: (p) => tEntropy(p.nu) + Math.log(p.sigma) },
  // @stdlib's gamma takes a rate.
  gamma: { pkg: '@stdlib/stats-base-dists-gamma-entropy', value: (p) => gammaEntropy(p.shape, 1 / p.scale) },
  beta: { pkg: '@stdlib/stats-base-dists-beta-entropy', value: (p) => betaEntropy(p.a, p.b) },
  lognormal: { pkg: '@stdlib/stats-base-dists-lognormal-entropy', value: (p) => lognormalEntropy(p.mu, p.sigma) },
  weibull: { pkg: '@stdlib/stats-base-dists-weibull-entropy', value: (p) => weibullEntropy(p.k, p.lambda) },
  gumbel: { pkg: '@stdlib/stats-base-dists-gumbel-entropy', value: (p) => gumbelEntropy(p.mu, p.beta) },
  pareto: { pkg: '@stdlib/stats-base-dists-pareto-type1-entropy', value: (p) => paretoEntropy(p.alpha, p.xm) },
  triangular: { pkg: '@stdlib/stats-base-dists-triangular-entropy', value: (p) => triangularEntropy(p.a, p.b, p.c) },
  rayleigh: { pkg: '@stdlib/stats-base-dists-rayleigh-entropy', value: (p) => rayleighEntropy(p.sigma) },
  // Maxwell–Boltzmann is chi with 3 degrees of freedom scaled by a.
  'maxwell-boltzmann': { pkg: '@stdlib/stats-base-dists-chi-entropy', value: (p) => chiEntropy(3) + Math.log(p.a) },
  chi: { pkg: '@stdlib/stats-base-dists-chi-entropy', value: (p) => chiEntropy(p.k) },
  'chi-squared': { pkg: '@stdlib/stats-base-dists-chisquare-entropy', value: (p) => chisquareEntropy(p.k) },
  arcsine: { pkg: '@stdlib/stats-base-dists-arcsine-entropy', value: (p) => arcsineEntropy(p.a, p.b) },
  levy: { pkg: '@stdlib/stats-base-dists-levy-entropy', value: (p) => levyEntropy(p.mu, p.c) },
  frechet: { pkg: '@stdlib/stats-base-dists-frechet-entropy', value: (p) => frechetEntropy(p.alpha, p.s, p.m) },
  'inverse-gamma': { pkg: '@stdlib/stats-base-dists-invgamma-entropy', value: (p) => invgammaEntropy(p.alpha, p.beta) },
};

describe('catalog', () => {
  it('lists at least 20 univariate and 6 multivariate closed-form families plus numeric ones', () => {
    const closedFamilies = new Set(all.filter((s) => !isNumericTruth(s)).map((s) => `${s.dim === 1 ? 'uni' : 'multi'}:${s.family}`));
    const univariateFamilies = [...closedFamilies].filter((f) => f.startsWith('uni:'));
    const multivariateFamilies = [...closedFamilies].filter((f) => f.startsWith('multi:'));
    expect(univariateFamilies.length).toBeGreaterThanOrEqual(20);
    expect(multivariateFamilies.length).toBeGreaterThanOrEqual(6);
    expect(all.filter((s) => !isNumericTruth(s)).length).toBeGreaterThanOrEqual(26);
    expect(all.some((s) => s.family === 'gaussian-mixture')).toBe(true);
    expect(all.some((s) => s.family === 'transformed')).toBe(true);
  });

  it('gives every scenario a source, facts for advice, and an id that names it again', () => {
    for (const s of all) {
      expect(s.truthSource.length, s.id).toBeGreaterThan(10);
      expect(['bounded', 'half', 'unbounded']).toContain(s.support);
      expect(['light', 'exponential', 'heavy']).toContain(s.tails);
      expect(Number.isFinite(s.truth), s.id).toBe(true);
      expect(parseScenario(s.id).truth).toBe(s.truth);
    }
  });
});

describe('closed-form entropies', () => {
  it('match the @stdlib entropy package of every family that has one, to 1e-10 relative', () => {
    let checked = 0;
    for (const s of univariateClosed) {
      const ref = stdlibEntropy[s.family];
      if (!ref) continue;
      expect(relativeError(s.truth, ref.value(s.params)), `${s.id} vs ${ref.pkg}`).toBeLessThan(1e-10);
      checked++;
    }
    expect(checked).toBeGreaterThanOrEqual(25);
  });

  it("match SciPy's entropy() and a quadrature of SciPy's logpdf, to 1e-10 relative", () => {
    for (const s of all) {
      const ref = scipy[s.id];
      expect(ref, `no SciPy reference for ${s.id}; rerun make_scenario_fixture.py`).toBeDefined();
      expect(relativeError(s.truth, ref.entropy), `${s.id} vs ${ref.entropy_source}`).toBeLessThan(1e-10);
      // The quadrature route loses accuracy at integrable endpoint poles (beta ½, arcsine) and for the
      // Lévy tail, where scipy.integrate.quad itself warns; the closed forms above are the reference there.
      const singular = s.family === 'arcsine' || s.family === 'levy' || (s.family === 'beta' && (s.params.a < 1 || s.params.b < 1));
      if (ref.entropy_quad !== undefined && !singular) {
        expect(relativeError(s.truth, ref.entropy_quad), `${s.id} vs scipy.integrate.quad`).toBeLessThan(1e-10);
      }
    }
  });

  it('uniform boxes and balls are log-volumes (log Γ from SciPy via the fixture for balls; boxes by hand)', () => {
    // Box sides 1, 2, 4 (width 1, aspect 4, log-spaced): log 8.
    expect(parseScenario('uniform-box:dim=3,width=1,aspect=4').truth).toBeCloseTo(Math.log(8), 14);
    // Unit disc: log π (from memory: area of the unit disc).
    expect(parseScenario('uniform-ball:dim=2,radius=1').truth).toBeCloseTo(Math.log(Math.PI), 14);
  });

  it('the multivariate t reduces to the univariate Student t at d = 1 (independent formulas)', () => {
    const mv = parseScenario('student-t-mv:dim=1,nu=5,rho=0,sigma=2');
    const uni = parseScenario('student-t:nu=5,mu=0,sigma=2');
    expect(relativeError(mv.truth, uni.truth)).toBeLessThan(1e-12);
    expect(relativeError(mv.logDensityVariance!, uni.logDensityVariance!)).toBeLessThan(1e-12);
  });

  it('every univariate log density integrates to its closed-form entropy (our quadrature, within its error estimate)', () => {
    // Checks the log densities that the numeric truths and Var(log f) rely on, and that the quadrature's
    // error estimate is honest (the closed forms are checked against @stdlib and SciPy above).
    for (const s of univariateClosed) {
      const r = entropyByQuadrature(s.univariate!);
      expect(r.error, s.id).toBeLessThan(1e-9);
      expect(Math.abs(r.value - s.truth), s.id).toBeLessThan(Math.max(10 * r.error, 1e-13));
    }
  });
});

describe('Var(log f(X))', () => {
  it('matches a SciPy quadrature for every univariate scenario (1e-8; 1e-6 where SciPy warns at poles)', () => {
    for (const s of univariateClosed) {
      const ref = scipy[s.id]?.var_log_f;
      if (ref === undefined) continue;
      if (s.family === 'levy') continue; // scipy.integrate.quad does not converge on the x^{-3/2} tail; see below
      const singular = s.family === 'arcsine' || (s.family === 'beta' && (s.params.a < 1 || s.params.b < 1));
      expect(Math.abs(s.logDensityVariance! - ref) / Math.max(1, ref), s.id).toBeLessThan(singular ? 1e-6 : 1e-8);
    }
  });

  it('Lévy: Var(3 log|Z| − Z²/2) = 9π²/8 − 5/2 agrees with our quadrature of the density', () => {
    const levy = parseScenario('levy');
    const d = levy.univariate!;
    const q = integrate(
      (x) => {
        const l = d.logDensity(x);
        const f = Math.exp(l);
        return f === 0 ? 0 : f * (l + levy.truth) ** 2;
      },
      0,
      Infinity,
      { absTol: 1e-10, relTol: 1e-11, breakpoints: d.breakpoints, maxPanels: 40000 },
    );
    expect(Math.abs(q.value - levy.logDensityVariance!)).toBeLessThan(1e-9);
  });

  it('the efficiency-bound variance is known for the multivariate scenarios', () => {
    expect(parseScenario('gaussian:dim=4').logDensityVariance).toBe(2);
    expect(parseScenario('uniform-ball').logDensityVariance).toBe(0);
    // Multivariate t via the Beta(ν/2, d/2) identity: ((ν+d)/2)²(ψ′(ν/2) − ψ′((ν+d)/2)); Monte Carlo below.
    const t = parseScenario('student-t-mv:dim=3,nu=5,rho=0.2,sigma=1');
    const rng = replicateRng(7, t.id, 200000, 0);
    const sample = t.sample(rng, 200000);
    let sum = 0;
    let sumSq = 0;
    for (let i = 0; i < sample.n; i++) {
      const l = t.logDensity!(sample.data.subarray(i * 3, i * 3 + 3));
      sum += l;
      sumSq += l * l;
    }
    const mean = sum / sample.n;
    const variance = sumSq / sample.n - mean * mean;
    // Monte-Carlo checks of both the entropy (−E log f) and Var(log f) at 200000 draws.
    expect(Math.abs(-mean - t.truth)).toBeLessThan(5 * Math.sqrt(variance / sample.n));
    expect(Math.abs(variance - t.logDensityVariance!) / t.logDensityVariance!).toBeLessThan(0.05);
  });
});

describe('CDFs used for goodness of fit', () => {
  it("our own CDFs agree with SciPy's at its 1%–99% quantiles (1e-12)", () => {
    for (const s of all.filter((x) => x.univariate)) {
      const ref = scipy[s.id]?.cdf;
      if (!ref) continue;
      for (const [x, expected] of ref) expect(Math.abs(s.univariate!.cdf(x) - expected), `${s.id} at ${x}`).toBeLessThan(1e-12);
    }
  });

  it("the KS p-value helper matches SciPy's kstwobign survival function", () => {
    for (const [lambda, sf] of fixture.kolmogorov_sf) expect(Math.abs(kolmogorovQ(lambda) - sf)).toBeLessThan(1e-10);
  });
});

describe('samplers', () => {
  const ksCases = all.filter((s) => s.univariate && s.family !== 'transformed');

  it.each(ksCases.map((s) => [s.id, s] as const))('%s passes a KS test at n = 20000 (p > 0.001)', (_id, s: Scenario) => {
    const n = 20000;
    const sample = s.sample(replicateRng(DEFAULT_SEED, s.id, n, 0), n);
    const cdfMaker = stdlibCdf[s.family];
    const cdf = cdfMaker ? cdfMaker(s.params) : s.univariate!.cdf;
    const { pValue } = ksPValue(sample.data, cdf);
    expect(pValue).toBeGreaterThan(0.001);
  });

  it('transformed samples map back to their base law (KS on g⁻¹ of the sample)', () => {
    const s = parseScenario('transformed[sinh;normal]');
    const sample = s.sample(replicateRng(3, s.id, 20000, 0), 20000);
    const back = sample.data.map(Math.asinh);
    expect(ksPValue(back, (x) => normalCdf(x, 0, 1)).pValue).toBeGreaterThan(0.001);
  });

  const multivariate = all.filter((s) => s.dim > 1 && s.moments);
  it.each(multivariate.map((s) => [s.id, s] as const))('%s matches its mean and covariance within 5 SE', (_id, s: Scenario) => {
    const n = 20000;
    const d = s.dim;
    const { data } = s.sample(replicateRng(99, s.id, n, 0), n);
    const mean = new Float64Array(d);
    for (let i = 0; i < n; i++) for (let j = 0; j < d; j++) mean[j] += data[i * d + j] / n;
    const { mean: trueMean, covariance: trueCov } = s.moments!;
    for (let j = 0; j < d; j++) {
      const se = Math.sqrt(trueCov[j][j] / n);
      expect(Math.abs(mean[j] - trueMean[j]), `${s.id} mean[${j}]`).toBeLessThan(5 * se);
    }
    // Covariance entries: the SE of a mean of products (x_j − m_j)(x_k − m_k), estimated from the sample.
    // Skipped when the fourth moments are infinite (multivariate t with ν ≤ 4), where the SE is undefined.
    if (s.family === 'student-t-mv' && s.params.nu <= 4) return;
    for (let j = 0; j < d; j++) {
      for (let k = 0; k <= j; k++) {
        let sum = 0;
        let sumSq = 0;
        for (let i = 0; i < n; i++) {
          const prod = (data[i * d + j] - mean[j]) * (data[i * d + k] - mean[k]);
          sum += prod;
          sumSq += prod * prod;
        }
        const cov = sum / n;
        const se = Math.sqrt((sumSq / n - cov * cov) / n);
        expect(Math.abs(cov - trueCov[j][k]), `${s.id} cov[${j}][${k}]`).toBeLessThan(5 * se);
      }
    }
  });

  it('the same seed gives bit-identical samples; other replicates, seeds, sizes and scenarios differ', () => {
    for (const spec of ['normal', 'gaussian:dim=3', 'student-t-mv', 'product[normal;exponential]', 'gaussian-mixture']) {
      const s = parseScenario(spec);
      const a = s.sample(replicateRng(1, s.id, 500, 4), 500).data;
      const b = s.sample(replicateRng(1, s.id, 500, 4), 500).data;
      expect(Buffer.from(a.buffer).equals(Buffer.from(b.buffer))).toBe(true);
      const other = s.sample(replicateRng(1, s.id, 500, 5), 500).data;
      expect(Buffer.from(a.buffer).equals(Buffer.from(other.buffer))).toBe(false);
    }
    const seeds = new Set([
      replicateSeed(1, 'normal:mu=0,sigma=1', 100, 0),
      replicateSeed(2, 'normal:mu=0,sigma=1', 100, 0),
      replicateSeed(1, 'normal:mu=0,sigma=2', 100, 0),
      replicateSeed(1, 'normal:mu=0,sigma=1', 101, 0),
      replicateSeed(1, 'normal:mu=0,sigma=1', 100, 1),
    ]);
    expect(seeds.size).toBe(5);
  });

  it('a replicate regenerates alone: drawing it first or after others gives the same values', () => {
    const s = parseScenario('gamma:shape=3');
    const alone = s.sample(replicateRng(5, s.id, 100, 7), 100).data;
    for (let r = 0; r < 7; r++) s.sample(replicateRng(5, s.id, 100, r), 100);
    const later = s.sample(replicateRng(5, s.id, 100, 7), 100).data;
    expect([...later]).toEqual([...alone]);
  });
});

describe('numeric truths', () => {
  it('a mixture whose components coincide equals the component closed form to 1e-9', () => {
    const mixture = parseScenario('gaussian-mixture:w1=0.3,mu1=1,sigma1=2,w2=0.7,mu2=1,sigma2=2');
    // ½ log(2πe·4), the Gaussian closed form (Cover & Thomas, Theorem 8.4.1).
    expect(Math.abs(mixture.truth - normalEntropy(1, 2))).toBeLessThan(1e-9);
  });

  it('a transform with a constant Jacobian equals the closed-form shift log|a|', () => {
    for (const [a, base] of [
      [3, 'gamma:shape=2,scale=1'],
      [-0.001, 'normal'],
      [1000, 'beta:a=2,b=5'],
    ] as const) {
      const t = parseScenario(`transformed[affine:a=${a},b=1;${base}]`);
      expect(Math.abs(t.truth - (parseScenario(base).truth + Math.log(Math.abs(a))))).toBeLessThan(1e-12);
    }
  });

  it('exp of a base shifts by its mean (E[log|g′|] = E[X]): exp of N(μ, σ) is the lognormal closed form', () => {
    const t = parseScenario('transformed[exp;normal:mu=0.7,sigma=0.5]');
    expect(Math.abs(t.truth - lognormalEntropy(0.7, 0.5))).toBeLessThan(1e-10);
  });

  it('log of a lognormal is the normal closed form (E[−log X] = −μ)', () => {
    const t = parseScenario('transformed[log;lognormal:mu=1.5,sigma=0.8]');
    expect(Math.abs(t.truth - normalEntropy(1.5, 0.8))).toBeLessThan(1e-10);
  });

  it('report a quadrature error bound below 1e-8 in truthSource', () => {
    for (const s of all.filter(isNumericTruth)) {
      const match = /error estimate ([0-9.e+-]+)/.exec(s.truthSource);
      expect(match, s.id).not.toBeNull();
      expect(Number(match![1])).toBeLessThan(NUMERIC_TRUTH_BOUND);
    }
  });

  it('the sinh transform of N(0,1) matches E[log cosh Z] by an independent trapezoid rule', () => {
    // The trapezoid rule on a smooth, fast-decaying integrand over the line converges geometrically
    // (Trefethen & Weideman, SIAM Review 56(3), 2014): step 1e-3 on [−40, 40] is exact to rounding here.
    const step = 1e-3;
    let sum = 0;
    for (let i = -40000; i <= 40000; i++) {
      const z = i * step;
      const a = Math.abs(z);
      sum += Math.exp(-0.5 * z * z) * (a + Math.log1p(Math.exp(-2 * a)) - Math.LN2);
    }
    const expected = (sum * step) / Math.sqrt(2 * Math.PI);
    const t = parseScenario('transformed[sinh;normal]');
    expect(Math.abs(t.truth - (normalEntropy(0, 1) + expected))).toBeLessThan(1e-12);
  });
});

describe('parameters', () => {
  it('bad values are usage errors naming the allowed range', () => {
    expect(() => parseScenario('gamma:shape=-1')).toThrow(/shape=-1 is not allowed; shape must be a number > 0/);
    expect(() => parseScenario('gaussian:dim=3,rho=-0.6')).toThrow(/rho=-0.6 is not allowed for dim=3; rho must be > -0.5/);
    expect(() => parseScenario('uniform:a=2,b=1')).toThrow(/needs a < b/);
    expect(() => parseScenario('normal:sd=2')).toThrow(/unknown parameter "sd"; allowed: mu, sigma/);
    expect(() => parseScenario('normal:sigma=abc')).toThrow(/sigma=abc is not a number/);
    expect(() => parseScenario('nope')).toThrow(UsageError);
    expect(() => parseScenario('gaussian-mixture:w1=0.5,mu1=0,w2=0.2,mu2=1')).toThrow(/weights sum to 0.7/);
    expect(() => parseScenario('transformed[exp;cauchy]')).toThrow(/heavy-tailed base/);
    expect(() => parseScenario('transformed[affine:c=1;normal]')).toThrow(/^transformed\[\.\.\.\]: map affine: unknown parameter "c"; allowed: a, b$/);
    expect(() => parseScenario('transformed[affine:a=x;normal]')).toThrow(/a=x is not a number/);
    expect(() => parseScenario('kl-gaussian:dim=3,rho=-0.6')).toThrow(/^kl-gaussian: rho=-0.6 is not allowed for dim=3; rho must be > -0.5/);
    expect(() => parseScenario('gaussian-covariance[1,2;2,1]')).toThrow(/not positive definite/);
  });

  it('every family creates its default scenario', () => {
    for (const f of listFamilies()) {
      const defaults = Object.fromEntries(f.params.map((p) => [p.name, p.default]));
      expect(f.create(defaults).family).toBe(f.id);
    }
  });

  it('digamma/log-gamma helpers come from @stdlib and agree with known values (from memory: ψ(1) = −γ, Γ(5) = 24)', () => {
    expect(digamma(1)).toBeCloseTo(-0.5772156649015329, 15);
    expect(logGamma(5)).toBeCloseTo(Math.log(24), 14);
  });
});

describe('closed-form truths at small, moderate and huge parameters', () => {
  // Found by a tester: σ = 1e200 overflowed the covariance and was refused as "not positive definite".
  it('refuses multivariate SDs whose squares leave the double range, naming them', () => {
    for (const spec of ['gaussian:dim=2,sigma=1e200', 'gaussian:dim=3,sigma=1e-170', 'student-t-mv:dim=2,sigma=1e200']) {
      expect(() => parseScenario(spec), spec).toThrow(/standard deviations from 1e[-+]\d+ to 1e[-+]\d+ are not allowed: .*between 1e-150 and 1e150/);
    }
    // Within the range the truth is the closed form: d/2·log(2πe) + d·log σ for independent coordinates.
    expect(parseScenario('gaussian:dim=2,sigma=1e100,rho=0').truth).toBeCloseTo(Math.log(2 * Math.PI * Math.E) + 2 * Math.log(1e100), 10);
  });

  // Reference: mpmath at 400 digits (the textbook forms cancel about 300 digits at 1e300), test/fixtures/make_extreme_truth_fixture.py (test/fixtures/extreme-truths.json).
  // Stirling-series and log-of-scale forms must hold 1e-12 relative (absolute below 1) where the textbook
  // formulas lose every digit, e.g. gamma:shape=1e15 or normal:sigma=1e200.
  const cases = extremeTruths.cases as { spec: string; truth: string }[];
  it('has cases (the fixture was read)', () => {
    expect(cases.length).toBeGreaterThan(100);
  });
  // Var(log f) (the report's efficiency bound), same reference: the trigamma forms cancel terms of size ν, k or
  // a + b down to about ½ and lost digits in proportion (1e-8 relative at ν = 1e8; at 1e15 no digit survived).
  const variances = extremeTruths.variances as { spec: string; variance: string }[];
  it('has variance cases (the fixture was read)', () => {
    expect(variances.length).toBeGreaterThan(50);
  });
  for (const c of variances) {
    it(`${c.spec}: Var(log f) matches mpmath`, () => {
      const expected = Number(c.variance);
      const actual = parseScenario(c.spec).logDensityVariance!;
      expect(relativeError(actual, expected), `${c.spec}: ${actual} vs ${c.variance}`).toBeLessThan(1e-12);
    });
  }
  for (const c of cases) {
    it(`${c.spec} matches mpmath`, () => {
      const expected = Number(c.truth);
      const actual = parseScenario(c.spec).truth;
      expect(Number.isFinite(actual), `${c.spec}: truth ${actual}`).toBe(true);
      expect(relativeError(actual, expected), `${c.spec}: ${actual} vs ${c.truth}`).toBeLessThan(1e-12);
    });
  }
});
