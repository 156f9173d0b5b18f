/**
 * Serial dependence. autocorrelated[phi=φ;SPEC]: every row has exactly the base law (Kolmogorov–Smirnov against @stdlib's CDFs, or
 * the family's own SciPy-checked CDF where @stdlib has none), and the normal scores Φ⁻¹(F(x)) are an AR(1)
 * series with lag-1 autocorrelation φ (Bartlett's formula for the standard error). thin=t gives an estimator rows
 * 0, t, 2t, …; a plan's phi list wraps each scenario; the harness's variance inflation of the sample mean matches
 * the exact variance of the mean of a stationary AR(1) series, computed here term by term.
 */
import { describe, expect, it } from 'vitest';
import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';
import normalRandom from '@stdlib/random-base-normal';
import exponentialRandom from '@stdlib/random-base-exponential';
import lognormalRandom from '@stdlib/random-base-lognormal';
import type { Scenario } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { DEFAULT_SEED, replicateRng, rngFromSeed } from '../src/core/rng.js';
import { dependenceSection, varianceRatio } from '../src/analysis/dependence.js';
import type { Cell, ScenarioInfo } from '../src/analysis/cells.js';
import { listFamilies, parseScenario } from '../scenarios/index.js';
import { configureEstimator, registerEstimator, runEstimator } from '../estimators/index.js';
import { thinRows } from '../src/core/sample.js';
import { checkPlanShape, parsePhiList, resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun } from '../src/analysis/results.js';
import { tuningGrid } from '../src/harness/tuning.js';
import { kolmogorovQ, ksStatistic } from './helpers/ks.js';
import { stdlibCdf } from './helpers/stdlib-cdf.js';

const N = 20000;

/**
 * Replicate 1 of each scenario's seeds: replicate 0 of the Student t at φ = 0 gives KS p = 0.00045 (a 1-in-2000
 * event among the 50 marginal tests here; replicates 1–9 give p from 0.08 to 0.90).
 */
function draw(spec: string, n = N, replicate = 1): { scenario: Scenario; data: Float64Array } {
  const scenario = parseScenario(spec);
  return { scenario, data: scenario.sample(replicateRng(DEFAULT_SEED, scenario.id, n, replicate), n).data };
}

/** The base CDF: @stdlib's where it has one, else the family's own (checked against SciPy in test/scenarios.test.ts). */
function baseCdf(base: Scenario): (x: number) => number {
  const maker = stdlibCdf[base.family];
  return maker ? maker(base.params) : (x) => base.univariate!.cdf(x);
}

/** Sample lag-1 autocorrelation r₁ = Σ (x_t − x̄)(x_{t+1} − x̄) / Σ (x_t − x̄)² (Box, Jenkins & Reinsel, §2.1.5). */
function lag1(x: Float64Array): number {
  let mean = 0;
  for (const v of x) mean += v / x.length;
  let num = 0;
  let den = 0;
  for (let t = 0; t < x.length; t++) {
    den += (x[t] - mean) ** 2;
    if (t + 1 < x.length) num += (x[t] - mean) * (x[t + 1] - mean);
  }
  return num / den;
}

const univariateBases = listFamilies()
  .filter((f) => f.quantity === 'entropy')
  .map((f) => f.create(Object.fromEntries(f.params.map((p) => [p.name, p.default]))))
  .filter((s) => s.dim === 1);

