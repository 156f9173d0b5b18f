/**
 * hhat advise: the profile, EM and BIC, the look-alike scenario and its entropy, the bootstrap, the
 * recommendation on held-out scenarios, advice for a described situation, and the command line.
 *
 * Outside references: test/fixtures/advise.json (NumPy and SciPy, written by make_advise_fixture.py with the
 * versions recorded in it), closed forms named beside each check, and brute-force computations in this file.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import normalEntropy from '@stdlib/stats-base-dists-normal-entropy';
import { main } from '../src/cli.js';
import type { Sample } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { rngFromSeed } from '../src/core/rng.js';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun } from '../src/analysis/results.js';
import { parseScenario } from '../scenarios/index.js';
import { lookalikeSpec, lookalikeTruth } from '../scenarios/lookalike.js';
import { correlationMatrix, profileSample, skewness } from '../src/analysis/advise/profile.js';
import { hillK, hillTail, hillXi } from '../src/analysis/advise/tails.js';
import { edgeEvidence, supportFromEdges } from '../src/analysis/advise/edges.js';
import { mixtureParameters, selectMixture, symmetricEigenvalues } from '../src/analysis/advise/mixture.js';
import { smoothedBootstrap } from '../src/analysis/advise/bootstrap.js';
import { quantileOfSorted } from '../src/math/moments.js';
import { applicableEstimators } from '../src/analysis/advise/benchmark.js';
import { adviseFile } from '../src/analysis/advise/file.js';
import { adviseSituation, matchScenarios } from '../src/analysis/advise/situation.js';
import { parseEstimatorSpec, runEstimator } from '../estimators/index.js';
import { runCli as run } from './helpers/cli.js';

interface Fixture {
  versions: Record<string, string>;
  profiles: Record<
    string,
    {
      dim: number;
      data: number[];
      correlation?: number[][];
      columns: { skewness: number; hillK: number; hillXi: number; edgeM: number; upperRatio: number; lowerRatio: number }[];
    }
  >;
  quantiles: { values: number[]; probabilities: number[]; quantiles: number[] };
  mixtures: { weights: number[]; means: number[][]; covariances: number[][][]; entropy: number; error: number; method: string }[];
}
const fixture = JSON.parse(readFileSync(join(__dirname, 'fixtures', 'advise.json'), 'utf8')) as Fixture;

function column(data: number[], dim: number, j: number): Float64Array {
  return Float64Array.from({ length: data.length / dim }, (_, i) => data[i * dim + j]);
}

/** Standard normal draws by Box–Muller from a seeded stream (independent of the project's samplers). */
function normals(seed: string, count: number): Float64Array {
  const rng = rngFromSeed(seed);
  const out = new Float64Array(count);
  for (let i = 0; i < count; i += 2) {
    const r = Math.sqrt(-2 * Math.log(1 - rng()));
    const angle = 2 * Math.PI * rng();
    out[i] = r * Math.cos(angle);
    if (i + 1 < count) out[i + 1] = r * Math.sin(angle);
  }
  return out;
}

