/**
 * The benchmark harness: determinism across workers, shards and resumes; scores against independent
 * computations; plan validation; failures counted without stopping the run.
 */
import { appendFileSync, existsSync, mkdirSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { Ajv2020 } from 'ajv/dist/2020.js';
import normalRandom from '@stdlib/random-base-normal';
import { checkPlanShape, planFingerprint, readPlanFile, resolvePlan, type Plan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { main } from '../src/cli.js';
import { planInputFromOptions } from '../src/commands/bench.js';
import { buildContext } from '../src/harness/context.js';
import { executeReplicate, planUnits } from '../src/harness/work.js';
import { assembleRun, readRunFile, writeRunFile, type RunFile } from '../src/analysis/results.js';
import { mergeShards } from '../src/analysis/merge.js';
import { fitRate, scoreCell } from '../src/analysis/score.js';
import { registerEstimator } from '../estimators/index.js';
import { EstimateError, UsageError } from '../src/core/errors.js';
import { rngFromSeed } from '../src/core/rng.js';
import { parseShard } from '../src/harness/shard.js';
import { pickJob } from '../src/harness/pool.js';
import runSchema from '../src/schemas/run.schema.json' with { type: 'json' };

const dir = mkdtempSync(join(tmpdir(), 'hhat-harness-'));

function smallPlan(): Plan {
  return resolvePlan({
    scenarios: ['normal', 'exponential', 'gaussian:dim=2'],
    estimators: ['kozachenko-leonenko', 'vasicek', 'gaussian', 'histogram:bins=sturges'],
    sampleSizes: [50, 400],
    replicates: 12,
    seed: 4242,
  }).plan;
}

const estimatesOf = (run: RunFile) => run.cells.map((c) => `${c.scenario}|${c.estimator}|${c.n}|${JSON.stringify(c.estimates)}`);

describe('determinism', () => {
  it('1 and 2 workers, 3 shards merged, and an interrupted-then-resumed run give identical estimates', async () => {
    const plan = smallPlan();
    const one = assembleRun(await runPlan(plan, { workers: 1 }), null);
    const two = assembleRun(await runPlan(plan, { workers: 2 }), null);

    const shards = [];
    for (let i = 1; i <= 3; i++) {
      const shard = { index: i, count: 3 };
      const path = join(dir, `shard-${i}.json`);
      writeRunFile(path, assembleRun(await runPlan(plan, { workers: 1, shard }), shard));
      shards.push({ path, run: readRunFile(path) });
    }
    const merged = mergeShards(shards);

    const checkpointPath = join(dir, 'resume.checkpoint.jsonl');
    const controller = new AbortController();
    const first = await runPlan(plan, {
      workers: 1,
      checkpointPath,
      signal: controller.signal,
      onProgress: (p) => {
        if (p.unitsDone >= 3) controller.abort();
      },
    });
    expect(first.interrupted).toBe(true);
    expect(first.results.size).toBeLessThan(first.units.length);
    const resumed = await runPlan(plan, { workers: 2, checkpointPath, resume: true });
    expect(resumed.resumedUnits).toBe(first.results.size);
    const resumedRun = assembleRun(resumed, null);

    const reference = estimatesOf(one);
    expect(reference.length).toBe(3 * 2 * 4 - 2 /* vasicek skips the 2-D scenario at both n */);
    expect(estimatesOf(two)).toEqual(reference);
    expect(estimatesOf(merged)).toEqual(reference);
    expect(estimatesOf(resumedRun)).toEqual(reference);
    // Scores follow from the estimates, so they agree too.
    expect(merged.cells.map((c) => c.scores.rmse.value)).toEqual(one.cells.map((c) => c.scores.rmse.value));
    expect(merged.rankings).toEqual(one.rankings);
  });

  it('a run with replicateOffset k continues the draws: its replicates are replicates k.. of the full run, on threads and in-process', async () => {
    const plan = smallPlan();
    const full = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
    const tail = resolvePlan({ ...plan, replicates: 5 }).plan;
    for (const isolation of ['threads', 'in-process'] as const) {
      const continued = assembleRun(await runPlan(tail, { workers: 2, isolation, replicateOffset: 7 }), null);
      expect(continued.cells.map((c) => `${c.scenario}|${c.estimator}|${c.n}|${JSON.stringify(c.estimates)}`)).toEqual(
        full.cells.map((c) => `${c.scenario}|${c.estimator}|${c.n}|${JSON.stringify(c.estimates.slice(7, 12))}`),
      );
    }
    await expect(runPlan(tail, { replicateOffset: 7, checkpointPath: join(dir, 'offset.checkpoint.jsonl') })).rejects.toThrow(/keeps no checkpoint/);
  });

  it('a checkpoint from another plan is refused on resume, and an existing one is never overwritten silently', async () => {
    const plan = smallPlan();
    const checkpointPath = join(dir, 'other.checkpoint.jsonl');
    const controller = new AbortController();
    await runPlan(plan, { workers: 1, checkpointPath, signal: controller.signal, onProgress: () => controller.abort() });
    await expect(runPlan({ ...plan, seed: 1 }, { workers: 1, checkpointPath, resume: true })).rejects.toThrow(/belongs to a different plan/);
    await expect(runPlan(plan, { workers: 1, checkpointPath })).rejects.toThrow(/exists from an interrupted run; add --resume/);
  });

  it('a checkpoint whose last line was torn by a crash resumes cleanly: the fragment is cut off, not glued to the next line', async () => {
    const plan = smallPlan();
    const reference = estimatesOf(assembleRun(await runPlan(plan, { workers: 1 }), null));
    const checkpointPath = join(dir, 'torn.checkpoint.jsonl');
    const controller = new AbortController();
    await runPlan(plan, { workers: 1, checkpointPath, signal: controller.signal, onProgress: (p) => p.unitsDone >= 2 && controller.abort() });
    // A crash in the middle of writing the next unit's line.
    appendFileSync(checkpointPath, '{"unit": 7, "estimates": [1.2');
    const first = await runPlan(plan, { workers: 1, checkpointPath, resume: true, signal: controller.signal });
    expect(first.interrupted).toBe(true);
    const text = readFileSync(checkpointPath, 'utf8');
    expect(text.endsWith('\n')).toBe(true);
    for (const line of text.split('\n').filter(Boolean)) expect(() => JSON.parse(line)).not.toThrow();
    const resumed = await runPlan(plan, { workers: 2, checkpointPath, resume: true });
    expect(estimatesOf(assembleRun(resumed, null))).toEqual(reference);
  });

  it('a folder where the checkpoint or the run file goes is refused before any work, with one line and exit code 2', async () => {
    const plan = smallPlan();
    const folder = join(dir, 'is-a-folder.checkpoint.jsonl');
    mkdirSync(folder);
    await expect(runPlan(plan, { workers: 1, checkpointPath: folder, resume: true })).rejects.toThrow(
      /is a folder, where hhat keeps this run's checkpoint; move it away or choose another --out/,
    );
    const out = join(dir, 'out-folder');
    mkdirSync(out);
    let err = '';
    const code = await main(['bench', '--scenario', 'normal', '--estimator', 'vasicek', '--n', '100', '--replicates', '4', '--out', out], {
      out: () => {},
      err: (t) => (err += `${t}\n`),
    });
    expect(code).toBe(2);
    expect(err.trim().split('\n')).toEqual([`hhat: --out ${out} is a folder; give the run file's path, e.g. --out ${join(out, 'run.json')}`]);
    expect(existsSync(`${out}.checkpoint.jsonl`)).toBe(false);
  });

  it('every other output that is a folder is a usage mistake too, refused before any work (bench --csv/--report, report and merge --out)', async () => {
    const folder = join(dir, 'outputs-folder');
    mkdirSync(folder);
    const run = join(dir, 'for-outputs.json');
    const bench = ['bench', '--scenario', 'normal', '--estimator', 'vasicek', '--n', '100', '--replicates', '4'];
    const cases: [string[], string][] = [
      [
        [...bench, '--out', join(dir, 'csv-run.json'), '--csv', folder],
        `hhat: --csv ${folder} is a folder; give a file's path, e.g. --csv ${join(folder, 'scores.csv')}`,
      ],
      [
        [...bench, '--out', join(dir, 'report-run.json'), '--report', folder],
        `hhat: --report ${folder} is a folder; give a file's path, e.g. --report ${join(folder, 'report.html')}`,
      ],
      [[...bench, '--out', join(dir, 'svg-run.json'), '--svg-dir', folder], "hhat: --svg-dir writes the report's charts; give --report too"],
      [['report', run, '--out', folder], `hhat: --out ${folder} is a folder; give a file's path, e.g. --out ${join(folder, 'report.html')}`],
      [['merge', run, '--out', folder], `hhat: --out ${folder} is a folder; give a file's path, e.g. --out ${join(folder, 'run.json')}`],
    ];
    expect(await main([...bench, '--out', run, '--quiet'], { out: () => {}, err: () => {} })).toBe(0);
    for (const [args, line] of cases) {
      let err = '';
      const code = await main(args, { out: () => {}, err: (t) => (err += `${t}\n`) });
      expect({ args, code, err: err.trim().split('\n') }).toEqual({ args, code: 2, err: [line] });
    }
    for (const name of ['csv-run.json', 'report-run.json', 'svg-run.json']) expect(existsSync(join(dir, name))).toBe(false);
  });

  it('a replicate whose every estimate already failed is not drawn again (a worker that died drawing it would die again)', () => {
    const context = buildContext(smallPlan());
    const [unit] = planUnits(context).units;
    context.scenarios[unit.scenario] = {
      ...context.scenarios[unit.scenario],
      sample: () => {
        throw new Error('drawn');
      },
    };
    const result = executeReplicate(unit, context, unit.repStart, { skip: () => true });
    expect(Array.from(result.values).every(Number.isNaN)).toBe(true);
    expect(result.failures).toEqual([]);
    expect(() => executeReplicate(unit, context, unit.repStart, { skip: (k) => k > 0 })).toThrow('drawn');
  });

  it('merge refuses incomplete or mixed shard sets', async () => {
    const plan = smallPlan();
    const path1 = join(dir, 'm1.json');
    writeRunFile(path1, assembleRun(await runPlan(plan, { workers: 1, shard: { index: 1, count: 2 } }), { index: 1, count: 2 }));
    const run1 = readRunFile(path1);
    expect(() => mergeShards([{ path: path1, run: run1 }])).toThrow(/shard 2\/2 missing/);
    expect(() =>
      mergeShards([
        { path: path1, run: run1 },
        { path: path1, run: run1 },
      ]),
    ).toThrow(/given twice/);
  });
});

describe('scheduling', () => {
  const jobs = (families: string): { unit: { codeFamily: string } }[] => [...families].map((f) => ({ unit: { codeFamily: f } }));

  it('units of one-dimensional and multivariate scenarios belong to different code families', () => {
    const context = buildContext(smallPlan());
    const units = planUnits(context).units;
    const family = (scenario: number) => new Set(units.filter((u) => u.scenario === scenario).map((u) => u.codeFamily));
    expect(context.scenarios.map((s) => s.dim)).toEqual([1, 1, 2]);
    expect(family(0)).toEqual(family(1));
    expect([...family(0)]).toHaveLength(1);
    expect([...family(2)]).toHaveLength(1);
    expect(family(0)).not.toEqual(family(2));
  });

  it('a worker keeps to its code family while it has units, and a new worker starts on a family nobody runs', () => {
    // Pending jobs costliest first; m = multivariate, u = univariate.
    const pending = jobs('mmumu');
    expect(pickJob(pending, null, [])).toBe(0);
    expect(pickJob(pending, null, [null])).toBe(0);
    expect(pickJob(pending, null, ['m'])).toBe(2);
    expect(pickJob(pending, 'u', ['m'])).toBe(2);
    expect(pickJob(pending, 'm', ['u'])).toBe(0);
    // Its family done, a worker takes the costliest unit left; with one family only, cost order alone decides.
    expect(pickJob(jobs('mmm'), 'u', ['m'])).toBe(0);
    expect(pickJob(jobs('mmm'), null, ['m'])).toBe(0);
  });

  it('two workers with unequal families both stay busy: the one whose family runs out helps with the other', () => {
    // A simulation of the pool with durations equal to cost: 10 multivariate units of cost 3, 6 univariate of cost 1.
    const pending = [
      ...Array.from({ length: 10 }, () => ({ unit: { codeFamily: 'm' }, cost: 3 })),
      ...Array.from({ length: 6 }, () => ({ unit: { codeFamily: 'u' }, cost: 1 })),
    ];
    const workers = [
      { family: null as string | null, free: 0, ran: '' },
      { family: null as string | null, free: 0, ran: '' },
    ];
    while (pending.length) {
      const w = workers[0].free <= workers[1].free ? workers[0] : workers[1];
      const [job] = pending.splice(
        pickJob(
          pending,
          w.family,
          workers.filter((o) => o !== w).map((o) => o.family),
        ),
        1,
      );
      w.family = job.unit.codeFamily;
      w.free += job.cost;
      w.ran += job.unit.codeFamily;
    }
    expect(workers.map((w) => w.ran)).toEqual(['mmmmmm', 'uuuuuummmm']);
    // Total cost 36 on two workers: both end at 18, as cost order alone would.
    expect(workers.map((w) => w.free)).toEqual([18, 18]);
  });
});

describe('run files', () => {
  it('validate against the shipped JSON Schema and keep raw estimates and provenance', async () => {
    const run = assembleRun(await runPlan(smallPlan(), { workers: 1 }), null);
    const path = join(dir, 'run.json');
    writeRunFile(path, run);
    const parsed = JSON.parse(readFileSync(path, 'utf8'));
    const validate = new Ajv2020({ strict: false }).compile(runSchema);
    expect(validate(parsed), JSON.stringify(validate.errors)).toBe(true);
    expect(parsed.schemaVersion).toBe(2);
    expect(parsed.environment.node).toBe(process.version);
    expect(parsed.fingerprint).toBe(planFingerprint(run.plan));
    expect(parsed.cells[0].estimates).toHaveLength(12);
    expect(existsSync(`${path}.${process.pid}.tmp`)).toBe(false);
  });

  it('an older schema version or a broken file is a clear error', () => {
    const old = join(dir, 'old.json');
    writeRunFile(old, { kind: 'hhat-run', schemaVersion: 0 } as unknown as RunFile);
    expect(() => readRunFile(old)).toThrow(/schemaVersion 0; this hhat reads version 2/);
    const broken = join(dir, 'broken.json');
    writeRunFile(broken, { kind: 'hhat-run' } as unknown as RunFile);
    expect(() => readRunFile(broken)).toThrow(UsageError);
  });
});

describe('scores', () => {
  // Estimates drawn from N(truth + 0.3, 0.5²): the true bias is 0.3, SD 0.5, RMSE √(0.09 + 0.25).
  const draw = normalRandom.factory(0, 1, { prng: rngFromSeed('scores') });
  const truth = 2;
  const make = (m: number) => Float64Array.from({ length: m }, () => truth + 0.3 + 0.5 * draw());

  it('match a direct two-pass computation on a synthetic set', () => {
    const values = make(40);
    const s = scoreCell(values, truth, 1000, 0.5);
    // Independent computation: textbook formulas, written out separately.
    const m = values.length;
    const mean = values.reduce((a, b) => a + b, 0) / m;
    const sd = Math.sqrt(values.reduce((a, v) => a + (v - mean) ** 2, 0) / (m - 1));
    const rmse = Math.sqrt(values.reduce((a, v) => a + (v - truth) ** 2, 0) / m);
    const mae = values.reduce((a, v) => a + Math.abs(v - truth), 0) / m;
    expect(s.mean.value).toBeCloseTo(mean, 12);
    expect(s.bias.value).toBeCloseTo(mean - truth, 12);
    expect(s.bias.se).toBeCloseTo(sd / Math.sqrt(m), 12);
    expect(s.sd.value).toBeCloseTo(sd, 12);
    expect(s.rmse.value).toBeCloseTo(rmse, 12);
    expect(s.mae.value).toBeCloseTo(mae, 12);
    expect(s.efficiency!.value).toBeCloseTo((1000 * sd * sd) / 0.5, 9);
  });

  it('standard errors match the spread of each score over many independent synthetic sets (Monte Carlo)', () => {
    const sets = 4000;
    const m = 50;
    const bias: number[] = [];
    const sd: number[] = [];
    const rmse: number[] = [];
    const mae: number[] = [];
    const reported = { bias: 0, sd: 0, rmse: 0, mae: 0 };
    for (let k = 0; k < sets; k++) {
      const s = scoreCell(make(m), truth, 100);
      bias.push(s.bias.value);
      sd.push(s.sd.value);
      rmse.push(s.rmse.value);
      mae.push(s.mae.value);
      reported.bias += s.bias.se / sets;
      reported.sd += s.sd.se / sets;
      reported.rmse += s.rmse.se / sets;
      reported.mae += s.mae.se / sets;
    }
    const spread = (xs: number[]) => {
      const mu = xs.reduce((a, b) => a + b, 0) / xs.length;
      return Math.sqrt(xs.reduce((a, x) => a + (x - mu) ** 2, 0) / (xs.length - 1));
    };
    // The average reported SE should match the actual SD of the score across sets within ~5%
    // (the delta method is first-order; at m = 50 its error is a few percent).
    expect(reported.bias / spread(bias)).toBeGreaterThan(0.95);
    expect(reported.bias / spread(bias)).toBeLessThan(1.05);
    for (const [name, xs] of [
      ['sd', sd],
      ['rmse', rmse],
      ['mae', mae],
    ] as const) {
      const ratio = reported[name] / spread(xs);
      expect(ratio, name).toBeGreaterThan(0.9);
      expect(ratio, name).toBeLessThan(1.1);
    }
    // Sanity against the true values of the generating law.
    expect(bias.reduce((a, b) => a + b, 0) / sets).toBeCloseTo(0.3, 2);
    expect(rmse.reduce((a, b) => a + b, 0) / sets).toBeCloseTo(Math.sqrt(0.34), 1);
  });

  it('failed replicates count as failures and are left out of the other scores', () => {
    const s = scoreCell([1, NaN, 3, NaN, 2], 2, 10);
    expect(s.failures).toBe(2);
    expect(s.successes).toBe(3);
    expect(s.failureRate.value).toBeCloseTo(0.4, 15);
    expect(s.bias.value).toBeCloseTo(0, 15);
  });

  it('fits the RMSE rate: exact power laws give their slope', () => {
    const points = [100, 1000, 10000].map((n) => ({ n, value: 3 * n ** -0.5, se: 0.05 * 3 * n ** -0.5 }));
    const fit = fitRate(points)!;
    expect(fit.slope).toBeCloseTo(-0.5, 12);
    // With known relative SE 5% per point, WLS gives SE = 0.05/√Σ(x − x̄)²; x = ln n at 3 equally spaced points.
    const spacing = Math.log(10);
    expect(fit.se).toBeCloseTo(0.05 / Math.sqrt(2 * spacing * spacing), 12);
  });

  it('scales the slope SE by √(χ²/ν) when the points do not follow a power law (SciPy curve_fit reference)', () => {
    // A metric that falls then rises, as gaussian's RMSE on Student t data (0.320, 0.147, 0.224 at n = 100, 500,
    // 2000; SEs 0.062, 0.013, 0.020). Reference, scipy.optimize.curve_fit(lambda x, a, b: a + b*x, ln n,
    // ln value, sigma=SE/value) with its default absolute_sigma=False, which scales the covariance by χ²/ν
    // (SciPy 1.17.1, run on this machine): slope 0.0219837, SE 0.2758347. Without scaling (absolute_sigma=True)
    // the SE is 0.0634041.
    const fit = fitRate([
      { n: 100, value: 0.32, se: 0.062 },
      { n: 500, value: 0.147, se: 0.013 },
      { n: 2000, value: 0.224, se: 0.02 },
    ])!;
    expect(fit.slope).toBeCloseTo(0.0219837, 6);
    expect(fit.se).toBeCloseTo(0.2758347, 6);
    // Points that fit better than their errors allow (χ²/ν < 1) keep the unscaled SE: the exact power law above.
  });
});

describe('bad input', () => {
  it('a plan whose every estimator–scenario pair is skipped is refused, not written as an empty run', async () => {
    const plan = resolvePlan({ scenarios: ['gaussian:dim=2'], estimators: ['vasicek'], sampleSizes: [50], replicates: 2, seed: 1 }).plan;
    await expect(runPlan(plan, { workers: 1 })).rejects.toThrow(
      new UsageError(
        'the plan has no cells to run: every estimator–scenario pair is skipped (on gaussian:dim=2,rho=0.5,spread=1,sigma=1: vasicek needs d = 1; the scenario has d = 2); `hhat scenarios` and `hhat estimators` list dimensions',
      ),
    );
  });

  it('plan files: unknown keys and bad values name the path', () => {
    expect(() => checkPlanShape({ scenarios: ['normal'], estimators: ['gaussian'], colour: 1 }, 'p.json')).toThrow(
      /^p\.json: colour: unknown key \(allowed: name, .*scenarios, .*sampleSizes, .*\)$/,
    );
    expect(() => checkPlanShape({ scenarios: ['normal'], estimators: ['gaussian'], replicates: 1.5 }, 'p.json')).toThrow(
      'p.json: replicates: must be an integer',
    );
    expect(() => checkPlanShape({ scenarios: [], estimators: ['gaussian'] }, 'p.json')).toThrow('p.json: scenarios: must list at least 1 item');
    // A misspelt key inside an estimator object: the object branch's complaint, not "must be a string".
    expect(() => checkPlanShape({ scenarios: ['normal'], estimators: [{ id: 'vasicek', setings: {} }] }, 'p.json')).toThrow(
      'p.json: estimators[0].setings: unknown key (allowed: id, settings)',
    );
    expect(() =>
      resolvePlan({ scenarios: ['normal'], estimators: ['gaussian', 'vasicek', { id: 'kozachenko-leonenko', settings: { k: 0 } }] }, 'p.json'),
    ).toThrow('p.json: estimators[2].settings.k: 0 is not allowed; it must be an integer ≥ 1');
    expect(() => resolvePlan({ scenarios: ['normal', 'nope'], estimators: ['gaussian'] }, 'p.json')).toThrow(/p.json: scenarios\[1\]: unknown scenario "nope"/);
    // ψ(1e-320) ≈ −1e320 overflows: the entropy of so peaked a law is −∞ in doubles; no error can be measured against it.
    expect(() => resolvePlan({ scenarios: ['normal', 'gamma:shape=1e-320'], estimators: ['gaussian'] }, 'p.json')).toThrow(
      "p.json: scenarios[1]: gamma:shape=1e-320,scale=1 has a true entropy of −∞ nats; a benchmark needs a finite true value, so choose parameters that give one (`hhat scenarios` lists each family's)",
    );
  });

  it("--time-limit and --memory-limit set the plan limits (over a plan file's), fingerprinted; bad or empty values are one line", async () => {
    const dir = mkdtempSync(join(tmpdir(), 'hhat-limits-'));
    const file = join(dir, 'plan.json');
    writeFileSync(
      file,
      JSON.stringify({
        scenarios: ['normal'],
        estimators: ['gaussian'],
        limits: { estimateSeconds: 30, estimateSecondsPerPoint: 0.01, workerMemoryMiB: 2048 },
      }),
    );
    expect(planInputFromOptions({ plan: file }).limits).toEqual({ estimateSeconds: 30, estimateSecondsPerPoint: 0.01, workerMemoryMiB: 2048 });
    // A number of seconds on the command line is the limit at every n: the per-point term goes.
    const flagged = planInputFromOptions({ plan: file, timeLimit: '2.5', memoryLimit: '512' });
    expect(flagged.limits).toEqual({ estimateSeconds: 2.5, estimateSecondsPerPoint: 0, workerMemoryMiB: 512 });
    expect(planInputFromOptions({ timeLimit: '1' }).limits).toEqual({ estimateSeconds: 1, estimateSecondsPerPoint: 0 });
    const plain = resolvePlan(planInputFromOptions({ plan: file })).plan;
    const limited = resolvePlan(flagged).plan;
    expect(limited.limits).toEqual({ estimateSeconds: 2.5, estimateSecondsPerPoint: 0, workerMemoryMiB: 512 });
    // A limit decides which estimates fail, so a run cannot be resumed under another one.
    expect(planFingerprint(limited)).not.toBe(planFingerprint(plain));
    for (const [flag, value, message] of [
      ['--time-limit', '0', /^hhat: --time-limit 0 is not allowed; it must be a number of seconds above 0 and at most 86400 \(e\.g\. 5 or 0\.5\)$/],
      ['--time-limit', 'soon', /^hhat: --time-limit soon is not allowed; it must be a number of seconds above 0/],
      ['--time-limit', '86401', /at most 86400/],
      ['--memory-limit', '63', /^hhat: --memory-limit 63 is not allowed; it must be an integer from 64 to 1048576$/],
      ['--memory-limit', '1000.5', /must be an integer from 64/],
      // An unset shell variable gives '': never a silent fall-back to the default plan or output.
      ['--plan', '', /^hhat: --plan was given an empty value; it needs a file name$/],
      ['--shard', ' ', /^hhat: --shard was given an empty value; it needs a slice, i\/N or auto$/],
      ['--svg-dir', '', /^hhat: --svg-dir was given an empty value; it needs a folder name$/],
    ] as const) {
      let err = '';
      const code = await main(['bench', flag, value, '--out', join(dir, 'never.json')], { out: () => {}, err: (t) => (err += t) });
      expect(code).toBe(2);
      expect(err.trim()).toMatch(message);
    }
    expect(existsSync(join(dir, 'never.json'))).toBe(false);
  });

  // Found by a tester: a plan with "scenarios" twice ran the second list only, unsaid; one with a byte-order mark was refused.
  it('a plan file with a key given twice in one object is refused with its place; a byte-order mark is allowed', async () => {
    const twice = join(dir, 'twice.json');
    writeFileSync(twice, '{"scenarios": ["normal"],\n "estimators": ["gaussian"],\n "scenarios": ["gamma"], "sampleSizes": [50], "replicates": 3}');
    let err = '';
    expect(await main(['bench', '--plan', twice, '--out', join(dir, 'never.json')], { out: () => {}, err: (t) => (err += t) })).toBe(2);
    expect(err).toBe(`hhat: ${twice} line 3, column 2: "scenarios" is given twice in one object; keep one (JSON readers keep only the last)`);
    // The same key in two objects, or an escaped quote in a value, is no duplicate.
    const fine = join(dir, 'bom.json');
    writeFileSync(
      fine,
      '\uFEFF{"scenarios": ["normal"], "estimators": ["gaussian:norm=\\"x\\""], "sampleSizes": [50], "replicates": 3, "limits": {"estimateSeconds": 5}}',
    );
    expect(readPlanFile(fine).estimators).toEqual(['gaussian:norm="x"']);
    writeFileSync(fine, '\uFEFF{"scenarios": ["normal"], "estimators": ["gaussian"], "sampleSizes": [50], "replicates": 3, "limits": {"estimateSeconds": 5}}');
    expect(readPlanFile(fine).scenarios).toEqual(['normal']);
  });

  it('shards: i/N, auto from Slurm, Kubernetes indexed Jobs and CI variables; bad values are errors', () => {
    expect(parseShard('2/5')).toEqual({ index: 2, count: 5 });
    expect(parseShard('auto', { SLURM_ARRAY_TASK_ID: '3', SLURM_ARRAY_TASK_MIN: '0', SLURM_ARRAY_TASK_COUNT: '4' })).toEqual({ index: 4, count: 4 });
    expect(parseShard('auto', { JOB_COMPLETION_INDEX: '0', HHAT_SHARD_COUNT: '3' })).toEqual({ index: 1, count: 3 });
    expect(parseShard('auto/6', { HHAT_SHARD_INDEX: '6' })).toEqual({ index: 6, count: 6 });
    expect(() => parseShard('0/3')).toThrow(/out of range/);
    expect(() => parseShard('auto', {})).toThrow(/found no array-job variables/);
    // Found by a tester: an index without a count was reported as no variables at all.
    expect(() => parseShard('auto', { HHAT_SHARD_INDEX: '1' })).toThrow(
      '--shard auto: HHAT_SHARD_INDEX is set but HHAT_SHARD_COUNT is not; set it to the number of shards, or use --shard auto/N',
    );
    expect(() => parseShard('half')).toThrow(/write i\/N/);
  });

  it('an estimator that throws on one replicate is counted as a failure in its cell and the run goes on', async () => {
    registerEstimator({
      id: 'test-fails-on-negative-first-point',
      family: 'test',
      quantity: 'entropy',
      summary: 'fails when the first point is negative',
      settings: [],
      dims: [1, 1],
      reference: 'a test double',
      estimate: (sample) => {
        if (sample.data[0] < 0) throw new EstimateError('numeric', 'first point negative');
        return 1;
      },
    });
    const plan = resolvePlan({
      scenarios: ['normal'],
      estimators: ['test-fails-on-negative-first-point', 'gaussian'],
      sampleSizes: [20],
      replicates: 20,
      seed: 9,
    }).plan;
    // Registered in this process only, so it runs in-process (worker threads know module estimators only);
    // on threads the run is refused before any work.
    await expect(runPlan(plan, { workers: 1 })).rejects.toThrow(
      /^"test-fails-on-negative-first-point" was registered in this process by code, which worker threads cannot see/,
    );
    const run = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
    const failing = run.cells.find((c) => c.estimatorId === 'test-fails-on-negative-first-point')!;
    expect(failing.scores.failures).toBeGreaterThan(0);
    expect(failing.scores.failures).toBeLessThan(20);
    expect(failing.failures[0].message).toBe('numeric: first point negative');
    expect(run.cells.find((c) => c.estimatorId === 'gaussian')!.scores.failures).toBe(0);
  });
});
