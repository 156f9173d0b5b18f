/**
 * Transfer entropy TE(X → Y) = I(Y_{t+1}; X_t^(l) | Y_t^(k)): the te-var1 truths, the te-ksg and te-gaussian
 * estimators, perturbations, the default plan and `hhat estimate --source-column --target-column`.
 *
 * Outside references: test/fixtures/transfer-entropy.json, written by test/fixtures/make_transfer_entropy_fixture.py
 * (NumPy and SciPy only): the stationary covariance by scipy.linalg.solve_discrete_lyapunov; TE(X → Y) and
 * TE(Y → X) from 10^6 steps simulated in NumPy, as ½ log of the ratio of least-squares residual variances
 * (numpy.linalg.lstsq) with a batch-means standard error; te-gaussian on fixed series by numpy.cov and
 * numpy.linalg.slogdet of the embedding's blocks (scipy.special.digamma for the bias term). This file also
 * simulates 10^6 steps with hhat's own sampler and regresses by hand (normal equations), to check the sampler.
 * test/fixtures/te-history.json, written by test/fixtures/make_te_history_fixture.py (NumPy and SciPy only): TE for
 * history lengths k and l from the lag covariances A^h Σ by Gaussian conditioning (numpy.linalg.solve).
 */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { configureEstimator, getEstimator, parseEstimatorSpec, runEstimator } from '../estimators/index.js';
import { historyNotes } from '../src/harness/target-notes.js';
import { embedTransfer } from '../estimators/transfer-entropy.js';
import type { Sample } from '../src/core/contracts.js';
import { EstimateError, UsageError } from '../src/core/errors.js';
import { replicateRng, rngFromSeed } from '../src/core/rng.js';
import { defaultPlan } from '../src/harness/default-plan.js';
import { parsePerturbation } from '../src/harness/perturb.js';
import { parseScenario } from '../scenarios/index.js';
import { discreteLyapunov2, spectralRadius2, var1Matrix } from '../scenarios/transfer-entropy.js';
import fixture from './fixtures/transfer-entropy.json' with { type: 'json' };
import historyFixture from './fixtures/te-history.json' with { type: 'json' };
import { runCli as run } from './helpers/cli.js';
import { validated } from './helpers/settings.js';

const teKsg = getEstimator('te-ksg');
const teGaussian = getEstimator('te-gaussian');

const specOf = (p: { a: number; b: number; cXY: number; cYX: number }, family = 'te-var1') => `${family}:a=${p.a},b=${p.b},cXY=${p.cXY},cYX=${p.cYX}`;

/** ½ log(residual variance of y+ on (1, own) / that on (1, own, other)), by the normal equations (centred moments). */
function regressionTe(future: Float64Array, own: Float64Array, other: Float64Array): number {
  const n = future.length;
  const mean = (v: Float64Array) => v.reduce((s, x) => s + x, 0) / n;
  const [mf, mo, mx] = [mean(future), mean(own), mean(other)];
  let sff = 0,
    soo = 0,
    sxx = 0,
    sfo = 0,
    sfx = 0,
    sox = 0;
  for (let i = 0; i < n; i++) {
    const f = future[i] - mf,
      o = own[i] - mo,
      x = other[i] - mx;
    sff += f * f;
    soo += o * o;
    sxx += x * x;
    sfo += f * o;
    sfx += f * x;
    sox += o * x;
  }
  const withoutSource = sff - (sfo * sfo) / soo;
  // Two regressors: residual = sff − bᵀ S b with b = S⁻¹ c.
  const det = soo * sxx - sox * sox;
  const withSource = sff - (sfo * (sxx * sfo - sox * sfx) + sfx * (soo * sfx - sox * sfo)) / det;
  return 0.5 * Math.log(withoutSource / withSource);
}

