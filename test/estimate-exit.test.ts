/**
 * Exit codes of `hhat estimate`: 0 when every named estimate was made or only default-set members could not
 * run on the data, 1 when a named estimator (or the whole default set) could not, 2 for usage mistakes.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import lognormalEntropy from '@stdlib/stats-base-dists-lognormal-entropy';
import { parseScenario } from '../scenarios/index.js';
import { replicateRng } from '../src/core/rng.js';
import { ensureBuilt } from './helpers/built.js';
import { runCli as run } from './helpers/cli.js';

const dir = mkdtempSync(join(tmpdir(), 'hhat-exit-'));
const bin = join(__dirname, '..', 'bin', 'hhat.js');
const n = 3000;

function lines(text: string): string[] {
  return text.split('\n').filter((line) => line !== '');
}

function lognormalValues(sigma: number): Float64Array {
  const scenario = parseScenario(`lognormal:sigma=${sigma}`);
  return scenario.sample(replicateRng(1, scenario.id, n, 0), n).data;
}

interface EstimateJson {
  estimator: string;
  value: number | null;
  error?: string;
  code?: string;
}

// File sizes in megabytes: a long right tail, written at full precision.
const sizes = join(dir, 'file-sizes.csv');
writeFileSync(sizes, `megabytes\n${Array.from(lognormalValues(2)).join('\n')}\n`);

// Reaction times in seconds, logged by a console that keeps only hundredths: many exact repeats.
const timesText = Array.from(lognormalValues(0.5), (v) => v.toFixed(2));
const times = join(dir, 'reaction-times.csv');
writeFileSync(times, `seconds\n${timesText.join('\n')}\n`);

// Brute-force counts from the written text, independent of hhat's reader and its repeat report.
const groupSize = new Map<string, number>();
for (const t of timesText) groupSize.set(t, (groupSize.get(t) ?? 0) + 1);
const repeatedRows = n - groupSize.size;
// A point's 3rd nearest neighbour is at distance 0 exactly when at least 3 other points share its value.
const zeroThirdNeighbour = [...groupSize.values()].filter((size) => size >= 4).reduce((sum, size) => sum + size, 0);

describe('hhat estimate with the default set', () => {
  it('a lognormal sample exits 0 with a value from every default estimator', async () => {
    const { code, out, err } = await run(['estimate', sizes, '--json']);
    expect(code).toBe(0);
    const estimates = JSON.parse(out).estimates as EstimateJson[];
    expect(estimates.map((e) => e.estimator)).toEqual(['kozachenko-leonenko', 'ebrahimi', 'vasicek', 'kernel', 'histogram', 'gaussian']);
    // Every default estimator runs on this far tail (the kernel one in log space, whatever its distance from the
    // rest): no failed row, nothing on stderr. The failure case is the rounded sample below.
    for (const e of estimates) expect(Number.isFinite(e.value), e.estimator).toBe(true);
    expect(err).toBe('');
    // True value from @stdlib/stats-base-dists-lognormal-entropy (μ = 0, σ = 2): 2.112 nats.
    const knn = estimates.find((e) => e.estimator === 'kozachenko-leonenko')!;
    expect(Math.abs(knn.value! - lognormalEntropy(0, 2))).toBeLessThan(0.1);
  });

  it('the table shows a failed row with its code and reason; stderr has only the note', async () => {
    const { code, out, err } = await run(['estimate', times]);
    expect(code).toBe(0);
    expect(out).toMatch(/│ kozachenko-leonenko +│ k=3, norm=euclidean +│ +failed \(ties\) │/);
    expect(out).toContain(`failed: kozachenko-leonenko: ${zeroThirdNeighbour} of ${n} points have their 3rd nearest neighbour at distance 0`);
    expect(out).toContain(`  ${repeatedRows} of ${n} rows repeat an earlier row exactly`);
    expect(lines(err)).toHaveLength(1);
    expect(err).toMatch(/^hhat: note: 1 of the 6 default estimators could not run on this data \(kozachenko-leonenko\)/);
  });

  it('rounded data: only kozachenko-leonenko fails, with code ties, and the repeats are described', async () => {
    const { code, out, err } = await run(['estimate', times, '--json']);
    expect(code).toBe(0);
    const result = JSON.parse(out) as { estimates: EstimateJson[]; repeats: string[] };
    const failed = result.estimates.filter((e) => e.value === null);
    expect(failed.map((e) => e.estimator)).toEqual(['kozachenko-leonenko']);
    expect(failed[0].code).toBe('ties');
    // The counts in the reason and the repeat report against the brute-force counts above.
    expect(failed[0].error).toContain(`${zeroThirdNeighbour} of ${n} points have their 3rd nearest neighbour at distance 0`);
    expect(result.repeats[0]).toBe(`${repeatedRows} of ${n} rows repeat an earlier row exactly`);
    // True value from @stdlib/stats-base-dists-lognormal-entropy (μ = 0, σ = 0.5); rounding to 0.01 moves it
    // by far less than the 0.1 allowed for estimator bias and sampling error at n = 3000.
    for (const e of result.estimates.filter((x) => x.value !== null && x.estimator !== 'gaussian')) {
      expect(Math.abs(e.value! - lognormalEntropy(0, 0.5)), e.estimator).toBeLessThan(0.1);
    }
    expect(lines(err)).toHaveLength(1);
    expect(err).toMatch(/note: 1 of the 6 default estimators could not run on this data \(kozachenko-leonenko\)/);
  });

  it('exits 1 when no estimator of the default set can run', async () => {
    const pair = join(dir, 'two-readings.csv');
    writeFileSync(pair, '4.2\n4.2\n');
    const { code, err } = await run(['estimate', pair, '--json']);
    expect(code).toBe(1);
    expect(lines(err).at(-1)).toBe('hhat: none of the 6 default estimators could run on this data');
  });
});

describe('hhat estimate with named estimators', () => {
  it('a named estimator that fails exits 1 with its reason on one stderr line', async () => {
    const { code, out, err } = await run(['estimate', times, '--estimator', 'kozachenko-leonenko']);
    expect(code).toBe(1);
    expect(out).toMatch(/failed \(ties\)/);
    const reasons = lines(err).filter((line) => !line.startsWith('  '));
    expect(reasons).toEqual([
      expect.stringMatching(new RegExp(`^hhat: kozachenko-leonenko: ${zeroThirdNeighbour} of ${n} points have their 3rd nearest neighbour at distance 0`)),
    ]);
    expect(err).toContain(`  ${repeatedRows} of ${n} rows repeat an earlier row exactly`);
  });

  it('beside one that succeeds: exit 1, and the successful value is still printed', async () => {
    const { code, out, err } = await run(['estimate', times, '--estimator', 'kozachenko-leonenko', '--estimator', 'vasicek']);
    expect(code).toBe(1);
    const value = Number(/│ vasicek +│ m=55 +│ +(-?[\d.]+) │/.exec(out)?.[1]);
    // True value from @stdlib/stats-base-dists-lognormal-entropy (μ = 0, σ = 0.5).
    expect(Math.abs(value - lognormalEntropy(0, 0.5))).toBeLessThan(0.1);
    expect(lines(err).filter((line) => !line.startsWith('  '))).toHaveLength(1);
    expect(err).toMatch(/^hhat: kozachenko-leonenko: /);
  });

  it('--json keeps the failed estimator with value null, error and code', async () => {
    const { code, out, err } = await run(['estimate', times, '--json', '--estimator', 'kozachenko-leonenko', '--estimator', 'histogram']);
    expect(code).toBe(1);
    const [knn, histogram] = JSON.parse(out).estimates as EstimateJson[];
    expect(knn).toMatchObject({ estimator: 'kozachenko-leonenko', value: null, code: 'ties' });
    expect(knn.error).toContain(`${zeroThirdNeighbour} of ${n} points have their 3rd nearest neighbour at distance 0`);
    expect(histogram).not.toHaveProperty('code');
    // True value from @stdlib/stats-base-dists-lognormal-entropy (μ = 0, σ = 0.5).
    expect(Math.abs(histogram.value! - lognormalEntropy(0, 0.5))).toBeLessThan(0.1);
    expect(lines(err)[0]).toBe(`hhat: ${knn.error}`);
  });

  it('a setting the data cannot support is a failure on the data (1), not a usage mistake', async () => {
    const { code, err } = await run(['estimate', times, '--estimator', 'vasicek:m=2000']);
    expect(code).toBe(1);
    expect(lines(err)).toEqual([`hhat: vasicek: window m = 2000 needs m < n/2, but n = ${n}; use m ≤ 1499 or at least 4001 points`]);
  });

  it('every named estimator succeeding exits 0 with nothing on stderr', async () => {
    const { code, err } = await run(['estimate', times, '--estimator', 'vasicek', '--estimator', 'histogram']);
    expect(code).toBe(0);
    expect(err).toBe('');
  });

  it('main leaves process.exitCode cleared for the next caller', async () => {
    expect((await run(['estimate', times, '--estimator', 'kozachenko-leonenko'])).code).toBe(1);
    expect(process.exitCode).toBeUndefined();
  });
});

describe('hhat estimate usage mistakes', () => {
  it('exit 2 with one line and no estimates', async () => {
    const twoColumns = join(dir, 'two-columns.csv');
    writeFileSync(twoColumns, Array.from({ length: 50 }, (_, i) => `${i},${(i * 7) % 13}`).join('\n'));
    const cases: [string[], RegExp][] = [
      [['estimate', times, '--estimator', 'kozachenko-leonenko', '--estimator', 'no-such-method'], /^hhat: unknown estimator "no-such-method"; known: /],
      [
        ['estimate', times, '--estimator', 'kernel:bandwidth=-1'],
        /^hhat: kernel: bandwidth=-1 is not allowed; bandwidth must be one of silverman \| scott \| likelihood-cv, or a number > 0\n$/,
      ],
      [
        ['estimate', times, '--estimator', 'ksg1'],
        /^hhat: ksg1 estimates mutual-information, but this call asks for entropy; for mutual-information, give --x-columns and --y-columns to choose X and Y among the columns \(e\.g\. --x-columns 1 --y-columns 2\)\n$/,
      ],
      [['estimate', twoColumns, '--estimator', 'vasicek'], /^hhat: vasicek does not support d = 2; it needs d = 1\n$/],
      [['estimate', join(dir, 'no-such-file.csv')], /^hhat: cannot read data file .*no-such-file\.csv/],
    ];
    for (const [args, message] of cases) {
      const { code, out, err } = await run(args);
      expect(code, args.join(' ')).toBe(2);
      expect(lines(err), args.join(' ')).toHaveLength(1);
      expect(err, args.join(' ')).toMatch(message);
      expect(out, args.join(' ')).toBe('');
    }
  });
});

describe('the installed command', () => {
  beforeAll(() => ensureBuilt(['src/cli.ts', 'src/commands/estimate.ts']));

  it('passes the exit code to the shell: 0, 1 and 2', () => {
    const node = (args: string[]) => spawnSync(process.execPath, [bin, 'estimate', ...args], { encoding: 'utf8' });
    const defaults = node([times]);
    expect(defaults.status, defaults.stderr).toBe(0);
    expect(defaults.stderr).toMatch(/^hhat: note: 1 of the 6 default estimators could not run on this data \(kozachenko-leonenko\)/);
    const named = node([times, '--estimator', 'kozachenko-leonenko', '--estimator', 'vasicek']);
    expect(named.status, named.stderr).toBe(1);
    expect(named.stdout).toMatch(/│ vasicek +│ m=55 +│ +[\d.]+ │/);
    expect(named.stderr).toMatch(/^hhat: kozachenko-leonenko: /);
    const usage = node([times, '--estimator', 'no-such-method']);
    expect(usage.status).toBe(2);
    expect(lines(usage.stderr)).toHaveLength(1);
  });

  it('documents the exit codes in its help', () => {
    const help = spawnSync(process.execPath, [bin, 'estimate', '--help'], { encoding: 'utf8' });
    expect(help.status).toBe(0);
    expect(help.stdout).toMatch(
      /Exit codes:\n {2}0 .*\n(.*\n)* {2}1 {2}an estimator named with --estimator could not run(.*\n)* {2}2 {2}a mistake in the command/,
    );
  });
});
