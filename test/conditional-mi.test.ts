/**
 * Conditional mutual information I(X; Y | Z): the cmi-gaussian and cmi-transformed-gaussian truths, the cmi-ksg
 * and cmi-gaussian estimators, perturbations, the default plan and `hhat estimate --z-columns`.
 *
 * Outside references: test/fixtures/cmi.json, written by test/fixtures/make_cmi_fixture.py (NumPy and SciPy
 * only): the Gaussian truths by numpy.linalg.slogdet of the principal blocks and, as a second route, by
 * scipy.stats.multivariate_normal entropies; a brute-force O(n²) Frenzel–Pompe estimator (all pairwise
 * max-norm distances, explicit strict counts, scipy.special.digamma); the Gaussian estimator by numpy.cov and
 * slogdet. The command-line check computes the sample partial correlation by hand in this file.
 */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import normalRandom from '@stdlib/random-base-normal';
import { describe, expect, it } from 'vitest';
import { getEstimator } from '../estimators/index.js';
import type { Sample } from '../src/core/contracts.js';
import { EstimateError, UsageError } from '../src/core/errors.js';
import { replicateRng, rngFromSeed } from '../src/core/rng.js';
import { defaultPlan } from '../src/harness/default-plan.js';
import { parsePerturbation } from '../src/harness/perturb.js';
import { parseScenario } from '../scenarios/index.js';
import fixture from './fixtures/cmi.json' with { type: 'json' };
import { runCli as run } from './helpers/cli.js';
import { validated } from './helpers/settings.js';

const cmiKsg = getEstimator('cmi-ksg');
const cmiGaussian = getEstimator('cmi-gaussian');

function fixtureSample(s: (typeof fixture.samples)[number]): Sample {
  return { n: s.n, dim: s.dim, data: Float64Array.from(s.data), xDim: s.xDim, yDim: s.yDim };
}

/** "k=4,copula=rank" → { k: 4, copula: 'rank' }. */
function settingsOf(key: string): Record<string, string | number> {
  return Object.fromEntries(
    key
      .split(',')
      .map((kv) => kv.split('='))
      .map(([k, v]) => [k, Number.isNaN(Number(v)) ? v : Number(v)]),
  );
}

