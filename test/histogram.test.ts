import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import normalRandom from '@stdlib/random-base-normal';
import exponentialRandom from '@stdlib/random-base-exponential';
import { type Sample, type Settings, TUNING_SCALE_FACTORS } from '../src/core/contracts.js';
import { EstimateError, UsageError } from '../src/core/errors.js';
import { rngFromSeed } from '../src/core/rng.js';
import { BIN_RULES, type BinRule, type GridSettings, histogramCells, histogramEstimators, histogramGrid } from '../estimators/histogram.js';
import { validated, withValidation } from './helpers/settings.js';

interface HistogramFixture {
  versions: { numpy: string };
  samples: Record<string, number[]>;
  cases: {
    sample: string;
    inSpacingFixture: boolean;
    rules: Record<string, { binCount: number; plugInEntropy: number; occupiedBins: number }>;
  }[];
}

// Both produced by test/fixtures/make_spacing_fixture.py (numpy.histogram_bin_edges / numpy.histogram).
const fixture = JSON.parse(readFileSync(new URL('./fixtures/histogram.json', import.meta.url), 'utf8')) as HistogramFixture;
const spacingSamples = (JSON.parse(readFileSync(new URL('./fixtures/spacing.json', import.meta.url), 'utf8')) as { samples: Record<string, number[]> }).samples;

const histogram = withValidation(histogramEstimators[0]);
/** The grid for settings as a user writes them. */
const gridOf = (sample: Sample, given: Settings) => histogramGrid(sample, validated<GridSettings>(histogramEstimators[0], given));
const NUMPY_NAME: Record<BinRule, string> = { sturges: 'sturges', scott: 'scott', 'freedman-diaconis': 'fd', doane: 'doane', sqrt: 'sqrt' };

function normalSample(seed: string, n: number, dim: number): Sample {
  const draw = normalRandom.factory(0, 1, { prng: rngFromSeed(seed) });
  const data = Float64Array.from({ length: n * dim }, () => draw());
  // Correlate the coordinates a little so that 2-D cells are not a product of margins.
  for (let i = 0; i < n && dim > 1; i++) data[i * dim + 1] += 0.6 * data[i * dim];
  return { n, dim, data };
}

const points = (sample: Sample): number[][] =>
  Array.from({ length: sample.n }, (_, i) => Array.from(sample.data.subarray(i * sample.dim, (i + 1) * sample.dim)));

/** Independent rule counts for the brute force, written from the formulas with plain arrays. */
function bruteForceBinCount(rule: BinRule, values: number[], dim: number): number {
  const n = values.length;
  const sorted = [...values].sort((a, b) => a - b);
  const range = sorted[n - 1] - sorted[0];
  const mean = values.reduce((a, b) => a + b, 0) / n;
  const sd = Math.sqrt(values.reduce((a, x) => a + (x - mean) ** 2, 0) / n);
  const percentile = (p: number): number => {
    const h = (n - 1) * p;
    const lo = Math.floor(h);
    return lo + 1 < n ? sorted[lo] + (h - lo) * (sorted[lo + 1] - sorted[lo]) : sorted[lo];
  };
  const perCoordinate = (total: number): number => Math.ceil(total ** (1 / dim));
  switch (rule) {
    case 'sturges':
      return perCoordinate(Math.log2(n) + 1);
    case 'sqrt':
      return perCoordinate(Math.sqrt(n));
    case 'doane': {
      const g1 = values.reduce((a, x) => a + ((x - mean) / sd) ** 3, 0) / n;
      const sg1 = Math.sqrt((6 * (n - 2)) / ((n + 1) * (n + 3)));
      return perCoordinate(1 + Math.log2(n) + Math.log2(1 + Math.abs(g1) / sg1));
    }
    case 'scott': // Scott (1992) §3.4: h = 2·3^{1/(d+2)} π^{d/(2(d+2))} σ n^{−1/(d+2)}
      return Math.ceil(range / (2 * 3 ** (1 / (dim + 2)) * Math.PI ** (dim / (2 * (dim + 2))) * sd * n ** (-1 / (dim + 2))));
    case 'freedman-diaconis':
      return Math.ceil(range / (2 * (percentile(0.75) - percentile(0.25)) * n ** (-1 / (dim + 2))));
  }
}

/**
 * Brute-force plug-in entropy: explicit edge lists per coordinate (equal bins from min to max, or `width`
 * bins from min), each point's bin found by scanning the edges, cells counted in a Map keyed by strings,
 * each cell's volume from its own edges.
 */
