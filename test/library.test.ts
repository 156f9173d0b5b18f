/**
 * hhat as a library: the README's examples run as written against the built package (imported by its name, as a
 * project that depends on it imports it), every name they document is exported, and the main functions refuse
 * what the command line refuses, with the command line's one-line UsageError, not a TypeError or a run whose
 * cells all fail.
 */
import { spawn } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import * as library from '../src/index.js';
import { readPlanFile, resolvePlan, type PlanInput } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun, writeRunFile } from '../src/analysis/results.js';
import { compareRuns } from '../src/analysis/compare.js';
import { parseScenario } from '../scenarios/index.js';
import { configureEstimator, parseEstimatorSpec } from '../estimators/index.js';
import { drawReplicate } from '../src/core/rng.js';
import { ensureBuilt } from './helpers/built.js';
import { asyncUsageMessage, usageMessage } from './helpers/usage-error.js';

const root = join(__dirname, '..');
const dir = mkdtempSync(join(tmpdir(), 'hhat-library-'));

/** The README's section on the library, up to the next section. */
function librarySection(): string {
  const readme = readFileSync(join(root, 'README.md'), 'utf8');
  const start = readme.indexOf('## hhat as a library');
  expect(start).toBeGreaterThan(0);
  return readme.slice(start, readme.indexOf('\n## ', start + 1));
}

function examples(): string[] {
  return [...librarySection().matchAll(/```js\n([\s\S]*?)```/g)].map((m) => m[1]);
}

function node(file: string): Promise<{ code: number | null; out: string; err: string }> {
  return new Promise((done) => {
    const child = spawn(process.execPath, [file], { cwd: dir });
    let out = '';
    let err = '';
    child.stdout.on('data', (chunk: Buffer) => (out += chunk.toString()));
    child.stderr.on('data', (chunk: Buffer) => (err += chunk.toString()));
    child.on('close', (code) => done({ code, out, err }));
  });
}

beforeAll(() => {
  ensureBuilt(['src/index.ts', 'src/harness/plan.ts', 'src/harness/runner.ts', 'src/analysis/compare.ts', 'src/core/rng.ts', 'src/analysis/results.ts']);
  // `import … from 'hhat'` resolves as in a project that installed it: node_modules/hhat is this package.
  mkdirSync(join(dir, 'node_modules'));
  symlinkSync(root, join(dir, 'node_modules', 'hhat'), 'dir');
});

afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe("the README's library section", () => {
  it('imports only names the package exports, and documents the main functions', () => {
    const section = librarySection();
    const imported = [...section.matchAll(/import \{([^}]*)\} from 'hhat'/g)]
      .flatMap((m) => m[1].split(',').map((name) => name.trim()))
      .filter((name) => name !== '…');
    // Functions named in the text as `name(...)`, and the error classes it names.
    const named = [...section.matchAll(/`(\w+)\(/g), ...section.matchAll(/`(\w+Error)`/g)].map((m) => m[1]).filter((name) => name !== 'TypeError');
    const exported = new Set(Object.keys(library));
    for (const name of [...imported, ...named]) expect(exported, name).toContain(name);
    for (const name of ['resolvePlan', 'runPlan', 'assembleRun', 'compareRuns', 'parseScenario', 'drawReplicate', 'UsageError'])
      expect(imported).toContain(name);
    expect(named).toEqual(expect.arrayContaining(['readPlanFile', 'writeRunFile', 'readRunFile', 'parseTolerance', 'EnvironmentError']));
  });

  it('runs every example as written, and they print what their comments say', async () => {
    const blocks = examples();
    expect(blocks.length).toBeGreaterThanOrEqual(4);
    const results = await Promise.all(
      blocks.map((code, i) => {
        const file = join(dir, `example-${i}.mjs`);
        writeFileSync(file, code);
        return node(file);
      }),
    );
    results.forEach((result, i) => expect({ example: i, code: result.code, err: result.err }).toEqual({ example: i, code: 0, err: '' }));
    const printed = results.map((r) => r.out).join('');
    // Laplace with scale b has entropy 1 + log 2b: 1 + log 4 for b = 2.
    expect(printed).toContain(String(1 + Math.log(4)));
    expect(printed).toContain("[ 'vasicek:m=auto', 'kozachenko-leonenko:k=3,norm=euclidean' ]");
    expect(printed).toContain('true plan: replicates: must be ≥ 2');
  }, 60_000);
});

const base: PlanInput = { scenarios: ['normal'], estimators: ['gaussian'], sampleSizes: [100], replicates: 2 };

describe('resolvePlan checks a plan given in code as --plan checks a plan file', () => {
  // Each as a plan file would hold it: the library's message is the command line's, with "plan" for the file's name.
  const cases: [string, Record<string, unknown>][] = [
    ['sample size 1.5', { ...base, sampleSizes: [1.5] }],
    ['sample size "100"', { ...base, sampleSizes: ['100'] }],
    ['sample size 0', { ...base, sampleSizes: [0] }],
    ['sample size -5', { ...base, sampleSizes: [-5] }],
    ['sample size 1e12', { ...base, sampleSizes: [1e12] }],
    ['0 replicates', { ...base, replicates: 0 }],
    ['2.5 replicates', { ...base, replicates: 2.5 }],
    ['seed -1', { ...base, seed: -1 }],
    ['an unknown key', { ...base, sampelSizes: [100] }],
    ['a setting that is true', { ...base, estimators: [{ id: 'kozachenko-leonenko', settings: { k: true } }] }],
    ['no scenarios', { estimators: ['gaussian'] }],
  ];
  for (const [what, input] of cases) {
    it(`refuses ${what} with the plan file's message`, () => {
      const file = join(dir, `plan-${what.replace(/\W+/g, '-')}.json`);
      writeFileSync(file, JSON.stringify(input));
      const fromFile = usageMessage(() => readPlanFile(file));
      expect(usageMessage(() => resolvePlan(input as unknown as PlanInput))).toBe(fromFile.replace(file, 'plan'));
    });
  }

  it('refuses what JSON cannot hold (NaN, Infinity) and no plan at all', () => {
    expect(usageMessage(() => resolvePlan({ ...base, sampleSizes: [NaN] }))).toBe('plan: sampleSizes[0]: must be an integer');
    expect(usageMessage(() => resolvePlan({ ...base, replicates: Infinity }))).toBe('plan: replicates: must be an integer');
    expect(usageMessage(() => resolvePlan({ ...base, seed: NaN }))).toBe('plan: seed: must be an integer');
    expect(usageMessage(() => (resolvePlan as (input?: unknown) => unknown)())).toBe('plan: the plan must be an object');
    expect(usageMessage(() => resolvePlan({} as PlanInput))).toBe('plan: scenarios: is required');
  });

  it('accepts a plan the command line accepts, unchanged', () => {
    const { plan } = resolvePlan({ ...base, estimators: [{ id: 'kozachenko-leonenko', settings: { k: 5 } }] });
    expect(plan).toMatchObject({ sampleSizes: [100], replicates: 2, estimators: ['kozachenko-leonenko:k=5,norm=euclidean'] });
  });
});