describe('profile, checked against NumPy and SciPy (fixtures/advise.json)', () => {
  it('skewness equals scipy.stats.skew(bias=True); correlation equals numpy.corrcoef', () => {
    for (const profile of Object.values(fixture.profiles)) {
      profile.columns.forEach((expected, j) => {
        expect(skewness(column(profile.data, profile.dim, j))).toBeCloseTo(expected.skewness, 12);
      });
    }
    const tri = fixture.profiles.trivariate;
    const sample: Sample = { n: tri.data.length / 3, dim: 3, data: Float64Array.from(tri.data) };
    const r = correlationMatrix(sample);
    tri.correlation!.forEach((row, a) => row.forEach((value, b) => expect(r[a][b]).toBeCloseTo(value, 12)));
  });

  it('the Hill estimate and the end-gap ratios equal an independent NumPy computation of the same formulas', () => {
    for (const profile of Object.values(fixture.profiles)) {
      profile.columns.forEach((expected, j) => {
        const x = column(profile.data, profile.dim, j);
        const tail = hillTail(x)!;
        expect(tail.k).toBe(expected.hillK);
        expect(tail.xi).toBeCloseTo(expected.hillXi, 12);
        const edges = edgeEvidence(x)!;
        expect(edges.upper.m).toBe(expected.edgeM);
        expect(edges.upper.ratio).toBeCloseTo(expected.upperRatio, 10);
        expect(edges.lower.ratio).toBeCloseTo(expected.lowerRatio, 10);
      });
    }
  });

  it('the Hill estimator finds the tail index of a Pareto sample, and of a Cauchy sample', () => {
    // Pareto(α = 3, x_m = 1) by inversion, x = U^{−1/α}. For a Pareto law kξ̂/ξ is Gamma(k, 1) exactly
    // (the log-excesses over y_(k+1) are i.i.d. exponential; Hill 1975), so α̂ is within 3 SE = 3α/√k.
    const n = 20000;
    const rng = rngFromSeed('advise test: pareto');
    const pareto = Float64Array.from({ length: n }, () => Math.pow(1 - rng(), -1 / 3));
    const k = hillK(n);
    expect(k).toBe(141);
    const alpha = 1 / hillXi(pareto, k);
    expect(Math.abs(alpha - 3)).toBeLessThan((3 * 3) / Math.sqrt(k));
    // Cauchy by inversion, tan(π(U − ½)): P(|X − 0| > y) ≈ 2/(πy), a tail index of 1; centred at the median.
    const cauchy = Float64Array.from({ length: n }, () => Math.tan(Math.PI * (rng() - 0.5)));
    const tail = hillTail(cauchy)!;
    expect(Math.abs(tail.alpha - 1)).toBeLessThan(3 / Math.sqrt(k));
    expect(tail.tails).toBe('heavy');
  });

  it('tail and support classes read Gaussian, Laplace and uniform samples as expected (n = 20 000)', () => {
    const n = 20000;
    const z = normals('advise test: classes', n);
    const rng = rngFromSeed('advise test: classes 2');
    // Laplace by inversion; uniform on [0, 1).
    const laplace = Float64Array.from({ length: n }, () => {
      const u = rng() - 0.5;
      return -Math.sign(u) * Math.log(1 - 2 * Math.abs(u));
    });
    const uniform = Float64Array.from({ length: n }, () => rng());
    const exponential = Float64Array.from({ length: n }, () => -Math.log(1 - rng()));
    // Reference thickness ξ̂·log(n/k): ½ for Gaussian tails, near 1 for exponential ones (see tails.ts).
    expect(hillTail(z)!.tails).toBe('light');
    expect(hillTail(laplace)!.tails).toBe('exponential');
    expect(supportFromEdges(edgeEvidence(z))).toBe('unbounded');
    expect(supportFromEdges(edgeEvidence(uniform))).toBe('bounded');
    const ends = edgeEvidence(exponential)!;
    expect([ends.lower.edge, ends.upper.edge]).toEqual([true, false]);
  });

  it('ties and the apparent recording step are reported, and data on a coarse grid look discrete', () => {
    const z = normals('advise test: grid', 2000);
    const rounded = Float64Array.from(z, (v) => Math.round(v * 4) / 4);
    const profile = profileSample({ n: 2000, dim: 1, data: rounded }, ['reading']);
    expect(profile.columns[0].step).toBe(0.25);
    // Brute force: values equal to another value of the column.
    const counts = new Map<number, number>();
    for (const v of rounded) counts.set(v, (counts.get(v) ?? 0) + 1);
    const tied = [...counts.values()].filter((c) => c > 1).reduce((s, c) => s + c, 0);
    expect(profile.columns[0].repeats.tiedValues).toBe(tied);
    expect(profile.discreteLooking).toBe(true);
    expect(profileSample({ n: 2000, dim: 1, data: z }).discreteLooking).toBe(false);
  });
});

