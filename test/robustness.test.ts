/**
 * Robustness: perturbations with exact truth shifts, unit drift, tuning grids, verdicts, and entropy relative
 * to a reference density. References: closed forms (digamma from @stdlib), determinants from ml-matrix,
 * trapezoid rules and quadrature written in the test.
 */
import { describe, expect, it } from 'vitest';
import { Matrix, determinant } from 'ml-matrix';
import digamma from '@stdlib/math-base-special-digamma';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun, cellKey, runFileErrors, toJson, type RunFile } from '../src/analysis/results.js';
import { parsePerturbation, type PreparedPerturbation } from '../src/harness/perturb.js';
import { parseScenario } from '../scenarios/index.js';
import { replicateRng } from '../src/core/rng.js';
import { parseEstimatorSpec, runEstimator } from '../estimators/index.js';
import { meanLogReference, parseReference, rescaleReference } from '../src/analysis/reference.js';
import { integrate } from '../src/math/quadrature.js';
import { convertEntropy, unitFactor } from '../src/core/units.js';
import { quantizationThreshold } from '../src/analysis/robustness.js';
import { robustnessText } from '../src/views/verdict-text.js';
import { robustnessTable } from '../src/views/tables.js';

function prepared(spec: string, scenario: string): PreparedPerturbation {
  const p = parsePerturbation(spec).prepare(parseScenario(scenario));
  if ('skip' in p) throw new Error(p.skip);
  return p;
}

async function run(input: Parameters<typeof resolvePlan>[0]): Promise<RunFile> {
  return assembleRun(await runPlan(resolvePlan(input).plan, { workers: 1 }), null);
}

describe('exact shifts of the true value', () => {
  it('rescale: d·log|c|', () => {
    expect(prepared('rescale:c=-1000', 'gaussian:dim=3').shift).toBeCloseTo(3 * Math.log(1000), 13);
  });

  it('monotone exp of N(0.7, 0.5²) shifts by the mean 0.7 (E[log e^X] = E[X])', () => {
    expect(prepared('monotone:map=exp', 'normal:mu=0.7,sigma=0.5').shift).toBeCloseTo(0.7, 11);
  });

  it('monotone log of Gamma(3) shifts by E[−log X] = −ψ(3) (digamma from @stdlib)', () => {
    expect(prepared('monotone:map=log', 'gamma:shape=3,scale=1').shift).toBeCloseTo(-digamma(3), 10);
  });

  it('monotone asinh on a 2-D Gaussian: Σ_j E[−½ log(1 + X_j²)], each by an independent trapezoid rule', () => {
    // Marginals of gaussian:dim=2,spread=4: SDs 1 and 4. Trapezoid on the line converges geometrically here.
    const expected = [1, 4].reduce((total, sigma) => {
      let sum = 0;
      const step = 1e-3 * sigma;
      for (let i = -60000; i <= 60000; i++) {
        const x = i * step;
        sum += Math.exp(-0.5 * (x / sigma) ** 2) * -0.5 * Math.log1p(x * x);
      }
      return total + (sum * step) / (sigma * Math.sqrt(2 * Math.PI));
    }, 0);
    expect(prepared('monotone:map=asinh', 'gaussian:dim=2,rho=0.3,spread=4').shift).toBeCloseTo(expected, 9);
  });

  it('affine: log|det A|, with A recovered from the map and its determinant from ml-matrix', () => {
    const p = prepared('affine:condition=10,scale=2', 'gaussian:dim=3');
    // Apply the map to 0 and to the unit vectors: columns of A are f(e_j) − f(0).
    const points = new Float64Array([0, 0, 0, 1, 0, 0, 0, 1, 0, 0, 0, 1]);
    p.apply({ n: 4, dim: 3, data: points }, 0, 0);
    const a = Matrix.zeros(3, 3);
    for (let j = 0; j < 3; j++) for (let r = 0; r < 3; r++) a.set(r, j, points[(j + 1) * 3 + r] - points[r]);
    expect(p.shift).toBeCloseTo(Math.log(Math.abs(determinant(a))), 12);
    expect(p.shift).toBeCloseTo(3 * Math.log(2), 12);
  });

  it('quantize writes a value rounded to zero from below as +0, never −0 (as recorded data would hold it)', () => {
    const data = Float64Array.of(-0.04, 0.04, -0.06, -0, 0.26);
    prepared('quantize:step=0.1', 'normal').apply({ n: 5, dim: 1, data }, 0, 0);
    expect(Array.from(data, (v) => Object.is(v, -0))).toEqual([false, false, false, false, false]);
    expect(Array.from(data)).toEqual([0, 0, -0.1, 0, 0.30000000000000004]);
  });

  it('quantize and contaminate leave the truth in place; perturbations that cannot apply say why', () => {
    expect(prepared('quantize:step=0.1', 'normal').shift).toBeNull();
    expect(prepared('contaminate:fraction=0.05', 'normal').shift).toBeNull();
    expect(parsePerturbation('monotone:map=log').prepare(parseScenario('normal'))).toEqual({ skip: expect.stringMatching(/positive support/) });
    expect(() => parsePerturbation('rescale:c=0')).toThrow(/c=0 is not allowed; c must be a nonzero number/);
    expect(() => parsePerturbation('blur')).toThrow(/unknown perturbation "blur"/);
  });

  it("mutual information: part=y touches only the columns after the scenario's xDim, and the truth stays", () => {
    const p = prepared('rescale:c=10,part=y', 'mi-gaussian:dimX=2,dimY=1');
    expect(p.shift).toBe(0);
    const data = new Float64Array([1, 2, 3, 4, 5, 6]);
    p.apply({ n: 2, dim: 3, data, xDim: 2 }, 0, 0);
    expect(Array.from(data)).toEqual([1, 2, 30, 4, 5, 60]);
    expect(parsePerturbation('affine').prepare(parseScenario('mi-gaussian'))).toEqual({ skip: expect.stringMatching(/mixes X and Y/) });
  });
});

