/**
 * Data at the edges of the double range: subnormal spreads (5e-320), huge ones (1e300), huge offsets.
 * The reference for every check is the same estimator on data in an ordinary unit plus the exact shift of
 * differential entropy under x → c·x, d·log c (MI and divergence: no shift); log c comes from outside the
 * project (Python 3's math.log, named beside each constant).
 */
import { describe, expect, it } from 'vitest';
import normalRandom from '@stdlib/random-base-normal';
import type { Estimator, Sample, Settings } from '../src/core/contracts.js';
import { estimateErrorOf } from './helpers/estimate-error.js';
import { rngFromSeed } from '../src/core/rng.js';
import { configureEstimator, getEstimator } from '../estimators/index.js';

/** Python 3: math.log(5e-320) (also: 5e-320 == 10120 * 2**-1074 exactly, by fractions.Fraction). */
const LOG_SUBNORMAL = -735.2178029785398;
const SUBNORMAL = 5e-320;
/** Python 3: math.log(1e300). */
const LOG_HUGE = 690.7755278982137;
const HUGE = 1e300;

const TOLERANCE = 1e-9;

function normalDraws(seed: string, count: number): Float64Array {
  const draw = normalRandom.factory(0, 1, { prng: rngFromSeed(seed) });
  return Float64Array.from({ length: count }, () => draw());
}

/**
 * N(0,1) draws times 2^27 recorded to 1/8 (no repeats at these sizes): every value is j/8 with |j| < 2^36,
 * so c·u = j·1265·2^−1074 is an exact subnormal for c = 5e-320 = 10120·2^−1074. (Full-precision N(0,1) values times 5e-320 round to
 * about 14 bits, which no estimator can undo: that case is the "as recorded" test below.)
 */
function gridDraws(seed: string, count: number): Float64Array {
  return normalDraws(seed, count).map((z) => Math.round(z * 2 ** 30) / 8);
}

function times(data: Float64Array, c: number): Float64Array {
  return data.map((x) => x * c);
}

function estimate(id: string, sample: Sample, settings: Settings = {}): number {
  const configured = configureEstimator(id, settings);
  return configured.estimator.estimate(sample, configured.settings);
}

const ENTROPY_CASES: { id: string; settings?: Settings; dims: number[] }[] = [
  { id: 'histogram', dims: [1, 3] },
  { id: 'histogram', settings: { bins: 'scott', correction: 'miller-madow' }, dims: [1, 3] },
  { id: 'kozachenko-leonenko', dims: [1, 3] },
  { id: 'kozachenko-leonenko', settings: { norm: 'max' }, dims: [1, 3] },
  { id: 'kozachenko-leonenko-weighted', dims: [1, 3] },
  { id: 'kernel', dims: [1, 3] },
  { id: 'gaussian', dims: [1, 3] },
  { id: 'vasicek', dims: [1] },
  { id: 'van-es', dims: [1] },
  { id: 'ebrahimi', dims: [1] },
  { id: 'correa', dims: [1] },
];

