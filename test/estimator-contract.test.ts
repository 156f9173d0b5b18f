/**
 * The estimator contract (src/contracts.ts): settings declared once and validated once, tuning grids and
 * default-set membership declared by each estimator, the registry finding estimator files by itself, and one
 * dimension check. The last block adds an estimator from a single file (test/fixtures/estimator-file/) and
 * follows it through validation, the registry, the default set and a robustness run's tuning grid.
 */
import { spawnSync } from 'node:child_process';
import { copyFileSync, cpSync, mkdtempSync, readdirSync, readFileSync, realpathSync, symlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { defineEstimator, type Estimator, type Sample, type Settings } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { checkEstimator } from '../src/core/spec.js';
import { tuningGrid } from '../src/harness/tuning.js';
import { defaultPlan } from '../src/harness/default-plan.js';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun } from '../src/analysis/results.js';
import { replicateRng } from '../src/core/rng.js';
import { parseScenario } from '../scenarios/index.js';
import { loadEstimatorModules, registerUserEstimators } from '../src/harness/modules.js';
import { defaultEstimatorsFor } from '../src/commands/estimate.js';
import {
  checkDimension,
  defaultSet,
  getEstimator,
  listEstimators,
  parseEstimatorSpec,
  registerEstimator,
  replaceEstimator,
  runEstimator,
} from '../estimators/index.js';
import { ensureBuilt } from './helpers/built.js';

const root = join(__dirname, '..');
const fixtureFile = join(root, 'test', 'fixtures', 'estimator-file', 'sorted-neighbour.js');

function sampleOf(spec: string, n: number, replicate = 0): Sample {
  const scenario = parseScenario(spec);
  return scenario.sample(replicateRng(11, scenario.id, n, replicate), n);
}

const gridOf = (spec: string, n: number): string[] => tuningGrid(parseEstimatorSpec(spec), 0, n).map((p) => `${p.setting}=${p.value}`);

describe('default sets, as the estimators declare them', () => {
  // The sets hhat had when they were lists in src/commands/estimate.ts and src/default-plan.ts: declaring them
  // in the estimators must not change a member or the order (tables and plan fingerprints follow the order).
  it('hhat estimate without --estimator: per quantity and dimension, in the same order as before', () => {
    expect(defaultEstimatorsFor(1)).toEqual(['kozachenko-leonenko', 'ebrahimi', 'vasicek', 'kernel', 'histogram', 'gaussian']);
    for (const d of [2, 3]) expect(defaultEstimatorsFor(d)).toEqual(['kozachenko-leonenko', 'kozachenko-leonenko-weighted', 'kernel', 'histogram', 'gaussian']);
    for (const d of [4, 5, 9]) expect(defaultEstimatorsFor(d)).toEqual(['kozachenko-leonenko-weighted', 'kozachenko-leonenko', 'kernel', 'gaussian']);
    expect(defaultEstimatorsFor(1, 'mutual-information')).toEqual([]);
    expect(defaultEstimatorsFor(2, 'mutual-information')).toEqual(['ksg1', 'ksg2', 'mi-histogram', 'mi-kernel', 'mi-gaussian', 'mi-from-entropies']);
    expect(defaultEstimatorsFor(3, 'divergence')).toEqual(['knn-divergence', 'histogram-divergence', 'gaussian-divergence']);
  });

  it('the default plans: every built-in of the quantity in registry order, the divergence plan with Sturges bins last', () => {
    expect(defaultPlan('entropy').estimators).toEqual([
      'histogram',
      'vasicek',
      'van-es',
      'ebrahimi',
      'correa',
      'kozachenko-leonenko',
      'kozachenko-leonenko-weighted',
      'kernel',
      'gaussian',
    ]);
    expect(defaultPlan('mutual-information').estimators).toEqual(['ksg1', 'ksg2', 'mi-histogram', 'mi-kernel', 'mi-gaussian', 'mi-from-entropies']);
    expect(defaultPlan('divergence').estimators).toEqual([
      'knn-divergence',
      'histogram-divergence',
      'gaussian-divergence',
      'histogram-divergence:bins=sturges',
    ]);
  });

  it('the MI and divergence default plans measure no tuning grid, so their new grids add no cell to them', () => {
    for (const quantity of ['mutual-information', 'divergence'] as const) expect(resolvePlan(defaultPlan(quantity)).plan.robustness?.tuning).toBe(false);
    expect(resolvePlan(defaultPlan('entropy')).plan.robustness?.tuning).toBe(true);
  });

  it('a replacement without its own defaultFor keeps the slot of the estimator it replaces; one with it uses its own', () => {
    const original = getEstimator('kernel');
    try {
      replaceEstimator({ ...original, defaultFor: undefined });
      expect(defaultEstimatorsFor(1)).toContain('kernel');
      replaceEstimator({ ...original, defaultFor: { estimate: [{ order: 1 }] } });
      expect(defaultEstimatorsFor(1)[0]).toBe('kernel');
      expect(defaultSet('bench', 'entropy')).not.toContain('kernel');
    } finally {
      replaceEstimator(original);
    }
    expect(defaultEstimatorsFor(1)).toEqual(['kozachenko-leonenko', 'ebrahimi', 'vasicek', 'kernel', 'histogram', 'gaussian']);
  });
});