describe('runPlan, compareRuns and the spec parsers refuse what the command line refuses', () => {
  it('checks a plan it did not resolve, and its options as the flags are checked', async () => {
    const { plan } = resolvePlan(base);
    expect(await asyncUsageMessage(() => runPlan({ ...plan, replicates: 2.5 }, { isolation: 'in-process' }))).toBe(
      'runPlan: plan: replicates: must be an integer',
    );
    expect(await asyncUsageMessage(() => runPlan({ ...plan, sampleSizes: [0] }, { isolation: 'in-process' }))).toBe(
      'runPlan: plan: sampleSizes[0]: must be ≥ 2',
    );
    expect(await asyncUsageMessage(() => runPlan(plan, { workers: 0 }))).toBe('runPlan: options.workers 0 is not allowed; it must be an integer from 1 to 256');
    expect(await asyncUsageMessage(() => runPlan(plan, { shard: { index: 3, count: 2 } }))).toMatch(/^runPlan: options\.shard .* 1 ≤ index ≤ count$/);
  });

  it('refuses a sample too large for memory before any work, as bench does', async () => {
    const { plan } = resolvePlan({ ...base, sampleSizes: [100_000_000], limits: { workerMemoryMiB: 64 } });
    expect(await asyncUsageMessage(() => runPlan(plan, { workers: 1 }))).toMatch(/^n = 100000000 needs about .* of memory .*; use n ≤ \d+/);
  });

  it('parseScenario, parseEstimatorSpec, configureEstimator and drawReplicate refuse values of the wrong type', () => {
    expect(usageMessage(() => parseScenario(undefined as unknown as string))).toBe('a scenario spec must be a string, ID or ID:key=value,...; got nothing');
    expect(usageMessage(() => parseEstimatorSpec(42 as unknown as string))).toBe(
      'an estimator spec must be a string, ID or ID:key=value,...; got the number 42',
    );
    expect(usageMessage(() => configureEstimator('kozachenko-leonenko', { k: true } as unknown as Record<string, number>))).toBe(
      'kozachenko-leonenko: k=true is not allowed; k must be an integer ≥ 1',
    );
    expect(usageMessage(() => configureEstimator('gaussian', null as unknown as Record<string, number>))).toMatch(/^gaussian: settings must be an object/);
    const normal = parseScenario('normal');
    expect(usageMessage(() => drawReplicate(normal, 1, 1.5, 0))).toBe('drawReplicate: n 1.5 is not allowed; it must be an integer from 1 to 100000000');
    expect(usageMessage(() => drawReplicate(normal, -1, 10, 0))).toBe('drawReplicate: seed -1 is not allowed; it must be an integer ≥ 0');
  });

  it('compareRuns refuses what is not a run, and options outside their ranges', async () => {
    const { plan } = resolvePlan(base);
    const run = assembleRun(await runPlan(plan, { isolation: 'in-process' }), null);
    expect(usageMessage(() => compareRuns(run, null as never))).toMatch(/^NEW is not a run \(null\); pass a run file/);
    expect(usageMessage(() => compareRuns(run, run, { level: 1.5 }))).toBe(
      'compareRuns: options.level 1.5 is not allowed; the confidence level is a number between 0 and 1 (e.g. 0.95)',
    );
    expect(compareRuns(run, run).counts.unchanged).toBe(1);
    expect(usageMessage(() => assembleRun(null as never, null))).toMatch(/^assembleRun: the outcome must be what runPlan resolves to/);
    expect(usageMessage(() => writeRunFile(undefined as never, run))).toBe('writeRunFile: the path must be a file name; got nothing');
  });
});
