/**
 * Recorded data: the lattice step detection, dequantize=auto|STEP, the lattice estimator against NumPy, and
 * `hhat estimate` on a file of inter-spike intervals logged to the microsecond.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import type { Sample } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { rngFromSeed } from '../src/core/rng.js';
import { detectStep } from '../src/math/lattice.js';
import { dequantizedVariant, getEstimator, parseEstimatorSpec, runEstimator, takesDequantize } from '../estimators/index.js';
import { tuningGrid } from '../src/harness/tuning.js';
import { runCli } from './helpers/cli.js';

interface LatticeCase {
  name: string;
  dim: number;
  data: number[];
  step: 'auto' | number;
  steps: number[];
  plugIn: number;
  millerMadow: number;
}
const fixture = JSON.parse(readFileSync(new URL('./fixtures/lattice.json', import.meta.url), 'utf8')) as { cases: LatticeCase[] };

/** Standard normals by Box–Muller from the project's seeded generator. */
function normals(n: number, seed: string): Float64Array {
  const u = rngFromSeed(seed);
  return Float64Array.from({ length: n }, () => Math.sqrt(-2 * Math.log(1 - u())) * Math.cos(2 * Math.PI * u()));
}

describe('detectStep', () => {
  const x = normals(20000, 'lattice-detect');
  it('finds decimal places, whole numbers and a step between the decimals', () => {
    expect(detectStep(x.map((v) => Math.round(v * 1e6) / 1e6))).toMatchObject({ step: 1e-6, method: 'decimal places' });
    expect(detectStep(x.map((v) => Math.round(3 * v)))).toMatchObject({ step: 1, method: 'decimal places' });
    // Recorded to two decimals but only at quarter steps, with an offset: the lattice is 0.25 wide.
    expect(detectStep(x.map((v) => 0.1 + 0.25 * Math.round(4 * v)))).toMatchObject({ step: 0.25, method: 'decimal places' });
    expect(detectStep(Float64Array.from([0.1 + 0.2, 0.3, 0.6, 0.9]))).toMatchObject({ step: 0.3 });
  });

  it('finds an irrational step from the gaps (values δ·round(x/δ), as the quantize perturbation makes them)', () => {
    const delta = 0.1 * Math.SQRT2;
    const report = detectStep(x.map((v) => delta * Math.round(v / delta)));
    expect(report.method).toBe('common gap');
    expect(report.step! / delta).toBeCloseTo(1, 12);
    // Sparse: 500 lognormal values on a lattice of 0.001 SD leave most cells empty, so the smallest gap is several steps.
    const fine = 0.001 * Math.sqrt((Math.E - 1) * Math.E);
    const sparse = detectStep(x.subarray(0, 500).map((v) => fine * Math.round(Math.exp(v) / fine)));
    expect(sparse.method).toBe('common gap');
    expect(sparse.step! / fine).toBeCloseTo(1, 9);
  });

  it('keeps the recording step of a sparse 0.01 lattice and of a decimal δ = 0.1·1.7 rounding', () => {
    // Few occupied cells far apart: the gaps (5.36, 94.65, 150.97) share no divisor above 0.01.
    expect(detectStep(Float64Array.from([0.01, 5.37, 100.02, 250.99]))).toMatchObject({ step: 0.01, method: 'decimal places', distinct: 4 });
    // δ·round(x/δ) with δ = 0.17, offset 3.3: the products carry floating error, the step is still 0.17.
    const delta = 0.1 * 1.7;
    const rounded = detectStep(x.map((v) => 3.3 + delta * Math.round(v / delta)));
    expect(rounded.method).toBe('decimal places');
    expect(rounded.step).toBeCloseTo(0.17, 15);
  });

  it('finds no step of 0 on values far below one unit, and none in two values off any decimal grid', () => {
    // Six-decimal values times 1e-12 all round to 0 at p = 0; their step is 1e-18, found from the gaps.
    const tiny = detectStep(x.map((v) => (Math.round(v * 1e6) / 1e6) * 1e-12));
    expect(tiny.method).toBe('common gap');
    expect(tiny.step! / 1e-18).toBeCloseTo(1, 9);
    expect(detectStep(x.map((v) => v * 1e-9))).toMatchObject({ step: null, method: 'none' });
    expect(detectStep(Float64Array.from([0, 0.1 * Math.SQRT2]))).toMatchObject({ step: null, method: 'none', distinct: 2 });
    expect(detectStep(Float64Array.from([0, 0.1 * Math.SQRT2])).detail).toMatch(/two distinct values/);
  });

  it('says continuous draws and constant columns are on no lattice', () => {
    expect(detectStep(x)).toMatchObject({ step: null, method: 'none' });
    expect(detectStep(x.map((v) => Math.exp(v)))).toMatchObject({ step: null, method: 'none' });
    expect(detectStep(Float64Array.from([2, 2, 2])).step).toBeNull();
  });
});