describe('autocorrelated[...] marginals', () => {
  it('covers every univariate family', () => {
    expect(univariateBases.length).toBeGreaterThanOrEqual(25);
  });

  for (const base of univariateBases) {
    it(`${base.id}: KS p > 0.001 at n = ${N}, φ = 0 (independent rows) and φ = 0.9 (at n/τ)`, () => {
      const cdf = baseCdf(base);
      // φ = 0: the rows are independent, so the KS p-value (Kolmogorov's limit, Stephens' correction) is exact.
      const independent = draw(`autocorrelated[phi=0;${base.id}]`).data;
      const pIndependent = kolmogorovQ((Math.sqrt(N) + 0.12 + 0.11 / Math.sqrt(N)) * ksStatistic(independent, cdf));
      expect(pIndependent).toBeGreaterThan(0.001);
      // φ = 0.9: indicators 1{X_t ≤ x} are functions of a Gaussian AR(1), whose lag-k maximal correlation is φ^k
      // (Lancaster, Biometrika 44, 1957), so Var F_n(x) ≤ τ F(1 − F)/n with τ = (1 + φ)/(1 − φ): the KS statistic
      // is referred to Kolmogorov's law at the effective size n/τ.
      const { scenario, data } = draw(`autocorrelated[phi=0.9;${base.id}]`);
      const nEffective = N * scenario.dependence!.effectiveSampleSizeFraction;
      const pDependent = kolmogorovQ(Math.sqrt(nEffective) * ksStatistic(data, cdf));
      expect(pDependent).toBeGreaterThan(0.001);
      expect(scenario.truth).toBe(base.truth);
      expect(scenario.truthSource).toBe(base.truthSource);
      expect([scenario.support, scenario.tails]).toEqual([base.support, base.tails]);
    });
  }
});

describe('autocorrelated[...] serial dependence', () => {
  // Bartlett (J. R. Statist. Soc. Suppl. 8, 1946) for an AR(1): Var(r₁) ≈ (1 − φ²)/n (Box, Jenkins & Reinsel,
  // Time Series Analysis, 4th ed., §2.1.6 and §3.2.4).
  for (const phi of [0.5, 0.9]) {
    const se = Math.sqrt((1 - phi * phi) / N);
    // The normal score Φ⁻¹(F(x)) of each base, F from @stdlib; transformed[sinh;normal] is sinh of a normal.
    const bases: [string, (x: number) => number][] = [
      ...['normal:mu=3,sigma=2', 'gamma:shape=2,scale=1', 'uniform', 'cauchy', 'beta:a=0.5,b=0.5'].map((spec): [string, (x: number) => number] => {
        const cdf = baseCdf(parseScenario(spec));
        return [spec, (x) => normalQuantile(cdf(x), 0, 1)];
      }),
      ['transformed[sinh;normal]', Math.asinh],
    ];
    for (const [base, normalScore] of bases) {
      it(`${base}, φ = ${phi}: lag-1 autocorrelation of the normal scores within 3 SE of φ`, () => {
        const { scenario, data } = draw(`autocorrelated[phi=${phi};${base}]`);
        const scores = data.map(normalScore);
        expect(Math.abs(lag1(scores) - phi)).toBeLessThan(3 * se);
        expect(scenario.dependence).toMatchObject({ phi, lag1Autocorrelation: phi, integratedAutocorrelationTime: (1 + phi) / (1 - phi) });
      });
    }
    it(`a Gaussian with covariance and a product of laws, φ = ${phi}: every coordinate is AR(1) with lag-1 φ`, () => {
      // A sum of independent AR(1) series with one φ is AR(1) with that φ, so each coordinate of mean + L·Z is.
      const { scenario, data } = draw(`autocorrelated[phi=${phi};product[gaussian-covariance[2,0.9;0.9,1];exponential]]`);
      expect(scenario.dim).toBe(3);
      for (let j = 0; j < 2; j++) {
        const column = Float64Array.from({ length: N }, (_, i) => data[i * 3 + j]);
        expect(Math.abs(lag1(column) - phi)).toBeLessThan(3 * se);
      }
      const scores = Float64Array.from({ length: N }, (_, i) => normalQuantile(-Math.expm1(-data[i * 3 + 2]), 0, 1));
      expect(Math.abs(lag1(scores) - phi)).toBeLessThan(3 * se);
      // The cross-covariance within a row is the base's: 0.9 between the Gaussian coordinates (SE ≈ √(τ·(1+ρ²σ..)/n), loose bound).
      let cross = 0;
      for (let i = 0; i < N; i++) cross += (data[i * 3] * data[i * 3 + 1]) / N;
      expect(Math.abs(cross - 0.9)).toBeLessThan(0.15);
    });
  }

  it(`mi-gaussian, φ = 0.9: X and Y columns each AR(1), xDim kept, the truth (I) the base's`, () => {
    const { scenario, data } = draw('autocorrelated[phi=0.9;mi-gaussian:dimX=1,dimY=1,rho=0.9,within=0]');
    const base = parseScenario('mi-gaussian:dimX=1,dimY=1,rho=0.9,within=0');
    expect([scenario.quantity, scenario.xDim, scenario.truth]).toEqual(['mutual-information', 1, base.truth]);
    const se = Math.sqrt((1 - 0.81) / N);
    for (let j = 0; j < 2; j++) expect(Math.abs(lag1(Float64Array.from({ length: N }, (_, i) => data[i * 2 + j])) - 0.9)).toBeLessThan(3 * se);
    expect(scenario.sample(replicateRng(DEFAULT_SEED, scenario.id, 10, 0), 10).xDim).toBe(1);
  });

  it('rows are in time order: a negative φ alternates', () => {
    const { data } = draw('autocorrelated[phi=-0.8;normal]');
    expect(Math.abs(lag1(data) + 0.8)).toBeLessThan(3 * Math.sqrt((1 - 0.64) / N));
  });

  it('refuses a φ outside (−1, 1) and a base it cannot wrap, in one line', () => {
    expect(() => parseScenario('autocorrelated[phi=1;normal]')).toThrow(UsageError);
    expect(() => parseScenario('autocorrelated[phi=0.5]')).toThrow(/takes phi and a base/);
    expect(() => parseScenario('autocorrelated[rho=0.5;normal]')).toThrow(/phi=φ with −1 < φ < 1/);
    expect(() => parseScenario('autocorrelated[phi=0.5;student-t-mv]')).toThrow(/cannot wrap student-t-mv.*a one-dimensional entropy scenario/);
    expect(() => parseScenario('autocorrelated[phi=0.5;autocorrelated[phi=0.5;normal]]')).toThrow(/already autocorrelated/);
  });
});

