/**
 * mi-mixed and mi-discrete-continuous against an independent brute force written from the papers' equations
 * (test/fixtures/make_mixed_mi_fixture.py: NumPy distance matrices, scipy.special.digamma), and the truths of the
 * mixed scenarios against SciPy's quadrature.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import type { Sample } from '../src/core/contracts.js';
import { catalog, parseScenario } from '../scenarios/index.js';
import { drawReplicate } from '../src/core/rng.js';
import { parseEstimatorSpec, runEstimator } from '../estimators/index.js';

interface MixedCase {
  name: string;
  xDim: number;
  yDim: number;
  data: number[];
  k: number;
  miMixed: number;
  kRoss?: number;
  miDiscreteContinuous?: number;
}
const fixture = JSON.parse(readFileSync(new URL('./fixtures/mixed-mi.json', import.meta.url), 'utf8')) as {
  cases: MixedCase[];
  truths: {
    'mi-label-gaussian': { m: number; gap: number; quadrature: number }[];
    'mi-uniform-window': { m: number; quadrature: number }[];
    'mi-zero-inflated': { p: number; sigma: number; quadrature: number }[];
  };
};

const sampleOf = (c: MixedCase): Sample => ({ n: c.data.length / (c.xDim + c.yDim), dim: c.xDim + c.yDim, data: Float64Array.from(c.data), xDim: c.xDim });

describe('against the brute force (Gao et al. 2017, Algorithm 1; Ross 2014, eq. 2)', () => {
  for (const c of fixture.cases) {
    it(c.name, () => {
      expect(Math.abs(runEstimator(parseEstimatorSpec(`mi-mixed:k=${c.k}`), sampleOf(c)).value - c.miMixed)).toBeLessThanOrEqual(1e-12);
      if (c.kRoss !== undefined) {
        const value = runEstimator(parseEstimatorSpec(`mi-discrete-continuous:k=${c.kRoss}`), sampleOf(c)).value;
        expect(Math.abs(value - c.miDiscreteContinuous!)).toBeLessThanOrEqual(1e-12);
      }
    });
  }

  it('mi-discrete-continuous refuses a continuous X, naming the estimators for it', () => {
    const c = fixture.cases.find((x) => x.name === 'continuous X and Y')!;
    expect(() => runEstimator(parseEstimatorSpec('mi-discrete-continuous'), sampleOf(c))).toThrow(/not a label; for a continuous X use ksg1 or mi-mixed/);
  });
});

describe('the mixed scenarios', () => {
  it('mi-uniform-window: the closed form equals SciPy quadrature to 1e-9', () => {
    for (const t of fixture.truths['mi-uniform-window']) expect(Math.abs(parseScenario(`mi-uniform-window:m=${t.m}`).truth - t.quadrature)).toBeLessThan(1e-9);
  });

  it('mi-zero-inflated: the closed form equals SciPy quadrature to 1e-9', () => {
    for (const t of fixture.truths['mi-zero-inflated']) {
      expect(Math.abs(parseScenario(`mi-zero-inflated:p=${t.p},sigma=${t.sigma}`).truth - t.quadrature)).toBeLessThan(1e-9);
    }
  });

  it('mi-label-gaussian: the quadrature truth equals SciPy quadrature to 1e-9', () => {
    for (const t of fixture.truths['mi-label-gaussian']) {
      expect(Math.abs(parseScenario(`mi-label-gaussian:m=${t.m},gap=${t.gap}`).truth - t.quadrature)).toBeLessThan(1e-9);
    }
  });

  it('every catalog instance of the three families is in the SciPy fixture', () => {
    const inFixture = new Set([
      ...fixture.truths['mi-uniform-window'].map((t) => parseScenario(`mi-uniform-window:m=${t.m}`).id),
      ...fixture.truths['mi-zero-inflated'].map((t) => parseScenario(`mi-zero-inflated:p=${t.p},sigma=${t.sigma}`).id),
      ...fixture.truths['mi-label-gaussian'].map((t) => parseScenario(`mi-label-gaussian:m=${t.m},gap=${t.gap}`).id),
    ]);
    const listed = catalog().filter((s) => ['mi-uniform-window', 'mi-zero-inflated', 'mi-label-gaussian'].includes(s.family));
    expect(listed.length).toBe(7);
    for (const s of listed) expect(inFixture.has(s.id), s.id).toBe(true);
  });

  it('at n = 5000 mi-mixed and mi-discrete-continuous are within 0.05 nats of the uniform window’s I, where ksg2 is far off', () => {
    const scenario = parseScenario('mi-uniform-window:m=4');
    const sample = drawReplicate(scenario, 20261203, 5000, 0);
    const mixed = runEstimator(parseEstimatorSpec('mi-mixed'), sample).value;
    expect(Math.abs(mixed - scenario.truth)).toBeLessThan(0.05);
    const ross = runEstimator(parseEstimatorSpec('mi-discrete-continuous'), sample).value;
    expect(Math.abs(ross - scenario.truth)).toBeLessThan(0.05);
    // KSG estimator (9) takes per-space neighbour extents, which a tied X collapses to 0 (measured 0.534 here).
    expect(Math.abs(runEstimator(parseEstimatorSpec('ksg2'), sample).value - scenario.truth)).toBeGreaterThan(0.2);
  });
});