describe('entropy estimates shift by exactly d·log c at subnormal and huge scales', () => {
  const n = 500;
  it('5e-320 times the grid values is exact (so the identity holds in exact arithmetic)', () => {
    const u = gridDraws('edges-exact', n * 3);
    const y = times(u, SUBNORMAL);
    // Independent of the estimators: y·2^1074 (two exact halvings of the exponent) is the integer j·1265.
    for (let i = 0; i < u.length; i++) expect(y[i] * 2 ** 537 * 2 ** 537).toBe(u[i] * 8 * 1265);
    expect(new Set(u).size).toBe(u.length);
    expect(y.some((v) => v !== 0 && Math.abs(v) < 2.2250738585072014e-308)).toBe(true);
    // Math.log handles subnormals; Python's math.log(5e-320) is the reference.
    expect(Math.abs(Math.log(SUBNORMAL) - LOG_SUBNORMAL)).toBeLessThan(1e-12);
    expect(Math.abs(Math.log(HUGE) - LOG_HUGE)).toBeLessThan(1e-12);
  });

  for (const { id, settings, dims } of ENTROPY_CASES) {
    for (const dim of dims) {
      const label = `${id}${settings ? ':' + JSON.stringify(settings) : ''}, d = ${dim}`;
      it(`${label}: × 5e-320 (subnormal)`, () => {
        const u = gridDraws(`edges-${dim}`, n * dim);
        const reference = estimate(id, { n, dim, data: u }, settings);
        const value = estimate(id, { n, dim, data: times(u, SUBNORMAL) }, settings);
        expect(Math.abs(value - (reference + dim * LOG_SUBNORMAL))).toBeLessThan(TOLERANCE);
      });
      it(`${label}: × 1e300`, () => {
        const z = normalDraws(`edges-huge-${dim}`, n * dim);
        const reference = estimate(id, { n, dim, data: z }, settings);
        const value = estimate(id, { n, dim, data: times(z, HUGE) }, settings);
        expect(Math.abs(value - (reference + dim * LOG_HUGE))).toBeLessThan(TOLERANCE);
      });
    }
  }

  it('settings in data units are converted with the data: histogram width, 1-D kernel bandwidth', () => {
    const u = gridDraws('edges-units', n);
    const y = times(u, SUBNORMAL);
    const widthU = estimate('histogram', { n, dim: 1, data: u }, { width: 2 ** 25 });
    const widthY = estimate('histogram', { n, dim: 1, data: y }, { width: 2 ** 25 * SUBNORMAL });
    expect(Math.abs(widthY - (widthU + LOG_SUBNORMAL))).toBeLessThan(TOLERANCE);
    const kernelU = estimate('kernel', { n, dim: 1, data: u }, { bandwidth: 3e7 });
    const kernelY = estimate('kernel', { n, dim: 1, data: y }, { bandwidth: 3e7 * SUBNORMAL });
    expect(Math.abs(kernelY - (kernelU + LOG_SUBNORMAL))).toBeLessThan(TOLERANCE);
    // The bandwidth reported as used is in data units: the subnormal one, not the internal unit's.
    const kernel = getEstimator('kernel');
    const usedU = kernel.resolve!({ n, dim: 1, data: u }, { bandwidth: 'silverman', scale: 1 }).bandwidth as number;
    const usedY = kernel.resolve!({ n, dim: 1, data: y }, { bandwidth: 'silverman', scale: 1 }).bandwidth as number;
    expect(usedY / SUBNORMAL / usedU).toBeCloseTo(1, 12);
    expect(estimate('kernel', { n, dim: 1, data: y }, { bandwidth: usedY })).toBeCloseTo(estimate('kernel', { n, dim: 1, data: y }), 9);
  });

  it('values near the top of the double range, whose sums overflow, are moved near 0 exactly', () => {
    const z = normalDraws('edges-offset', n * 2);
    const offset = 1e306; // 500 of them sum past the largest double
    const shifted = z.map((x) => offset + x * 1e299);
    // Every value is within a factor 2 of the offset, so value − offset is exact (Sterbenz's lemma).
    const centred = shifted.map((x) => x - offset);
    for (const id of ['histogram', 'kozachenko-leonenko', 'kernel', 'gaussian']) {
      const reference = estimate(id, { n, dim: 2, data: centred });
      expect(Math.abs(estimate(id, { n, dim: 2, data: shifted }) - reference), id).toBeLessThan(TOLERANCE);
    }
  });
});

describe('data as recorded: N(0,1) × 5e-320 rounded to subnormals', () => {
  const n = 500;
  const z = normalDraws('edges-recorded', n);
  const y = times(z, SUBNORMAL);

  it('has few repeats, so no estimator may call the values equal', () => {
    const distinct = new Set(y).size;
    expect(distinct).toBeGreaterThan(480);
    for (const id of ['histogram', 'kozachenko-leonenko', 'kernel', 'gaussian', 'vasicek']) {
      expect(() => estimate(id, { n, dim: 1, data: y }), id).not.toThrow();
    }
  });

  it('gives the estimate of the same values times 2^1074 (exact integers) less 1074·log 2', () => {
    const integers = y.map((v) => v * 2 ** 537 * 2 ** 537);
    for (let i = 0; i < n; i++) expect(Number.isInteger(integers[i])).toBe(true);
    for (const id of ['histogram', 'kozachenko-leonenko', 'kozachenko-leonenko-weighted', 'kernel', 'gaussian', 'ebrahimi']) {
      const reference = estimate(id, { n, dim: 1, data: integers }) - 1074 * Math.LN2;
      expect(Math.abs(estimate(id, { n, dim: 1, data: y }) - reference), id).toBeLessThan(TOLERANCE);
    }
  });
});