describe('cmi-gaussian truth: ½ log(det Σ_XZ det Σ_YZ / (det Σ_Z det Σ)) and Var(i) against NumPy and SciPy (make_cmi_fixture.py)', () => {
  for (const entry of fixture.scenarios) {
    it(`${entry.spec}: numpy.linalg.slogdet and scipy.stats.multivariate_normal entropies agree with the truth to 1e-12; Var(i) too`, () => {
      const scenario = parseScenario(entry.spec);
      expect(scenario.id).toBe(entry.spec);
      expect(Math.abs(scenario.truth - entry.truth)).toBeLessThan(1e-12);
      expect(Math.abs(scenario.truth - entry.truthByEntropies)).toBeLessThan(1e-12);
      const transformed = parseScenario(entry.spec.replace('cmi-gaussian', 'cmi-transformed-gaussian'));
      expect(transformed.truth).toBe(scenario.truth);
      // Var of the conditional information density: NumPy's ½ tr((AΣ)²), and scipy logpdf Monte Carlo within 4 SE.
      const variance = scenario.logDensityVariance!;
      expect(transformed.logDensityVariance).toBe(variance);
      if (entry.densityVariance < 1e-12) expect(variance).toBe(0);
      else {
        expect(Math.abs(variance - entry.densityVariance)).toBeLessThan(1e-10);
        expect(Math.abs(variance - entry.densityVarianceMonteCarlo)).toBeLessThan(4 * entry.densityVarianceMonteCarloSE);
      }
    });
  }

  for (const entry of fixture.covarianceScenarios) {
    it(`${entry.spec.slice(0, 60)}…: any covariance, against numpy.linalg.slogdet to 1e-12`, () => {
      const scenario = parseScenario(entry.spec);
      expect(scenario.id).toBe(entry.spec);
      expect(scenario.quantity).toBe('conditional-mutual-information');
      expect(Math.abs(scenario.truth - entry.truth)).toBeLessThan(1e-12);
      expect(Math.abs(scenario.truth - entry.truthByEntropies)).toBeLessThan(1e-12);
    });
  }

  it('cmi-gaussian-covariance: a matrix that is not positive definite, or no Z column, is one line', () => {
    expect(() => parseScenario('cmi-gaussian-covariance[1,1;1,0.99,0.99;0.99,1,0;0.99,0,1]')).toThrow(
      /^cmi-gaussian-covariance: the covariance is not positive definite; give a symmetric positive-definite matrix$/,
    );
    expect(() => parseScenario('cmi-gaussian-covariance[1,2;1,0.5,0.3;0.5,1,0.4;0.3,0.4,1]')).toThrow(
      /^cmi-gaussian-covariance: dimX \+ dimY = 3 leaves no Z coordinate in a 3×3 covariance; Z needs at least one$/,
    );
  });

  it('X and Y independent given Z (rhoXY = rhoXZ·rhoYZ): the truth is exactly 0', () => {
    expect(parseScenario('cmi-gaussian:rhoXY=0.25,rhoXZ=0.5,rhoYZ=0.5').truth).toBe(0);
  });

  it('correlations that are not a covariance: one line naming them and the condition', () => {
    expect(() => parseScenario('cmi-gaussian:rhoXY=0.9,rhoXZ=0.9,rhoYZ=-0.9')).toThrow(UsageError);
    expect(() => parseScenario('cmi-gaussian:rhoXY=0.9,rhoXZ=0.9,rhoYZ=-0.9')).toThrow(
      /^cmi-gaussian: the correlations rhoXY=0\.9, rhoXZ=0\.9, rhoYZ=-0\.9 do not form a positive-definite covariance; they must satisfy 1 − rhoXY² − rhoXZ² − rhoYZ² \+ 2·rhoXY·rhoXZ·rhoYZ > 0$/,
    );
  });

  it('draws: X | Y | Z columns, and the sample covariance within 4 SE of the stated one (n = 20000)', () => {
    const scenario = parseScenario('cmi-gaussian:dimX=2,dimY=1,dimZ=2,rhoXY=0.6,rhoXZ=0.4,rhoYZ=0.3');
    const n = 20000;
    const sample = scenario.sample(rngFromSeed('cmi-draws'), n);
    expect(sample).toMatchObject({ n, dim: 5, xDim: 2, yDim: 1 });
    const cov = scenario.moments!.covariance;
    for (let a = 0; a < 5; a++) {
      for (let b = 0; b <= a; b++) {
        let sum = 0;
        for (let i = 0; i < n; i++) sum += sample.data[i * 5 + a] * sample.data[i * 5 + b];
        // SE of a mean of products of standard normals: sqrt((1 + ρ²)/n).
        expect(Math.abs(sum / n - cov[a][b])).toBeLessThan(4 * Math.sqrt((1 + cov[a][b] ** 2) / n));
      }
    }
  });

  it('cmi-transformed-gaussian draws are exp, cube and z + z³ of the cmi-gaussian draws from the same stream', () => {
    const base = parseScenario('cmi-gaussian').sample(rngFromSeed('same'), 40);
    const mapped = parseScenario('cmi-transformed-gaussian').sample(rngFromSeed('same'), 40);
    for (let i = 0; i < 40; i++) {
      const [x, y, z] = base.data.subarray(3 * i, 3 * i + 3);
      expect([...mapped.data.subarray(3 * i, 3 * i + 3)]).toEqual([Math.exp(x), y * y * y, z + z * z * z]);
    }
  });
});

describe('cmi-ksg equals a brute-force NumPy Frenzel–Pompe estimator (make_cmi_fixture.py) to 1e-12', () => {
  for (const entry of fixture.samples) {
    for (const [key, expected] of Object.entries(entry.cmiKsg) as [string, number | null][]) {
      it(`${entry.label}, n = ${entry.n}, ${key}`, () => {
        const settings = validated(cmiKsg, settingsOf(key));
        if (expected === null) {
          expect(() => cmiKsg.estimate(fixtureSample(entry), settings)).toThrow(EstimateError);
          return;
        }
        expect(Math.abs(cmiKsg.estimate(fixtureSample(entry), settings) - expected)).toBeLessThan(1e-12);
      });
    }
  }
});

describe('cmi-gaussian equals numpy.cov and slogdet (make_cmi_fixture.py) to 1e-12', () => {
  for (const entry of fixture.samples) {
    it(`${entry.label}, n = ${entry.n}: plug-in and Ahmed–Gokhale, with and without copula=rank`, () => {
      for (const [key, expected] of Object.entries(entry.cmiGaussian)) {
        const got = cmiGaussian.estimate(fixtureSample(entry), validated(cmiGaussian, settingsOf(key)));
        expect(Math.abs(got - expected), key).toBeLessThan(1e-12);
      }
    });
  }
});