describe('unit drift under rescale', () => {
  it('is 0 to rounding for Kozachenko–Leonenko, the spacing estimators and data-driven histograms; a fixed-width histogram drifts and the table says so', async () => {
    const result = await run({
      scenarios: ['normal', 'exponential', 'gaussian:dim=2,rho=0.5'],
      estimators: [
        'kozachenko-leonenko',
        'kozachenko-leonenko:norm=max',
        'vasicek',
        'van-es',
        'ebrahimi',
        'correa',
        'histogram',
        'histogram:bins=sturges',
        'histogram:width=0.25',
      ],
      sampleSizes: [300],
      replicates: 6,
      seed: 11,
      robustness: { perturbations: ['rescale:c=0.001', 'rescale:c=0.1', 'rescale:c=10', 'rescale:c=1000'], tuning: false },
    });
    const section = result.robustness!;
    const rescaled = section.measures.filter((m) => m.kind === 'rescale');
    expect(rescaled.length).toBe(4 * (2 * 9 + 5)); // 1-D scenarios: all 9 estimators; 2-D: the 5 that are not spacing
    for (const m of rescaled) {
      if (m.estimator.includes('width=0.25')) continue;
      expect(m.drift.value, `${m.estimator} on ${m.scenario} under ${m.perturbation}`).toBeLessThan(1e-9);
    }
    const fixed = rescaled.filter((m) => m.estimator.includes('width=0.25'));
    for (const m of fixed) expect(m.drift.value).toBeGreaterThan(1e-3);
    const row = (spec: string) => section.table.find((r) => r.estimator.startsWith(spec))!;
    expect(row('kozachenko-leonenko:k=3,norm=euclidean').columns.rescale.verdict).toBe('pass');
    expect(row('vasicek').columns.rescale.verdict).toBe('pass');
    expect(row('histogram:bins=freedman-diaconis').columns.rescale.verdict).toBe('pass');
    expect(row('histogram:bins=freedman-diaconis,scale=1,width=0.25').columns.rescale.verdict).toBe('fail');
    expect(robustnessTable(result)).toMatch(/histogram:width=0.25 +│ +fail/);
  });
});