describe('EM with BIC', () => {
  // Two well-separated 2-D components drawn by brute force: weight 0.3 at (−4, 0), 0.7 at (3, 2).
  const n = 1500;
  const z = normals('advise test: em', 2 * n);
  const rng = rngFromSeed('advise test: em labels');
  const data = new Float64Array(2 * n);
  for (let i = 0; i < n; i++) {
    const first = rng() < 0.3;
    const [mx, my] = first ? [-4, 0] : [3, 2];
    // Component covariances [[1, 0.5], [0.5, 1]] and [[2, 0], [0, 0.5]] through their Cholesky factors.
    const [a, b] = [z[2 * i], z[2 * i + 1]];
    data[2 * i] = mx + (first ? a : Math.SQRT2 * a);
    data[2 * i + 1] = my + (first ? 0.5 * a + Math.sqrt(0.75) * b : Math.sqrt(0.5) * b);
  }
  const { best, fits } = selectMixture(data, n, 2, { seed: 'em test', maxComponents: 4 });

  it('BIC picks 2 components and the fit recovers the weights and means', () => {
    expect(best.components).toBe(2);
    expect(fits[1].bic).toBeLessThan(fits[0].bic);
    expect(fits.slice(2).every((f) => f.bic > fits[1].bic)).toBe(true);
    const order = best.means[0] < best.means[2] ? [0, 1] : [1, 0];
    // Binomial SE of a weight √(0.21/1500) = 0.012; SE of a mean ≈ σ/√(n w) ≤ 0.07: 3–4 SE tolerances.
    expect(Math.abs(best.weights[order[0]] - 0.3)).toBeLessThan(0.04);
    expect(Math.abs(best.means[2 * order[0]] + 4)).toBeLessThan(0.2);
    expect(Math.abs(best.means[2 * order[0] + 1] - 0)).toBeLessThan(0.2);
    expect(Math.abs(best.means[2 * order[1]] - 3)).toBeLessThan(0.2);
    expect(Math.abs(best.means[2 * order[1] + 1] - 2)).toBeLessThan(0.15);
  });

  it('the reported BIC is −2 log L + p log n with log L recomputed by brute force from the fitted parameters', () => {
    let logLikelihood = 0;
    for (let i = 0; i < n; i++) {
      let density = 0;
      for (let k = 0; k < best.components; k++) {
        const [s11, s12, s22] = [best.covariances[4 * k], best.covariances[4 * k + 1], best.covariances[4 * k + 3]];
        const det = s11 * s22 - s12 * s12;
        const dx = data[2 * i] - best.means[2 * k];
        const dy = data[2 * i + 1] - best.means[2 * k + 1];
        const q = (s22 * dx * dx - 2 * s12 * dx * dy + s11 * dy * dy) / det;
        density += (best.weights[k] * Math.exp(-q / 2)) / (2 * Math.PI * Math.sqrt(det));
      }
      logLikelihood += Math.log(density);
    }
    // p = (K − 1) + K d + K d(d + 1)/2 = 1 + 4 + 6 for K = 2, d = 2.
    expect(mixtureParameters(2, 2)).toBe(11);
    expect(best.bic).toBeCloseTo(-2 * logLikelihood + 11 * Math.log(n), 4);
  });

  it('symmetric eigenvalues match the closed form for 2 × 2 matrices', () => {
    const [a, b, c] = [2, 0.7, 0.5];
    const mid = (a + c) / 2;
    const radius = Math.sqrt(((a - c) / 2) ** 2 + b * b);
    const values = symmetricEigenvalues([a, b, b, c], 2);
    expect(values[0]).toBeCloseTo(mid - radius, 13);
    expect(values[1]).toBeCloseTo(mid + radius, 13);
  });
});

describe('the look-alike scenario gaussian-mixture-mv[...]', () => {
  it('its entropy matches SciPy quad (d = 1), dblquad (d = 2) and a NumPy Monte Carlo (d = 3)', () => {
    for (const m of fixture.mixtures) {
      const spec = lookalikeSpec(m.weights.map((weight, k) => ({ weight, mean: m.means[k], covariance: m.covariances[k] })));
      const truth = lookalikeTruth(parseScenario(spec));
      if (m.means[0].length < 3) {
        // Both quadratures claim errors below 1e-9; allow their sum and a little rounding.
        expect(Math.abs(truth.value - m.entropy)).toBeLessThan(truth.error + m.error + 1e-9);
      } else {
        expect(truth.method).toBe('monte-carlo');
        expect(Math.abs(truth.value - m.entropy)).toBeLessThan(4 * Math.hypot(truth.error, m.error));
      }
    }
  });

  it('a one-component look-alike has the Gaussian closed form ½ log((2πe)^d det Σ) (Cover & Thomas, Thm 8.4.1)', () => {
    const covariance = [
      [1.5, 0.4],
      [0.4, 0.8],
    ];
    const scenario = parseScenario(lookalikeSpec([{ weight: 1, mean: [3, -1], covariance }]));
    const det = 1.5 * 0.8 - 0.4 * 0.4;
    expect(scenario.truth).toBeCloseTo(0.5 * (2 * Math.log(2 * Math.PI * Math.E) + Math.log(det)), 9);
  });

  it('its spec reads back to the same id, and malformed specs are one-line usage errors', () => {
    const spec = 'gaussian-mixture-mv[0.25:1,2:1,0.5,0.5,2;0.75:-1,0:0.5,0,0,0.5]';
    expect(parseScenario(spec).id).toBe(spec);
    expect(parseScenario(spec).dim).toBe(2);
    for (const [bad, message] of [
      ['gaussian-mixture-mv[0.5:0:1;0.4:1:1]', /sum to 0.9/],
      ['gaussian-mixture-mv[1:0,0:1,0.2,0.3,1]', /symmetric/],
      ['gaussian-mixture-mv[1:0,0:1,0,1]', /needs 4/],
      ['gaussian-mixture-mv[1:0:-1]', /positive definite/],
      ['gaussian-mixture-mv[1:0]', /WEIGHT:MEAN:COVARIANCE/],
    ] as const) {
      expect(() => parseScenario(bad)).toThrow(UsageError);
      expect(() => parseScenario(bad)).toThrow(message);
    }
  });

  it('its draws have the mixture mean and covariance Σ w_k(Σ_k + μ_k μ_kᵀ) − μμᵀ', () => {
    const components = [
      {
        weight: 0.4,
        mean: [0, 1, 2],
        covariance: [
          [1, 0.3, 0],
          [0.3, 1, 0.2],
          [0, 0.2, 0.5],
        ],
      },
      {
        weight: 0.6,
        mean: [2, -1, 0],
        covariance: [
          [0.5, 0, 0],
          [0, 2, -0.4],
          [0, -0.4, 1],
        ],
      },
    ];
    const scenario = parseScenario(lookalikeSpec(components));
    const n = 100000;
    const sample = scenario.sample(rngFromSeed('advise test: draws'), n);
    const mean = [0, 1, 2].map((j) => components.reduce((s, c) => s + c.weight * c.mean[j], 0));
    for (let a = 0; a < 3; a++) {
      let sum = 0;
      for (let i = 0; i < n; i++) sum += sample.data[3 * i + a];
      const variance = components.reduce((s, c) => s + c.weight * (c.covariance[a][a] + c.mean[a] ** 2), 0) - mean[a] ** 2;
      // 4 standard errors of a sample mean.
      expect(Math.abs(sum / n - mean[a])).toBeLessThan(4 * Math.sqrt(variance / n));
      expect(scenario.moments!.covariance[a][a]).toBeCloseTo(variance, 12);
    }
  });

  it('worker threads rebuild it from its spec: 1 and 2 workers give identical estimates', async () => {
    const spec = 'gaussian-mixture-mv[0.5:0,0:1,0.3,0.3,1;0.5:3,1:0.6,0,0,0.6]';
    const plan = resolvePlan({ scenarios: [spec], estimators: ['kozachenko-leonenko', 'gaussian'], sampleSizes: [300], replicates: 6, seed: 5 }).plan;
    const one = assembleRun(await runPlan(plan, { workers: 1 }), null);
    const two = assembleRun(await runPlan(plan, { workers: 2 }), null);
    expect(two.cells.map((c) => c.estimates)).toEqual(one.cells.map((c) => c.estimates));
  });
});