describe('convergence and invariance', () => {
  it('cmi-ksg (k = 4) within 0.05 nats of the truth at n = 2000 on the default cmi-gaussian (mean of 5 replicates)', () => {
    // Frenzel & Pompe report a small bias for Gaussian triples at this n; the SD of one estimate here is about
    // 0.02 nats (measured), so the mean of 5 has SD ≈ 0.009 and 0.05 is over 5 SDs from a bias-free mean.
    const scenario = parseScenario('cmi-gaussian');
    let sum = 0;
    for (let r = 0; r < 5; r++) sum += cmiKsg.estimate(scenario.sample(replicateRng(7, scenario.id, 2000, r), 2000), validated(cmiKsg));
    expect(Math.abs(sum / 5 - scenario.truth)).toBeLessThan(0.05);
  });

  it('with copula=rank, both estimators give bit-identical values on cmi-transformed-gaussian and on the Gaussian draws it maps', () => {
    const base = parseScenario('cmi-gaussian');
    const mapped = parseScenario('cmi-transformed-gaussian');
    const a = base.sample(rngFromSeed('rank-invariance'), 500);
    const b = mapped.sample(rngFromSeed('rank-invariance'), 500);
    for (const estimator of [cmiKsg, cmiGaussian]) {
      const settings = validated(estimator, { copula: 'rank' });
      expect(estimator.estimate(b, settings)).toBe(estimator.estimate(a, settings));
    }
  });

  it('refuses a sample without yDim, or with no Z column, as an EstimateError', () => {
    const sample = parseScenario('cmi-gaussian').sample(rngFromSeed('shape'), 50);
    for (const bad of [
      { ...sample, yDim: undefined },
      { ...sample, yDim: 2 },
    ]) {
      expect(() => cmiKsg.estimate(bad, validated(cmiKsg))).toThrow(EstimateError);
      expect(() => cmiGaussian.estimate(bad, validated(cmiGaussian))).toThrow(EstimateError);
    }
  });
});

describe('perturbations and the default plan', () => {
  const scenario = parseScenario('cmi-gaussian:dimX=1,dimY=1,dimZ=2,rhoXY=0.6,rhoXZ=0.4,rhoYZ=0.3');

  it('monotone maps of Z alone and rescaling leave the truth (shift 0) and touch only the chosen columns', () => {
    const sample = scenario.sample(rngFromSeed('perturb'), 20);
    for (const [spec, touched] of [
      ['monotone:map=asinh,part=z', [2, 3]],
      ['monotone:map=asinh,part=y', [1]],
      ['rescale:c=1000', [0, 1, 2, 3]],
    ] as const) {
      const prepared = parsePerturbation(spec).prepare(scenario);
      if ('skip' in prepared) throw new Error(prepared.skip);
      expect(prepared.shift, spec).toBe(0);
      const copy = { ...sample, data: Float64Array.from(sample.data) };
      prepared.apply(copy, 0, 1);
      for (let j = 0; j < 4; j++) {
        const moved = copy.data[j] !== sample.data[j];
        expect(moved, `${spec}, column ${j + 1}`).toBe((touched as readonly number[]).includes(j));
      }
    }
  });

  it('an affine map mixes X, Y and Z: skipped with its reason; part=z on a mutual-information scenario is skipped too', () => {
    expect(parsePerturbation('affine:condition=10').prepare(scenario)).toHaveProperty('skip');
    expect(parsePerturbation('rescale:c=2,part=z').prepare(parseScenario('mi-gaussian'))).toHaveProperty('skip');
  });

  it('the default plan: both estimators, every cmi scenario of the catalog, n = 100 and 1000, no tuning grids', () => {
    const plan = defaultPlan('conditional-mutual-information');
    expect(plan.estimators).toEqual(['cmi-ksg', 'cmi-gaussian']);
    expect(plan.sampleSizes).toEqual([100, 1000]);
    expect(plan.scenarios.every((s) => s.startsWith('cmi-'))).toBe(true);
    expect(plan.scenarios).toContain(parseScenario('cmi-transformed-gaussian').id);
    expect(plan.robustness).toMatchObject({ tuning: false });
  });
});