describe('tuning grids, as the estimators declare them', () => {
  it('entropy: the grids of before (k, bin rules and scale, bandwidth scale, window m)', () => {
    expect(gridOf('kozachenko-leonenko', 500)).toEqual(['k=1', 'k=2', 'k=3', 'k=4', 'k=5', 'k=6', 'k=7', 'k=8', 'k=9', 'k=10']);
    expect(gridOf('kozachenko-leonenko', 5)).toEqual(['k=1', 'k=2', 'k=3', 'k=4']);
    expect(gridOf('kozachenko-leonenko-weighted', 500)).toEqual(['k=2', 'k=4', 'k=6', 'k=8', 'k=12', 'k=16', 'k=20']);
    const rules = ['bins=sturges', 'bins=scott', 'bins=freedman-diaconis', 'bins=doane', 'bins=sqrt'];
    const scales = ['scale=0.5', 'scale=0.71', 'scale=1', 'scale=1.41', 'scale=2'];
    expect(gridOf('histogram', 500)).toEqual([...rules, ...scales]);
    expect(gridOf('histogram:bins=12', 500)).toEqual(rules);
    expect(gridOf('histogram:width=0.5', 500)).toEqual([]);
    expect(gridOf('kernel', 500)).toEqual(scales);
    expect(gridOf('kernel:bandwidth=0.3', 500)).toEqual([]);
    // ⌊√500 + ½⌋ = 22 × {0.5, 0.71, 1, 1.41, 2} = 11, 15.6, 22, 31.0, 44, rounded.
    expect(gridOf('vasicek', 500)).toEqual(['m=11', 'm=16', 'm=22', 'm=31', 'm=44']);
    // n = 10: m0 = 3 → 2 (1.5 rounds to 2), 2, 3, 4, 6; each once, and m < n/2 = 5 keeps 2, 3, 4.
    expect(gridOf('correa', 10)).toEqual(['m=2', 'm=3', 'm=4']);
    expect(gridOf('gaussian', 500)).toEqual([]);
  });

  it('mutual information and divergence: k for the neighbour methods, bins and scale, bandwidth scale', () => {
    const ks = ['k=1', 'k=2', 'k=3', 'k=4', 'k=5', 'k=6', 'k=7', 'k=8', 'k=9', 'k=10'];
    expect(gridOf('ksg1', 300)).toEqual(ks);
    expect(gridOf('ksg2:copula=rank', 4)).toEqual(['k=1', 'k=2', 'k=3']);
    expect(gridOf('mi-histogram', 300)).toEqual(gridOf('histogram', 300));
    expect(gridOf('mi-kernel', 300)).toEqual(gridOf('kernel', 300));
    expect(gridOf('mi-kernel:bandwidth=0.1', 300)).toEqual([]);
    expect(gridOf('mi-gaussian', 300)).toEqual([]);
    // mi-from-entropies passes k on, so its grid is its entropy estimator's k grid, and none without a k.
    expect(gridOf('mi-from-entropies', 300)).toEqual(ks);
    expect(gridOf('mi-from-entropies:entropy=kozachenko-leonenko-weighted', 300)).toEqual(gridOf('kozachenko-leonenko-weighted', 300));
    expect(gridOf('mi-from-entropies:entropy=histogram', 300)).toEqual([]);
    expect(gridOf('knn-divergence', 500)).toEqual(ks);
    expect(gridOf('histogram-divergence:bins=sturges', 500)).toEqual(gridOf('histogram', 500));
    expect(gridOf('gaussian-divergence', 500)).toEqual([]);
  });

  it('every grid point of every built-in is a valid configuration, and a robustness run measures the MI grids', async () => {
    for (const estimator of listEstimators()) for (const n of [3, 30, 500]) expect(() => tuningGrid(parseEstimatorSpec(estimator.id), 0, n)).not.toThrow();
    const { plan } = resolvePlan({
      quantity: 'mutual-information',
      scenarios: ['mi-gaussian'],
      estimators: ['ksg1', 'mi-kernel'],
      sampleSizes: [60],
      replicates: 2,
      robustness: { perturbations: ['rescale:c=1000'] },
    });
    const run = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
    const curves = run.robustness!.tuning.map((c) => `${c.estimator} ${c.setting}: ${c.points.map((p) => p.value).join(' ')}`);
    expect(curves).toEqual(['ksg1:k=3,copula=none k: 1 2 3 4 5 6 7 8 9 10', 'mi-kernel:bandwidth=silverman,scale=1,copula=none scale: 0.5 0.71 1 1.41 2']);
  });

  it('a grid value the declaration does not allow is an error naming the estimator and the grid, not a silent gap', () => {
    const broken: Estimator = {
      ...getEstimator('kozachenko-leonenko'),
      id: 'grid-with-zero',
      defaultFor: undefined,
      tuning: () => [{ setting: 'k', values: [0, 1] }],
    };
    registerEstimator(broken);
    expect(() => tuningGrid(parseEstimatorSpec('grid-with-zero'), 0, 100)).toThrow(
      'grid-with-zero: its tuning grid at n = 100 (from grid-with-zero:k=3,norm=euclidean) has a value that is not allowed: grid-with-zero: k=0 is not allowed; k must be an integer ≥ 1',
    );
  });
});