/** TE(source column → target column) of a 2-column series by regression, and its batch-means SE over `blocks`. */
function simulatedTe(data: Float64Array, n: number, source: number, target: number, blocks: number): { estimate: number; standardError: number } {
  const of = (from: number, to: number) => {
    const m = to - from - 1;
    const future = new Float64Array(m),
      own = new Float64Array(m),
      other = new Float64Array(m);
    for (let t = 0; t < m; t++) {
      future[t] = data[2 * (from + t + 1) + target];
      own[t] = data[2 * (from + t) + target];
      other[t] = data[2 * (from + t) + source];
    }
    return regressionTe(future, own, other);
  };
  const size = n / blocks;
  const parts = Array.from({ length: blocks }, (_, b) => of(b * size, (b + 1) * size));
  const mean = parts.reduce((s, v) => s + v, 0) / blocks;
  const sd = Math.sqrt(parts.reduce((s, v) => s + (v - mean) ** 2, 0) / (blocks - 1));
  return { estimate: of(0, n), standardError: sd / Math.sqrt(blocks) };
}

describe('te-var1: the stationary covariance and the exact transfer entropy', () => {
  it('the Lyapunov solution equals scipy.linalg.solve_discrete_lyapunov (fixture) to 1e-12, and the spectral radius numpy.linalg.eigvals', () => {
    for (const entry of fixture.lyapunov) {
      const matrix = var1Matrix(entry.params);
      const [sxx, sxy, syy] = discreteLyapunov2(matrix);
      const want = entry.covariance;
      expect(Math.abs(sxx - want[0][0]) / want[0][0]).toBeLessThan(1e-12);
      expect(Math.abs(sxy - want[0][1])).toBeLessThan(1e-12 * want[0][0]);
      expect(Math.abs(syy - want[1][1]) / want[1][1]).toBeLessThan(1e-12);
      expect(spectralRadius2(matrix)).toBeCloseTo(entry.spectralRadius, 12);
    }
  });

  it('TE(X → Y) (the truth) and TE(Y → X) (the facts) lie within 3 SE of a NumPy simulation of 10^6 steps (fixture)', () => {
    for (const entry of fixture.simulation) {
      const scenario = parseScenario(specOf(entry.params));
      for (const [got, want] of [
        [scenario.truth, entry.xToY],
        [scenario.transfer!.reverse, entry.yToX],
      ] as const) {
        expect(Math.abs(got - want.estimate), `${scenario.id}: ${got} vs ${want.estimate} ± ${want.standardError}`).toBeLessThan(3 * want.standardError);
      }
      const reverse = parseScenario(specOf(entry.params, 'te-var1-reverse'));
      expect(reverse.truth).toBe(scenario.transfer!.reverse);
      expect(reverse.transfer!.reverse).toBe(scenario.truth);
    }
  });

  it('with history lengths k and l the truth equals a NumPy conditional-variance computation (fixture te-history.json) to 1e-12, both directions', () => {
    for (const c of historyFixture.cases) {
      const spec = (family: string) => `${family}:a=${c.a},b=${c.b},cXY=${c.cXY},cYX=${c.cYX},history=${c.history},sourceHistory=${c.sourceHistory}`;
      const forward = parseScenario(spec('te-var1'));
      const backward = parseScenario(spec('te-var1-reverse'));
      expect(Math.abs(forward.truth - c.xToY), `${forward.id}: ${forward.truth} vs ${c.xToY}`).toBeLessThan(1e-12);
      expect(Math.abs(forward.transfer!.reverse - c.yToX), `${forward.id} reverse`).toBeLessThan(1e-12);
      expect(Math.abs(backward.truth - c.yToX), `${backward.id}`).toBeLessThan(1e-12);
    }
  });

  it('histories of 1 stay out of the id, so k = l = 1 scenarios keep theirs; others are part of it', () => {
    expect(parseScenario('te-var1:a=0.5,b=0.5,cXY=0.4,cYX=0,history=1,sourceHistory=1').id).toBe('te-var1:a=0.5,b=0.5,cXY=0.4,cYX=0');
    expect(parseScenario('te-var1:a=0.5,b=0.5,cXY=0.4,cYX=0,history=3').id).toBe('te-var1:a=0.5,b=0.5,cXY=0.4,cYX=0,history=3');
    expect(parseScenario('te-var1:sourceHistory=2').id).toBe('te-var1:a=0.5,b=0.5,cXY=0.4,cYX=0,sourceHistory=2');
    expect(() => parseScenario('te-var1:history=0')).toThrow(UsageError);
    expect(() => parseScenario('te-var1:history=1.5')).toThrow(UsageError);
  });

  it("hhat's own sampler: 10^6 steps of te-var1 give regression TE within 3 SE of the truth, both directions", () => {
    const scenario = parseScenario('te-var1:a=0.3,b=0.6,cXY=0.5,cYX=0.2');
    const n = 1_000_000;
    const { data } = scenario.sample(rngFromSeed('te-var1-million'), n);
    const forward = simulatedTe(data, n, 0, 1, 20);
    const backward = simulatedTe(data, n, 1, 0, 20);
    expect(Math.abs(forward.estimate - scenario.truth)).toBeLessThan(3 * forward.standardError);
    expect(Math.abs(backward.estimate - scenario.transfer!.reverse)).toBeLessThan(3 * backward.standardError);
  });

  it('the first row has the stationary law: over 4000 replicates its variances match Σ within 4 SE', () => {
    const scenario = parseScenario('te-var1:a=0.95,b=-0.4,cXY=0.2,cYX=0.1');
    const [[sxx], [, syy]] = scenario.transfer!.stationaryCovariance;
    let vx = 0,
      vy = 0;
    const reps = 4000;
    for (let r = 0; r < reps; r++) {
      const row = scenario.sample(replicateRng(3, scenario.id, 1, r), 1).data;
      vx += row[0] * row[0];
      vy += row[1] * row[1];
    }
    // The SE of a mean of squares of N(0, σ²) is σ²·sqrt(2/reps).
    expect(Math.abs(vx / reps - sxx)).toBeLessThan(4 * sxx * Math.sqrt(2 / reps));
    expect(Math.abs(vy / reps - syy)).toBeLessThan(4 * syy * Math.sqrt(2 / reps));
  });

  it('refuses a non-stationary process with one line naming the spectral radius (exit 2)', async () => {
    expect(() => parseScenario('te-var1:a=0.9,b=0.9,cXY=0.5,cYX=0.5')).toThrow(UsageError);
    expect(() => parseScenario('te-var1:a=0.9,b=0.9,cXY=0.5,cYX=0.5')).toThrow(/spectral radius of \[\[a, cYX\], \[cXY, b\]\] = 1\.4\b.*must be below 1/);
    const { code, err } = await run(['scenarios', 'te-var1:a=1,b=0,cXY=0,cYX=0']);
    expect(code).toBe(2);
    expect(err.trim().split('\n')).toHaveLength(1);
  });
});