describe('monotone and affine perturbations in the table', () => {
  it('report the bias change with its Monte-Carlo error for every estimator', async () => {
    const result = await run({
      scenarios: ['normal', 'gaussian:dim=2,rho=0.5'],
      estimators: ['kozachenko-leonenko', 'kernel', 'histogram', 'gaussian', 'ebrahimi'],
      sampleSizes: [200],
      replicates: 8,
      seed: 5,
      robustness: { perturbations: ['monotone:map=asinh', 'affine:condition=10,scale=1'], tuning: false },
    });
    for (const row of result.robustness!.table) {
      for (const column of ['monotone', 'affine']) {
        expect(row.columns[column].verdict, `${row.estimator} ${column}`).not.toBe('n/a');
        expect(row.columns[column].detail).toMatch(/bias change up to -?[0-9.e-]+ ± [0-9.e-]+ nats/);
      }
    }
    // The gaussian estimator is affine-equivariant: its paired change under an affine map is 0 to rounding.
    const gaussianAffine = result.robustness!.measures.filter((m) => m.estimator.startsWith('gaussian') && m.kind === 'affine');
    for (const m of gaussianAffine) expect(Math.abs(m.change.value)).toBeLessThan(1e-9);
  });
});

describe('quantization and tuning', () => {
  it('values in nats follow --bits, and show the SDs their verdict is judged in', () => {
    // 0.29 nats = 0.29/ln 2 = 0.418 bits; 4.37 nats = 6.30 bits (by hand).
    expect(robustnessText('contaminate', 'fail', 0.29, undefined, { base: 'bits', sd: 10.2 })).toBe('fail 0.42 bits (10 SD)');
    expect(robustnessText('contaminate', 'warn', 0.056, undefined, { sd: 2.04 })).toBe('warn 0.056 nats (2.0 SD)');
    expect(robustnessText('rescale', 'fail', 4.37, undefined, { base: 'bits', sd: 190 })).toBe('fail 6.3 bits (190 SD)');
    // A passing drift is judged in nats (exact to rounding): no SDs.
    expect(robustnessText('rescale', 'pass', 7e-16, undefined, { sd: 1e-14 })).toBe('pass 7e-16 nats');
    expect(robustnessText('monotone', 'warn', 0.46, undefined, { base: 'bits' })).toBe('warn 0.46 SD');
  });

  it('the quantization threshold is the largest step before the bias moves by 0.25 SD or an estimate fails, whatever the replicate count', () => {
    const base = {
      scenario: 's',
      estimator: 'e',
      perturbation: 'q',
      kind: 'quantize' as const,
      shift: null,
      drift: { value: 0, se: 0 },
      discreteEntropy: null,
      sd: 0.1,
      biasSe: 0.01,
    };
    const levels = [
      { ...base, level: 0.001, change: { value: 0.001, se: 1e-4 }, failures: 0 },
      { ...base, level: 0.01, change: { value: 0.015, se: 1e-3 }, failures: 0 },
      { ...base, level: 0.1, change: { value: 0.05, se: 1e-3 }, failures: 0 },
    ];
    // 0.25 × SD 0.1 = 0.025 (by hand): 0.015 is below it, 0.05 is not.
    expect(quantizationThreshold(levels)).toBe(0.01);
    expect(quantizationThreshold([{ ...levels[0], failures: 2 }, levels[1]])).toBe(0);
    // Few replicates (a bias SE of 0.05) make no change look small: 0.05 is still twice the threshold. A rule
    // "within 2 Monte-Carlo SE" would have passed it, and passed more the fewer the replicates.
    expect(quantizationThreshold(levels.map((m) => ({ ...m, biasSe: 0.05 })))).toBe(0.01);
  });

  it('tuning grids run on the same draws, and the spread is (max − min of the means)/SD', async () => {
    const result = await run({
      scenarios: ['normal'],
      estimators: ['kozachenko-leonenko', 'histogram', 'vasicek', 'kernel'],
      sampleSizes: [400],
      replicates: 8,
      seed: 3,
      robustness: { perturbations: [], tuning: true },
    });
    // Main and tuning cells share scenario, n and perturbation; their estimator specs alone tell them apart.
    expect(new Set(result.cells.map(cellKey)).size).toBe(result.cells.length);
    const curves = result.robustness!.tuning;
    const kl = curves.find((c) => c.estimator.startsWith('kozachenko-leonenko') && c.setting === 'k')!;
    expect(kl.points.map((p) => p.value)).toEqual([1, 2, 3, 4, 5, 6, 7, 8, 9, 10]);
    const means = kl.points.map((p) => p.mean.value);
    const sd = result.cells.find((c) => c.role === 'main' && c.estimator.startsWith('kozachenko-leonenko'))!.scores.sd.value;
    expect(kl.spread).toBeCloseTo((Math.max(...means) - Math.min(...means)) / sd, 12);
    // The k = 3 point is the plan's own cell: identical estimates, not a second run.
    expect(kl.points.find((p) => p.value === 3)!.mean.value).toBe(
      result.cells.find((c) => c.role === 'main' && c.estimator.startsWith('kozachenko-leonenko'))!.scores.mean.value,
    );
    expect(curves.some((c) => c.estimator.startsWith('histogram') && c.setting === 'bins')).toBe(true);
    expect(curves.some((c) => c.estimator.startsWith('histogram') && c.setting === 'scale')).toBe(true);
    expect(curves.some((c) => c.estimator.startsWith('kernel') && c.setting === 'scale')).toBe(true);
    expect(curves.find((c) => c.estimator.startsWith('vasicek'))!.points.map((p) => p.value)).toEqual([10, 14, 20, 28, 40]);
  });
});