describe('the smoothed bootstrap', () => {
  it('quantiles interpolate like numpy.quantile', () => {
    const sorted = Float64Array.from(fixture.quantiles.values).sort();
    fixture.quantiles.probabilities.forEach((p, i) => expect(quantileOfSorted(sorted, p)).toBeCloseTo(fixture.quantiles.quantiles[i], 13));
  });

  it('gives an interval as wide as the known sampling spread of the Gaussian estimator', () => {
    // For ½ log(2πe σ̂²) on N(0, 1) data, SD ≈ √(1/(2n)): (n − 1)σ̂² ~ χ²_{n−1} and Var(log χ²_ν) = ψ′(ν/2) ≈ 2/ν
    // (Bartlett & Kendall 1946, J. R. Statist. Soc. Suppl. 8(2), 128–138, the log-variance transformation; reference from memory),
    // so a 95% interval is about 2 · 1.96 · √(1/(2n)) wide.
    const n = 1000;
    const sample: Sample = { n, dim: 1, data: normals('advise test: bootstrap', n) };
    const gaussian = parseEstimatorSpec('gaussian');
    const estimate = runEstimator(gaussian, sample).value;
    const interval = smoothedBootstrap(sample, gaussian, estimate, { resamples: 600, level: 0.95, seed: 'b' });
    const expectedWidth = 2 * 1.96 * Math.sqrt(1 / (2 * n));
    expect(interval.resamples).toBe(600);
    expect(interval.lower).toBeLessThan(estimate);
    expect(interval.upper).toBeGreaterThan(estimate);
    expect((interval.upper - interval.lower) / expectedWidth).toBeGreaterThan(0.85);
    expect((interval.upper - interval.lower) / expectedWidth).toBeLessThan(1.15);
  });
});

describe('advise FILE on held-out scenarios', () => {
  // Scenarios with parameters that appear nowhere in the catalog or in the advice code. For each: one sample,
  // the advice on it (100 look-alike replicates), then every estimator's realized RMSE on the TRUE scenario at
  // the same n (the harness, 120 replicates), and the recommended estimator's RMSE must be within 1.5× the best.
  const cases: [string, number][] = [
    ['weibull:k=1.7,lambda=2', 400],
    ['gaussian-mixture:w1=0.35,mu1=-2,sigma1=0.6,w2=0.65,mu2=1,sigma2=1.3', 300],
    ['product[logistic:mu=0,s=1;gamma:shape=3,scale=0.5]', 600],
    ['student-t-mv:dim=3,nu=6,rho=0.2,sigma=1', 800],
  ];
  for (const [spec, n] of cases) {
    it(`${spec} at n = ${n}`, async () => {
      const scenario = parseScenario(spec);
      const sample = scenario.sample(rngFromSeed(`held-out ${spec}`), n);
      const advice = await adviseFile(sample, { level: null, replicates: 100 });
      const plan = resolvePlan({ scenarios: [spec], estimators: applicableEstimators(scenario.dim), sampleSizes: [n], replicates: 120, seed: 77 }).plan;
      const run = assembleRun(await runPlan(plan), null);
      const rmse = new Map(run.cells.filter((c) => c.role === 'main').map((c) => [c.estimator, c.scores.rmse.value]));
      const best = Math.min(...[...rmse.values()].filter(Number.isFinite));
      const chosen = rmse.get(advice.recommendation.recommended!.estimator)!;
      expect(chosen / best).toBeLessThan(1.5);
    });
  }
});