describe('te-ksg and te-gaussian', () => {
  it('te-gaussian equals the NumPy computation on fixed series (fixture) to 1e-12, for several histories, both corrections', () => {
    for (const s of fixture.samples) {
      const sample: Sample = { n: s.n, dim: 2, data: Float64Array.from(s.data), xDim: 1 };
      for (const [key, want] of Object.entries(s.teGaussian)) {
        const [history, sourceHistory, correction] = key.split(',');
        const got = teGaussian.estimate(sample, validated(teGaussian, { history: Number(history), sourceHistory: Number(sourceHistory), correction }));
        expect(Math.abs(got - want), `${s.label} ${key}`).toBeLessThan(1e-12);
      }
    }
  });

  it('te-ksg is cmi-ksg on the embedding: the same value as cmi-ksg given the embedded rows as X | Y | Z', () => {
    const { data } = parseScenario('te-var1').sample(rngFromSeed('embed'), 400);
    const embedding = embedTransfer(data, 400, 2, 3);
    expect(embedding.rows).toBe(397);
    // Row 0 is t = 2: [Y_3, X_2, X_1, X_0, Y_2, Y_1].
    expect(Array.from(embedding.data.subarray(0, 6))).toEqual([data[7], data[4], data[2], data[0], data[5], data[3]]);
    const cmi = getEstimator('cmi-ksg').estimate(
      { n: embedding.rows, dim: 6, data: embedding.data, xDim: 1, yDim: 3 },
      validated(getEstimator('cmi-ksg'), { k: 5 }),
    );
    expect(teKsg.estimate({ n: 400, dim: 2, data, xDim: 1 }, validated(teKsg, { k: 5, history: 2, sourceHistory: 3 }))).toBe(cmi);
  });

  it('coupling X → Y only, n = 5000: TE(X → Y) within 0.03 nats of the truth on each of 4 replicates; TE(Y → X) within 0.02 of 0 on their mean', () => {
    const forward = parseScenario('te-var1:a=0.5,b=0.5,cXY=0.4,cYX=0');
    const backward = parseScenario('te-var1-reverse:a=0.5,b=0.5,cXY=0.4,cYX=0');
    expect(backward.truth).toBe(0);
    for (const estimator of [teKsg, teGaussian]) {
      let reverseSum = 0;
      for (let r = 0; r < 4; r++) {
        const there = estimator.estimate(forward.sample(replicateRng(17, forward.id, 5000, r), 5000), validated(estimator));
        expect(Math.abs(there - forward.truth), `${estimator.id} X → Y, replicate ${r}: ${there}`).toBeLessThan(0.03);
        const back = estimator.estimate(backward.sample(replicateRng(17, backward.id, 5000, r), 5000), validated(estimator));
        expect(Math.abs(back), `${estimator.id} Y → X, replicate ${r}: ${back}`).toBeLessThan(0.03);
        reverseSum += back;
      }
      expect(Math.abs(reverseSum / 4), `${estimator.id}: mean TE(Y → X)`).toBeLessThan(0.02);
    }
  });

  it('with copula=rank, both give bit-identical values after an increasing map of each series', () => {
    const sample = parseScenario('te-var1').sample(rngFromSeed('rank'), 500);
    const mapped: Sample = { ...sample, data: sample.data.map((v, i) => (i % 2 === 0 ? Math.exp(v) : v * v * v + v)) };
    for (const estimator of [teKsg, teGaussian]) {
      const settings = validated(estimator, { copula: 'rank' });
      expect(estimator.estimate(mapped, settings)).toBe(estimator.estimate(sample, settings));
    }
  });

  it('refuses a series too short for the embedding as an EstimateError naming the rows needed', () => {
    const sample = parseScenario('te-var1').sample(rngFromSeed('short'), 6);
    expect(() => teKsg.estimate(sample, validated(teKsg, { k: 4, history: 2 }))).toThrow(EstimateError);
    expect(() => teKsg.estimate(sample, validated(teKsg, { k: 4, history: 2 }))).toThrow(/at least 7 rows/);
    expect(() => teGaussian.estimate(sample, validated(teGaussian, { history: 3, sourceHistory: 2 }))).toThrow(/at least 10 rows/);
    expect(() => teGaussian.estimate({ ...sample, n: 0 }, validated(teGaussian))).toThrow(EstimateError);
  });

  // Found by a tester: te-ksg answered from 19 embedded points in 41 dimensions.
  it('te-ksg needs more embedded points than embedding dimensions', () => {
    const n = 39;
    const data = new Float64Array(2 * n);
    const rng = rngFromSeed('short te series');
    for (let i = 0; i < 2 * n; i++) data[i] = rng();
    expect(() => runEstimator(configureEstimator('te-ksg', { history: 20, sourceHistory: 20 }), { n, dim: 2, xDim: 1, data })).toThrow(
      /te-ksg: a series of 39 rows gives 19 embedded rows .*a 41-dimensional embedding \(more points than dimensions\) needs at least 42, so at least 62 rows/,
    );
  });

  it('thin=t is refused for transfer entropy (every t-th row is another process)', () => {
    expect(() => configureEstimator('te-ksg', { thin: 2 })).toThrow(/thin=2 is not allowed for transfer entropy: every 2nd row of a series/);
    expect(() => configureEstimator('te-ksg', { thin: 11 })).toThrow(/every 11th row/);
    expect(() => configureEstimator('te-ksg', { thin: 23 })).toThrow(/every 23rd row/);
    expect(configureEstimator('te-ksg', { thin: 1 }).thin).toBe(1);
  });
});