describe('entropy relative to a reference density', () => {
  const scenario = parseScenario('gaussian:dim=2,rho=0.6,spread=3');
  const sample = scenario.sample(replicateRng(1, scenario.id, 2000, 0), 2000);
  const kl = parseEstimatorSpec('kozachenko-leonenko');
  const scaled = (c: number) => ({ ...sample, data: sample.data.map((v) => v * c) });

  it('does not move under rescale when m is carried along, while plain entropy moves by the exact shift', () => {
    for (const text of ['unit:0.5', 'uniform:-40,40', 'gaussian']) {
      const reference = parseReference(text);
      const plain = runEstimator(kl, sample).value;
      const relative = plain + meanLogReference(reference, sample);
      for (const c of [1e-3, 0.1, 10, 1e3]) {
        const plainScaled = runEstimator(kl, scaled(c)).value;
        expect(plainScaled - plain).toBeCloseTo(2 * Math.log(c), 9);
        const relativeScaled = plainScaled + meanLogReference(rescaleReference(reference, c), scaled(c));
        expect(Math.abs(relativeScaled - relative), `${text}, c = ${c}`).toBeLessThan(1e-9);
      }
    }
  });

  it('relative to the fitted Gaussian, is unchanged by affine maps for the affine-equivariant gaussian estimator', () => {
    const gaussian = parseEstimatorSpec('gaussian');
    const reference = parseReference('gaussian');
    const before = runEstimator(gaussian, sample).value + meanLogReference(reference, sample);
    const p = prepared('affine:condition=30,scale=3', scenario.id);
    const moved = { ...sample, data: Float64Array.from(sample.data) };
    p.apply(moved, 0, 0);
    const plainShift = runEstimator(gaussian, moved).value - runEstimator(gaussian, sample).value;
    expect(plainShift).toBeCloseTo(p.shift!, 9);
    expect(runEstimator(gaussian, moved).value + meanLogReference(reference, moved)).toBeCloseTo(before, 9);
  });

  it('its true value is invariant under a monotone map with m carried along (quadrature in both coordinates)', () => {
    // ρ = Gamma(3), m = Exponential(1): −KL(ρ‖m) by quadrature. After y = log x, the densities become
    // ρ_Y(y) = ρ(e^y)e^y and m_Y(y) = m(e^y)e^y; integrate again in y. Plain entropy moves by E[log g′] = −ψ(3).
    const gammaLog = (x: number) => 2 * Math.log(x) - x - Math.log(2);
    const expLog = (x: number) => -x;
    const inX = integrate((x) => (x > 0 ? Math.exp(gammaLog(x)) * (expLog(x) - gammaLog(x)) : 0), 0, Infinity, { absTol: 1e-13 });
    const inY = integrate(
      (y) => {
        const x = Math.exp(y);
        if (x === 0 || x === Infinity) return 0;
        const rhoY = gammaLog(x) + y;
        const mY = expLog(x) + y;
        return Math.exp(rhoY) * (mY - rhoY);
      },
      -Infinity,
      Infinity,
      { absTol: 1e-13 },
    );
    expect(inY.value).toBeCloseTo(inX.value, 10);
    const hX = integrate((x) => (x > 0 ? -Math.exp(gammaLog(x)) * gammaLog(x) : 0), 0, Infinity, { absTol: 1e-13 }).value;
    const hY = integrate(
      (y) => {
        const x = Math.exp(y);
        if (x === 0 || x === Infinity) return 0;
        return -Math.exp(gammaLog(x) + y) * (gammaLog(x) + y);
      },
      -Infinity,
      Infinity,
      { absTol: 1e-13 },
    ).value;
    expect(hY - hX).toBeCloseTo(-digamma(3), 10);
  });

  it('bad references are one-line errors; points outside a uniform box are refused, not −∞', () => {
    expect(() => parseReference('unit:0')).toThrow(/unit:W with a bin width W > 0/);
    expect(() => parseReference('uniform:3,1')).toThrow(/a < b/);
    expect(() => parseReference('lebesgue')).toThrow(/use unit:W, uniform:a,b or gaussian/);
    expect(() => meanLogReference(parseReference('uniform:-1,1'), sample)).toThrow(/outside the box/);
  });
});

