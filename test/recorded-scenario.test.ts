/**
 * recorded[step=Δ;SPEC]: the exact discrete entropy of the recorded values against SciPy (test/fixtures/
 * make_recorded_fixture.py), the drawn values on the lattice and at the cell frequencies of the base CDF.
 */
import { readFileSync } from 'node:fs';
import chisquareCdf from '@stdlib/stats-base-dists-chisquare-cdf';
import { describe, expect, it } from 'vitest';
import { parseScenario } from '../scenarios/index.js';
import { drawReplicate } from '../src/core/rng.js';
import { parseDelimited } from '../src/data/index.js';
import { runCli } from './helpers/cli.js';

const fixture = JSON.parse(readFileSync(new URL('./fixtures/recorded.json', import.meta.url), 'utf8')) as {
  cases: { base: string; step: number; discreteEntropy: number; latticeEntropy: number }[];
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
    // The discrete entropy is computed when first asked for.
    expect(() => parseScenario('recorded[step=1e-9;normal]').recorded!.discreteEntropy).toThrow(/would need \d+ cells/);
  });
});