describe('perturbations and the default plan', () => {
  const scenario = parseScenario('te-var1');

  it('rescale and monotone maps of either series leave the truth (shift 0); affine is skipped; quantize leaves it unknown', () => {
    for (const spec of ['rescale:c=1000', 'monotone:map=asinh,part=x', 'monotone:map=cubic,part=y']) {
      const prepared = parsePerturbation(spec).prepare(scenario);
      if ('skip' in prepared) throw new Error(prepared.skip);
      expect(prepared.shift, spec).toBe(0);
      expect(prepared.shiftSource).toMatch(/TE\(X → Y\)/);
    }
    expect(parsePerturbation('affine:condition=10').prepare(scenario)).toHaveProperty('skip');
    const quantized = parsePerturbation('quantize:step=0.1').prepare(scenario);
    expect('skip' in quantized ? undefined : quantized.shift).toBeNull();
  });

  it('the default plan: both estimators, four te-var1 settings (zero coupling among them), n = 500 and 5000, no tuning grids', () => {
    const plan = defaultPlan('transfer-entropy');
    expect(plan.estimators).toEqual(['te-ksg', 'te-gaussian']);
    expect(plan.sampleSizes).toEqual([500, 5000]);
    expect(plan.scenarios).toHaveLength(4);
    expect(plan.scenarios.map((s) => parseScenario(s).truth)).toContain(0);
    expect(plan.robustness).toMatchObject({ tuning: false });
  });
});

