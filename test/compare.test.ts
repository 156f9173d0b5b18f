/**
 * `hhat compare`: the t tests against SciPy, classification of cells, paired versus unpaired power, and the
 * CLI's outputs (exit codes, Markdown, JSON, JUnit XML read back with an XML parser).
 */
import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { rngFromSeed } from '../src/core/rng.js';
import { XMLParser } from 'fast-xml-parser';
import { changeFound, compareRuns, failsPolicy, pairedTTest, parseTolerance, welchTTest, type Comparison } from '../src/analysis/compare.js';
import {
  escapeXml,
  formatComparisonJson,
  formatComparisonJunit,
  formatComparisonMarkdown,
  formatComparisonText,
  formatP,
} from '../src/views/compare-format.js';
import { resolvePlan, type PlanInput } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun, writeRunFile, type RunFile } from '../src/analysis/results.js';
import { scoreCell } from '../src/analysis/score.js';
import { UsageError } from '../src/core/errors.js';
import { getEstimator, replaceEstimator } from '../estimators/index.js';
import type { Estimator } from '../src/core/contracts.js';
import { useEstimatorModules } from '../src/harness/modules.js';
import { shiftedKozachenkoLeonenko } from './fixtures/shifted-kozachenko-leonenko.js';
import { wildKozachenkoLeonenko } from './fixtures/wild-kozachenko-leonenko.js';
import { fisherExact, signTest, signTestAbove } from '../src/analysis/exact-tests.js';
import scipy from './fixtures/compare.json' with { type: 'json' };
import { runCli as run } from './helpers/cli.js';

const dir = mkdtempSync(join(tmpdir(), 'hhat-compare-'));
const shiftedModule = join(__dirname, 'fixtures', 'shifted-kozachenko-leonenko.ts');
const builtInKl = getEstimator('kozachenko-leonenko');

async function runInProcess(input: PlanInput): Promise<RunFile> {
  const { plan } = resolvePlan(input);
  return assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
}

/** Runs `work` with `estimator` in place of the built-in of its id, putting the built-in back whatever happens. */
async function withEstimator<T>(estimator: Estimator, work: () => Promise<T>): Promise<T> {
  replaceEstimator(estimator);
  try {
    return await work();
  } finally {
    replaceEstimator(builtInKl);
  }
}

function save(name: string, value: RunFile): string {
  const path = join(dir, name);
  writeRunFile(path, value);
  return path;
}

/** Relative difference, for p-values spanning many orders of magnitude. */
const relative = (a: number, b: number) => Math.abs(a - b) / Math.abs(b);

describe('t tests (reference: SciPy, test/fixtures/make_compare_fixture.py)', () => {
  it.each(Object.entries(scipy.paired))('paired (one-sample t on differences): %s', (_name, ref) => {
    const test = pairedTTest(ref.d)!;
    expect(test.t).toBeCloseTo(ref.statistic, 9);
    expect(test.df).toBe(ref.df);
    expect(relative(test.p, ref.p)).toBeLessThan(1e-7);
    expect(test.interval[0]).toBeCloseTo(ref.ci95[0], 10);
    expect(test.interval[1]).toBeCloseTo(ref.ci95[1], 10);
    const ninety = pairedTTest(ref.d, 0.9)!;
    expect(ninety.interval[0]).toBeCloseTo(ref.ci90[0], 10);
    expect(ninety.interval[1]).toBeCloseTo(ref.ci90[1], 10);
  });

  it.each(Object.entries(scipy.welch))("Welch's unequal-variance t: %s", (_name, ref) => {
    const test = welchTTest(ref.a, ref.b)!;
    expect(test.t).toBeCloseTo(ref.statistic, 9);
    expect(test.df).toBeCloseTo(ref.df, 8);
    expect(relative(test.p, ref.p)).toBeLessThan(1e-7);
    expect(test.interval[0]).toBeCloseTo(ref.ci95[0], 10);
    expect(test.interval[1]).toBeCloseTo(ref.ci95[1], 10);
  });

  it('the t quantile behind the intervals matches a printed table (from memory: t(0.975; 10) = 2.228, t(0.95; 4) = 2.132)', () => {
    // An odd-sized sample of 0 and (m − 1)/2 pairs ±√m has mean 0 and SE 1, so the interval's upper end is the quantile.
    const unitSe = (m: number) => [0, ...Array.from({ length: m - 1 }, (_, i) => (i % 2 ? 1 : -1) * Math.sqrt(m))];
    expect(pairedTTest(unitSe(11))!.interval[1]).toBeCloseTo(2.228, 3);
    expect(pairedTTest(unitSe(5), 0.9)!.interval[1]).toBeCloseTo(2.132, 3);
  });

  it.each(scipy.sign.map((r) => [r.above, r.below, r] as const))('sign test %i worse against %i better (scipy.stats.binomtest, p = ½)', (_a, _b, ref) => {
    expect(relative(signTest(ref.above, ref.below).p, ref.p)).toBeLessThan(1e-10);
    // One-sided, where it has the larger count: half the two-sided p (the tails are symmetric at p = ½).
    if (ref.above > ref.below) expect(relative(signTestAbove(ref.above, ref.below), ref.p / 2)).toBeLessThan(1e-10);
  });

  it.each(scipy.fisher.map((r) => [JSON.stringify(r.table), r] as const))("Fisher's exact test on %s (scipy.stats.fisher_exact)", (_t, ref) => {
    const [[a, b], [c, d]] = ref.table;
    expect(relative(fisherExact(a, b, c, d), ref.p)).toBeLessThan(1e-10);
  });

  it('too few values give no test rather than NaN', () => {
    expect(pairedTTest([1])).toBeNull();
    expect(welchTTest([1, 2], [3])).toBeNull();
  });
});