describe('one validation, at the boundary', () => {
  it('estimators receive validated, typed settings with every default filled in', () => {
    const seen: Settings[] = [];
    const original = getEstimator('kozachenko-leonenko');
    registerEstimator({
      ...original,
      id: 'settings-spy',
      defaultFor: undefined,
      estimate: (sample, settings) => (seen.push(settings), original.estimate(sample, settings)),
    });
    const sample = sampleOf('normal', 200);
    runEstimator(parseEstimatorSpec('settings-spy:k=5'), sample);
    runEstimator(parseEstimatorSpec('settings-spy'), sample);
    expect(seen).toEqual([
      { k: 5, norm: 'euclidean' },
      { k: 3, norm: 'euclidean' },
    ]);
    expect(() => parseEstimatorSpec('settings-spy:k=2.5')).toThrow('settings-spy: k=2.5 is not allowed; k must be an integer ≥ 1');
    expect(seen).toHaveLength(2);
  });

  it('defineEstimator types the settings from the declaration (checked by tsc in npm test) and they arrive as typed', () => {
    const seen: unknown[] = [];
    const typed = defineEstimator({
      id: 'typed-settings',
      family: 'test',
      quantity: 'entropy',
      summary: 'returns the log of its width setting',
      settings: [
        { name: 'width', kind: 'number', min: 0, minExclusive: true, default: 1, meaning: 'a width' },
        { name: 'rule', kind: 'choice', choices: ['narrow', 'wide'], default: 'narrow', meaning: 'a rule' },
        { name: 'window', kind: 'choice-or-integer', choices: ['auto'], min: 1, default: 'auto', meaning: 'a window' },
      ],
      dims: [1, 1],
      reference: 'none (a test of types)',
      tuning: (base) => [{ setting: 'width', values: [base.width / 2, base.width * 2] }],
      estimate(_sample, settings) {
        const width: number = settings.width;
        const rule: 'narrow' | 'wide' = settings.rule;
        const window: 'auto' | number = settings.window;
        // @ts-expect-error: not a declared setting
        seen.push(settings.bandwidth);
        seen.push(width, rule, window);
        return Math.log(width);
      },
    });
    registerEstimator(typed);
    expect(runEstimator(parseEstimatorSpec('typed-settings:width=2,window=7'), sampleOf('normal', 10)).value).toBe(Math.log(2));
    expect(seen).toEqual([undefined, 2, 'narrow', 7]);
    expect(gridOf('typed-settings:width=2', 100)).toEqual(['width=1', 'width=4']);
  });

  it('the dimension is checked once, by the registry, as a usage error', () => {
    const sample: Sample = { n: 50, dim: 2, data: sampleOf('gaussian:dim=2,rho=0.5', 50).data };
    for (const id of ['vasicek', 'van-es', 'ebrahimi', 'correa']) {
      expect(() => runEstimator(parseEstimatorSpec(id), sample)).toThrow(UsageError);
      expect(() => checkDimension(getEstimator(id), 2)).toThrow(`${id} does not support d = 2; it needs d = 1`);
    }
    expect(() => checkDimension(getEstimator('ksg1'), 1)).toThrow('ksg1 does not support d = 1; it needs d ≥ 2');
    expect(() => checkDimension(getEstimator('kernel'), 7)).not.toThrow();
  });

  it('every built-in and registered estimator passes the declaration check, which catches bad grids and default sets', () => {
    for (const estimator of listEstimators()) expect(checkEstimator('built-in', estimator)).toBe(estimator);
    const base = getEstimator('histogram-divergence');
    const bad = (change: Partial<Record<keyof Estimator, unknown>>) => () => checkEstimator('test', { ...base, id: 'bad', ...change });
    expect(bad({ tuning: [1, 2] })).toThrow(/tuning is \[1, 2\]; when given it must be a function/);
    expect(bad({ defaultFor: { plots: true } })).toThrow(/defaultFor\.plots is not a default set/);
    expect(bad({ defaultFor: { estimate: false } })).toThrow(/defaultFor\.estimate is false/);
    expect(bad({ defaultFor: { bench: [{ dims: [1, 2] }] } })).toThrow(/defaultFor\.bench\[0\]: "dims" is not allowed/);
    expect(bad({ defaultFor: { estimate: [{ order: 'first' }] } })).toThrow(/order is "first"; it must be a number/);
    expect(bad({ defaultFor: { estimate: [{ dims: [0, 2] }] } })).toThrow(/dims must be \[min, max\]/);
    expect(bad({ dims: [1, 3], defaultFor: { estimate: [{ dims: [2, 5] }] } })).toThrow(/dims \[2, 5\] reach beyond the estimator's own dims \[1, 3\]/);
    expect(bad({ defaultFor: { bench: [{ settings: { bins: 'weekly' } }] } })).toThrow(
      /defaultFor\.bench\[0\]: bad: bins=weekly is not allowed; bins must be one of/,
    );
    expect(() => registerEstimator({ ...base, id: 'No Spaces' })).toThrow(/id "No Spaces" is not allowed/);
  });
});

describe('the registry finds estimator files by itself', () => {
  it('lists the files of estimators/ by catalogOrder, each file its estimators in order; helpers live in subfolders', async () => {
    const folder = join(root, 'estimators');
    const files = readdirSync(folder, { withFileTypes: true }).filter((e) => e.isFile() && e.name.endsWith('.ts') && e.name !== 'index.ts');
    const modules = await Promise.all(
      files.map(async (e) => (await import(join(folder, e.name))) as { registration: { catalogOrder: number; estimators: Estimator[] } }),
    );
    const expected = modules
      .sort((a, b) => a.registration.catalogOrder - b.registration.catalogOrder)
      .flatMap((m) => m.registration.estimators.map((e) => e.id));
    // (Estimators this file registers by code come after the built-ins.)
    expect(
      listEstimators()
        .map((e) => e.id)
        .slice(0, expected.length),
    ).toEqual(expected);
    expect(new Set(modules.map((m) => m.registration.catalogOrder)).size).toBe(modules.length);
  });
});

describe('an estimator added from a single file', () => {
  it('as a user module: its settings are validated, it is registered, and a robustness run measures its tuning grid', async () => {
    const [loaded] = await loadEstimatorModules([fixtureFile]);
    const seen: Settings[] = [];
    registerUserEstimators([{ ...loaded, estimate: (sample, settings) => (seen.push(settings), loaded.estimate(sample, settings)) }]);
    expect(listEstimators().map((e) => e.id)).toContain('sorted-neighbour');
    expect(() => parseEstimatorSpec('sorted-neighbour:k=0')).toThrow('sorted-neighbour: k=0 is not allowed; k must be an integer ≥ 1 and ≤ 50');
    expect(() => parseEstimatorSpec('sorted-neighbour:k=many')).toThrow(UsageError);
    // An independent check of the file's arithmetic: the built-in k-d tree Kozachenko–Leonenko with the same k.
    const sample = sampleOf('normal', 400);
    const value = runEstimator(parseEstimatorSpec('sorted-neighbour:k=4'), sample).value;
    const builtIn = runEstimator(parseEstimatorSpec('kozachenko-leonenko:k=4'), sample).value;
    expect(Math.abs(value - builtIn) / Math.abs(builtIn)).toBeLessThan(1e-12);
    expect(seen.at(-1)).toEqual({ k: 4 });

    const { plan } = resolvePlan({
      scenarios: ['normal'],
      estimators: ['sorted-neighbour'],
      sampleSizes: [80],
      replicates: 3,
      robustness: { perturbations: ['rescale:c=1000'] },
    });
    const run = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
    const [curve] = run.robustness!.tuning;
    expect(curve.estimator).toBe('sorted-neighbour:k=2');
    expect(curve.setting).toBe('k');
    expect(curve.points.map((p) => p.value)).toEqual([1, 2, 3, 4, 5]);
    expect(run.cells.filter((c) => c.role === 'tuning').map((c) => c.estimator)).toEqual([
      'sorted-neighbour:k=1',
      'sorted-neighbour:k=3',
      'sorted-neighbour:k=4',
      'sorted-neighbour:k=5',
    ]);
    // Every value the estimator saw was a validated number, never text from a spec.
    expect(new Set(seen.map((s) => typeof s.k))).toEqual(new Set(['number']));
  });

  it('as a file dropped into estimators/ of the built program: in the catalog, validated, in the default set, with its grid', () => {
    ensureBuilt(['estimators/index.ts', 'src/cli.ts', 'src/core/spec.ts', 'src/harness/tuning.ts']);
    // A copy of the built program with one file added to dist/estimators/ and nothing else edited.
    const copy = mkdtempSync(join(tmpdir(), 'hhat-estimator-file-'));
    cpSync(join(root, 'dist'), join(copy, 'dist'), { recursive: true });
    cpSync(join(root, 'bin'), join(copy, 'bin'), { recursive: true });
    copyFileSync(join(root, 'package.json'), join(copy, 'package.json'));
    symlinkSync(realpathSync(join(root, 'node_modules')), join(copy, 'node_modules'));
    copyFileSync(fixtureFile, join(copy, 'dist', 'estimators', 'sorted-neighbour.js'));
    const hhat = (...args: string[]) =>
      spawnSync(process.execPath, [join(copy, 'bin', 'hhat.js'), ...args], { encoding: 'utf8', cwd: copy, env: { ...process.env, NODE_OPTIONS: '' } });

    const catalog = hhat('estimators', '--json');
    expect(catalog.stderr).toBe('');
    const ids = (JSON.parse(catalog.stdout) as { id: string }[]).map((e) => e.id);
    expect(ids.slice(ids.indexOf('kernel'), ids.indexOf('kernel') + 3)).toEqual(['kernel', 'sorted-neighbour', 'gaussian']);

    const values = Array.from(sampleOf('normal', 300).data);
    writeFileSync(join(copy, 'values.csv'), `${values.join('\n')}\n`);
    const refused = hhat('estimate', 'values.csv', '--estimator', 'sorted-neighbour:k=0');
    expect(refused.status).toBe(2);
    expect(refused.stderr.trim()).toBe('hhat: sorted-neighbour: k=0 is not allowed; k must be an integer ≥ 1 and ≤ 50');

    const estimated = hhat('estimate', 'values.csv', '--json');
    expect(estimated.status).toBe(0);
    const estimates = (JSON.parse(estimated.stdout) as { estimates: { estimator: string; value: number }[] }).estimates;
    expect(estimates.map((e) => e.estimator)).toEqual(['kozachenko-leonenko', 'ebrahimi', 'vasicek', 'kernel', 'sorted-neighbour', 'histogram', 'gaussian']);
    const pair = hhat('estimate', 'values.csv', '--json', '--estimator', 'sorted-neighbour', '--estimator', 'kozachenko-leonenko:k=2');
    const [mine, reference] = (JSON.parse(pair.stdout) as { estimates: { value: number }[] }).estimates.map((e) => e.value);
    expect(Math.abs(mine - reference) / Math.abs(reference)).toBeLessThan(1e-12);

    // On worker threads, which rebuild the registry from the same folder.
    const bench = hhat(
      'bench',
      '--scenario',
      'normal',
      '--estimator',
      'sorted-neighbour',
      '--n',
      '60',
      '--replicates',
      '3',
      '--robustness',
      '--perturb',
      'rescale:c=1000',
      '--out',
      'run.json',
      '--workers',
      '2',
    );
    expect(bench.status, bench.stderr).toBe(0);
    const run = JSON.parse(readFileSync(join(copy, 'run.json'), 'utf8')) as { robustness: { tuning: { setting: string; points: { value: number }[] }[] } };
    expect(run.robustness.tuning.map((c) => [c.setting, c.points.map((p) => p.value)])).toEqual([['k', [1, 2, 3, 4, 5]]]);
  });
});