describe('the lattice estimator against NumPy (test/fixtures/make_lattice_fixture.py: np.unique counts, plug-in + Σ log Δ)', () => {
  for (const c of fixture.cases) {
    it(c.name, () => {
      const sample: Sample = { n: c.data.length / c.dim, dim: c.dim, data: Float64Array.from(c.data) };
      const plain = runEstimator(parseEstimatorSpec(`lattice:step=${c.step}`), sample, { report: true });
      expect(Math.abs(plain.value - c.plugIn)).toBeLessThanOrEqual(1e-12);
      const corrected = runEstimator(parseEstimatorSpec(`lattice:step=${c.step},correction=miller-madow`), sample).value;
      expect(Math.abs(corrected - c.millerMadow)).toBeLessThanOrEqual(1e-12);
      if (c.steps.every((s) => s === c.steps[0])) expect(plain.settings.step).toBeCloseTo(c.steps[0], 12);
    });
  }

  // The conformance suite's invariances for step=auto, on data that are on a lattice (its own samples are
  // continuous, which step=auto refuses): H(c·X) = H(X) + d·log|c| holds exactly for the recorded values, whose
  // counts do not change while the detected steps scale by |c|; a shift or a permutation changes no count.
  it('with step=auto, shifts by d·log|c| under x → c·x and is unchanged by translation and row order (2-D, steps 0.01 and 1)', () => {
    const n = 600;
    const z = normals(2 * n, 'lattice-invariance');
    const data = z.map((v, i) => (i % 2 === 0 ? Math.round(v * 100) / 100 : Math.round(3 * v)));
    const base: Sample = { n, dim: 2, data };
    const spec = parseEstimatorSpec('lattice:correction=miller-madow');
    const h = runEstimator(spec, base).value;
    for (const c of [8, -1 / 16]) {
      const scaled = runEstimator(spec, { ...base, data: data.map((v) => c * v) }).value;
      expect(Math.abs(scaled - (h + 2 * Math.log(Math.abs(c))))).toBeLessThan(1e-9);
    }
    expect(Math.abs(runEstimator(spec, { ...base, data: data.map((v, i) => v + (i % 2 === 0 ? 5 : -3.25)) }).value - h)).toBeLessThan(1e-9);
    const reversed = new Float64Array(2 * n);
    for (let i = 0; i < n; i++) reversed.set(data.subarray(2 * (n - 1 - i), 2 * (n - i)), 2 * i);
    expect(runEstimator(spec, { ...base, data: reversed }).value).toBe(h);
  });

  it('refuses data on no lattice with step=auto, naming the coordinate', () => {
    const sample: Sample = { n: 500, dim: 1, data: normals(500, 'lattice-refuse') };
    expect(() => runEstimator(parseEstimatorSpec('lattice'), sample)).toThrow(/coordinate 1 is not on a lattice.*give step=/);
    // Values far below one unit are no whole numbers (they once gave a step of 0, and a NaN estimate).
    const tiny: Sample = { ...sample, data: sample.data.map((v) => v * 1e-9) };
    expect(() => runEstimator(parseEstimatorSpec('lattice'), tiny)).toThrow(/coordinate 1 is not on a lattice/);
  });
});