describe('--tolerance', () => {
  it('reads nats and percentages of the base RMSE; anything else is a one-line usage error', () => {
    expect(parseTolerance('0.01')).toEqual({ kind: 'nats', value: 0.01 });
    expect(parseTolerance('1e-3')).toEqual({ kind: 'nats', value: 0.001 });
    expect(parseTolerance('5%')).toEqual({ kind: 'ratio', value: 0.05 });
    for (const bad of ['-0.1', 'five', '5%%', '']) {
      expect(() => parseTolerance(bad)).toThrow(UsageError);
      expect(() => parseTolerance(bad)).toThrow(
        /^--tolerance .* is not allowed; give a change in RMSE in nats \(e\.g\. 0\.01\) or a percentage of the base RMSE \(e\.g\. 5%\)/,
      );
    }
  });
});

describe('comparing runs', () => {
  // Plan A: the 0.05-nat regression. Kozachenko–Leonenko's bias here is near 0, so adding 0.05 nats raises
  // every KL cell's MSE by about 0.05² (paired t ≥ 3.8 at this seed), while vasicek and gaussian are untouched.
  const planA: PlanInput = {
    scenarios: ['normal', 'uniform', 'exponential'],
    estimators: ['kozachenko-leonenko', 'kozachenko-leonenko:k=5', 'vasicek', 'gaussian'],
    sampleSizes: [200, 1000],
    replicates: 200,
    seed: 99,
  };
  // Plan B: the 0.005-nat change, far below the Monte-Carlo error of either run. KL is biased by about
  // −0.033 nats here, so a shift δ changes the MSE by δ(2·bias + δ), which the paired test resolves.
  const planB: PlanInput = { scenarios: ['gaussian:dim=3'], estimators: ['kozachenko-leonenko'], sampleSizes: [1000], replicates: 200, seed: 99 };

  let base: RunFile;
  let shifted: RunFile;
  let basePath: string;
  let shiftedPath: string;

  beforeAll(async () => {
    base = await runInProcess(planA);
    basePath = save('base.json', base);
    const registration = await useEstimatorModules([shiftedModule]);
    expect(registration.replaced).toEqual(['kozachenko-leonenko']);
    shifted = await runInProcess(planA);
    // A built-in replaced by code, not by a module file: threads would run the built-in, so they refuse.
    replaceEstimator({ ...builtInKl });
    await expect(runPlan(resolvePlan(planB).plan, { workers: 1 })).rejects.toThrow(/^"kozachenko-leonenko" was registered in this process by code/);
    replaceEstimator(builtInKl);
    shiftedPath = save('shifted.json', shifted);
  });

  afterAll(() => {
    replaceEstimator(builtInKl);
  });

  it('a run compared with itself: every cell unchanged, paired, exit 0 (also under --fail-on changed)', async () => {
    const comparison = compareRuns(base, base);
    expect(comparison.pairing.paired).toBe(true);
    expect(comparison.cells).toHaveLength(24);
    expect(comparison.cells.every((c) => c.status === 'unchanged')).toBe(true);
    expect(comparison.counts).toMatchObject({ unchanged: 24, worse: 0, improved: 0, 'changed-within-noise': 0, added: 0, removed: 0 });

    const text = await run(['compare', basePath, basePath, '--fail-on', 'changed']);
    expect(text.code).toBe(0);
    expect(text.out).toMatch(/^Paired: both runs drew the same samples/m);
    expect(text.out).toContain('0 worse, 0 improved, 0 changed, not significantly or within tolerance, 24 unchanged');
    const json = await run(['compare', basePath, basePath, '--json']);
    expect(json.code).toBe(0);
    const parsed = JSON.parse(json.out) as Comparison;
    expect(parsed.pairing.paired).toBe(true);
    expect(new Set(parsed.cells.map((c) => c.status))).toEqual(new Set(['unchanged']));
  });

  // Found by a tester: a cell whose replicates all failed on one side read "0.07697 → −∞", "ΔRMSE -0.0770 ± 0",
  // and one failed on both sides "every estimate is bit-identical" although the draws differed.
  it('cells with no estimates show "–", not −∞ or ± 0, and two all-failed cells are not called bit-identical', async () => {
    const bench = (seed: string, name: string) =>
      run([
        'bench',
        '--quantity',
        'divergence',
        '--scenario',
        'kl-gaussian:dim=1,shift=1,sigma=1',
        '--estimator',
        'histogram-divergence:bins=freedman-diaconis',
        '--estimator',
        'histogram-divergence:bins=sturges',
        '--n',
        '300,1000',
        '--replicates',
        '6',
        '--seed',
        seed,
        '--out',
        join(dir, name),
        '--quiet',
      ]);
    await bench('20261201', 'fail-a.json');
    await bench('9', 'fail-b.json');
    const text = await run(['compare', join(dir, 'fail-a.json'), join(dir, 'fail-b.json')]);
    expect(text.code).toBe(0);
    expect(text.out).not.toMatch(/−∞|± 0 /);
    const json = JSON.parse((await run(['compare', join(dir, 'fail-a.json'), join(dir, 'fail-b.json'), '--json'])).out) as Comparison;
    const allFailedNext = json.cells.find((c) => c.rmse.base.value !== null && c.rmse.next.value === null)!;
    expect(allFailedNext.rmse.change).toBeNull();
    const bothFailed = json.cells.filter((c) => c.rmse.base.value === null && c.rmse.next.value === null);
    expect(bothFailed.length).toBeGreaterThan(0);
    for (const c of bothFailed) expect(c.reasons[0]).toBe('no estimates in either run: every replicate failed in both');
  });

  // Found by a tester: runs of the same seed whose plans differed only in their scenario lists were called
  // "different samples" and compared by Welch's test, although every shared cell drew the same samples.
  it('pairs the cells of runs with the same seed and replicate count, whatever else their plans hold', () => {
    const wider = { ...base, drawsFingerprint: 'another plan', plan: { ...base.plan, sampleSizes: [...base.plan.sampleSizes, 99999] } };
    const comparison = compareRuns(base, wider);
    expect(comparison.pairing.paired).toBe(true);
    expect(comparison.pairing.reason).toMatch(
      /^the cells both runs hold drew the same samples \(seed \d+, \d+ replicates; the plans differ otherwise: sample sizes/,
    );
    const fewer = { ...base, drawsFingerprint: 'another plan', plan: { ...base.plan, replicates: base.plan.replicates + 4 } };
    const unpaired = compareRuns(base, fewer);
    expect(unpaired.pairing.paired).toBe(false);
    expect(unpaired.pairing.reason).toMatch(/their first \d+ replicates are the same draws, which Welch's test treats as independent/);
  });

  // Found by a tester: an MI run against a divergence run passed `--fail-on worse --allow-missing` with "0 worse".
  it('runs with no cell in common are refused, not passed', async () => {
    const other = save('no-common.json', { ...base, cells: base.cells.map((c) => ({ ...c, scenario: `${c.scenario}-elsewhere` })) });
    const result = await run(['compare', basePath, other, '--fail-on', 'worse', '--allow-missing']);
    expect(result.code).toBe(2);
    expect(result.err).toMatch(/have no cell in common \(same scenario, estimator, n and role\)/);
  });

  it('a module adding 0.05 nats to kozachenko-leonenko: exactly its cells are worse, and every output says so', async () => {
    const comparison = compareRuns(base, shifted);
    const worse = comparison.cells.filter((c) => c.status === 'worse');
    const others = comparison.cells.filter((c) => c.status !== 'worse');
    expect(worse.map((c) => `${c.scenario} ${c.estimator} ${c.n}`).sort()).toEqual(
      comparison.cells
        .filter((c) => c.estimator.startsWith('kozachenko-leonenko:'))
        .map((c) => `${c.scenario} ${c.estimator} ${c.n}`)
        .sort(),
    );
    expect(worse).toHaveLength(12);
    expect(others.every((c) => c.status === 'unchanged')).toBe(true);
    for (const c of worse) {
      // Independent of the test: every paired estimate moved by exactly the module's 0.05 (to rounding).
      expect(c.shift!.value).toBeCloseTo(0.05, 12);
      expect(c.rmse.change).toBeGreaterThan(0);
      expect(c.test!.interval[0]).toBeGreaterThan(0);
    }

    const cli = await run(['compare', basePath, shiftedPath, '--fail-on', 'worse', '--markdown', '--junit', join(dir, 'junit.xml')]);
    expect(cli.code).toBe(1);
    expect(cli.err.trim()).toBe('hhat compare: 12 cells are worse (--fail-on worse)');

    // Markdown: the summary line first, then the changed cells, all of them KL and all worse.
    const lines = cli.out.split('\n');
    expect(lines[0]).toBe('**hhat compare: 12 worse, 0 improved, 0 changed, not significantly or within tolerance, 12 unchanged** (paired, tolerance 0 nats)');
    const changedRows = lines.filter((l) => l.startsWith('| **worse**'));
    expect(changedRows).toHaveLength(12);
    expect(changedRows.every((l) => l.includes('`kozachenko-leonenko:'))).toBe(true);
    expect(cli.out).toContain('<details><summary>12 unchanged cells</summary>');

    // JUnit: read back with an XML parser; one testcase per cell, a <failure> for each worse cell.
    const xml = new XMLParser({ ignoreAttributes: false, attributeNamePrefix: '', isArray: (name) => name === 'testcase' || name === 'failure' }).parse(
      readFileSync(join(dir, 'junit.xml'), 'utf8'),
    );
    const suite = xml.testsuites.testsuite;
    const cases = suite.testcase as { classname: string; name: string; failure?: { type: string; '#text': string }[] }[];
    expect(cases).toHaveLength(24);
    const failed = cases.filter((c) => c.failure);
    expect(failed.flatMap((c) => c.failure)).toHaveLength(12);
    expect(Number(suite.failures)).toBe(12);
    expect(failed.every((c) => c.name.startsWith('kozachenko-leonenko:') && /@(200|1000)$/.test(c.name))).toBe(true);
    expect(new Set(failed.map((c) => c.classname))).toEqual(new Set(['normal:mu=0,sigma=1', 'uniform:a=0,b=1', 'exponential:rate=1']));
    expect(failed[0].failure![0]['#text']).toMatch(/paired t test on squared errors: difference \+/);

    // With a tolerance above every ΔRMSE (at most about 0.05 nats) the same cells are changed within the tolerance
    // (the tests find the shift; its estimated size is within the tolerance), and CI passes.
    const lenient = await run(['compare', basePath, shiftedPath, '--fail-on', 'worse', '--tolerance', '0.05']);
    expect(lenient.code).toBe(0);
    expect(lenient.out).toContain('0 worse, 0 improved, 12 changed, not significantly or within tolerance, 12 unchanged');
    const statuses = lenient.out.split('\n').filter((l) => l.startsWith('│ changed'));
    expect(statuses).toHaveLength(12);
    expect(statuses.every((l) => l.startsWith('│ changed within tolerance'))).toBe(true);
    // The decisive column says why these cells are not worse: the tests found the change, its size is within the tolerance.
    expect(lenient.out).toContain('cell p (Holm)');
    expect(statuses.every((l) => l.includes('│ size ≤ tolerance │'))).toBe(true);
    // --fail-on changed fails on the same cells.
    expect((await run(['compare', basePath, shiftedPath, '--fail-on', 'changed', '--tolerance', '0.05'])).code).toBe(1);
  });

  it('failures: one new failure is within noise, a significant rise is worse whatever the tolerance; cells in one run only are listed and missing ones fail', () => {
    const withFailures = (replicates: number[]) => {
      const next = structuredClone(base);
      const cell = next.cells.find((c) => c.estimator.startsWith('vasicek') && c.n === 200)!;
      const truth = next.scenarios.find((s) => s.id === cell.scenario)!.truth;
      for (const r of replicates) {
        cell.estimates[r] = null;
        cell.failures.push({ replicate: r, message: 'numeric: test' });
      }
      cell.scores = scoreCell(
        cell.estimates.map((v) => (v === null ? NaN : v)),
        truth,
        cell.n,
      );
      return { next, cell };
    };
    // One new failure in 200: exact McNemar p = 1 (1 discordant pair), so not evidence of a higher failure rate.
    const one = withFailures([3]);
    const single = compareRuns(base, one.next, { tolerance: parseTolerance('1000%') }).cells.filter((c) => c.status !== 'unchanged');
    expect(single).toHaveLength(1);
    expect(single[0]).toMatchObject({ status: 'changed-within-noise', failures: { base: 0, next: 1, onlyNext: 1, onlyBase: 0, p: 1 } });
    // Eight new failures and none fixed: p = 2·2⁻⁸ = 0.0078 (the binomial tail, computed here by hand) ≤ 0.05/3.
    const eight = withFailures([1, 3, 5, 7, 9, 11, 13, 15]);
    const next = eight.next;
    const removed = next.cells.pop()!;
    next.cells.push({ ...removed, estimator: 'gaussian:correction=none' });
    const comparison = compareRuns(base, next, { tolerance: parseTolerance('1000%') });
    const changed = comparison.cells.filter((c) => c.status !== 'unchanged');
    expect(changed).toHaveLength(1);
    expect(changed[0]).toMatchObject({
      scenario: eight.cell.scenario,
      estimator: eight.cell.estimator,
      n: 200,
      status: 'worse',
      failures: { base: 0, next: 8, onlyNext: 8, onlyBase: 0 },
    });
    expect(changed[0].failures.p).toBeCloseTo(2 * 2 ** -8, 12);
    expect(changed[0].reasons[0]).toMatch(/^failures 0 → 8 of 200: 8 replicates fail only in the new run, 0 only in the base \(exact McNemar p = 0.00781\)$/);
    expect(comparison.removed).toEqual([{ scenario: removed.scenario, estimator: removed.estimator, n: removed.n, perturbation: null }]);
    expect(comparison.added).toEqual([{ scenario: removed.scenario, estimator: 'gaussian:correction=none', n: removed.n, perturbation: null }]);
    expect(failsPolicy(comparison, 'worse')).toBe(true);
    // A run that only lost a cell fails --fail-on worse unless missing cells are allowed.
    const lost = structuredClone(base);
    lost.cells.pop();
    const lostComparison = compareRuns(base, lost);
    expect(lostComparison.counts.worse).toBe(0);
    expect(failsPolicy(lostComparison, 'worse')).toBe(true);
    expect(failsPolicy(lostComparison, 'worse', true)).toBe(false);
  });

  it('a module returning 1e200 (or 1e150) on 1 draw in 20 is worse, and fails --fail-on worse; so does a run missing cells', async () => {
    for (const value of [1e200, 1e150]) {
      const wild = await withEstimator(wildKozachenkoLeonenko(value), () => runInProcess(planA));
      const wildPath = save(`wild-${value}.json`, wild);
      const comparison = compareRuns(base, wild);
      const klCells = comparison.cells.filter((c) => c.estimator.startsWith('kozachenko-leonenko:'));
      // Independently of the comparison: which KL cells hold a value of exactly `value`.
      const touched = wild.cells.filter((c) => c.estimator.startsWith('kozachenko-leonenko:') && c.estimates.includes(value));
      expect(touched.length).toBeGreaterThan(0);
      for (const c of klCells) {
        const hit = touched.some((t) => t.scenario === c.scenario && t.estimator === c.estimator && t.n === c.n && t.perturbation === c.perturbation);
        expect(c.status).toBe(hit ? 'worse' : 'unchanged');
        if (hit) expect(c.reasons[0]).toMatch(/wild estimate/);
      }
      expect(comparison.cells.filter((c) => !c.estimator.startsWith('kozachenko-leonenko:')).every((c) => c.status === 'unchanged')).toBe(true);
      const cli = await run(['compare', basePath, wildPath, '--fail-on', 'worse']);
      expect(cli.code).toBe(1);
      expect((await run(['compare', basePath, wildPath, '--fail-on', 'changed'])).code).toBe(1);
    }
    // A new run with cells missing: exit 1 under --fail-on worse, 0 with --allow-missing.
    const partial = structuredClone(base);
    partial.cells = partial.cells.filter((c) => c.n !== 1000);
    const partialPath = save('partial.json', partial);
    const missing = await run(['compare', basePath, partialPath, '--fail-on', 'worse']);
    expect(missing.code).toBe(1);
    expect(missing.err).toMatch(/12 cells of the base run are missing from the new run \(--allow-missing to accept\)/);
    expect((await run(['compare', basePath, partialPath, '--fail-on', 'worse', '--allow-missing'])).code).toBe(0);
  });

  it('one huge value cannot hide a change on every other draw: the sign test sees it', () => {
    // The base had one wild estimate on replicate 0; the new code fixes it but is 0.02 nats further from the
    // truth on every other draw. The mean of the squared-error differences is dominated by the fix.
    const next = structuredClone(base);
    const edited = structuredClone(base);
    const cell = edited.cells.find((c) => c.estimator.startsWith('vasicek') && c.n === 1000)!;
    const newCell = next.cells.find((c) => c.estimator.startsWith('vasicek') && c.n === 1000)!;
    const truth = edited.scenarios.find((s) => s.id === cell.scenario)!.truth;
    cell.estimates[0] = truth + 50;
    newCell.estimates = newCell.estimates.map((v, r) => (r === 0 ? v : v! + Math.sign(v! - truth) * 0.02));
    for (const [c, t] of [
      [cell, truth],
      [newCell, truth],
    ] as const)
      c.scores = scoreCell(
        c.estimates.map((v) => (v === null ? NaN : v)),
        t,
        c.n,
      );
    const [comparison] = compareRuns(edited, next).cells.filter((c) => c.status !== 'unchanged');
    // Direct check of the premise: the t test alone does not separate (its interval at α/3 includes 0).
    expect(comparison.test!.interval[0]).toBeLessThan(0);
    expect(comparison.test!.interval[1]).toBeGreaterThan(0);
    expect(comparison.sign).toMatchObject({ above: 199, below: 1 });
    expect(comparison.status).toBe('worse');
    expect(comparison.reasons[0]).toMatch(/^199 of 200 changed replicates got worse \(sign test p = /);
    expect(comparison.medianChange).toBeCloseTo(0.02, 10);
  });

  it("many changed cells share α by Holm's step-down: cells worse alone are within noise together, exactly as Holm (1979) orders them", () => {
    // Every vasicek and gaussian error grows by 25% on even draws and shrinks by 20% on odd ones: the sign
    // test sees 100 against 100 (p = 1) and there are no failures, so each cell's p is its t test's, times 3.
    const next = structuredClone(base);
    const changed = next.cells.flatMap((c, i) => (c.estimator.startsWith('vasicek') || c.estimator.startsWith('gaussian') ? [i] : []));
    for (const i of changed) {
      const cell = next.cells[i];
      const truth = next.scenarios.find((s) => s.id === cell.scenario)!.truth;
      cell.estimates = cell.estimates.map((v, r) => truth + (v! - truth) * (r % 2 === 0 ? 1.25 : 0.8));
      cell.scores = scoreCell(
        cell.estimates.map((v) => v ?? NaN),
        truth,
        cell.n,
      );
    }
    const alone = changed.map((i) => {
      const one = structuredClone(base);
      one.cells[i] = next.cells[i];
      return compareRuns(base, one).cells[i];
    });
    const joint = compareRuns(base, next);
    expect(joint.testedCells).toBe(changed.length);
    // Holm by hand from the cells' own p values: walk up from the smallest while 3p ≤ α/(m − j).
    const alpha = 0.05;
    const m = changed.length;
    const order = alone.map((c, j) => ({ j, p: 3 * c.test!.p })).sort((a, b) => a.p - b.p);
    const rejected = new Set<number>();
    for (let step = 0; step < m && order[step].p <= alpha / (m - step); step++) rejected.add(order[step].j);
    let running = 0;
    const adjusted = new Map(order.map(({ j, p }, step) => [j, (running = Math.max(running, Math.min(1, (m - step) * p)))]));
    alone.forEach((_, j) => {
      const together = joint.cells[changed[j]];
      expect(together.status).toBe(rejected.has(j) ? 'worse' : 'changed-within-noise');
      expect(together.adjustedP).toBeCloseTo(adjusted.get(j)!, 12);
    });
    // The premise: some cells are worse alone at α/3 yet not together, and some stay worse together.
    const worseAlone = alone.filter((c) => c.status === 'worse').length;
    expect(worseAlone).toBeGreaterThan(rejected.size);
    expect(rejected.size).toBeGreaterThan(0);
    expect(joint.cells.filter((c) => !changed.includes(joint.cells.indexOf(c))).every((c) => c.status === 'unchanged' && c.adjustedP === null)).toBe(true);
  });

  it('estimates reflected about the truth keep every squared error, yet they moved: changed within noise, and --fail-on changed fails', () => {
    // Truth 0 and errors in eighths, so every squared error, and the mean difference, is exactly equal.
    const before = structuredClone(base);
    const index = before.cells.findIndex((c) => c.estimator.startsWith('vasicek') && c.n === 200);
    const cell = before.cells[index];
    before.scenarios.find((s) => s.id === cell.scenario)!.truth = 0;
    cell.estimates = cell.estimates.map((_, r) => ((r % 7) - 3) / 8);
    cell.scores = scoreCell(
      cell.estimates.map((v) => v ?? NaN),
      0,
      cell.n,
    );
    const next = structuredClone(before);
    next.cells[index].estimates = cell.estimates.map((v) => -v!);
    next.cells[index].scores = scoreCell(
      next.cells[index].estimates.map((v) => v ?? NaN),
      0,
      cell.n,
    );
    const comparison = compareRuns(before, next);
    const [moved] = comparison.cells.filter((c) => c.status !== 'unchanged');
    expect(moved).toMatchObject({ estimator: cell.estimator, status: 'changed-within-noise' });
    expect(moved.test!.difference).toBe(0);
    expect(failsPolicy(comparison, 'changed')).toBe(true);
    expect(failsPolicy(comparison, 'worse')).toBe(false);
  });

  it('changes carry paired standard errors: a constant shift moves the bias exactly, with an SE at rounding level', () => {
    const comparison = compareRuns(base, shifted);
    const c = comparison.cells.find((x) => x.status === 'worse')!;
    expect(c.bias.paired).toBe(true);
    expect(c.bias.change).toBeCloseTo(0.05, 12);
    expect(c.bias.changeSe).toBeLessThan(1e-12);
    expect(Math.abs(c.sd.change)).toBeLessThan(1e-12);
    expect(c.sd.changeSe).toBeLessThan(1e-12);
    // ΔRMSE and its SE, recomputed here from the estimates two ways: the delta method's per-replicate terms
    // w_r = e_new,r²/(2 RMSE_new) − e_base,r²/(2 RMSE_base), and a brute-force paired bootstrap of the replicates.
    const baseCell = base.cells.find((x) => x.scenario === c.scenario && x.estimator === c.estimator && x.n === c.n)!;
    const truth = base.scenarios.find((s) => s.id === c.scenario)!.truth;
    const errors = (shift: number) => baseCell.estimates.map((v) => v! + shift - truth);
    const rmseOf = (e: number[]) => Math.sqrt(e.reduce((sum, x) => sum + x * x, 0) / e.length);
    const [eNew, eBase] = [errors(0.05), errors(0)];
    const w = eNew.map((x, r) => (x * x) / (2 * rmseOf(eNew)) - (eBase[r] * eBase[r]) / (2 * rmseOf(eBase)));
    const wMean = w.reduce((sum, x) => sum + x, 0) / w.length;
    const deltaSe = Math.sqrt(w.reduce((sum, x) => sum + (x - wMean) ** 2, 0) / (w.length - 1) / w.length);
    expect(c.rmse.change).toBeCloseTo(rmseOf(eNew) - rmseOf(eBase), 10);
    expect(c.rmse.changeSe).toBeCloseTo(deltaSe, 12);
    const draw = rngFromSeed('compare-rmse-bootstrap');
    const resampled = Array.from({ length: 4000 }, () => {
      const picks = eNew.map(() => Math.floor(draw() * eNew.length));
      return rmseOf(picks.map((r) => eNew[r])) - rmseOf(picks.map((r) => eBase[r]));
    });
    const bMean = resampled.reduce((sum, x) => sum + x, 0) / resampled.length;
    const bootstrapSe = Math.sqrt(resampled.reduce((sum, x) => sum + (x - bMean) ** 2, 0) / (resampled.length - 1));
    // The bootstrap SE of 4000 resamples has about 1% Monte-Carlo error; the delta method is first-order.
    expect(c.rmse.changeSe / bootstrapSe).toBeGreaterThan(0.9);
    expect(c.rmse.changeSe / bootstrapSe).toBeLessThan(1.1);
    // Every output format carries them.
    const row = formatComparisonMarkdown(comparison)
      .split('\n')
      .find((l) => l.includes(`| ${c.n} |`) && l.includes(c.scenario))!;
    expect(row).toMatch(/\| \+0\.0500 ± [0-9.e-]+ \|/);
    expect(formatComparisonJunit(comparison)).toMatch(/bias [^\n]* \(\+0\.0500 ± [0-9.e-]+\)/);
    const parsed = JSON.parse(formatComparisonJson(comparison)) as Comparison;
    const same = parsed.cells.find((x) => x.scenario === c.scenario && x.estimator === c.estimator && x.n === c.n)!;
    expect(same.bias.changeSe).toBeCloseTo(c.bias.changeSe, 14);
  });

  it('shard files are refused with one line', () => {
    const shard = { ...structuredClone(base), shard: { index: 1, count: 2 }, complete: false };
    expect(() => compareRuns(shard, base, {}, { base: 'a.json', next: 'b.json' })).toThrow(
      'a.json is shard 1/2 of a run; merge the shards (hhat merge) and compare the merged file',
    );
  });

  it('a change of 0.005 nats at 200 replicates: the paired test finds it, an unpaired comparison cannot', async () => {
    const b = await runInProcess(planB);
    const results: Record<string, { pairedP: number; unpairedP: number; paired: string; unpaired: string }> = {};
    for (const shift of [0.005, -0.005]) {
      const next = await withEstimator(shiftedKozachenkoLeonenko(shift), () => runInProcess(planB));
      const [paired] = compareRuns(b, next).cells;
      const [unpaired] = compareRuns(b, next, { pairing: 'unpaired' }).cells;
      expect(paired.paired).toBe(true);
      expect(unpaired.paired).toBe(false);
      expect(unpaired.test!.kind).toBe('welch-t');
      results[String(shift)] = { pairedP: paired.test!.p, unpairedP: unpaired.test!.p, paired: paired.status, unpaired: unpaired.status };
      // The change in RMSE is below the Monte-Carlo SE that the two runs' own scores give it (unpaired), far above its paired SE.
      expect(Math.abs(paired.rmse.change)).toBeLessThan(unpaired.rmse.changeSe);
      expect(Math.abs(paired.rmse.change)).toBeGreaterThan(5 * paired.rmse.changeSe);
      expect(paired.test!.p).toBeLessThan(1e-8);
      expect(unpaired.test!.p).toBeGreaterThan(0.05);
      expect(unpaired.status).toBe('changed-within-noise');
    }
    // KL is biased low here, so moving it up helps and moving it down hurts.
    expect(results['0.005'].paired).toBe('improved');
    expect(results['-0.005'].paired).toBe('worse');
    console.info(`0.005-nat change on gaussian:dim=3, n=1000, 200 replicates: ${JSON.stringify(results)}`);
  });

  it('different seeds fall back to an unpaired comparison and say why', async () => {
    const b = await runInProcess(planB);
    const other = await runInProcess({ ...planB, seed: 100 });
    const comparison = compareRuns(b, other);
    expect(comparison.pairing.paired).toBe(false);
    expect(comparison.pairing.reason).toBe(
      "the runs drew different samples (seed 99 vs 100); Welch's t test on the squared errors, Fisher's exact test on failures",
    );
    expect(comparison.cells[0].test!.kind).toBe('welch-t');
    expect(comparison.cells[0].status).not.toBe('unchanged');
    expect(formatComparisonMarkdown(comparison).split('\n')[0]).toMatch(/\(unpaired, tolerance 0 nats\)$/);
    // Every estimate differs on other draws; nothing was found, so the cell is not "changed" and --fail-on changed passes.
    const found = comparison.cells.filter((c) => changeFound(c));
    expect(found).toEqual([]);
    expect(failsPolicy(comparison, 'changed')).toBe(false);
    expect(formatComparisonText(comparison)).toContain('│ no significant change');
  });

  it('unpaired failures compare rates, not counts: 10 of 200 → 8 of 20 is worse', async () => {
    const b = await runInProcess({ ...planB, replicates: 200 });
    const next = await runInProcess({ ...planB, replicates: 20, seed: 100 });
    const fail = (run: RunFile, replicates: number[]) => {
      const cell = run.cells[0];
      const truth = run.scenarios[0].truth;
      for (const r of replicates) {
        cell.estimates[r] = null;
        cell.failures.push({ replicate: r, message: 'numeric: test' });
      }
      cell.scores = scoreCell(
        cell.estimates.map((v) => (v === null ? NaN : v)),
        truth,
        cell.n,
      );
    };
    fail(
      b,
      Array.from({ length: 10 }, (_, i) => i * 20),
    );
    fail(next, [0, 2, 4, 6, 8, 10, 12, 14]);
    const [cell] = compareRuns(b, next, { tolerance: parseTolerance('1000%') }).cells;
    // Fisher's exact test on [[8, 12], [10, 190]]: scipy.stats.fisher_exact(...).pvalue = 2.7254076011028743e-05
    // (SciPy 1.17.1, run once for this test).
    expect(cell.failures.p).toBeCloseTo(2.7254076011028743e-5, 15);
    expect(cell.status).toBe('worse');
    expect(cell.reasons[0]).toMatch(/^failures 10 of 200 → 8 of 20 \(Fisher exact p = /);
  });
});

describe('output details', () => {
  it('JUnit text survives any characters in names: a real parser reads back what was written', async () => {
    const { plan } = resolvePlan({ scenarios: ['normal'], estimators: ['gaussian'], sampleSizes: [20], replicates: 3, seed: 1 });
    const r = assembleRun(await runPlan(plan, { workers: 1 }), null);
    const comparison = compareRuns(r, r);
    const awkward = `odd <scenario> & "quotes" 'apostrophes' ]]> \u0001bell`;
    comparison.cells[0].scenario = awkward;
    const xml = new XMLParser({ ignoreAttributes: false, attributeNamePrefix: '' }).parse(formatComparisonJunit(comparison));
    // The control character is not allowed in XML 1.0 at all, so it is dropped; everything else round-trips.
    expect(xml.testsuites.testsuite.testcase.classname).toBe(awkward.replace('\u0001', ''));
    expect(escapeXml('a<b')).toBe('a&lt;b');
  });

  it('p-values keep their magnitude', () => {
    expect(formatP(0.04321)).toBe('0.043');
    expect(formatP(2.4e-88)).toBe('2.4e-88');
    expect(formatP(NaN)).toBe('–');
  });

  it('usage errors: unknown --fail-on, --markdown with --json, a file that is not a run file', async () => {
    const path = join(dir, 'not-a-run.json');
    writeRunFile(path, {} as RunFile);
    const bad = await run(['compare', path, path]);
    expect(bad.code).toBe(2);
    expect(bad.err.trim()).toBe(`hhat: ${path} is not an hhat run file (no "kind": "hhat-run")`);
    const failOn = await run(['compare', path, path, '--fail-on', 'slower']);
    expect(failOn.code).toBe(2);
    expect(failOn.err.trim()).toBe(
      'hhat: --fail-on slower is not allowed; it must be worse (a cell got worse beyond the tolerance) or changed (any cell differs; on different draws, any change the tests find)',
    );
    expect((await run(['compare', path, path, '--markdown', '--json'])).code).toBe(2);
  });
});
