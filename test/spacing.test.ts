import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import digamma from '@stdlib/math-base-special-digamma';
import normalRandom from '@stdlib/random-base-normal';
import exponentialRandom from '@stdlib/random-base-exponential';
import type { Estimator, Sample } from '../src/core/contracts.js';
import { EstimateError, UsageError } from '../src/core/errors.js';
import { rngFromSeed } from '../src/core/rng.js';
import { correaEntropy, spacingEstimators } from '../estimators/spacing.js';
import { sortAscending } from '../src/math/sort.js';
import { parseEstimatorSpec, runEstimator } from '../estimators/index.js';

interface SpacingFixture {
  versions: { scipy: string; numpy: string };
  samples: Record<string, number[]>;
  cases: {
    name: string;
    n: number;
    defaultWindow: number;
    values: Record<string, number>;
    otherWindows: { m: number; values: Record<string, number> }[];
  }[];
  convergence: {
    n: number;
    trueEntropy: Record<string, number>;
    study: { distribution: string; method: string; replicates: number; meanError: number; sd: number }[];
  };
}

// Produced by test/fixtures/make_spacing_fixture.py (scipy.stats.differential_entropy).
const fixture = JSON.parse(readFileSync(new URL('./fixtures/spacing.json', import.meta.url), 'utf8')) as SpacingFixture;

const METHOD_IDS = ['vasicek', 'van-es', 'ebrahimi', 'correa'];
const byId = (id: string): Estimator => spacingEstimators.find((e) => e.id === id)!;
const sampleOf = (values: ArrayLike<number>): Sample => ({ n: values.length, dim: 1, data: Float64Array.from(values) });
const relativeError = (ours: number, reference: number): number => Math.abs(ours - reference) / Math.abs(reference);

function normalSample(seed: string, n: number): Sample {
  const draw = normalRandom.factory(0, 1, { prng: rngFromSeed(seed) });
  return { n, dim: 1, data: Float64Array.from({ length: n }, () => draw()) };
}

describe('spacing estimators against SciPy', () => {
  it('records the SciPy version that made the fixture', () => {
    expect(fixture.versions.scipy).toMatch(/^\d+\.\d+/);
    expect(spacingEstimators.map((e) => e.id)).toEqual(METHOD_IDS);
  });

  for (const testCase of fixture.cases) {
    it(`matches scipy.stats.differential_entropy on ${testCase.name} with the default window`, () => {
      const sample = sampleOf(fixture.samples[testCase.name]);
      for (const id of METHOD_IDS) {
        const estimator = byId(id);
        // Source: SciPy's value on the same doubles (fixture), relative 1e-10.
        expect(relativeError(estimator.estimate(sample, { m: 'auto' }), testCase.values[id]), id).toBeLessThan(1e-10);
        expect(estimator.resolve!(sample, { m: 'auto' }).m).toBe(testCase.defaultWindow);
      }
    });
  }

  for (const testCase of fixture.cases.filter((c) => c.otherWindows.length > 0)) {
    it(`matches SciPy on ${testCase.name} with m = ${testCase.otherWindows.map((w) => w.m).join(', ')}`, () => {
      const sample = sampleOf(fixture.samples[testCase.name]);
      for (const { m, values } of testCase.otherWindows) {
        for (const id of METHOD_IDS) {
          expect(relativeError(byId(id).estimate(sample, { m }), values[id]), `${id} m=${m}`).toBeLessThan(1e-10);
        }
      }
    });
  }
});