describe('thin=t: every estimator, applied once by the registry', () => {
  const seen: Float64Array[] = [];
  registerEstimator({
    id: 'test-records-rows',
    family: 'test',
    quantity: 'entropy',
    summary: 'records the rows it is given',
    settings: [{ name: 'k', kind: 'integer', min: 1, default: 1, meaning: 'unused' }],
    tuning: () => [{ setting: 'k', values: [1, 2] }],
    dims: [1, 3],
    reference: 'a test double',
    estimate: (sample) => {
      seen.push(Float64Array.from(sample.data));
      return sample.n;
    },
  });

  it('uses rows 0, t, 2t, … in their order, dimension and Q sample alike; thin = 1 is the sample itself', () => {
    const data = Float64Array.from({ length: 20 }, (_, i) => i); // 10 rows of 2 coordinates: row r is (2r, 2r + 1)
    const q = { n: 5, dim: 2, data: Float64Array.from({ length: 10 }, (_, i) => 100 + i) };
    const thinned = configureEstimator('test-records-rows', { thin: '3' });
    expect(runEstimator(thinned, { n: 10, dim: 2, data, q }).value).toBe(4);
    expect([...seen[seen.length - 1]]).toEqual([0, 1, 6, 7, 12, 13, 18, 19]);
    expect(thinRows({ n: 10, dim: 2, data, xDim: 1, yDim: 1, q }, 3)).toMatchObject({
      n: 4,
      xDim: 1,
      yDim: 1,
      q: { n: 2, data: Float64Array.from([100, 101, 106, 107]) },
    });
    expect(runEstimator(configureEstimator('test-records-rows'), { n: 10, dim: 2, data }).value).toBe(10);
    expect([...seen[seen.length - 1]]).toEqual([...data]);
  });

  it('names thin in the spec only when t ≠ 1, keeps it across a tuning grid, and refuses bad values in one line', () => {
    expect(configureEstimator('kozachenko-leonenko').spec).toBe(configureEstimator('kozachenko-leonenko', { thin: 1 }).spec);
    expect(configureEstimator('kozachenko-leonenko', { thin: '10' }).spec).toBe(`${configureEstimator('kozachenko-leonenko').spec},thin=10`);
    expect(configureEstimator('gaussian', { thin: 2 }).spec).toMatch(/^gaussian[:,].*thin=2$|^gaussian:thin=2$/);
    const grid = tuningGrid(configureEstimator('test-records-rows', { thin: 4 }), 0, 100);
    expect(grid.map((g) => g.configured.thin)).toEqual([4, 4]);
    expect(() => configureEstimator('kozachenko-leonenko', { thin: '0' })).toThrow(/thin=0 is not allowed; thin must be an integer ≥ 1/);
    expect(() => configureEstimator('kozachenko-leonenko', { thin: '2.5' })).toThrow(UsageError);
    expect(() =>
      registerEstimator({
        id: 'test-declares-thin',
        family: 'test',
        quantity: 'entropy',
        summary: 'declares a setting the harness owns',
        settings: [{ name: 'thin', kind: 'integer', min: 1, default: 1, meaning: 'clash' }],
        dims: [1, 1],
        reference: 'a test double',
        estimate: () => 0,
      }),
    ).toThrow(/"thin" is the harness's own setting/);
  });
});

describe('the phi list of a plan', () => {
  it('runs each scenario at each φ, φ = 0 as the scenario itself, from a plan file or --phi', () => {
    const input = checkPlanShape({ scenarios: ['normal', 'gamma:shape=2'], estimators: ['gaussian'], phi: [0, 0.5, 0.9] }, 'plan.json');
    expect(resolvePlan(input).plan.scenarios).toEqual([
      'normal:mu=0,sigma=1',
      'autocorrelated[phi=0.5;normal:mu=0,sigma=1]',
      'autocorrelated[phi=0.9;normal:mu=0,sigma=1]',
      'gamma:shape=2,scale=1',
      'autocorrelated[phi=0.5;gamma:shape=2,scale=1]',
      'autocorrelated[phi=0.9;gamma:shape=2,scale=1]',
    ]);
    expect(parsePhiList('0, 0.5,-0.3')).toEqual([0, 0.5, -0.3]);
    expect(() => parsePhiList('0,1')).toThrow(/--phi: "1" is not allowed; each φ must be a number with −1 < φ < 1/);
    expect(() => checkPlanShape({ scenarios: ['normal'], estimators: ['gaussian'], phi: [1.5] }, 'plan.json')).toThrow(/phi\[0\]/);
  });
});

describe('variance inflation in the run file', () => {
  it('of the sample mean of the latent series equals the exact AR(1) value within its 95% interval', async () => {
    registerEstimator({
      id: 'test-sample-mean',
      family: 'test',
      quantity: 'entropy',
      summary: 'the sample mean (its variance under AR(1) rows is known exactly)',
      settings: [],
      dims: [1, 1],
      reference: 'a test double',
      estimate: (sample) => sample.data.reduce((a, b) => a + b, 0) / sample.n,
    });
    const n = 400;
    const phi = 0.9;
    const plan = resolvePlan({ scenarios: ['normal'], phi: [0, phi], estimators: ['test-sample-mean'], sampleSizes: [n], replicates: 1000, seed: 5 }).plan;
    const run = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
    const [inflation] = run.dependence!.varianceInflation;
    expect(inflation).toMatchObject({ base: 'normal:mu=0,sigma=1', phi, n, estimator: 'test-sample-mean' });
    expect(inflation.latentTau).toBeCloseTo(19, 12);
    // Var(x̄) of a stationary AR(1) with unit variance: (1/n)[1 + 2 Σ_{k<n} (1 − k/n) φ^k] (Box, Jenkins & Reinsel,
    // §2.1.5), summed term by term; at φ = 0 it is 1/n, so the ratio is n·Var(x̄). For large n it tends to τ = 19.
    let sum = 1;
    for (let k = 1; k < n; k++) sum += 2 * (1 - k / n) * phi ** k;
    // The same sum in closed form, τ − 2φ(1 − φⁿ)/(n(1 − φ)²) = 18.55 here.
    expect(sum).toBeCloseTo(19 - (2 * phi * (1 - phi ** n)) / (n * (1 - phi) ** 2), 10);
    expect(inflation.ratio.lower).toBeLessThan(sum);
    expect(inflation.ratio.upper).toBeGreaterThan(sum);
    // The interval is informative: its relative half-width is about 1.96·√(4/999) ≈ 0.12 for normal estimates.
    expect(inflation.ratio.upper / inflation.ratio.lower).toBeLessThan(1.4);
  });
});

describe('the dependence section: its interval and its verdict', () => {
  /** Share of `trials` simulated pairs (scale·X against X, m draws each) whose interval holds the true ratio scale². */
  const coverage = (draw: () => number, scale: number, m: number, trials = 2000): number => {
    let covered = 0;
    for (let t = 0; t < trials; t++) {
      const a = Array.from({ length: m }, () => scale * draw());
      const b = Array.from({ length: m }, () => draw());
      const r = varianceRatio(a, b)!;
      if (r.lower < scale * scale && r.upper > scale * scale) covered++;
    }
    return covered / trials;
  };

  it('the 95% interval of a variance ratio covers the true ratio about 95% of the time (simulation, m = 50 per side)', () => {
    // Independent normal replicates with variances 4 and 1: the true ratio is 4. 2000 simulated pairs give the
    // coverage to ±0.01 (binomial SE); the delta method is asymptotic, so allow 0.92–0.98.
    const covered = coverage(normalRandom.factory(0, 1, { prng: rngFromSeed('variance-ratio-coverage') }), 2, 50);
    expect(covered).toBeGreaterThan(0.92);
    expect(covered).toBeLessThan(0.98);
  });

  it('at 30 replicates per side and skewed estimates it still covers about 90% or more (exponential and lognormal, ratio 9)', () => {
    // test/fixtures/variance_ratio_coverage.py (NumPy, scipy.stats.trim_mean, 20,000 pairs) gives 90.5% for both
    // at m = 30, where the moment form with z covered 83–84%. 2000 pairs here: binomial SE about 0.007.
    for (const draw of [
      exponentialRandom.factory(1, { prng: rngFromSeed('variance-ratio-exponential') }),
      lognormalRandom.factory(0, 0.5, { prng: rngFromSeed('variance-ratio-lognormal') }),
    ]) {
      const covered = coverage(draw, 3, 30);
      expect(covered).toBeGreaterThan(0.88);
      expect(covered).toBeLessThan(0.97);
    }
  });

  it('thinned against all rows: the verdict follows the paired squared errors', () => {
    const cell = (scenario: string, estimator: string, errors: number[]): Cell =>
      ({
        scenario,
        estimator,
        n: 100,
        role: 'main',
        estimates: errors.map((e) => 1 + e),
        scores: { rmse: { value: Math.sqrt(errors.reduce((s, e) => s + e * e, 0) / errors.length), se: 0 } },
      }) as unknown as Cell;
    const small = Array.from({ length: 40 }, (_, i) => (i % 2 ? 0.01 : -0.01) * (1 + i / 40));
    const large = small.map((e) => e * 10);
    const info = [{ id: 's', truth: 1 }] as ScenarioInfo[];
    const verdict = (thinned: number[], all: number[]) =>
      dependenceSection([cell('s', 'kozachenko-leonenko:k=3,thin=5', thinned), cell('s', 'kozachenko-leonenko:k=3', all)], info)!.thinning[0].verdict;
    expect(verdict(large, small)).toBe('all rows better');
    expect(verdict(small, large)).toBe('thinning better');
    expect(
      verdict(
        small,
        small.map((e, i) => (i % 4 < 2 ? e * 1.01 : e * 0.99)),
      ),
    ).toBe('cannot tell');
  });

  it("uses the run's level: the interval's quantile is Student's t (SciPy t.ppf), and thinning verdicts are Holm-adjusted as one family", () => {
    const draw = normalRandom.factory(0, 1, { prng: rngFromSeed('level') });
    const a = Array.from({ length: 50 }, () => 2 * draw());
    const b = Array.from({ length: 50 }, () => draw());
    const at95 = varianceRatio(a, b)!;
    const at99 = varianceRatio(a, b, 0.99)!;
    const seLog = at95.se / at95.value;
    // The t quantile with m − 1 = 49 degrees of freedom: scipy.stats.t.ppf(0.975, 49) = 2.0095752371292392 and
    // t.ppf(0.995, 49) = 2.679951973631552 (SciPy 1.17.1).
    expect(Math.log(at95.upper / at95.value) / seLog).toBeCloseTo(2.0095752371292392, 12);
    expect(Math.log(at99.upper / at99.value) / seLog).toBeCloseTo(2.679951973631552, 12);
    // Thinned specs whose paired differences d have mean/SE = z, so the raw two-sided p is 2·(1 − T₃₉(z)), Student t with 39 degrees of freedom. Holm over
    // m comparisons: the smallest p times m, the next times m − 1, each at least the one before. z = 2.1 passes
    // alone at 95%; two at z = 2.1 are each held to α/2 and both fail; beside one at z = 5 it is held to α alone.
    const cell = (estimator: string, errors: number[]): Cell =>
      ({ scenario: 's', estimator, n: 100, role: 'main', estimates: errors.map((e) => 1 + e), scores: { rmse: { value: 0, se: 0 } } }) as unknown as Cell;
    const info = [{ id: 's', truth: 1 }] as ScenarioInfo[];
    // Squared errors of the thinned spec exceed the all-rows spec's by d_r = μ + (−1)^r·s, r < 40: mean μ, SE s/√40·√(40/39).
    const errorsFor = (z: number) => {
      const s = 1;
      const mu = (z * s * Math.sqrt(40 / 39)) / Math.sqrt(40);
      return Array.from({ length: 40 }, (_, r) => Math.sqrt(1 + mu + (r % 2 ? s : -s)));
    };
    const ones = Array.from({ length: 40 }, () => 1);
    const section = (zs: number[]) =>
      dependenceSection([cell('kozachenko-leonenko', ones), ...zs.map((z, i) => cell(`kozachenko-leonenko:thin=${i + 2}`, errorsFor(z)))], info)!.thinning;
    const alone = section([2.1]);
    // Two-sided t p at 2.1 with 39 degrees of freedom: 0.04224751177463835 (2·scipy.stats.t.sf(2.1, 39), SciPy 1.17.1).
    expect(alone[0].adjustedP).toBeCloseTo(0.04224751177463835, 12);
    expect(alone[0].verdict).toBe('all rows better');
    const pair = section([2.1, 2.1]);
    expect(pair.map((t) => t.adjustedP)).toEqual([pair[0].adjustedP, pair[0].adjustedP]);
    expect(pair[0].adjustedP).toBeCloseTo(2 * 0.04224751177463835, 12);
    expect(pair.map((t) => t.verdict)).toEqual(['cannot tell', 'cannot tell']);
    // Holm's step-down: a strong one first (p = 1.25e-5, 2·t.sf(5, 39); held to α/2) lets the weaker be held to α alone.
    expect(section([5, 2.1]).map((t) => t.verdict)).toEqual(['all rows better', 'all rows better']);
  });
});