describe('hhat draw of a conditional-MI scenario', () => {
  it('names the columns x1, y1, z1, z2 and says which are X, Y and Z', async () => {
    const out = join(mkdtempSync(join(tmpdir(), 'hhat-cmi-draw-')), 'triple.csv');
    const result = await run(['draw', 'cmi-gaussian:dimZ=2', '--n', '5', '--out', out]);
    expect(result.code).toBe(0);
    expect(result.out).toMatch(/\(conditional-mutual-information, d = 4: X = x1, Y = y1, Z = z1\.\.z2\)/);
    expect(readFileSync(out, 'utf8').split('\n')[0]).toBe('x1,y1,z1,z2');
  });
});

describe('hhat estimate FILE --x-columns --y-columns --z-columns', () => {
  // Two greenhouse loggers (X, Y) that both follow the outside temperature (Z), with a text column beside them.
  const draw = normalRandom.factory(0, 1, { prng: rngFromSeed('estimate-cmi-file') });
  const rows = Array.from({ length: 300 }, () => {
    const outside = draw();
    const west = 0.7 * outside + 0.7 * draw();
    return { outside, west, east: 0.5 * outside + 0.4 * west + 0.6 * draw() };
  });
  const file = join(mkdtempSync(join(tmpdir(), 'hhat-cmi-file-')), 'loggers.csv');
  writeFileSync(file, ['site,west,east,outside', ...rows.map((r, i) => `house-${i % 2},${r.west},${r.east},${r.outside}`)].join('\n'));

  it('the Gaussian plug-in is −½ log(1 − r²) with r the sample partial correlation of X and Y given Z, computed here', async () => {
    const { code, out, err } = await run([
      'estimate',
      file,
      '--x-columns',
      'west',
      '--y-columns',
      '3',
      '--z-columns',
      'outside',
      '--estimator',
      'cmi-gaussian:correction=none',
      '--json',
    ]);
    expect(err).toBe('');
    expect(code).toBe(0);
    const columns = [rows.map((r) => r.west), rows.map((r) => r.east), rows.map((r) => r.outside)];
    const means = columns.map((c) => c.reduce((s, v) => s + v, 0) / c.length);
    const cov = (a: number, b: number) => columns[a].reduce((s, v, i) => s + (v - means[a]) * (columns[b][i] - means[b]), 0);
    const corr = (a: number, b: number) => cov(a, b) / Math.sqrt(cov(a, a) * cov(b, b));
    const [rxy, rxz, ryz] = [corr(0, 1), corr(0, 2), corr(1, 2)];
    const partial = (rxy - rxz * ryz) / Math.sqrt((1 - rxz * rxz) * (1 - ryz * ryz));
    const parsed = JSON.parse(out) as { n: number; dim: number; quantity: string; xDim: number; yDim: number; estimates: { value: number }[] };
    expect(parsed).toMatchObject({ n: 300, dim: 3, quantity: 'conditional-mutual-information', xDim: 1, yDim: 1 });
    expect(parsed.estimates[0].value).toBeCloseTo(-0.5 * Math.log(1 - partial * partial), 12);
  });

  it('the default set runs both estimators; overlapping or missing selections are one line, exit code 2', async () => {
    const ok = await run(['estimate', file, '--x-columns', '2', '--y-columns', '3', '--z-columns', '4', '--json']);
    expect(ok.code).toBe(0);
    expect((JSON.parse(ok.out) as { estimates: { estimator: string }[] }).estimates.map((e) => e.estimator)).toEqual(['cmi-ksg', 'cmi-gaussian']);
    const overlap = await run(['estimate', file, '--x-columns', '2', '--y-columns', '3', '--z-columns', '3-4']);
    expect(overlap.code).toBe(2);
    expect(overlap.err.trim()).toBe('hhat: --y-columns and --z-columns both name column "3"; X, Y and Z must be different columns');
    const missing = await run(['estimate', file, '--x-columns', '2', '--z-columns', '4']);
    expect(missing.code).toBe(2);
    expect(missing.err.trim()).toBe('hhat: conditional mutual information needs --x-columns, --y-columns and --z-columns');
    const wrong = await run(['estimate', file, '--x-columns', '2', '--y-columns', '3', '--estimator', 'cmi-ksg']);
    expect(wrong.code).toBe(2);
    expect(wrong.err).toMatch(/^hhat: cmi-ksg estimates conditional-mutual-information, but this call asks for mutual-information/);
  });
});