describe('spacing estimators: units, ties and bad input', () => {
  it('shifts by exactly log c when the data are rescaled by c', () => {
    const sample = normalSample('spacing-rescale', 3000);
    for (const c of [1000, 1 / 7, 2 ** -30, 3.7e5]) {
      const scaled = { ...sample, data: sample.data.map((x) => c * x) };
      for (const id of METHOD_IDS) {
        const shift = byId(id).estimate(scaled, { m: 'auto' }) - byId(id).estimate(sample, { m: 'auto' });
        // Exact identity of the definitions (every spacing scales by c); tolerance is rounding only.
        expect(Math.abs(shift - Math.log(c)), `${id} c=${c}`).toBeLessThan(1e-12);
      }
    }
  });

  it('reports ties as an EstimateError with counts and a window that avoids them', () => {
    // Rounding normal draws to integers leaves runs of ~190 equal values among 500.
    const rounded = normalSample('spacing-ties', 500);
    rounded.data = rounded.data.map((x) => Math.round(x));
    let longestRun = 1;
    const sorted = Float64Array.from(rounded.data).sort();
    for (let i = 1, run = 1; i < sorted.length; i++) {
      run = sorted[i] === sorted[i - 1] ? run + 1 : 1;
      longestRun = Math.max(longestRun, run);
    }
    for (const id of METHOD_IDS) {
      let caught: unknown;
      try {
        byId(id).estimate(rounded, { m: 'auto' });
      } catch (error) {
        caught = error;
      }
      expect(caught, id).toBeInstanceOf(EstimateError);
      const error = caught as EstimateError;
      expect(error.code).toBe('ties');
      expect(error.message).toMatch(/\d+ of \d+ spacings/);
      expect(error.message).toContain(`longest run of equal values ${longestRun}`);
      expect(error.message).toContain(`m ≥ ${longestRun}`);
      // The suggested way forward works: a window as long as the longest run has no zero spacing.
      expect(Number.isFinite(byId(id).estimate(rounded, { m: longestRun }))).toBe(true);
    }
  });

  it('rejects windows with m ≥ n/2, naming n and m', () => {
    for (const id of METHOD_IDS) {
      expect(() => byId(id).estimate(sampleOf([0.1, 0.5, 0.2, 0.9]), { m: 2 })).toThrow(/m = 2.*n = 4/);
      expect(() => byId(id).estimate(sampleOf([0.1, 0.5]), { m: 'auto' })).toThrow(EstimateError);
      // Two points: no window works, so the advice is more points, never an m below 1.
      expect(() => byId(id).estimate(sampleOf([0.1, 0.5]), { m: 'auto' })).toThrow(/n = 2; it needs at least 3 points$/);
      expect(() => byId(id).estimate(sampleOf([0.1, 0.5, 0.2, 0.9]), { m: 2 })).toThrow(/use m ≤ 1 or at least 5 points$/);
      try {
        byId(id).estimate(sampleOf([0.1, 0.5, 0.2, 0.9]), { m: 2 });
      } catch (error) {
        expect((error as EstimateError).code).toBe('too-few-points');
      }
      // m = 1 < 3/2 is allowed.
      expect(Number.isFinite(byId(id).estimate(sampleOf([0.1, 0.5, 0.2]), { m: 1 }))).toBe(true);
    }
  });

  it('rejects NaN, infinities and more than one dimension', () => {
    for (const id of METHOD_IDS) {
      expect(() => byId(id).estimate(sampleOf([0.1, NaN, 0.3, 0.4, 0.7]), { m: 1 })).toThrow(/row 2/);
      expect(() => byId(id).estimate(sampleOf([0.1, 0.2, Infinity, 0.4, 0.7]), { m: 1 })).toThrow(EstimateError);
      // The dimension is the registry's check (its `dims` declare d = 1), made before the estimator runs.
      const twoColumns = { n: 3, dim: 2, data: new Float64Array(6) };
      expect(() => runEstimator(parseEstimatorSpec(`${id}:m=1`), twoColumns)).toThrow(UsageError);
      expect(() => runEstimator(parseEstimatorSpec(`${id}:m=1`), twoColumns)).toThrow(`${id} does not support d = 2; it needs d = 1`);
    }
  });
});

describe('Correa window sums', () => {
  // Independent brute force: Correa's formula with each window's mean computed afresh, O(n·m).
  function correaBruteForce(sorted: Float64Array, m: number): number {
    const n = sorted.length;
    const at = (j: number): number => sorted[Math.min(Math.max(j, 0), n - 1)];
    let total = 0;
    for (let i = 0; i < n; i++) {
      let mean = 0;
      for (let j = i - m; j <= i + m; j++) mean += at(j);
      mean /= 2 * m + 1;
      let numerator = 0;
      let denominator = 0;
      for (let j = i - m; j <= i + m; j++) {
        numerator += (at(j) - mean) * (j - i);
        denominator += (at(j) - mean) ** 2;
      }
      total += Math.log(numerator / (n * denominator));
    }
    return -total / n;
  }

  it('agrees with the brute force on data with far-apart tight clusters', () => {
    // Far-apart clusters make the sliding sums cancel badly unless they are re-centred.
    const draw = normalRandom.factory(0, 1e-3, { prng: rngFromSeed('correa-clusters') });
    const values = Float64Array.from({ length: 300 }, (_, i) => (i % 3 === 0 ? 1e6 : i % 3 === 1 ? -5 : 0) + draw());
    const sorted = Float64Array.from(values).sort();
    for (const m of [1, 4, 17, 60]) {
      expect(relativeError(correaEntropy(sorted, m), correaBruteForce(sorted, m)), `m=${m}`).toBeLessThan(1e-10);
    }
  });
});