describe('hhat estimate SERIES --source-column --target-column [--history k[,l]]', () => {
  // Two greenhouse loggers: the heater-side one drives the plant-side one, one step later; a text column beside.
  const scenario = parseScenario('te-var1:a=0.6,b=0.5,cXY=0.5,cYX=0');
  const { data } = scenario.sample(rngFromSeed('greenhouse'), 2000);
  const file = join(mkdtempSync(join(tmpdir(), 'hhat-te-file-')), 'loggers.csv');
  const lines = Array.from({ length: 2000 }, (_, t) => `${t},${20 + data[2 * t + 1]},${18 + data[2 * t]}`);
  writeFileSync(file, ['minute,plant,heater', ...lines].join('\n'));

  it('prints both directions; the te-gaussian values equal the estimator on the columns, each way', async () => {
    const { code, out, err } = await run(['estimate', file, '--source-column', 'heater', '--target-column', 'plant', '--estimator', 'te-gaussian', '--json']);
    expect(err).toBe('');
    expect(code).toBe(0);
    const parsed = JSON.parse(out) as { quantity: string; estimates: { direction: string; value: number }[] };
    expect(parsed.quantity).toBe('transfer-entropy');
    expect(parsed.estimates.map((e) => e.direction)).toEqual(['TE(heater → plant)', 'TE(plant → heater)']);
    const series: Sample = { n: 2000, dim: 2, data: Float64Array.from(data, (v, i) => v + (i % 2 === 0 ? 18 : 20)), xDim: 1 };
    const swapped: Sample = { ...series, data: Float64Array.from(series.data, (_, i) => series.data[i % 2 === 0 ? i + 1 : i - 1]) };
    expect(parsed.estimates[0].value).toBeCloseTo(teGaussian.estimate(series, validated(teGaussian)), 12);
    expect(parsed.estimates[1].value).toBeCloseTo(teGaussian.estimate(swapped, validated(teGaussian)), 12);
    const text = await run(['estimate', file, '--source-column', '3', '--target-column', '2', '--history', '2,1']);
    expect(text.code).toBe(0);
    expect(text.out).toMatch(/te-ksg +│ TE\(heater → plant\) │ k=4, history=2, sourceHistory=1, copula=none/);
    expect(text.out).toMatch(/te-gaussian +│ TE\(plant → heater\)/);
  });

  it('mistakes are one line with exit code 2', async () => {
    const cases: [string[], RegExp][] = [
      [['--source-column', '3'], /^hhat: transfer entropy needs both --source-column and --target-column$/],
      [['--source-column', '3', '--target-column', '3'], /both name column "3"; source and target must be different columns$/],
      [['--source-column', '2-3', '--target-column', '1'], /--source-column 2-3 is not allowed; give one column/],
      [['--source-column', '3', '--target-column', '2', '--history', '0'], /--history 0 is not allowed; give k or k,l, whole numbers from 1 to 50/],
      [['--history', '2'], /--history applies to transfer entropy/],
      [['--source-column', '3', '--target-column', '2', '--x-columns', '1'], /--x-columns cannot be combined with --source-column\/--target-column/],
      [
        ['--source-column', '3', '--target-column', '2', '--estimator', 'ksg1'],
        /^hhat: ksg1 estimates mutual-information, but this call asks for transfer-entropy/,
      ],
      [['--source-column', '3', '--target-column', '2', '--estimator', 'te-ksg:thin=3'], /thin=3 is not allowed for transfer entropy/],
      [['--source-column', '3', '--target-column', '2', '--max-seconds', '5'], /--max-seconds cannot be used with --source-column/],
    ];
    for (const [args, message] of cases) {
      const { code, err } = await run(['estimate', file, ...args]);
      expect(code, args.join(' ')).toBe(2);
      expect(err.trim().split('\n'), args.join(' ')).toHaveLength(1);
      expect(err.trim(), args.join(' ')).toMatch(message);
    }
  });

  it('hhat draw names the columns x1 (source) and y1 (target)', async () => {
    const out = join(mkdtempSync(join(tmpdir(), 'hhat-te-draw-')), 'series.csv');
    const result = await run(['draw', 'te-var1', '--n', '5', '--out', out]);
    expect(result.code).toBe(0);
    expect(result.out).toMatch(/\(transfer-entropy, d = 2: a time series, rows in time order; source x1, target y1\)/);
    expect(readFileSync(out, 'utf8').split('\n')[0]).toBe('x1,y1');
  });
});