describe('units', () => {
  it('convert by d·log(old/new): millimetres to metres in 3-D subtracts 3·log 1000', () => {
    expect(unitFactor('mm', 'm')).toBeCloseTo(1e-3, 18);
    expect(convertEntropy(1.5, 3, unitFactor('mm', 'm'))).toBeCloseTo(1.5 - 3 * Math.log(1000), 12);
    expect(() => unitFactor('mm', 's')).toThrow(/same kind/);
  });

  it('hhat convert: a value or factor beyond the double range is named as typed, exit 2', async () => {
    const { runCli } = await import('./helpers/cli.js');
    for (const [args, line] of [
      [['convert', '1e400', '--factor', '2'], 'hhat: 1e400 is beyond the range of a double (about ±1.8e308); give the entropy value to convert'],
      [['convert', '1', '--factor', '1e400'], 'hhat: --factor 1e400 is beyond the range of a double (about ±1.8e308)'],
      // Found by a tester: this read "the factor 0 is not allowed".
      [
        ['convert', '2.31', '--factor', '1e-400'],
        'hhat: --factor 1e-400 is below the smallest double (about 5e-324) and reads as 0; it must be a finite nonzero number',
      ],
      [['convert', '2.31', '--factor', '0.0'], 'hhat: the factor 0 is not allowed; it must be a finite nonzero number'],
    ] as const) {
      const { code, err } = await runCli([...args]);
      expect({ code, err: err.trim() }).toEqual({ code: 2, err: line });
    }
    // A large factor is exact: 1 + log(1e20) nats.
    const { out } = await runCli(['convert', '1', '--factor', '1e20']);
    expect(out).toMatch(/^47\.05170186 nats/);
  });
});

describe('an estimator that fails on every unperturbed draw of a scenario', () => {
  it('leaves that scenario out of its verdicts and the run file still reads back (a regression: the SD was written as null)', async () => {
    // mi-from-entropies fails on mi-uniform-window (X takes a few values: tied points have no neighbour distance)
    // and succeeds on mi-gaussian; the rescale verdict is judged on mi-gaussian alone.
    const result = await run({
      quantity: 'mutual-information',
      scenarios: ['mi-gaussian:rho=0.5', 'mi-uniform-window:m=2'],
      estimators: ['mi-from-entropies', 'ksg1'],
      sampleSizes: [100],
      replicates: 4,
      seed: 3,
      robustness: { perturbations: ['rescale:c=1000', 'monotone:map=asinh,part=x'], tuning: false },
    });
    const row = result.robustness!.table.find((r) => r.estimator.startsWith('mi-from-entropies'))!;
    const unperturbed = result.cells.find((c) => c.role === 'main' && c.estimator === row.estimator && c.scenario.startsWith('mi-uniform-window'))!;
    expect(unperturbed.estimates.every((v) => v === null)).toBe(true);
    expect(row.columns.rescale.verdict).toBe('pass');
    expect(row.columns.rescale.detail).toMatch(/1 scenario not judged \(the estimator failed unperturbed\)/);
    expect(Number.isFinite(row.columns.rescale.sd)).toBe(true);
    const reread = JSON.parse(toJson(result)) as unknown;
    expect(runFileErrors(reread)).toBeNull();
  });
});