describe('sortAscending', () => {
  it('gives the same order as the typed-array sort, above and below the radix-sort size', () => {
    const rng = rngFromSeed('radix-sort');
    for (const n of [1000, 50_000]) {
      const values = Float64Array.from({ length: n }, () => (rng() - 0.5) * Math.exp(80 * (rng() - 0.5)));
      const specials = [0, -0, 5e-324, -5e-324, 2.2e-308, -Number.MAX_VALUE, Number.MAX_VALUE, 1, 1, -1, -1];
      specials.forEach((x, i) => (values[i * 7] = x));
      const expected = Float64Array.from(values).sort();
      const sorted = sortAscending(Float64Array.from(values));
      expect(
        sorted.every((x, i) => Object.is(x, expected[i])),
        `n=${n}`,
      ).toBe(true);
    }
    // Only positive and only negative values take the other branches of the final reordering.
    for (const sign of [1, -1]) {
      const values = Float64Array.from({ length: 40_000 }, () => sign * rng());
      const expected = Float64Array.from(values).sort();
      expect(sortAscending(Float64Array.from(values))).toEqual(expected);
    }
  });
});

describe('spacing estimators converge at n = 20000', () => {
  // What the tolerance relies on: the mean error and SD of SciPy's implementation of each estimator at this
  // n, from the Monte-Carlo study in the fixture (200 replicates; 100 for Correa), which our code matches to
  // 1e-10 on fixed samples. Theory agrees with the study: the SD is about sqrt(Var log f(X) / n), i.e.
  // sqrt(0.5/n) = 0.0050 for the normal and sqrt(1/n) = 0.0071 for the exponential (Vasicek 1976; van Es
  // 1992), and for the uniform the mean error is the distribution-free spacing bias checked exactly below.
  // Our single sample must land within 4 SD (plus 4 SE of the study's mean) of truth + mean error.
  const { n, trueEntropy, study } = fixture.convergence;
  const m = Math.floor(Math.sqrt(n) + 0.5);
  const rng = rngFromSeed('spacing-convergence');
  const normalDraw = normalRandom.factory(0, 1, { prng: rng });
  const exponentialDraw = exponentialRandom.factory(1, { prng: rng });
  const samples: Record<string, Sample> = {
    normal: sampleOf(Float64Array.from({ length: n }, () => normalDraw())),
    uniform: sampleOf(Float64Array.from({ length: n }, () => rng())),
    exponential: sampleOf(Float64Array.from({ length: n }, () => exponentialDraw())),
  };

  for (const row of study) {
    it(`${row.method} on ${row.distribution}`, () => {
      const estimate = byId(row.method).estimate(samples[row.distribution], { m: 'auto' });
      const tolerance = 4 * row.sd * Math.sqrt(1 + 1 / row.replicates);
      expect(Math.abs(estimate - trueEntropy[row.distribution] - row.meanError)).toBeLessThan(tolerance);
      // And plainly close to the truth: within |mean error| + 4 SD.
      expect(Math.abs(estimate - trueEntropy[row.distribution])).toBeLessThan(Math.abs(row.meanError) + tolerance);
    });
  }

  it("the study's uniform mean errors equal the exact distribution-free spacing bias", () => {
    // For uniform order statistics U(j) − U(i) ~ Beta(j−i, n−j+i+1), so E log(U(j) − U(i)) = ψ(j−i) − ψ(n+1)
    // (digamma from @stdlib). This gives the exact expectation of Vasicek's and Ebrahimi's estimates on
    // uniform data; van Es's harmonic term makes it exactly unbiased there.
    let vasicekMean = 0;
    let sumLogWeights = 0;
    for (let i = 1; i <= n; i++) {
      const k = Math.min(i + m, n) - Math.max(i - m, 1);
      vasicekMean += Math.log(n / (2 * m)) + digamma(k) - digamma(n + 1);
      sumLogWeights += Math.log(i <= m ? 1 + (i - 1) / m : i > n - m ? 1 + (n - i) / m : 2);
    }
    vasicekMean /= n;
    const exact: Record<string, number> = {
      vasicek: vasicekMean,
      ebrahimi: vasicekMean + Math.LN2 - sumLogWeights / n,
      'van-es': 0,
    };
    for (const row of study.filter((r) => r.distribution === 'uniform' && r.method in exact)) {
      const standardError = row.sd / Math.sqrt(row.replicates);
      expect(Math.abs(row.meanError - exact[row.method]), row.method).toBeLessThan(4 * standardError);
    }
  });
});
