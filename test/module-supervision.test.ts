/**
 * `hhat estimate` and `hhat check` run a module's estimators on a supervised thread (src/harness/module-thread.ts),
 * and every command refuses a module whose top-level code ends its thread (src/harness/modules.ts, the load probe).
 * Found by a tester: an estimate calling process.exit(0) made both commands print nothing and exit 0 (a CI gate
 * passed), process.exit(3) exited 3, endless allocation crashed V8 (exit 134), an endless loop hung them; a
 * process.exit at a module's top level ended bench, estimate and check the same way. Each case runs the built
 * command in a process of its own, so that a regression ends or hangs that process, not the test.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { parseScenario } from '../scenarios/index.js';
import { replicateRng } from '../src/core/rng.js';
import { ensureBuilt } from './helpers/built.js';
import { runCli } from './helpers/cli.js';

const root = join(__dirname, '..');
const bin = join(root, 'bin', 'hhat.js');
const fixture = join(__dirname, 'fixtures', 'faults', 'supervised.mjs');
const dir = mkdtempSync(join(tmpdir(), 'hhat-supervision-'));

/** The built command; a regression that hangs is stopped after 60 s and fails here. */
function hhat(args: string[]): { code: number | null; out: string; err: string } {
  const result = spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8', timeout: 60_000 });
  return { code: result.status, out: result.stdout, err: result.stderr };
}

function lines(text: string): string[] {
  return text.split('\n').filter((line) => line !== '');
}

const values = parseScenario('normal').sample(replicateRng(3, 'normal', 300, 0), 300).data;
const data = join(dir, 'data.csv');
writeFileSync(data, `x\n${Array.from(values).join('\n')}\n`);

beforeAll(() => {
  ensureBuilt([
    'src/harness/module-thread.ts',
    'src/harness/module-worker.ts',
    'src/harness/modules.ts',
    'src/analysis/conformance-job.ts',
    'src/commands/estimate.ts',
    'src/commands/check.ts',
  ]);
});

describe('hhat estimate: a module estimator that misbehaves fails its own row, exit 1', () => {
  it('process.exit(0), an endless loop, a TypeError: each row says failed, one line each on stderr; a good estimate beside them is exact', () => {
    const named = ['gaussian-plain', 'exits', 'spins', 'throws'].flatMap((id) => ['--estimator', id]);
    const { code, out, err } = hhat(['estimate', data, '--estimator-module', fixture, ...named, '--time-limit', '1', '--json']);
    expect(code).toBe(1);
    const estimates = (JSON.parse(out) as { estimates: { estimator: string; value: number | null; error?: string; code?: string }[] }).estimates;
    // The Gaussian plug-in ½·log(2πe·σ̂²), σ̂² about the mean, computed here from the values written to the file.
    const mean = values.reduce((s, x) => s + x, 0) / values.length;
    const variance = values.reduce((s, x) => s + (x - mean) ** 2, 0) / values.length;
    expect(estimates[0].value).toBeCloseTo(0.5 * Math.log(2 * Math.PI * Math.E * variance), 12);
    expect(estimates.slice(1)).toEqual([
      { estimator: 'exits', settings: {}, value: null, error: 'exits: the estimator ended its worker thread (exit code 0)', code: 'module' },
      { estimator: 'spins', settings: {}, value: null, error: 'spins: timed out after 1 s (--time-limit)', code: 'module' },
      // Not hhat's bug ("internal error"): the estimate's failure, as in a benchmark.
      { estimator: 'throws', settings: {}, value: null, error: 'throws: threw TypeError: a bug in the estimator, not an EstimateError', code: 'module' },
    ]);
    expect(lines(err)).toEqual([
      'hhat: exits: the estimator ended its worker thread (exit code 0)',
      'hhat: spins: timed out after 1 s (--time-limit)',
      'hhat: throws: threw TypeError: a bug in the estimator, not an EstimateError',
    ]);
  });

  it('endless allocation, in the heap and in typed arrays: out of memory, not a V8 crash', () => {
    const { code, out, err } = hhat([
      'estimate',
      data,
      '--estimator-module',
      fixture,
      '--estimator',
      'hoards',
      '--estimator',
      'hoards-typed',
      '--memory-limit',
      '256',
    ]);
    expect(code).toBe(1);
    expect(out).toMatch(/^│ hoards +│ – +│ failed \(module\) │$/m);
    expect(lines(err).slice(1)).toEqual([
      "hhat: hoards: out of memory: the thread's heap passed its limit of 256 MiB (--memory-limit)",
      // The workers' process limit: 256 MiB for the thread plus 1024 for hhat (src/core/memory.ts).
      "hhat: hoards-typed: out of memory: the process passed 1280 MiB while this estimate ran (the thread's --memory-limit plus room for hhat itself; typed arrays count here, outside the thread's heap)",
    ]);
  });
});

