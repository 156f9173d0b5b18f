/**
 * recorded[step=Δ;SPEC]: the exact discrete entropy of the recorded values and the survival functions it uses in
 * the upper tail against SciPy (test/fixtures/make_recorded_fixture.py), the drawn values on the lattice and at the
 * cell frequencies of the base CDF.
 */
import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Ajv2020 } from 'ajv/dist/2020.js';
import chisquareCdf from '@stdlib/stats-base-dists-chisquare-cdf';
import { describe, expect, it } from 'vitest';
import { parseScenario } from '../scenarios/index.js';
import { upperQuantileOf } from '../scenarios/build.js';
import { drawReplicate, replicateRng } from '../src/core/rng.js';
import { parseDelimited } from '../src/data/index.js';
import { runCli } from './helpers/cli.js';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun, writeRunFile, type RunFile } from '../src/analysis/results.js';
import runSchema from '../src/schemas/run.schema.json' with { type: 'json' };

const fixture = JSON.parse(readFileSync(new URL('./fixtures/recorded.json', import.meta.url), 'utf8')) as {
  cases: { base: string; step: number; discreteEntropy: number; latticeEntropy: number }[];
  survival: { base: string; x: number; sf: number }[];
};

describe('recorded[...] discrete entropy against SciPy (cell sums of scipy.stats cdf/sf)', () => {
  for (const c of fixture.cases) {
    it(`${c.base} at step ${c.step}`, () => {
      const scenario = parseScenario(`recorded[step=${c.step};${c.base}]`);
      expect(Math.abs(scenario.recorded!.discreteEntropy! - c.discreteEntropy)).toBeLessThanOrEqual(1e-10);
      expect(Math.abs(scenario.recorded!.latticeEntropy! - c.latticeEntropy)).toBeLessThanOrEqual(1e-10);
      expect(scenario.truth).toBe(parseScenario(c.base).truth);
    });
  }
});

describe('survival functions against scipy.stats sf, median to the 1e-17 upper quantile', () => {
  const bases = [...new Set(fixture.survival.map((c) => c.base))];
  it(`every law of the fixture (${bases.length}) states one, to 1e-12 relative`, () => {
    for (const base of bases) {
      const density = parseScenario(base).univariate!;
      expect(density.survival, base).toBeTypeOf('function');
      for (const c of fixture.survival.filter((x) => x.base === base)) {
        expect(Math.abs(density.survival!(c.x) - c.sf), `${base} at ${c.x}`).toBeLessThanOrEqual(1e-12 * c.sf);
      }
    }
  });

  it('the upper 1e-17 quantile comes from the survival function (1 − 1e-17 rounds to 1)', () => {
    for (const base of ['normal', 'lognormal', 'gamma:shape=2,scale=1', 'student-t:nu=3,mu=0,sigma=1']) {
      const density = parseScenario(base).univariate!;
      const x = upperQuantileOf(density)(1e-17);
      expect(Math.abs(density.survival!(x) / 1e-17 - 1), base).toBeLessThan(1e-9);
    }
    // SciPy: norm.isf(1e-17) = 8.4937932241095968 (the fixture's normal point at q = 1e-17).
    const point = fixture.survival.find((c) => c.base === 'normal:mu=0,sigma=1' && c.sf < 2e-17)!;
    expect(Math.abs(upperQuantileOf(parseScenario('normal').univariate!)(1e-17) - point.x)).toBeLessThan(1e-12);
  });
});

describe('hhat scenarios on recorded[...]', () => {
  it("--json states the lattice and the recorded values' own entropy, in the unit asked for", async () => {
    const { code, out } = await runCli(['scenarios', '--json', '--bits', 'recorded[step=0.1;normal]']);
    expect(code).toBe(0);
    const [record] = JSON.parse(out) as { recorded: { steps: number[]; discreteEntropy: number; latticeEntropy: number } }[];
    const c = fixture.cases.find((x) => x.base === 'normal:mu=0,sigma=1' && x.step === 0.1)!;
    expect(record.recorded.steps).toEqual([0.1]);
    expect(Math.abs(record.recorded.discreteEntropy - c.discreteEntropy / Math.LN2)).toBeLessThan(1e-10);
    expect(Math.abs(record.recorded.latticeEntropy - c.latticeEntropy / Math.LN2)).toBeLessThan(1e-10);
  });
});

