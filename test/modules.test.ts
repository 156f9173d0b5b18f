/**
 * Estimator modules: loading the user's own estimators, replacing built-ins under their own ids, and
 * one-line errors for modules that break the Estimator contract.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import digamma from '@stdlib/math-base-special-digamma';
import { getEstimator, parseEstimatorSpec, replaceEstimator, runEstimator } from '../estimators/index.js';
import { loadEstimatorModules, registerUserEstimators, useEstimatorModules, describeRegistration } from '../src/harness/modules.js';
import { UsageError } from '../src/core/errors.js';
import { parseScenario } from '../scenarios/index.js';
import { replicateRng } from '../src/core/rng.js';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun } from '../src/analysis/results.js';
import type { Sample } from '../src/core/contracts.js';

const root = join(__dirname, '..');
const example = join(root, 'examples', 'drift-corrected-estimators.mjs');
const shiftedFixture = join(root, 'test', 'fixtures', 'shifted-kozachenko-leonenko.ts');
const dir = mkdtempSync(join(tmpdir(), 'hhat-modules-'));
const builtInKl = getEstimator('kozachenko-leonenko');

afterAll(() => {
  replaceEstimator(builtInKl);
});

function sampleOf(spec: string, n: number, replicate = 0): Sample {
  const scenario = parseScenario(spec);
  return scenario.sample(replicateRng(7, scenario.id, n, replicate), n);
}

describe('the worked example module (examples/drift-corrected-estimators.mjs)', () => {
  it('loads, registers as a new id, and takes settings through the registry', async () => {
    const list = await loadEstimatorModules([example]);
    expect(list.map((e) => e.id)).toEqual(['detrended-kozachenko-leonenko']);
    const registration = registerUserEstimators(list, { replace: true });
    expect(registration).toEqual({ replaced: [], added: ['detrended-kozachenko-leonenko'] });
    expect(describeRegistration(registration)).toBe('estimator modules: added detrended-kozachenko-leonenko');
    // Registering the same objects again (as an in-process run after the CLI would) reports nothing.
    expect(registerUserEstimators(list, { replace: true })).toEqual({ replaced: [], added: [] });
    expect(parseEstimatorSpec('detrended-kozachenko-leonenko:drift=quadratic,k=5').spec).toBe('detrended-kozachenko-leonenko:k=5,drift=quadratic');
    expect(() => parseEstimatorSpec('detrended-kozachenko-leonenko:drift=cubic')).toThrow(/drift must be one of none \| linear \| quadratic/);
  });

  it('computes the Kozachenko–Leonenko formula: a hand-worked 4-point sample', async () => {
    const [estimator] = await loadEstimatorModules([example]);
    // Points 0, 1, 3, 7 with k = 1: nearest distances 1, 1, 2, 4; H = ψ(4) − ψ(1) + log 2 + (1/4)·Σ log ε
    // (log 2 is the length of the 1-D unit ball). ψ from @stdlib, the formula from Kozachenko & Leonenko (1987).
    const expected = digamma(4) - digamma(1) + Math.log(2) + (Math.log(1) + Math.log(1) + Math.log(2) + Math.log(4)) / 4;
    const sample: Sample = { n: 4, dim: 1, data: Float64Array.from([0, 1, 3, 7]) };
    expect(estimator.estimate(sample, { k: 1, drift: 'none' })).toBeCloseTo(expected, 13);
  });

  it('with drift=none agrees with the built-in kd-tree implementation to rounding (an independent brute-force search)', async () => {
    const [estimator] = await loadEstimatorModules([example]);
    for (const spec of ['normal', 'gaussian:dim=3']) {
      const sample = sampleOf(spec, 600);
      const builtIn = runEstimator(parseEstimatorSpec('kozachenko-leonenko:k=4'), sample).value;
      expect(Math.abs(estimator.estimate(sample, { k: 4, drift: 'none' }) - builtIn)).toBeLessThan(1e-12);
    }
  });

  it('removes an exact polynomial drift in recording order: the estimate is the drift-free one', async () => {
    const [estimator] = await loadEstimatorModules([example]);
    const clean = sampleOf('gaussian:dim=2', 500);
    const drifted = Float64Array.from(clean.data);
    for (let i = 0; i < clean.n; i++) {
      drifted[2 * i] += 5 + 0.01 * i;
      drifted[2 * i + 1] += -3 + 0.002 * i + 1e-5 * i * i;
    }
    const driftedSample = { ...clean, data: drifted };
    const reference = estimator.estimate(clean, { k: 3, drift: 'quadratic' });
    expect(estimator.estimate(driftedSample, { k: 3, drift: 'quadratic' })).toBeCloseTo(reference, 9);
    // Without the correction the drift stretches the sample and inflates the estimate.
    expect(estimator.estimate(driftedSample, { k: 3, drift: 'none' })).toBeGreaterThan(estimator.estimate(clean, { k: 3, drift: 'none' }) + 0.5);
  });

  it('runs in a plan in-process beside the built-ins', async () => {
    await useEstimatorModules([example]);
    const { plan } = resolvePlan({
      scenarios: ['normal'],
      estimators: ['kozachenko-leonenko', 'detrended-kozachenko-leonenko:drift=none'],
      sampleSizes: [100],
      replicates: 4,
      seed: 3,
    });
    const run = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
    // On supervised worker threads the module must be named in the plan, which every worker loads.
    const threaded = assembleRun(await runPlan({ ...plan, modules: [example] }, { workers: 2 }), null);
    expect(threaded.cells.map((c) => c.estimates)).toEqual(run.cells.map((c) => c.estimates));
    const [builtIn, user] = run.cells;
    expect(user.estimator).toBe('detrended-kozachenko-leonenko:k=3,drift=none');
    expect(user.family).toBe('nearest-neighbour');
    // The same draws reach both, and drift=none is the same estimator: estimates agree to rounding.
    user.estimates.forEach((v, r) => expect(Math.abs(v! - builtIn.estimates[r]!)).toBeLessThan(1e-12));
  });
});

describe('replacing a built-in', () => {
  it('a module estimator with a built-in id replaces it, keeps its cell names, and can be put back', async () => {
    const sample = sampleOf('normal', 300);
    const before = runEstimator(parseEstimatorSpec('kozachenko-leonenko'), sample).value;
    const registration = await useEstimatorModules([shiftedFixture]);
    expect(registration).toEqual({ replaced: ['kozachenko-leonenko'], added: [] });
    expect(describeRegistration(registration)).toMatch(/^estimator modules: replaced kozachenko-leonenko/);
    const configured = parseEstimatorSpec('kozachenko-leonenko');
    expect(configured.spec).toBe('kozachenko-leonenko:k=3,norm=euclidean');
    expect(runEstimator(configured, sample).value).toBe(before + 0.05);
    replaceEstimator(builtInKl);
    expect(runEstimator(parseEstimatorSpec('kozachenko-leonenko'), sample).value).toBe(before);
  });

  it('without replace, an id that is taken is an error naming it', async () => {
    const list = await loadEstimatorModules([shiftedFixture]);
    expect(() => registerUserEstimators(list, { replace: false })).toThrow(/estimator "kozachenko-leonenko" is already registered/);
    expect(getEstimator('kozachenko-leonenko')).toBe(builtInKl);
  });
});

describe('bad modules: one line naming the file and the problem', () => {
  // Found by a tester: a module whose top level never ends hung `hhat check` with no output.
  it('a module whose loading never ends is refused after the load limit, and the process goes on', async () => {
    const path = join(dir, 'endless.mjs');
    writeFileSync(path, 'while (true) {}\n');
    const before = process.env.HHAT_MODULE_LOAD_SECONDS;
    process.env.HHAT_MODULE_LOAD_SECONDS = '1';
    try {
      await expect(loadEstimatorModules([path])).rejects.toThrow(
        `estimator module ${path} did not finish loading in 1 s: code at its top level runs when it loads, and some of it never ends`,
      );
    } finally {
      if (before === undefined) delete process.env.HHAT_MODULE_LOAD_SECONDS;
      else process.env.HHAT_MODULE_LOAD_SECONDS = before;
    }
  });

  const valid = `{ id: 'ok-method', family: 'test', quantity: 'entropy', summary: 's', settings: [], dims: [1, 1], reference: 'r', estimate: () => 0 }`;
  const withField = (field: string) => `export default { ...${valid}, ${field} };`;
  const cases: [string, string, string, RegExp][] = [
    ['no-exports', 'mjs', 'export const x = 1;', /exports no estimators; export `const estimators = \[\.\.\.\]`/],
    ['not-array', 'mjs', 'export const estimators = 3;', /"estimators" is 3, not an array/],
    ['empty', 'mjs', 'export const estimators = [];', /"estimators" is an empty array/],
    ['default-number', 'mjs', 'export default 42;', /the default export is 42/],
    ['not-object', 'mjs', `export const estimators = [${valid}, 'knn'];`, /estimators\[1\] is "knn"; an estimator is an object/],
    ['no-id', 'mjs', 'export default { estimate() { return 0; } };', /the default export has no id/],
    ['bad-id', 'mjs', withField(`id: 'My Method'`), /id "My Method" is not allowed; an id is lowercase/],
    ['no-estimate', 'mjs', withField('estimate: undefined'), /\("ok-method"\): estimate is nothing, not a function/],
    ['estimate-number', 'mjs', withField('estimate: 1.5'), /estimate is 1\.5, not a function/],
    ['resolve', 'mjs', withField(`resolve: 'auto'`), /resolve is "auto"; when given it must be a function/],
    [
      'quantity',
      'mjs',
      withField(`quantity: 'entropie'`),
      /quantity "entropie" is not allowed; it must be one of entropy, mutual-information, conditional-mutual-information, transfer-entropy, divergence/,
    ],
    ['no-reference', 'mjs', withField('reference: undefined'), /reference is missing; give the paper or book/],
    ['empty-family', 'mjs', withField(`family: ' '`), /family is " "; give a family name/],
    ['dims-zero', 'mjs', withField('dims: [0, 3]'), /dims must be \[min, max\], whole numbers with 1 ≤ min ≤ max \(max may be Infinity\); got \[0, 3\]/],
    ['dims-reversed', 'mjs', withField('dims: [3, 1]'), /dims must be \[min, max\].*got \[3, 1\]/],
    ['dims-scalar', 'mjs', withField('dims: 2'), /dims must be \[min, max\].*got 2$/],
    ['settings-object', 'mjs', withField(`settings: { k: 3 }`), /settings is an object; give an array of setting specs/],
    [
      'setting-kind',
      'mjs',
      withField(`settings: [{ name: 'k', meaning: 'm', default: 3, kind: 'int' }]`),
      /settings\[0\] \("k"\): kind "int" is not allowed; it must be one of integer, number/,
    ],
    [
      'setting-default',
      'mjs',
      withField(`settings: [{ name: 'k', meaning: 'm', default: 0, kind: 'integer', min: 1 }]`),
      /settings\[0\] \("k"\): default 0 is not allowed; k must be an integer ≥ 1/,
    ],
    ['setting-choices', 'mjs', withField(`settings: [{ name: 'rule', meaning: 'm', default: 'a', kind: 'choice' }]`), /kind "choice" needs choices/],
    ['setting-name', 'mjs', withField(`settings: [{ name: 'k=1', meaning: 'm', default: 1, kind: 'integer' }]`), /settings\[0\]: name "k=1" is not allowed/],
    ['setting-meaning', 'mjs', withField(`settings: [{ name: 'k', default: 1, kind: 'integer' }]`), /settings\[0\] \("k"\): meaning is missing/],
    [
      'setting-twice',
      'mjs',
      withField(`settings: [{ name: 'k', meaning: 'm', default: 1, kind: 'integer' }, { name: 'k', meaning: 'm', default: 1, kind: 'integer' }]`),
      /settings\[1\]: the name "k" is used twice/,
    ],
    ['setting-bounds', 'mjs', withField(`settings: [{ name: 'h', meaning: 'm', default: 1, kind: 'number', min: 2, max: 1 }]`), /min 2 is above max 1/],
    ['same-id-twice', 'mjs', `const e = ${valid}; export const estimators = [e, { ...e }];`, /the id "ok-method" is also defined earlier in the same file/],
    // Node says "Unexpected token"; under vitest the module runner's parser words it differently.
    ['syntax', 'mjs', 'export const estimators = [;', /could not be loaded: .*(Unexpected token|invalid JS syntax)/],
    ['throws', 'mjs', `throw new Error('calibration file missing\\nsecond line');`, /could not be loaded: calibration file missing$/],
    ['commonjs-named', 'js', 'export const estimators = [];', /rename it to \.mjs|"estimators" is an empty array/],
    ['data', 'json', '[]', /"\.json" files cannot be loaded; use \.js or \.mjs/],
  ];

  it.each(cases)('%s', async (name, extension, source, problem) => {
    const path = join(dir, `${name}.${extension}`);
    writeFileSync(path, source);
    const error = await loadEstimatorModules([path]).then(
      () => null,
      (e: unknown) => e,
    );
    expect(error).toBeInstanceOf(UsageError);
    const message = (error as UsageError).message;
    expect(message).not.toContain('\n');
    expect(message).toContain(`estimator module ${path}`);
    expect(message).toMatch(problem);
  });

  it('a missing file and an id defined in two files', async () => {
    await expect(loadEstimatorModules([join(dir, 'absent.mjs')])).rejects.toThrow(/^estimator module .*absent\.mjs: no such file$/);
    const a = join(dir, 'first.mjs');
    const b = join(dir, 'second.mjs');
    const source = `export default { id: 'twin', family: 'f', quantity: 'entropy', summary: 's', settings: [], dims: [1, 2], reference: 'r', estimate: () => 0 };`;
    writeFileSync(a, source);
    writeFileSync(b, source);
    await expect(loadEstimatorModules([a, b])).rejects.toThrow(`estimator module ${b}: the id "twin" is also defined in ${a}; each id may be defined once`);
  });

  it('under plain Node (no TypeScript loader): a TypeScript module and a syntax error are clear one-line errors', () => {
    const built = join(root, 'dist', 'src', 'harness', 'modules.js');
    if (!existsSync(built)) throw new Error('dist/ is missing: run npm run build (npm test does) before this test');
    const broken = join(dir, 'plain-node-syntax.mjs');
    writeFileSync(broken, 'export const estimators = [;');
    const script = `import { loadEstimatorModules } from ${JSON.stringify(built)};
      for (const path of process.argv.slice(1)) {
        await loadEstimatorModules([path]).then(() => console.log('loaded'), (e) => console.log(e.message));
      }`;
    const result = spawnSync(process.execPath, ['--input-type=module', '-e', script, shiftedFixture, broken], {
      encoding: 'utf8',
      env: { ...process.env, NODE_OPTIONS: '' },
    });
    const [typescript, syntax, ...rest] = result.stdout.trim().split('\n');
    expect(rest).toEqual([]);
    expect(typescript).toBe(
      `estimator module ${shiftedFixture}: TypeScript modules load only under a TypeScript loader (NODE_OPTIONS="--import tsx" npx hhat ...); compile it to .mjs, or run hhat that way`,
    );
    expect(syntax).toBe(`estimator module ${broken} could not be loaded: Unexpected token ';'`);
  });
});