describe('hhat check: an estimate that misbehaves fails the check it ran in, with the reason', () => {
  it('exit on too few points, a loop and endless allocation on NaN: those checks fail, the others still run and pass, exit 1', () => {
    const estimators = ['exits-on-too-few', 'spins-on-non-finite', 'hoards-on-non-finite'].flatMap((id) => ['--estimator', id]);
    const { code, out, err } = hhat(['check', fixture, ...estimators, '--time-limit', '1', '--memory-limit', '256']);
    expect(code).toBe(1);
    expect(err.trim()).toBe(
      'hhat check: 3 of 3 estimators failed: exits-on-too-few: rejects-too-few; spins-on-non-finite: rejects-non-finite, rejects-too-few; hoards-on-non-finite: rejects-non-finite, rejects-too-few',
    );
    const blocks = out.split('\n\n');
    expect(blocks[0]).toMatch(/^ {2}FAIL {2}rejects-too-few +an estimate was stopped: the estimator ended its worker thread \(exit code 0\)$/m);
    expect(blocks[1]).toMatch(/^ {2}FAIL {2}rejects-non-finite +an estimate was stopped: timed out after 1 s \(--time-limit\)$/m);
    // After a time-out, a check that needs an estimate does not wait for the limit again; one that needs none runs.
    expect(blocks[1]).toMatch(
      /^ {2}FAIL {2}rejects-too-few +not run: an estimate in rejects-non-finite passed the time limit, and each further one could too$/m,
    );
    expect(blocks[1]).toMatch(/^ {2}n\/a {3}rejects-wrong-dimension +hhat checks the dimension/m);
    expect(blocks[2]).toMatch(
      /^ {2}FAIL {2}rejects-non-finite +an estimate was stopped: out of memory: the thread's heap passed its limit of 256 MiB \(--memory-limit\)$/m,
    );
    // Every check before the fault ran on the thread and passed (the estimator is correct elsewhere).
    for (const block of blocks) {
      for (const check of ['deterministic', 'leaves-sample-unchanged', 'row-order', 'scale', 'translation', 'known-value'])
        expect(block).toMatch(new RegExp(`^ {2}pass {2}${check} `, 'm'));
    }
  });
});

describe('a module whose top-level code calls process.exit is refused, exit 2, one line', () => {
  const moduleExiting = (code: number): string => {
    const path = join(dir, `exits-${code}-at-load.mjs`);
    writeFileSync(path, `process.exit(${code});\nexport const estimators = [];\n`);
    return path;
  };
  const refusal = (path: string, code: number) =>
    `hhat: estimator module ${path} ended the thread loading it (exit code ${code}) before it finished loading: code at its top level calls process.exit (or awaits something that never settles), which would end hhat too`;

  it.each([0, 3])('process.exit(%i): check, estimate and bench (which writes no run file)', (exitCode) => {
    const path = moduleExiting(exitCode);
    const out = join(dir, `run-${exitCode}.json`);
    for (const args of [
      ['check', path],
      ['estimate', data, '--estimator-module', path],
      ['bench', '--estimator-module', path, '--scenario', 'normal', '--estimator', 'gaussian', '--n', '50', '--replicates', '2', '--out', out, '--quiet'],
    ]) {
      const result = hhat(args);
      expect(result.code, args[0]).toBe(2);
      expect(lines(result.err), args[0]).toEqual([refusal(path, exitCode)]);
    }
    expect(existsSync(out)).toBe(false);
  });
});

describe('--time-limit and --memory-limit of estimate and check', () => {
  it('hold an estimator command to --time-limit too', () => {
    const silent = join(dir, 'silent-command.mjs');
    writeFileSync(silent, 'setInterval(() => {}, 1000);\n');
    const { code, err } = hhat(['estimate', data, '--estimator-command', `silent=${process.execPath} ${silent}`, '--estimator', 'silent', '--time-limit', '1']);
    expect(code).toBe(1);
    expect(err).toMatch(/^hhat: silent did not answer hhat's hello within 1 s \(the limit at every n: --time-limit/m);
  });

  it('are usage mistakes where nothing would obey them, or out of range: exit 2, one line', async () => {
    const cases: [string[], string][] = [
      [
        ['estimate', data, '--time-limit', '5'],
        '--time-limit 5 applies to the estimators of --estimator-module and --estimator-command; the built-ins have none',
      ],
      [['estimate', data, '--memory-limit', '512'], '--memory-limit 512 applies to the estimators of --estimator-module, which run on a thread of their own'],
      [['check', '--time-limit', '5'], "--time-limit 5 applies to a MODULE's estimators and to --estimator-command; the built-ins have none"],
      [['check', fixture, '--time-limit', '0'], '--time-limit 0 is not allowed; it must be a number of seconds above 0'],
      [
        ['estimate', data, '--estimator-module', fixture, '--estimator', 'gaussian-plain', '--memory-limit', '1'],
        '--memory-limit 1 is not allowed; it must be an integer from',
      ],
    ];
    for (const [args, message] of cases) {
      const { code, err } = await runCli(args);
      expect(code, args.join(' ')).toBe(2);
      expect(lines(err), args.join(' ')).toHaveLength(1);
      expect(err, args.join(' ')).toContain(message);
    }
  });
});
