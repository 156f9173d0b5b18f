/**
 * The command line as a user meets it: catalogs as JSON, estimates of files, one-line errors with exit 2.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { copyFileSync, mkdirSync, mkdtempSync, readdirSync, writeFileSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import normalEntropy from '@stdlib/stats-base-dists-normal-entropy';
import { checkSampleMemory, processMemoryLimitBytes } from '../src/core/memory.js';
import { parseScenario } from '../scenarios/index.js';
import { replicateRng } from '../src/core/rng.js';
import { runCli as run } from './helpers/cli.js';

const dir = mkdtempSync(join(tmpdir(), 'hhat-cli-'));
const bin = join(__dirname, '..', 'bin', 'hhat.js');

describe('hhat scenarios', () => {
  it('--json lists the catalog with the documented keys', async () => {
    const { code, out } = await run(['scenarios', '--json']);
    expect(code).toBe(0);
    const list = JSON.parse(out) as Record<string, unknown>[];
    expect(list.length).toBeGreaterThanOrEqual(26);
    for (const key of ['id', 'family', 'dim', 'params', 'quantity', 'truth', 'truthSource', 'support', 'tails']) expect(list[0]).toHaveProperty(key);
  });

  it('--bits divides by log 2', async () => {
    const nats = JSON.parse((await run(['scenarios', '--json', 'normal'])).out)[0].truth;
    const bits = JSON.parse((await run(['scenarios', '--json', '--bits', 'normal'])).out)[0].truth;
    expect(nats).toBeCloseTo(normalEntropy(0, 1), 14);
    expect(bits).toBeCloseTo(nats / Math.LN2, 14);
  });
});

describe('hhat estimators', () => {
  it('--json gives settings, defaults, dimensions and a reference for every estimator', async () => {
    const list = JSON.parse((await run(['estimators', '--json'])).out) as { id: string; reference: string; settings: unknown[]; dims: unknown[] }[];
    const ids = list.map((e) => e.id);
    for (const id of ['histogram', 'vasicek', 'van-es', 'ebrahimi', 'correa', 'kozachenko-leonenko', 'kozachenko-leonenko-weighted', 'kernel', 'gaussian'])
      expect(ids).toContain(id);
    for (const e of list) expect(e.reference.length).toBeGreaterThan(20);
  });
});

describe('hhat estimate', () => {
  const scenario = parseScenario('normal:mu=3,sigma=2');
  const sample = scenario.sample(replicateRng(1, scenario.id, 3000, 0), 3000);
  const csv = join(dir, 'signal.csv');
  writeFileSync(csv, `voltage\n${Array.from(sample.data).join('\n')}\n`);

  it('--json has the documented shape with the settings actually used', async () => {
    const { code, out } = await run(['estimate', csv, '--json', '--estimator', 'kozachenko-leonenko:k=4', '--estimator', 'vasicek']);
    expect(code).toBe(0);
    const result = JSON.parse(out);
    expect(result).toMatchObject({ n: 3000, dim: 1, base: 'nats' });
    expect(result.estimates[0]).toMatchObject({ estimator: 'kozachenko-leonenko', settings: { k: 4, norm: 'euclidean' } });
    // m resolved from 'auto' to floor(√3000 + 0.5) = 55.
    expect(result.estimates[1].settings.m).toBe(55);
    for (const e of result.estimates) expect(Math.abs(e.value - scenario.truth)).toBeLessThan(0.1);
  });

  it('bad input is one line and exit code 2', async () => {
    const cases: [string[], RegExp][] = [
      [['estimate', join(dir, 'missing.csv')], /cannot read data file .*missing\.csv/],
      [['estimate', csv, '--estimator', 'nope'], /unknown estimator "nope"; known: /],
      [['estimate', csv, '--estimator', 'kozachenko-leonenko:k=-1'], /k=-1 is not allowed; k must be an integer ≥ 1/],
      [['estimate', csv, '--estimator', 'kozachenko-leonenko:q=1'], /unknown setting "q"; allowed: k, norm/],
      [['estimate', csv, '--columns', '3'], /column 3 does not exist/],
      [['scenarios', 'gamma:shape=0'], /shape=0 is not allowed; shape must be a number > 0/],
      [['bench', '--n', '10,x'], /--n: "x" is not allowed/],
      [['bench', '--workers', '0'], /--workers 0 is not allowed/],
      [['bench', '--shard', '4/3'], /shard 4 of 3/],
      // A flag's error quotes the flag as typed, not the plan's internal path (estimators[0].settings.k).
      [
        ['bench', '--scenario', 'normal', '--estimator', 'kozachenko-leonenko:k=0'],
        /^hhat: --estimator kozachenko-leonenko:k=0: k=0 is not allowed; k must be an integer ≥ 1$/m,
      ],
      [['bench', '--scenario', 'normal', '--estimator', 'vasicek:mm=3'], /^hhat: --estimator vasicek:mm=3: unknown setting "mm"/m],
      // Found by a tester: each was accepted, or named the wrong bound or reason.
      [['bench', '--seed', '9007199254740992'], /--seed 9007199254740992 is not allowed; it must be an integer from 0 to 9007199254740991$/m],
      [['scenarios', '--family', 'nope'], /^hhat: --family nope is not allowed; use one of arcsine, beta, /m],
      [['estimate', csv, '--reference', 'uniform:-1e400,1'], /--reference uniform:-1e400,1: write uniform:a,b with finite a < b/],
      [['bench', '--report', '--svg-dir', csv], /--svg-dir .* is a file, not a folder/],
      [
        ['estimate', csv, '--against', csv, '--unit', 'mV'],
        /^hhat: --unit mV applies to entropy; mutual information, transfer entropy and divergences do not depend/m,
      ],
      [['advise', csv, '--x-columns', '1', '--y-columns', '2'], /^hhat: --x-columns: advise covers differential entropy only; for mutual information/m],
    ];
    for (const [args, message] of cases) {
      const { code, err } = await run(args);
      expect(code, args.join(' ')).toBe(2);
      expect(err.trim().split('\n')).toHaveLength(1);
      expect(err, args.join(' ')).toMatch(message);
    }
  });

  it('convert prints the shift d·log|c| itself, also beside a value it cannot change in double precision', async () => {
    // Found by a tester: 1e20 + log 2 rounds to 1e20, and the shift was printed as their difference, 0.
    const { code, out } = await run(['convert', '1e20', '--factor', '2']);
    expect(code).toBe(0);
    expect(out).toContain(`: 100000000000000000000 + ${Math.LN2.toFixed(10)})`);
  });

  it('ties are reported with the repeats found, never as -Infinity', async () => {
    const tied = join(dir, 'tied.csv');
    writeFileSync(tied, Array.from({ length: 200 }, (_, i) => String(i % 7)).join('\n'));
    const { code, out, err } = await run(['estimate', tied, '--json', '--estimator', 'kozachenko-leonenko']);
    // A named estimator that cannot run on the data is a failed computation (1), not a usage mistake (2).
    expect(code).toBe(1);
    const result = JSON.parse(out);
    expect(result.estimates[0].value).toBeNull();
    expect(err).toMatch(/193 of 200 rows repeat an earlier row/);
    // The message may explain that log-distances would be −∞; no value is ever printed as one.
    expect(out).not.toMatch(/"value": *-?Infinity/);
  });
});

describe('the installed command', () => {
  it('prints help, exits 0; an unknown option exits 2 with one line', () => {
    const help = execFileSync('node', [bin, '--help']).toString();
    expect(help).toMatch(/Usage: hhat/);
    const bad = spawnSync('node', [bin, 'bench', '--frobnicate']);
    expect(bad.status).toBe(2);
    expect(bad.stderr.toString()).toBe("hhat: unknown option '--frobnicate' (hhat bench --help lists the options)\n");
    // Commander's own complaints are one line like every other usage error, its suggestion included.
    const typo = spawnSync('node', [bin, 'bnch'], { encoding: 'utf8' });
    expect(typo.status).toBe(2);
    expect(typo.stderr).toBe("hhat: unknown command 'bnch'; did you mean bench? (hhat --help lists the commands and options)\n");
    const missing = spawnSync('node', [bin, 'bench', '--n'], { encoding: 'utf8' });
    expect(missing.status).toBe(2);
    expect(missing.stderr).toBe("hhat: option '--n <sizes>' argument missing (hhat bench --help lists the options)\n");
  });

  it('a full disk on standard output is one line and exit 1, not a stack trace', () => {
    // /dev/full: every write fails with ENOSPC (Linux).
    const full = spawnSync('sh', ['-c', `node ${JSON.stringify(bin)} scenarios > /dev/full`], { encoding: 'utf8' });
    expect(full.status).toBe(1);
    expect(full.stderr).toBe('hhat: cannot write to standard output: the disk is full\n');
  });

  it('a standard error that cannot be written costs nothing: the run completes, its run file written, exit 0', () => {
    const folder = mkdtempSync(join(tmpdir(), 'hhat-full-stderr-'));
    const out = join(folder, 'run.json');
    const args = ['bench', '--scenario', 'normal', '--estimator', 'vasicek', '--n', '100', '--replicates', '3', '--out', out];
    const run = spawnSync('sh', ['-c', `node ${[bin, ...args].map((a) => JSON.stringify(a)).join(' ')} 2> /dev/full`], { encoding: 'utf8' });
    expect(run.status).toBe(0);
    expect(run.stdout).toContain(`run file: ${out}`);
    expect(readdirSync(folder)).toEqual(['run.json']);
  });

  it('a copy that was never built (or whose build was stopped) says what to run', () => {
    const copy = mkdtempSync(join(tmpdir(), 'hhat-unbuilt-'));
    mkdirSync(join(copy, 'bin'));
    copyFileSync(bin, join(copy, 'bin', 'hhat.js'));
    writeFileSync(join(copy, 'package.json'), JSON.stringify({ type: 'module' }));
    const res = spawnSync('node', [join(copy, 'bin', 'hhat.js'), '--version'], { encoding: 'utf8' });
    expect(res.status).toBe(1);
    expect(res.stderr).toMatch(/^hhat: the program is not built \(Cannot find module '.*\/dist\/src\/cli\.js' .*\); run `npm run build` in .*\n$/);
  });

  it('runs a small bench end to end and writes a run file', () => {
    const out = join(dir, 'cli-run.json');
    const res = spawnSync(
      'node',
      [bin, 'bench', '--scenario', 'uniform', '--estimator', 'vasicek', '--n', '200', '--replicates', '5', '--out', out, '--workers', '1'],
      { encoding: 'utf8' },
    );
    expect(res.status, res.stderr).toBe(0);
    expect(res.stdout).toMatch(/run file: /);
    const runFile = JSON.parse(readFileSync(out, 'utf8'));
    expect(runFile.cells).toHaveLength(1);
    expect(runFile.cells[0].estimates).toHaveLength(5);
  });
});

describe('the package entry', () => {
  it('the built library loads from package.json "main" and runs a plan end to end', async () => {
    // The published entry point (dist/, built by npm's prepare step): what `import ... from 'hhat'` loads.
    const pkg = JSON.parse(readFileSync(join(__dirname, '..', 'package.json'), 'utf8')) as { main: string };
    const lib = await import(join(__dirname, '..', pkg.main));
    const { plan } = lib.resolvePlan({ scenarios: ['uniform'], estimators: ['vasicek'], sampleSizes: [100], replicates: 3, seed: 1 });
    const run = lib.assembleRun(await lib.runPlan(plan, { workers: 1 }), null);
    expect(run.cells).toHaveLength(1);
    expect(run.cells[0].estimates.every((v: number | null) => typeof v === 'number')).toBe(true);
    expect(lib.parseScenario('uniform').truth).toBe(0);
  });
});

describe('sizes the machine cannot hold', () => {
  it('bench refuses them up front, in one line naming what they would need; --n beyond the schema range is refused too', async () => {
    // 1e8 points in d = 50 are 5e9 values, past the 2^32 a typed array can hold on any machine.
    const big = await run(['bench', '--scenario', 'gaussian:dim=50', '--n', '100000000', '--replicates', '2', '--workers', '1', '--quiet']);
    expect(big.code).toBe(2);
    expect(big.err.trim().split('\n')).toHaveLength(1);
    expect(big.err).toMatch(
      /n = 100000000 asks for 100000000 points in d = 50, 5000000000 values in one array, beyond the 4294967296 a JavaScript typed array can hold/,
    );
    const beyond = await run(['bench', '--scenario', 'normal', '--n', '1e12']);
    expect(beyond.code).toBe(2);
    expect(beyond.err).toMatch(/--n: "1e12" is not allowed; sample sizes must be integers from 2 to 100000000/);
  });

  it('the memory check names what a size needs against the memory given (a 16 GB machine here)', () => {
    // 1e8 points in d = 5 on 2 workers: 150 MB + 2 × 1e8 × 8 × (6·5 + 28) bytes = 92.95 GB (src/core/memory.ts's
    // formula, worked out here by hand).
    expect(() => checkSampleMemory('n = 100000000', 1e8, 5, { workers: 2, totalBytes: 16e9 })).toThrow(
      /needs about 93 GB of memory .*more than this machine's 16 GB/,
    );
    expect(() => checkSampleMemory('n = 1000', 1000, 5, { workers: 2, totalBytes: 16e9 })).not.toThrow();
  });

  it("a run on workers must fit the limit its watchdog enforces, not just the machine: the plan's workerMemoryMiB names the lever", () => {
    // 1e7 points in d = 3 on 2 workers: 150 MB + 2 × 1e7 × 8 × (6·3 + 28) bytes = 7.51 GB, by hand. The run's
    // limit is min((2 × 1024 + 1024) MiB, 85% of 24 GB) = 3 GiB = 3.22 GB: refused, although the machine holds it;
    // what fits is (3 GiB − 150 MB)/(2 × 368 bytes) = 4172860 points (one worker's 2 GiB would not hold 1e7 either).
    const machine = 24e9;
    expect(() => checkSampleMemory('n = 10000000', 1e7, 3, { workers: 2, totalBytes: machine })).not.toThrow();
    expect(() =>
      checkSampleMemory('n = 10000000', 1e7, 3, {
        workers: 2,
        totalBytes: machine,
        workerMemoryMiB: 1024,
        raise: "--memory-limit or a plan's limits.workerMemoryMiB",
      }),
    ).toThrow(
      /needs about 7\.5 GB of memory .*more than the run's limit of 3\.2 GB \(2 × limits\.workerMemoryMiB 1024 MiB \+ 1024 MiB; --memory-limit or a plan's limits\.workerMemoryMiB may raise it up to 85% of this machine's 24 GB\); use n ≤ 4172860$/,
    );
    // Where no option raises the limit (advise), the message names none (and one worker would not hold it either).
    expect(() => checkSampleMemory('--n 10000000', 1e7, 3, { workers: 2, totalBytes: machine, workerMemoryMiB: 1024 })).toThrow(
      /the run's limit of 3\.2 GB \(2 × limits\.workerMemoryMiB 1024 MiB \+ 1024 MiB\); use n ≤ 4172860$/,
    );
    // With the default 4096 MiB per worker the limit is 9 GiB = 9.66 GB: it fits.
    expect(() => checkSampleMemory('n = 10000000', 1e7, 3, { workers: 2, totalBytes: machine, workerMemoryMiB: 4096 })).not.toThrow();
    // The pool's watchdog uses the same limit.
    expect(processMemoryLimitBytes(2, 4096, machine)).toBe(9 * 2 ** 30);
    expect(processMemoryLimitBytes(2, 16384, machine)).toBe(0.85 * machine);
  });
});