describe('dequantize', () => {
  // A normal recorded to 0.01: h of the underlying law is ½ log(2πe) (closed form; Cover & Thomas, Table 17.1).
  const truth = 0.5 * Math.log(2 * Math.PI * Math.E);
  const recorded: Sample = { n: 2000, dim: 1, data: normals(2000, 'dequantize-normal').map((v) => Math.round(v * 100) / 100) };

  it('lets Kozachenko–Leonenko run on recorded data, close to the underlying entropy, the same value every time', () => {
    expect(() => runEstimator(parseEstimatorSpec('kozachenko-leonenko:k=1'), recorded)).toThrow(/distance 0/);
    const spec = parseEstimatorSpec('kozachenko-leonenko:k=1,dequantize=auto');
    const first = runEstimator(spec, recorded, { report: true });
    expect(Math.abs(first.value - truth)).toBeLessThan(0.05);
    expect(first.resolution).toEqual({ steps: [0.01], methods: ['decimal places'], details: ['recorded to 2 decimal places, on a lattice of step 0.01'] });
    expect(runEstimator(spec, { ...recorded, data: Float64Array.from(recorded.data) }).value).toBe(first.value);
    expect(runEstimator(parseEstimatorSpec('kozachenko-leonenko:k=1,dequantize=0.01'), recorded).value).toBe(first.value);
  });

  it('leaves continuous data exactly as they are', () => {
    const sample: Sample = { n: 1000, dim: 2, data: normals(2000, 'dequantize-continuous') };
    expect(runEstimator(parseEstimatorSpec('kozachenko-leonenko:dequantize=auto'), sample).value).toBe(
      runEstimator(parseEstimatorSpec('kozachenko-leonenko'), sample).value,
    );
  });

  it('is named in the spec only when set, before thin, and refused where it does not apply', () => {
    expect(parseEstimatorSpec('vasicek').spec).toBe('vasicek:m=auto');
    expect(parseEstimatorSpec('vasicek:thin=2,dequantize=auto').spec).toBe('vasicek:m=auto,dequantize=auto,thin=2');
    expect(parseEstimatorSpec('kernel:dequantize=none').spec).toBe(parseEstimatorSpec('kernel').spec);
    expect(dequantizedVariant(parseEstimatorSpec('ksg1:k=4'))!.spec).toBe('ksg1:k=4,copula=none,dequantize=auto');
    expect(dequantizedVariant(parseEstimatorSpec('histogram'))).toBeNull();
    expect(dequantizedVariant(parseEstimatorSpec('vasicek:dequantize=0.5'))).toBeNull();
    expect([
      parseEstimatorSpec('vasicek').dequantize,
      parseEstimatorSpec('vasicek:dequantize=auto').dequantize,
      parseEstimatorSpec('vasicek:dequantize=0.5').dequantize,
    ]).toEqual(['none', 'auto', 0.5]);
    expect(
      ['kozachenko-leonenko', 'kernel', 'vasicek', 'ksg1', 'knn-divergence', 'cmi-ksg', 'te-ksg', 'mi-kernel', 'lattice', 'gaussian'].map((id) =>
        takesDequantize(getEstimator(id)),
      ),
    ).toEqual([true, true, true, true, true, true, true, true, false, false]);
    expect(() => parseEstimatorSpec('histogram:dequantize=auto')).toThrow(UsageError);
    expect(() => parseEstimatorSpec('histogram:dequantize=auto')).toThrow(
      /not a setting of the histogram family; it applies to nearest-neighbour, kernel, spacing/,
    );
    expect(() => parseEstimatorSpec('kozachenko-leonenko:dequantize=-1')).toThrow(/dequantize=-1 is not allowed; give none, auto/);
  });
});

describe('a tuning grid keeps the harness settings of its base', () => {
  it('every point of kozachenko-leonenko:dequantize=auto,thin=2 is dequantized and thinned too', () => {
    const grid = tuningGrid(parseEstimatorSpec('kozachenko-leonenko:dequantize=auto,thin=2'), 0, 1000);
    expect(grid.length).toBeGreaterThan(1);
    for (const point of grid) {
      expect(point.configured.dequantize).toBe('auto');
      expect(point.configured.thin).toBe(2);
      expect(point.configured.spec).toMatch(/,dequantize=auto,thin=2$/);
    }
  });
});

describe('hhat estimate on inter-spike intervals logged to the microsecond (examples/spike-intervals.csv)', () => {
  it('exits 0 with the detected step and the estimators for recorded data, each labelled', async () => {
    const { code, out } = await runCli(['estimate', 'examples/spike-intervals.csv']);
    expect(code).toBe(0);
    expect(out).toMatch(/"interval_s": recorded to 6 decimal places, on a lattice of step 1e-6; \d+ of 10000 values tied/);
    expect(out).toMatch(/kozachenko-leonenko:dequantize=auto\s+│ jitter: uniform noise within the step/);
    expect(out).toMatch(/lattice\s+│ counts: discrete entropy of the recorded values/);
    expect(out).toContain('hhat advise examples/spike-intervals.csv');
    const json = await runCli(['estimate', 'examples/spike-intervals.csv', '--json']);
    const parsed = JSON.parse(json.out) as {
      recorded: { columns: { step: number; method: string }[]; estimates: { estimator: string; value: number | null }[] };
    };
    expect(parsed.recorded.columns[0]).toMatchObject({ step: 1e-6, method: 'decimal places' });
    const knn = parsed.recorded.estimates.find((e) => e.estimator.startsWith('kozachenko-leonenko'))!;
    // The gamma law of the intervals (shape 2, scale 0.01 s) has h = -3.02795 nats (SciPy gamma.entropy, printed by the generator script).
    expect(Math.abs(knn.value! - -3.027954521087)).toBeLessThan(0.1);
  });
});