describe('mutual information and divergence do not move at subnormal and huge scales', () => {
  const n = 400;
  const u = gridDraws('edges-mi', 2 * n);
  // Dependent pair, still on the 1/8 grid: y = x + noise.
  for (let i = 0; i < n; i++) u[2 * i + 1] = u[2 * i] + u[2 * i + 1];
  // Divergence: P and a wider, shifted Q on the same grid, so every P bin of a coarse grid holds Q points.
  const p = gridDraws('edges-p', n);
  const q = gridDraws('edges-q', n).map((x) => 2 * x + 2 ** 25);
  const cases: { id: string; settings?: Settings }[] = [
    { id: 'ksg1' },
    { id: 'ksg2' },
    { id: 'mi-histogram' },
    { id: 'mi-kernel' },
    { id: 'mi-gaussian' },
    { id: 'mi-from-entropies' },
    { id: 'knn-divergence' },
    { id: 'histogram-divergence', settings: { bins: 'sturges' } },
    { id: 'gaussian-divergence' },
  ];
  for (const { id, settings } of cases) {
    for (const c of [SUBNORMAL, HUGE]) {
      it(`${id} × ${c}`, () => {
        const estimator: Estimator = getEstimator(id);
        // For 1e300 the grid values (SD 2^27) would overflow: use them divided by 2^27 (exact), SD 1.
        const unit = c === HUGE ? 2 ** -27 : 1;
        const sampleAt = (scale: number): Sample =>
          estimator.quantity === 'divergence'
            ? { n, dim: 1, data: times(times(p, unit), scale), q: { n, dim: 1, data: times(times(q, unit), scale) } }
            : { n, dim: 2, data: times(times(u, unit), scale), xDim: 1 };
        const reference = estimate(id, sampleAt(1), settings);
        expect(Math.abs(estimate(id, sampleAt(c), settings) - reference)).toBeLessThan(TOLERANCE);
      });
    }
  }
});

describe('what cannot be brought to a safe range, and constant columns', () => {
  it('a genuinely constant column keeps the error it gave before, whatever its value', () => {
    const n = 200;
    const spread = normalDraws('edges-constant', n * 3);
    for (const value of [SUBNORMAL, 2.5, HUGE]) {
      const oneD = new Float64Array(n).fill(value);
      for (const id of ['histogram', 'vasicek', 'van-es', 'ebrahimi', 'correa', 'kozachenko-leonenko', 'kozachenko-leonenko-weighted', 'kernel', 'gaussian']) {
        expect(estimateErrorOf(() => estimate(id, { n, dim: 1, data: oneD })).code, `${id} at ${value}`).toBe('ties');
      }
      const threeD = spread.map((x, p) => (p % 3 === 0 ? value : x));
      expect(estimateErrorOf(() => estimate('histogram', { n, dim: 3, data: threeD })).code).toBe('ties');
      expect(estimateErrorOf(() => estimate('gaussian', { n, dim: 3, data: threeD })).code).toBe('ties');
      expect(estimateErrorOf(() => estimate('kernel', { n, dim: 3, data: threeD })).message).toMatch(/column 1 is constant/);
      // Nearest-neighbour distances never see a constant coordinate: the value is that of the other two.
      const twoColumns = { n, dim: 3, data: spread.map((x, p) => (p % 3 === 0 ? 0 : x)) };
      expect(estimate('kozachenko-leonenko', { n, dim: 3, data: threeD })).toBe(estimate('kozachenko-leonenko', twoColumns));
    }
  });

  it('rows that differ only below the squared-distance underflow are a numeric error, not ties', () => {
    // Column 1 repeats each value 4 times; column 2 separates the copies by about 1e-170, whose square
    // (1e-340) underflows: the Euclidean 3rd neighbour distance rounds to 0 for every point.
    const n = 200;
    const data = new Float64Array(2 * n);
    for (let i = 0; i < n; i++) {
      data[2 * i] = Math.floor(i / 4);
      data[2 * i + 1] = (i % 4) * 1e-170;
    }
    const error = estimateErrorOf(() => estimate('kozachenko-leonenko', { n, dim: 2, data }));
    expect(error.code).toBe('numeric');
    expect(error.message).toMatch(/^kozachenko-leonenko: \d+ pairs of distinct points are at a distance that rounds to 0 .*use norm=max$/);
    // The max norm squares nothing, so the same data work there.
    expect(Number.isFinite(estimate('kozachenko-leonenko', { n, dim: 2, data }, { norm: 'max' }))).toBe(true);
    // Genuine repeats still get the ties advice.
    const repeated = data.map((x, p) => (p % 2 === 1 ? 0 : x));
    expect(estimateErrorOf(() => estimate('kozachenko-leonenko', { n, dim: 2, data: repeated })).code).toBe('ties');
  });

  it('spacings below 2^-1074 of the range are a numeric error naming the range', () => {
    // 40 values spread over ±1e300 and 30 distinct values within 3e-299 of 0: no double unit holds both.
    const values = [...Array.from({ length: 40 }, (_, i) => (i - 19.5) * 5e298), ...Array.from({ length: 30 }, (_, i) => (i + 1) * 1e-300)];
    const sample = { n: values.length, dim: 1, data: Float64Array.from(values) };
    const error = estimateErrorOf(() => estimate('van-es', sample, { m: 1 }));
    expect(error.code).toBe('numeric');
    expect(error.message).toMatch(
      /^van-es: the values span more than double precision can resolve \(range -9\.75e\+299 \.\. 9\.75e\+299, yet \d+ neighbouring values .*transform the data/,
    );
  });
});
