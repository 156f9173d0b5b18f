/**
 * What a user sees while a run goes and when it stops: the progress line's exact words, the bar that fills
 * with the units it counts, the time left withheld until it means something, the count an interrupted run
 * says it saved (the same as its last progress line and as the checkpoint's unit lines, read here directly),
 * and the command a resume with another plan prints.
 */
import { spawn, spawnSync } from 'node:child_process';
import { copyFileSync, existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { delimiter, join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { describeProgress, progressBar, progressReporter } from '../src/views/progress.js';
import { timeLeftMs, type Progress } from '../src/harness/runner.js';
import { hhatCommand, invokedAs, shellQuote } from '../src/core/shell.js';
import { ensureBuilt } from './helpers/built.js';

const bin = join(__dirname, '..', 'bin', 'hhat.js');
const dir = mkdtempSync(join(tmpdir(), 'hhat-progress-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const at = (p: Partial<Progress>): Progress => ({
  unitsDone: 0,
  unitsTotal: 40,
  cellsDone: 0,
  cellsTotal: 12,
  failures: 0,
  elapsedMs: 0,
  remainingMs: null,
  ...p,
});

describe('the progress line', () => {
  it('counts units (what the bar shows and an interrupt reports) before cells, in exact words', () => {
    expect(describeProgress(at({ unitsDone: 1, elapsedMs: 800 }))).toBe('1/40 units, 0/12 cells done · 1 s elapsed · estimating time left');
    expect(describeProgress(at({ unitsDone: 18, cellsDone: 3, elapsedMs: 65_000, remainingMs: 80_000, failures: 1 }))).toBe(
      '18/40 units, 3/12 cells done · 1 min 5 s elapsed · about 1 min 20 s left · 1 failed estimate',
    );
    // Finished: no time left to guess.
    expect(describeProgress(at({ unitsDone: 40, cellsDone: 12, elapsedMs: 3000, remainingMs: 0 }))).toBe('40/40 units, 12/12 cells done · 3 s elapsed');
  });

  it('fills the bar in proportion to the units counted, full only when all are done', () => {
    expect(progressBar(at({ unitsDone: 0 }))).toBe(`[${'.'.repeat(24)}]`);
    expect(progressBar(at({ unitsDone: 20 }))).toBe(`[${'#'.repeat(12)}${'.'.repeat(12)}]`);
    expect(progressBar(at({ unitsDone: 39 }))).toBe(`[${'#'.repeat(23)}.]`);
    expect(progressBar(at({ unitsDone: 40 }))).toBe(`[${'#'.repeat(24)}]`);
  });

  it('draws the bar and the words on one redrawn terminal line', () => {
    let written = '';
    const reporter = progressReporter({ isTTY: true, write: (t: string) => (written += t) });
    reporter.update(at({ unitsDone: 10, cellsDone: 3, elapsedMs: 2000 }));
    reporter.done();
    expect(written).toBe(`\r[######${'.'.repeat(18)}] 10/40 units, 3/12 cells done · 2 s elapsed · estimating time left\n`);
  });

  it('withholds the time left until 5% of the predicted work and 2 units are done', () => {
    // elapsed, cost done this session, this session's predicted cost, its units done, cost left
    expect(timeLeftMs(1000, 50, 100, 1, 50)).toBeNull(); // half the work but one unit
    expect(timeLeftMs(1000, 4, 100, 3, 96)).toBeNull(); // three units, 4% of the work
    expect(timeLeftMs(1000, 5, 100, 2, 95)).toBe(19_000); // the rate: 1000 ms per 5 cost units
    expect(timeLeftMs(1000, 0, 0, 2, 0)).toBeNull();
  });
});

describe('quoting a command line to copy', () => {
  it('names hhat as it was called: npx hhat under npm, node PATH when run by path and not on PATH, else hhat', () => {
    const home = mkdtempSync(join(tmpdir(), 'hhat-invoked-'));
    mkdirSync(join(home, 'pkg', 'bin'), { recursive: true });
    const script = join(home, 'pkg', 'bin', 'hhat.js');
    writeFileSync(script, '');
    expect(invokedAs({ npm_command: 'exec', PATH: '' }, script)).toBe('npx hhat');
    expect(invokedAs({ PATH: '' }, script)).toBe(`node ${script}`);
    expect(invokedAs({ PATH: '' }, '/usr/lib/node_modules/vitest/vitest.mjs')).toBe('hhat');
    // A global or linked install: the shell's hhat is a link to this very script.
    mkdirSync(join(home, 'on-path'));
    symlinkSync(script, join(home, 'on-path', 'hhat'));
    expect(invokedAs({ PATH: ['/nonexistent', join(home, 'on-path')].join(delimiter) }, script)).toBe('hhat');
    // Another hhat on PATH is not this one.
    expect(invokedAs({ PATH: join(home, 'on-path') }, join(home, 'other', 'bin', 'hhat.js'))).toBe(`node ${join(home, 'other', 'bin', 'hhat.js')}`);
  });

  it('quotes only what a POSIX shell would split or expand (checked by running it through sh)', () => {
    const args = ['bench', '--scenario', 'gaussian:dim=2,rho=0.5', '--out', 'my run.json', "it's", '$HOME', ''];
    expect(hhatCommand(args)).toBe(`${invokedAs()} bench --scenario gaussian:dim=2,rho=0.5 --out 'my run.json' 'it'\\''s' '$HOME' ''`);
    // The shell itself (outside the project) gives the words back unchanged.
    const echoed = spawnSync('sh', ['-c', `printf '%s\\n' ${args.map(shellQuote).join(' ')}`], { encoding: 'utf8' }).stdout;
    expect(echoed).toBe(args.map((a) => `${a}\n`).join(''));
  });
});

describe('an interrupted run and its resume', () => {
  const out = join(dir, 'run.json');
  const checkpoint = `${out}.checkpoint.jsonl`;
  const plan = [
    'bench',
    '--scenario',
    'normal',
    '--scenario',
    'exponential',
    '--estimator',
    'kozachenko-leonenko',
    '--estimator',
    'kernel',
    '--n',
    '20000,50000',
    '--replicates',
    '200',
    '--workers',
    '2',
    '--out',
    'run.json',
    '--no-chart',
  ];
  let stderr = '';

  it('after SIGINT, says it saved as many units as its last progress line and the checkpoint hold', async () => {
    ensureBuilt(['src/harness/runner.ts', 'src/commands/bench.ts', 'src/views/progress.ts', 'src/core/shell.ts']);
    const child = spawn(process.execPath, [bin, ...plan], { cwd: dir, stdio: ['ignore', 'ignore', 'pipe'] });
    child.stderr.on('data', (d) => (stderr += d));
    const exited = new Promise<number | null>((resolve) => child.once('exit', (code) => resolve(code)));
    const units = () =>
      existsSync(checkpoint)
        ? readFileSync(checkpoint, 'utf8')
            .split('\n')
            .filter((l) => l.startsWith('{"unit"')).length
        : 0;
    for (let i = 0; i < 2400 && units() < 5; i++) await new Promise((r) => setTimeout(r, 25));
    expect(units(), 'five units were never saved').toBeGreaterThanOrEqual(5);
    child.kill('SIGINT');
    expect(await exited).toBe(130);

    const lines = stderr.trim().split('\n');
    const saved = units();
    // The first line comes with the first unit: too early for a time left.
    const first = /^progress: 1\/(\d+) units, 0\/8 cells done · \d+ s elapsed · estimating time left$/.exec(lines[0]);
    expect(first, lines[0]).not.toBeNull();
    const total = Number(first![1]);
    const last = /^progress: (\d+)\/(\d+) units, \d+\/8 cells done · \d+ s elapsed · (estimating time left|about .+ left)$/.exec(lines.at(-3)!);
    expect(last, lines.join('\n')).not.toBeNull();
    expect(Number(last![1])).toBe(saved);
    expect(Number(last![2])).toBe(total);
    expect(saved).toBeLessThan(total);
    expect(lines.at(-2)).toBe(`interrupted: ${saved} of ${total} units are saved in ${checkpoint}`);
    // The child was started as `node PATH/bin/hhat.js`, and the hint says so (unless npm's launcher ran the tests).
    expect(lines.at(-1)).toBe(`continue with: ${[invokedAs(process.env, bin), ...plan, '--resume'].map((a, i) => (i ? shellQuote(a) : a)).join(' ')}`);
  }, 60_000);

  it('resumed with another command line, prints the command that started it', () => {
    const other = ['bench', '--scenario', 'normal', '--estimator', 'kernel', '--n', '100', '--replicates', '10', '--out', 'run.json', '--resume'];
    const result = spawnSync(process.execPath, [bin, ...other], { cwd: dir, encoding: 'utf8' });
    expect(result.status).toBe(2);
    expect(result.stderr).toBe(
      `hhat: ${checkpoint} belongs to another plan or shard; continue it with the command that started it: \`${invokedAs(process.env, bin)} bench --scenario normal --scenario exponential --estimator kozachenko-leonenko --estimator kernel --n 20000,50000 --replicates 200 --workers 2 --out run.json --no-chart --resume\`, or delete the checkpoint to start this plan over\n`,
    );
  });

  it('names the folder the run started in when the resume runs elsewhere', () => {
    const other = ['bench', '--scenario', 'normal', '--estimator', 'kernel', '--n', '100', '--replicates', '10', '--out', out, '--resume'];
    const result = spawnSync(process.execPath, [bin, ...other], { cwd: tmpdir(), encoding: 'utf8' });
    expect(result.status).toBe(2);
    expect(result.stderr).toContain(
      `continue it with the command that started it (in ${dir}): \`${invokedAs(process.env, bin)} bench --scenario normal --scenario exponential`,
    );
  });

  it('started by this same command but another plan now (a --plan file edited since): says so', () => {
    const edited = join(dir, 'edited.json');
    const other = ['bench', '--plan', 'plan.json', '--out', 'edited.json', '--resume'];
    const [head, ...rest] = readFileSync(checkpoint, 'utf8').split('\n');
    // The header of a run started by `hhat bench --plan plan.json --out edited.json`, whose plan file then changed.
    const header = { ...(JSON.parse(head) as Record<string, unknown>), command: { args: other.slice(0, -1), cwd: dir } };
    writeFileSync(`${edited}.checkpoint.jsonl`, [JSON.stringify(header), ...rest].join('\n'));
    writeFileSync(join(dir, 'plan.json'), JSON.stringify({ scenarios: ['normal'], estimators: ['kernel'], sampleSizes: [100], replicates: 10 }));
    const result = spawnSync(process.execPath, [bin, ...other], { cwd: dir, encoding: 'utf8' });
    expect(result.status).toBe(2);
    expect(result.stderr).toBe(
      `hhat: ${edited}.checkpoint.jsonl was started by this same command, but the plan or shard it gives differs now (a --plan file changed, or --shard auto read another slice); restore that to resume, or delete the checkpoint to start over\n`,
    );
  });

  it('still reads a checkpoint written before the header named its command', () => {
    const old = join(dir, 'old.json');
    copyFileSync(checkpoint, `${old}.checkpoint.jsonl`);
    const [head, ...rest] = readFileSync(checkpoint, 'utf8').split('\n');
    const header = JSON.parse(head) as Record<string, unknown>;
    delete header.command;
    writeFileSync(`${old}.checkpoint.jsonl`, [JSON.stringify(header), ...rest].join('\n'));
    const other = ['bench', '--scenario', 'normal', '--estimator', 'kernel', '--n', '100', '--replicates', '10', '--out', old, '--resume'];
    const result = spawnSync(process.execPath, [bin, ...other], { cwd: dir, encoding: 'utf8' });
    expect(result.status).toBe(2);
    expect(result.stderr).toBe(
      `hhat: ${old}.checkpoint.jsonl belongs to a different plan or shard; run without --resume after deleting it, or resume with the plan that made it\n`,
    );
  });
});