function bruteForceEntropy(sample: Sample, binCounts: number[] | null, width: number | null, millerMadow = false): number {
  const rows = points(sample);
  const edges: number[][] = [];
  for (let k = 0; k < sample.dim; k++) {
    const column = rows.map((r) => r[k]);
    const lo = Math.min(...column);
    const hi = Math.max(...column);
    if (width !== null) {
      const e = [lo];
      while (e[e.length - 1] <= hi) e.push(lo + e.length * width);
      edges.push(e);
    } else {
      const count = binCounts![k];
      edges.push(Array.from({ length: count + 1 }, (_, i) => (i === count ? hi : lo + i * ((hi - lo) / count))));
    }
  }
  const cells = new Map<string, number>();
  for (const row of rows) {
    const key = row
      .map((x, k) => {
        const e = edges[k];
        let b = 0;
        while (b < e.length - 2 && x >= e[b + 1]) b++;
        return b;
      })
      .join(',');
    cells.set(key, (cells.get(key) ?? 0) + 1);
  }
  let entropy = 0;
  for (const [key, count] of cells) {
    const volume = key.split(',').reduce((v, b, k) => v * (edges[k][Number(b) + 1] - edges[k][Number(b)]), 1);
    entropy -= (count / sample.n) * Math.log(count / (sample.n * volume));
  }
  return millerMadow ? entropy + (cells.size - 1) / (2 * sample.n) : entropy;
}

const close = (ours: number, reference: number, tolerance = 1e-12): void => {
  expect(Math.abs(ours - reference)).toBeLessThan(tolerance * Math.max(1, Math.abs(reference)));
};

describe('histogram bin rules against NumPy', () => {
  it('records the NumPy version that made the fixture', () => {
    expect(fixture.versions.numpy).toMatch(/^\d+\.\d+/);
  });

  for (const testCase of fixture.cases) {
    it(`bin counts and plug-in values on ${testCase.sample} equal numpy.histogram's`, () => {
      const values = testCase.inSpacingFixture ? spacingSamples[testCase.sample] : fixture.samples[testCase.sample];
      const sample: Sample = { n: values.length, dim: 1, data: Float64Array.from(values) };
      for (const rule of BIN_RULES) {
        const numpy = testCase.rules[NUMPY_NAME[rule]];
        // Source: len(numpy.histogram_bin_edges(x, bins=RULE)) − 1. NumPy computes ceil(range / width) with
        // the width from the rule, we compute ceil of the scale-free ratio; the two could differ only when
        // that ratio is an exact integer up to rounding, which none of these samples hits.
        expect(gridOf(sample, { bins: rule })[0].binCount, rule).toBe(numpy.binCount);
        // Source: −Σ (c/n) log(c/(n w)) from numpy.histogram's counts and edges (same bin convention).
        close(histogram.estimate(sample, { bins: rule, correction: 'none' }), numpy.plugInEntropy);
        // Miller (1955): + (B − 1)/(2n), B = occupied bins as counted by numpy.
        const corrected = histogram.estimate(sample, { bins: rule, correction: 'miller-madow' });
        close(corrected, numpy.plugInEntropy + (numpy.occupiedBins - 1) / (2 * sample.n));
      }
    });
  }
});

describe('histogram against a brute-force computation', () => {
  it('agrees for every rule and an integer count in d = 1, 2, 3', () => {
    for (const [dim, n] of [
      [1, 257],
      [2, 300],
      [3, 200],
    ]) {
      const sample = normalSample(`histogram-brute-${dim}`, n, dim);
      const columns = Array.from({ length: dim }, (_, k) => points(sample).map((r) => r[k]));
      for (const rule of BIN_RULES) {
        const counts = columns.map((c) => bruteForceBinCount(rule, c, dim));
        expect(
          gridOf(sample, { bins: rule }).map((a) => a.binCount),
          `${rule} d=${dim}`,
        ).toEqual(counts);
        close(histogram.estimate(sample, { bins: rule }), bruteForceEntropy(sample, counts, null));
        close(histogram.estimate(sample, { bins: rule, correction: 'miller-madow' }), bruteForceEntropy(sample, counts, null, true));
      }
      close(histogram.estimate(sample, { bins: 7 }), bruteForceEntropy(sample, Array(dim).fill(7), null));
    }
  });

  it('agrees with a fixed width, which overrides bins', () => {
    for (const dim of [1, 2]) {
      const sample = normalSample(`histogram-width-${dim}`, 200, dim);
      for (const width of [0.3, 1.7]) {
        const settings: Settings = { bins: 'sturges', width, correction: 'miller-madow' };
        close(histogram.estimate(sample, settings), bruteForceEntropy(sample, null, width, true));
      }
    }
  });

  it('counts occupied cells correctly on grids far larger than the sample (sorted keys, ranked keys)', () => {
    // d = 3 with 3000 bins per axis: 2.7e10 cells, sorted numeric keys. d = 6 with 1000 bins per axis:
    // 1e18 cells ≥ 2^53, so the leading coordinates' keys are ranked first.
    for (const [dim, bins] of [
      [3, 3000],
      [6, 1000],
    ]) {
      const sample = normalSample(`histogram-sparse-${dim}`, 150, dim);
      const expected = bruteForceEntropy(sample, Array(dim).fill(bins), null, true);
      close(histogram.estimate(sample, { bins, correction: 'miller-madow' }), expected);
      const occupied = histogramCells(sample, gridOf(sample, { bins })).occupied;
      expect(occupied).toBeLessThanOrEqual(150);
    }
  });
});