describe('a plan whose transfer-entropy estimator aims at other histories than a scenario states', () => {
  const scenarios = ['te-var1:a=0.3,b=0.6,cXY=0.5,cYX=0.2', 'te-var1:a=0.5,b=0.5,cXY=0,cYX=0', 'te-var1:a=0.3,b=0.6,cXY=0.5,cYX=0.2,history=3'].map((s) =>
    parseScenario(s),
  );
  const notesFor = (spec: string, on = scenarios) => historyNotes(on, [parseEstimatorSpec(spec)]);

  it("gets a note naming the estimator's own target (NumPy fixture value at k = 3) and the spec that states it", () => {
    const [note, ...rest] = notesFor('te-gaussian:history=3,sourceHistory=3');
    expect(rest).toEqual([]);
    const k3 = historyFixture.cases.find((c) => c.a === 0.3 && c.cYX === 0.2 && c.history === 3 && c.sourceHistory === 3)!;
    expect(note).toContain(`against ${Number(k3.xToY.toPrecision(5))} at the estimator's histories`);
    expect(note).toContain('te-var1:a=0.3,b=0.6,cXY=0.5,cYX=0.2 states its truth for k = 1, l = 1');
    expect(note).toMatch(/benchmark te-var1:a=0\.3,b=0\.6,cXY=0\.5,cYX=0\.2,history=3,sourceHistory=3$/);
  });
  it('gets none where the target does not change: only the source history differs, an uncoupled target, or the scenario states the same k', () => {
    expect(notesFor('te-ksg:sourceHistory=4', [scenarios[0], scenarios[1]])).toEqual([]);
    expect(notesFor('te-gaussian:history=3', [scenarios[1], scenarios[2]])).toEqual([]);
    expect(notesFor('te-gaussian')).toHaveLength(1); // k = 1 against the scenario stated for k = 3
  });
});