describe('recorded[...] draws', () => {
  it('are on the lattice, the doubles that decimal text gives, at the cell frequencies of the base (Pearson chi-square, level 0.001)', () => {
    const step = 0.25;
    const scenario = parseScenario(`recorded[step=${step};normal]`);
    const n = 20000;
    const { data } = drawReplicate(scenario, 7, n, 0);
    expect(data.every((v) => Number.isInteger(v / step))).toBe(true);
    // Values rounded to zero from below are +0, as the decimal text "0.00" reads back.
    expect(data.some((v) => Object.is(v, -0))).toBe(false);
    const hundredths = parseScenario('recorded[step=0.01;gamma:shape=2,scale=1]');
    const drawn = drawReplicate(hundredths, 7, 500, 0).data;
    const text = Array.from(drawn, (v) => v.toFixed(2)).join('\n');
    expect(Float64Array.from(parseDelimited(`x\n${text}\n`, {}).sample.data)).toEqual(drawn);
    // Cells k = round(x/step) with expected counts n·p_k from the normal CDF (@stdlib via the base scenario).
    const cdf = parseScenario('normal').univariate!.cdf;
    const counts = new Map<number, number>();
    for (const v of data) counts.set(Math.round(v / step), (counts.get(Math.round(v / step)) ?? 0) + 1);
    // Cells with an expected count under 5 are pooled into one (common practice for Pearson's test).
    let statistic = 0;
    let cells = 0;
    let pooledObserved = n;
    let pooledExpected = n;
    for (let k = -20; k <= 20; k++) {
      const expected = n * (cdf((k + 0.5) * step) - cdf((k - 0.5) * step));
      if (expected < 5) continue;
      const observed = counts.get(k) ?? 0;
      statistic += (observed - expected) ** 2 / expected;
      cells++;
      pooledObserved -= observed;
      pooledExpected -= expected;
    }
    statistic += (pooledObserved - pooledExpected) ** 2 / pooledExpected;
    cells++;
    expect(1 - chisquareCdf(statistic, cells - 1)).toBeGreaterThan(0.001);
  });

  it('take one step per coordinate, keep X and Y of mutual information, and refuse a bad step in one line', () => {
    const two = parseScenario('recorded[step=0.5/0;gaussian:dim=2]');
    const { data } = drawReplicate(two, 1, 200, 0);
    expect(
      Array.from(data)
        .filter((_, i) => i % 2 === 0)
        .every((v) => Number.isInteger(v / 0.5)),
    ).toBe(true);
    expect(
      Array.from(data)
        .filter((_, i) => i % 2 === 1)
        .some((v) => !Number.isInteger(v * 1e6)),
    ).toBe(true);
    expect(two.recorded!.discreteEntropy).toBeNull();
    const mi = parseScenario('recorded[step=0.1;mi-gaussian:rho=0.5]');
    expect(mi.xDim).toBe(1);
    expect(drawReplicate(mi, 1, 10, 0).xDim).toBe(1);
    expect(() => parseScenario('recorded[step=-1;normal]')).toThrow(/step=-1" is not allowed; the first argument must be step=Δ with Δ > 0/);
    expect(() => parseScenario('recorded[step=0.1/0.2;normal]')).toThrow(/2 steps given for normal:mu=0,sigma=1, which has 1 coordinates/);
    // A lattice of more than 1e7 cells between the 1e-17 quantiles: the scenario states why, in one line, with the step that would do.
    const fine = parseScenario('recorded[step=1e-9;normal]');
    expect(fine.recorded!.discreteEntropy).toBeNull();
    expect(fine.recorded!.source).toMatch(/^not computed: [^\n]*would need 16987586449 cells[^\n]*at least 0\.0000017$/);
    expect(parseScenario('recorded[step=0.1;cauchy]').recorded!.discreteEntropy).toBeNull();
  });
});

describe('recorded[...] determinism and composition', () => {
  it('the same seed draws the same recorded values; another seed does not', () => {
    const scenario = parseScenario('recorded[step=0.01;lognormal]');
    const a = drawReplicate(scenario, 11, 300, 2).data;
    expect(drawReplicate(parseScenario('recorded[step=0.01;lognormal]'), 11, 300, 2).data).toEqual(a);
    expect(drawReplicate(scenario, 12, 300, 2).data).not.toEqual(a);
    // The base's own draws, rounded: recording consumes the random stream as the base does.
    const base = parseScenario('lognormal').sample(replicateRng(11, scenario.id, 300, 2), 300).data;
    expect(Float64Array.from(base, (v) => Math.round(v * 100) / 100)).toEqual(a);
  });

  it('keeps the base normal representation, rounded (autocorrelated[...] of a recorded law is on the lattice)', () => {
    const scenario = parseScenario('autocorrelated[phi=0.8;recorded[step=0.25;gamma:shape=2,scale=1]]');
    const { data } = drawReplicate(scenario, 3, 400, 0);
    expect(data.every((v) => Number.isInteger(v / 0.25))).toBe(true);
    expect(scenario.truth).toBe(parseScenario('gamma:shape=2,scale=1').truth);
  });

  it('passes on no density (the recorded law has none) and states the bound for the neglected tails', () => {
    const scenario = parseScenario('recorded[step=0.1;normal]');
    expect(scenario.univariate).toBeUndefined();
    expect(scenario.logDensity).toBeUndefined();
    expect(scenario.marginals).toBeUndefined();
    expect(scenario.moments).toEqual(parseScenario('normal').moments);
    expect(scenario.recorded!.source).toMatch(/survival function above.*error from the tails at most \d\.\de-1[5-7] nats/);
    expect(parseScenario('recorded[step=0.1;transformed[sinh;normal]]').recorded!.source).toMatch(/states no CDF/);
  });
});

describe('recorded[...] in a run file', () => {
  it('carries the recorded facts in its scenario info (valid against run.schema.json), and a density-needing perturbation skips with a reason', async () => {
    const plan = resolvePlan({
      scenarios: ['recorded[step=0.1;normal]', 'recorded[step=0.5/0;gaussian:dim=2]', 'normal'],
      estimators: ['kozachenko-leonenko'],
      robustness: { perturbations: ['monotone:map=asinh'], tuning: false },
      sampleSizes: [60],
      replicates: 2,
      seed: 5,
    }).plan;
    const run = assembleRun(await runPlan(plan, { workers: 1 }), null);
    const path = join(mkdtempSync(join(tmpdir(), 'hhat-recorded-')), 'run.json');
    writeRunFile(path, run);
    const parsed = JSON.parse(readFileSync(path, 'utf8')) as RunFile;
    const validate = new Ajv2020({ strict: false }).compile(runSchema);
    expect(validate(parsed), JSON.stringify(validate.errors)).toBe(true);
    const info = new Map(parsed.scenarios.map((s) => [s.id, s]));
    const c = fixture.cases.find((x) => x.base === 'normal:mu=0,sigma=1' && x.step === 0.1)!;
    const one = info.get('recorded[step=0.1;normal:mu=0,sigma=1]')!;
    expect(one.recorded!.steps).toEqual([0.1]);
    expect(Math.abs(one.recorded!.discreteEntropy! - c.discreteEntropy)).toBeLessThanOrEqual(1e-10);
    expect(one.logDensityVariance).toBeNull();
    expect(info.get(parseScenario('recorded[step=0.5/0;gaussian:dim=2]').id)!.recorded!.steps).toEqual([0.5, 0]);
    expect(info.get('normal:mu=0,sigma=1')!.recorded).toBeUndefined();
    expect(parsed.skipped.map((s) => JSON.stringify(s)).join('\n')).toMatch(/recorded\[step=0\.1.*monotone:map=asinh needs the coordinates' marginal laws/);
  });
});