describe("Freedman–Diaconis counts when a draw is reused (the rule keeps each draw's IQRs)", () => {
  // Source for every count: bruteForceBinCount above (plain-array sort and percentile), times the scale
  // and rounded as the setting states.
  const expectedCounts = (sample: Sample, scale: number): number[] =>
    Array.from({ length: sample.dim }, (_, k) => {
      const column = points(sample).map((r) => r[k]);
      return Math.max(1, Math.round(bruteForceBinCount('freedman-diaconis', column, sample.dim) * scale));
    });
  const countsOf = (sample: Sample, scale: number): number[] => gridOf(sample, { bins: 'freedman-diaconis', scale }).map((a) => a.binCount);

  it('d = 3: every tuning scale, then the same buffer refilled with another draw', () => {
    const sample = normalSample('histogram-reuse-3', 500, 3);
    // Columns of very different spread and shape, so one column's IQR used for another changes the count.
    for (let i = 0; i < sample.n; i++) {
      sample.data[3 * i + 1] *= 100;
      sample.data[3 * i + 2] = Math.exp(sample.data[3 * i + 2]);
    }
    for (const scale of TUNING_SCALE_FACTORS) expect(countsOf(sample, scale), `scale ${scale}`).toEqual(expectedCounts(sample, scale));
    const other = normalSample('histogram-reuse-3-other', 500, 3);
    sample.data.set(other.data);
    for (const scale of TUNING_SCALE_FACTORS) expect(countsOf(sample, scale), `refilled, scale ${scale}`).toEqual(expectedCounts(sample, scale));
  });

  it('d = 1: as given, in a power-of-two unit (values near 2^200), and as views of one buffer', () => {
    const sample = normalSample('histogram-reuse-1', 400, 1);
    const huge: Sample = { ...sample, data: sample.data.map((x) => x * 2 ** 200) };
    const shared = new Float64Array(900);
    shared.set(normalSample('histogram-reuse-1-a', 450, 1).data, 0);
    shared.set(
      normalSample('histogram-reuse-1-b', 450, 1).data.map((x) => 3 * x),
      450,
    );
    const first: Sample = { n: 450, dim: 1, data: shared.subarray(0, 450) };
    const second: Sample = { n: 450, dim: 1, data: shared.subarray(450) };
    for (const each of [sample, huge, first, second]) {
      for (const scale of [1, 2, 1]) expect(countsOf(each, scale)).toEqual(expectedCounts(each, scale));
    }
  });
});

describe('histogram under a change of unit', () => {
  it('data-driven rules and counts shift by exactly d·log c (d = 1, 2)', () => {
    for (const dim of [1, 2]) {
      const sample = normalSample(`histogram-units-${dim}`, 2000, dim);
      for (const bins of [...BIN_RULES, 12] as const) {
        const base = histogram.estimate(sample, { bins });
        for (const c of [1000, 0.037, 2 ** -20]) {
          const scaled = { ...sample, data: sample.data.map((x) => c * x) };
          // Every count is scale-free and every edge scales by c, so counts are unchanged and the volume
          // scales by c^d: an exact identity, up to rounding.
          expect(Math.abs(histogram.estimate(scaled, { bins }) - base - dim * Math.log(c)), `${bins} d=${dim} c=${c}`).toBeLessThan(1e-12);
        }
      }
    }
  });

  it('a fixed width is NOT scale-equivariant: the estimate moves by more than d·log c', () => {
    // Deliberately: the width is in data units, so rescaling changes how many points share a bin.
    for (const dim of [1, 2]) {
      const sample = normalSample(`histogram-width-units-${dim}`, 2000, dim);
      const base = histogram.estimate(sample, { width: 0.5 });
      for (const c of [0.1, 10]) {
        const scaled = { ...sample, data: sample.data.map((x) => c * x) };
        const drift = histogram.estimate(scaled, { width: 0.5 }) - base - dim * Math.log(c);
        expect(Math.abs(drift), `d=${dim} c=${c}`).toBeGreaterThan(0.01);
      }
    }
  });
});