describe('advise FILE on data a Gaussian mixture cannot imitate', () => {
  // Found by a tester: a "99.9%" interval was read off 20 resamples.
  it('says when the resamples are too few for the interval asked for (5 beyond each end, common practice)', async () => {
    const z = normals('advise test: resamples for the level', 200);
    const sample = { n: 200, dim: 1, data: Float64Array.from(z) };
    const rough = await adviseFile(sample, { replicates: 10, resamples: 20, level: 0.999 });
    expect(rough.warnings).toContain(
      '--resamples gave 20 bootstrap resamples, fewer than the 10000 that put 5 beyond each end of a 99.9% interval: its ends are rough; give --resamples 10000 or more, or ask for a lower --interval.',
    );
    const enough = await adviseFile(sample, { replicates: 10, resamples: 20, level: 0.5 });
    expect(enough.warnings.some((w) => w.includes('bootstrap resamples, fewer than'))).toBe(false);
  });

  // Found by a tester: at 1e-170 a column was called constant, at 1e200 the look-alike's mean was NaN.
  it('refuses a column beyond the scales a look-alike can be written in, with its SD, and calls only an equal-valued column constant', async () => {
    const z = normals('advise test: extreme scales', 200);
    const scaled = (c: number) => ({ n: 200, dim: 1, data: Float64Array.from(z, (v) => v * c) });
    for (const c of [1e-170, 1e200]) {
      await expect(adviseFile(scaled(c), { replicates: 10, resamples: 10, columnNames: ['dose'] })).rejects.toThrow(
        new RegExp(`^dose has SD \\d\\.\\d\\de${c < 1 ? '-170' : '\\+200'} and centre .*: advise's look-alike needs an SD from 1e-150 to 1e\\+150`),
      );
    }
    const flat = { n: 50, dim: 1, data: new Float64Array(50).fill(1e-170) };
    await expect(adviseFile(flat, { replicates: 10, resamples: 10, columnNames: ['dose'] })).rejects.toThrow(/^dose is constant/);
  });

  it('says so plainly for values on a coarse grid, and estimates with an estimator that works on them', async () => {
    const z = normals('advise test: coarse grid', 300);
    const data = Float64Array.from(z, (v) => Math.round(v * 4) / 4);
    const advice = await adviseFile({ n: 300, dim: 1, data }, { replicates: 30, resamples: 40, columnNames: ['reading'] });
    // Recorded data: the look-alike is benchmarked recorded at the same step, with the estimators built for such data.
    expect(
      advice.warnings.some((w) =>
        /^your data are recorded data \(reading: recorded to 2 decimal places, on a lattice of step 0\.25; \d+ of 300 rows repeat/.test(w),
      ),
    ).toBe(true);
    const compared = advice.benchmark.estimators.map((e) => e.estimator);
    expect(compared).toContain('lattice:step=auto,correction=none');
    expect(compared).toContain('kozachenko-leonenko:k=3,norm=euclidean,dequantize=auto');
    // Whatever is recommended, the value reported is one that the chosen estimator really gave on these data.
    const used = advice.userEstimates.find((u) => u.estimator === advice.estimate!.estimator)!;
    expect(used.value).toBe(advice.estimate!.value);
    if (advice.estimate!.estimator !== advice.recommendation.recommended!.estimator) {
      expect(advice.warnings.some((w) => w.startsWith(`${advice.recommendation.recommended!.label} fails on your data`))).toBe(true);
    }
  });
});

describe('advise for a described situation', () => {
  it('matches dimension exactly, filters tails and support, and says plainly when it falls back', () => {
    const heavy = matchScenarios(1, 'heavy', undefined, 6);
    expect(heavy.exact).toBe(true);
    for (const s of heavy.scenarios) expect([s.dim, s.tails]).toEqual([1, 'heavy']);
    expect(heavy.scenarios.length).toBe(6);
    expect(new Set(heavy.scenarios.map((s) => s.id.split(/[:[]/)[0])).size).toBe(6);
    const none = matchScenarios(2, 'heavy', 'bounded', 6);
    expect(none.exact).toBe(false);
    expect(none.note).toMatch(/^No scenario in the catalog at d = 2 has heavy tails and bounded support; the nearest differ in one of them/);
    const rebuilt = matchScenarios(4, undefined, undefined, 6);
    expect(rebuilt.rebuilt).toBe(true);
    for (const s of rebuilt.scenarios) expect(s.dim).toBe(4);
  });

  it('ranks by the mean of per-scenario RMSEs, recomputed here from the raw estimates and true values', async () => {
    const advice = await adviseSituation({ n: 200, dim: 2, budgetSeconds: 3, minReplicates: 10, maxScenarios: 3 });
    const truths = new Map(advice.match.scenarios.map((s) => [s.id, parseScenario(s.id).truth]));
    for (const summary of advice.estimators) {
      // Brute force: RMSE per scenario from the cells' estimates, then the plain mean over scenarios.
      const perScenario = summary.scenarios.map((c) => c.rmse.value);
      expect(summary.meanRmse.value).toBeCloseTo(perScenario.reduce((a, b) => a + b, 0) / perScenario.length, 12);
      // The robustness section is the first thing cut when the measured pace does not fit the budget (a loaded machine).
      expect(summary.robustness === null).toBe(advice.benchmark.perturbations.length === 0);
    }
    const sorted = advice.estimators.map((s) => s.meanRmse.value).filter(Number.isFinite);
    expect(sorted).toEqual([...sorted].sort((a, b) => a - b));
    // The run's failure rule (maxFailureRate 0): an estimator that failed any draw of a scenario is not recommended.
    const eligible = advice.estimators.filter((s) => s.scenarios.every((c) => c.failures === 0) && Number.isFinite(s.meanRmse.value));
    expect(advice.recommendation.recommended).toBe(eligible[0]);
    expect(advice.recommendation.reason).toMatch(new RegExp(`^${eligible[0].label} has the lowest mean RMSE`));
    expect(truths.size).toBe(3);
  });
});

describe('advice that no estimator is usable', () => {
  it('n ≤ d: says so at once, without a benchmark, well within the budget (advise --n 100 --dim 500)', async () => {
    let out = '';
    const started = performance.now();
    const code = await main(['advise', '--n', '100', '--dim', '500', '--budget', '5'], { out: (t) => (out += `${t}\n`), err: () => {} });
    const seconds = (performance.now() - started) / 1000;
    expect(code).toBe(0);
    expect(seconds).toBeLessThan(5);
    expect(out).toMatch(/No estimator is usable here: n = 100 points in d = 500 dimensions lie in a flat of at most 99 dimensions/);
    expect(out).not.toMatch(/Recommended:/);
    let json = '';
    await main(['advise', '--n', '100', '--dim', '500', '--json'], { out: (t) => (json += t), err: () => {} });
    expect(JSON.parse(json)).toMatchObject({ recommended: null, replicates: 0, estimators: [] });
  });

  it('every RMSE above the spread of the true values: no recommendation, and the reason names both numbers', async () => {
    // Two normal laws whose entropies differ by log(1.01), from @stdlib's normal entropy: an SD of half that,
    // 0.004975 nats. At n = 50 every estimator's RMSE is far above it.
    const { runTargeted } = await import('../src/analysis/advise/benchmark.js');
    const { summarise, recommend } = await import('../src/analysis/advise/recommend.js');
    const bench = await runTargeted({
      scenarios: ['normal', 'normal:sigma=1.01'],
      estimators: applicableEstimators(1),
      n: 50,
      budgetSeconds: 30,
      minReplicates: 10,
      maxReplicates: 10,
      workers: 1,
    });
    const summaries = summarise(bench.run);
    const recommendation = recommend(bench.run, summaries);
    expect(recommendation.recommended).toBeNull();
    const spread = (normalEntropy(0, 1.01) - normalEntropy(0, 1)) / 2;
    expect(recommendation.reason).toMatch(
      new RegExp(`larger than the spread of the true values over the matching scenarios \\(SD ${spread.toPrecision(2)} nats\\)`),
    );
    expect(Math.min(...summaries.map((x) => x.meanRmse.value).filter(Number.isFinite))).toBeGreaterThan(spread);
  });

  it('a budgeted benchmark in two rounds draws what --replicates R draws: the same estimates, cell by cell', async () => {
    const { runTargeted } = await import('../src/analysis/advise/benchmark.js');
    const base = { scenarios: ['normal'], estimators: ['vasicek', 'gaussian'], n: 100, workers: 2 };
    // No cap within reach, so the budget alone sizes both rounds (a cap reached in round one leaves no round two).
    const budgeted = await runTargeted({ ...base, budgetSeconds: 3, minReplicates: 10, maxReplicates: 1_000_000 });
    expect(budgeted.rounds).toHaveLength(2);
    const fixed = await runTargeted({ ...base, budgetSeconds: 60, minReplicates: budgeted.replicates, maxReplicates: budgeted.replicates });
    expect(fixed.rounds).toHaveLength(1);
    const estimates = (run: typeof fixed.run) => run.cells.map((c) => `${c.scenario}|${c.estimator}|${c.role}|${JSON.stringify(c.estimates)}`);
    expect(estimates(budgeted.run)).toEqual(estimates(fixed.run));
  });

  it('the runner-up sentence prints the two RMSEs with the digits that tell them apart', async () => {
    const { distinguishable } = await import('../src/analysis/advise/recommend.js');
    // The oven-probe case: 0.0698 and 0.0703 both read 0.070 at three decimals.
    expect(distinguishable(0.06981, 0.07032)).toEqual(['0.0698', '0.0703']);
    expect(distinguishable(0.0666, 0.0741)).toEqual(['0.067', '0.074']);
    expect(distinguishable(1.5, 1.5)).toEqual(['1.50000', '1.50000']);
    expect(distinguishable(0.0012, 0.00131)).toEqual(['0.0012', '0.0013']);
  });

  /** Two estimators on a light- and an exponential-tailed law, 10 replicates: the run the constructed cases edit. */
  const twoLawBench = async () => {
    const { runTargeted } = await import('../src/analysis/advise/benchmark.js');
    return runTargeted({
      scenarios: ['normal', 'laplace'],
      estimators: ['vasicek', 'ebrahimi'],
      n: 100,
      budgetSeconds: 30,
      minReplicates: 10,
      maxReplicates: 10,
      workers: 1,
    });
  };

  it('a runner-up whose mean RMSE is within twice the combined SE is called not separated by the data, not beaten (constructed)', async () => {
    const { summarise, recommend } = await import('../src/analysis/advise/recommend.js');
    const bench = await twoLawBench();
    const [first, second] = summarise(bench.run);
    const withRmse = (value: number, se: number) => [
      { ...first, meanRmse: { value: 0.1, se: 0.01 } },
      { ...second, meanRmse: { value, se } },
    ];
    // 0.11 − 0.10 = 0.01 ≤ 2·√(0.01² + 0.01²) = 0.0283 (by hand): a tie in all but name.
    expect(recommend(bench.run, withRmse(0.11, 0.01)).reason).toContain(
      `its mean RMSE (0.110 ± 0.010 against 0.100) is within twice their combined SE: the data do not separate the two, and the pick follows the lower mean.`,
    );
    // 0.2 − 0.1 = 0.1 > 0.0283: no such clause.
    expect(recommend(bench.run, withRmse(0.2, 0.01)).reason).not.toContain('do not separate');
  });

  it('a runner-up in the best set where the recommended one is not is named there (constructed best sets)', async () => {
    const { summarise, recommend } = await import('../src/analysis/advise/recommend.js');
    const bench = await twoLawBench();
    const [first, second] = summarise(bench.run).map((s, i) => ({ ...s, meanRmse: { value: 0.1 * (i + 1), se: 0.001 } }));
    // Best sets set by hand: both on the normal law, only the runner-up on the Laplace law.
    const run = structuredClone(bench.run);
    for (const ranking of run.rankings) {
      for (const entry of ranking.entries) {
        entry.best = entry.estimator === second.estimator || !ranking.scenario.startsWith('laplace');
      }
    }
    const reason = recommend(run, [first, second]).reason;
    expect(reason).toContain(
      `the runner-up ${second.label} is in the best set too on the light-tailed one, and in the best set without ${first.label} on the exponential-tailed one`,
    );
    // And it is never said to be outside the best set everywhere when it is alone in it somewhere.
    for (const ranking of run.rankings)
      for (const entry of ranking.entries) entry.best = entry.estimator === (ranking.scenario.startsWith('laplace') ? second.estimator : first.estimator);
    expect(recommend(run, [first, second]).reason).toContain(
      `the runner-up ${second.label} is in the best set without ${first.label} on the exponential-tailed one`,
    );
  });

  it('the runner-up is never an estimator that fails on some draws (constructed: the lowest RMSE marked failing)', async () => {
    const { runTargeted } = await import('../src/analysis/advise/benchmark.js');
    const { summarise, recommend } = await import('../src/analysis/advise/recommend.js');
    const bench = await runTargeted({
      scenarios: ['normal'],
      estimators: applicableEstimators(1),
      n: 200,
      budgetSeconds: 30,
      minReplicates: 10,
      maxReplicates: 10,
      workers: 1,
    });
    const ran = summarise(bench.run).filter((s) => Number.isFinite(s.meanRmse.value) && s.failedScenarios === 0);
    expect(ran.length).toBeGreaterThanOrEqual(3);
    // The best one now fails a draw of its only scenario: the recommendation and the runner-up skip it.
    const summaries = [{ ...ran[0], failures: 1, failureRate: 0.1, failedScenarios: 1 }, ...ran.slice(1)];
    const recommendation = recommend(bench.run, summaries);
    expect(recommendation.recommended).toBe(summaries[1]);
    expect(recommendation.runnerUp).toBe(summaries[2]);
    expect(recommendation.reason).toMatch(
      new RegExp(`\\(${summaries[0].label.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')} has a lower RMSE but fails on 10\\.0% of draws\\)`),
    );
  });

  it('advise FILE with n ≤ d: one line, exit 1, no look-alike attempted', async () => {
    const { mkdtempSync, writeFileSync } = await import('node:fs');
    const { tmpdir } = await import('node:os');
    const file = join(mkdtempSync(join(tmpdir(), 'hhat-advise-')), 'wide.csv');
    const z = normals('wide', 20 * 30);
    writeFileSync(file, Array.from({ length: 20 }, (_, i) => Array.from(z.subarray(i * 30, i * 30 + 30)).join(',')).join('\n'));
    let err = '';
    const code = await main(['advise', file], { out: () => {}, err: (t) => (err += `${t}\n`) });
    expect(code).toBe(1);
    expect(err.trim().split('\n')).toHaveLength(1);
    expect(err).toMatch(/no estimator is usable on this file: n = 20 points in d = 30 dimensions/);
  });
});

describe('hhat advise on the command line', () => {
  it('refuses mixed or missing descriptions with one line and exit code 2', async () => {
    for (const [args, message] of [
      [['advise'], /give a data file .* or describe the setting with --n and --dim/],
      [['advise', 'examples/oven-probes.csv', '--n', '100'], /--n describes a situation/],
      [['advise', '--n', '100', '--dim', '2', '--tails', 'fat'], /--tails fat is not allowed; it must be one of light, exponential, heavy/],
      [['advise', '--n', '100', '--dim', '2', '--interval', '0.9'], /--interval applies to a data file/],
      [['advise', 'examples/oven-probes.csv', '--interval', '95'], /--interval 95 is not allowed/],
      [['advise', '--n', '5', '--dim', '1'], /--n 5 is not allowed/],
    ] as const) {
      const { code, err } = await run([...args]);
      expect(code).toBe(2);
      expect(err.trim().split('\n')).toHaveLength(1);
      expect(err).toMatch(message);
    }
  });

  it('--json on the demo file has the recommendation, the estimate with its interval and the bias-corrected value', async () => {
    const args = ['advise', join(__dirname, '..', 'examples', 'oven-probes.csv'), '--replicates', '30', '--resamples', '60', '--json'];
    const { code, out } = await run(args);
    expect(code).toBe(0);
    const advice = JSON.parse(out);
    // With the counts fixed the advice is reproducible: a second run (on two threads again) gives the same numbers.
    const again = JSON.parse((await run(args)).out);
    const scores = (x: { estimators: { estimator: string; meanRmse: number; meanBias: number }[] }) =>
      x.estimators.map((e) => [e.estimator, e.meanRmse, e.meanBias]);
    expect(scores(again)).toEqual(scores(advice));
    expect(again.estimate).toEqual(advice.estimate);
    expect(advice.replicates).toBe(30);
    expect(advice.estimate.interval.resamples).toBe(60);
    expect(advice).toMatchObject({ kind: 'hhat-advice', mode: 'file', n: 720, dim: 3 });
    expect(advice.estimators.map((e: { estimator: string }) => e.estimator)).toContain(advice.recommended);
    const e = advice.estimate;
    expect(e.interval.lower).toBeLessThan(e.value);
    expect(e.interval.upper).toBeGreaterThan(e.value);
    expect(e.corrected).toBeCloseTo(e.value - e.bias, 12);
    // The bias-corrected interval is the spread of the estimate and the uncertainty of the bias, added in
    // quadrature on each side: z·√(SE(bias)² + SE(truth)²), z = scipy.stats.norm.ppf(0.975) = 1.959963984540054.
    // The look-alike's truth is a Monte-Carlo mean here (d = 3), so its SE is positive.
    expect(e.truthSe).toBeGreaterThan(0);
    const spread = 1.959963984540054 * Math.hypot(e.biasSe, e.truthSe);
    expect(e.correctedInterval.lower).toBeCloseTo(e.corrected - Math.hypot(e.value - e.interval.lower, spread), 12);
    expect(e.correctedInterval.upper).toBeCloseTo(e.corrected + Math.hypot(e.interval.upper - e.value, spread), 12);
    expect(advice.lookalike.spec.startsWith('gaussian-mixture-mv[')).toBe(true);
  });
});