describe('histogram errors', () => {
  const codeOf = (sample: Sample, settings: Settings): string => {
    try {
      histogram.estimate(sample, settings);
    } catch (error) {
      expect(error).toBeInstanceOf(EstimateError);
      return (error as EstimateError).code;
    }
    return 'no error';
  };
  const oneD = (values: number[]): Sample => ({ n: values.length, dim: 1, data: Float64Array.from(values) });

  it('reports ties, bad values and too few points', () => {
    expect(codeOf(oneD([2, 2, 2, 2]), {})).toBe('ties');
    // A fixed width still works on constant data: one bin of that width, entropy log(width).
    expect(histogram.estimate(oneD([2, 2, 2, 2]), { width: 0.5 })).toBeCloseTo(Math.log(0.5), 14);
    // Freedman–Diaconis needs IQR > 0: here 6 of 9 values are equal.
    const heavyTies = oneD([0, 1, 1, 1, 1, 1, 1, 2, 3]);
    expect(codeOf(heavyTies, { bins: 'freedman-diaconis' })).toBe('ties');
    expect(() => histogram.estimate(heavyTies, {})).toThrow(/interquartile range 0/);
    expect(codeOf(heavyTies, { bins: 'scott' })).toBe('no error');
    expect(codeOf(oneD([0.1, NaN, 0.3]), {})).toBe('invalid-input');
    expect(codeOf(oneD([0.1, 0.4]), { bins: 'doane' })).toBe('too-few-points');
    expect(codeOf(oneD([]), { bins: 5 })).toBe('too-few-points');
    // Settings outside the declaration never reach the estimator: the registry's validation refuses them.
    expect(() => histogram.estimate(oneD([0.1, 0.4, 0.5]), { bins: 0 })).toThrow(UsageError);
    expect(() => histogram.estimate(oneD([0.1, 0.4, 0.5]), { width: -1 })).toThrow(/width=-1 is not allowed; width must be one of none, or a number > 0/);
    // Edges that doubles cannot separate would give zero-width bins and a log of 0.
    expect(codeOf(oneD([1e6, 1e6 + 1e-9, 1e6 + 2e-9]), { bins: 1e6 })).toBe('numeric');
    expect(codeOf(oneD([1e6, 1e6 + 1e-9]), { width: 1e-12 })).toBe('numeric');
  });
});

describe('histogram converges at n = 20000 (default freedman-diaconis)', () => {
  // What the tolerance relies on (from memory, standard results): the plug-in bias is about
  // −(B − 1)/(2n) (Miller 1955) plus the binning bias (h²/24)·∫ f'²/f, which is h²/24 for the standard
  // normal and for the exponential (∫ f'²/f = 1 for both) and 0 for the uniform with edges at the sample's
  // min and max. The SD is about sqrt(Var log f(X) / n): sqrt(0.5/n) = 0.0050 (normal), sqrt(1/n) = 0.0071
  // (exponential); for the uniform Var log f = 0 and the multinomial term sqrt((B − 1)/2)/n remains.
  // Tolerance: |bias| + 4 SD.
  const n = 20000;
  const rng = rngFromSeed('histogram-convergence');
  const normalDraw = normalRandom.factory(0, 1, { prng: rng });
  const exponentialDraw = exponentialRandom.factory(1, { prng: rng });
  const cases = [
    { name: 'normal', draw: () => normalDraw(), truth: 0.5 * Math.log(2 * Math.PI * Math.E), fisher: 1, logDensityVariance: 0.5 },
    { name: 'uniform', draw: () => rng(), truth: 0, fisher: 0, logDensityVariance: 0 },
    { name: 'exponential', draw: () => exponentialDraw(), truth: 1, fisher: 1, logDensityVariance: 1 },
  ];
  for (const { name, draw, truth, fisher, logDensityVariance } of cases) {
    it(name, () => {
      const sample: Sample = { n, dim: 1, data: Float64Array.from({ length: n }, draw) };
      const grid = gridOf(sample, {});
      const { occupied } = histogramCells(sample, grid);
      const bias = -(occupied - 1) / (2 * n) + (grid[0].binWidth ** 2 / 24) * fisher;
      const sd = Math.sqrt(logDensityVariance / n + (occupied - 1) / (2 * n * n));
      const estimate = histogram.estimate(sample, {});
      expect(Math.abs(estimate - truth)).toBeLessThan(Math.abs(bias) + 4 * sd);
      // Miller–Madow removes the first bias term.
      const corrected = histogram.estimate(sample, { correction: 'miller-madow' });
      expect(Math.abs(corrected - truth)).toBeLessThan((grid[0].binWidth ** 2 / 24) * fisher + 4 * sd);
    });
  }
});
