/**
 * Results survive what machines and users do: an empty working folder, a missing or read-only output folder,
 * a disk that fills up mid-run (then resumed once space is freed), two runs on one output, a finished run
 * that must not be overwritten, and a resume or merge across a change of code, which must be refused.
 *
 * The full and read-only disks are real tmpfs mounts; where mounting is not allowed (not root) those two
 * tests say so and are skipped.
 */
import { execFileSync, spawn, spawnSync } from 'node:child_process';
import { existsSync, lstatSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, statSync, symlinkSync, writeFileSync } from 'node:fs';
import { hostname, tmpdir } from 'node:os';
import { dirname, join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { readRunFile } from '../src/analysis/results.js';
import { mergeShards } from '../src/analysis/merge.js';
import { removeLeftoverTemporaries, writeFileAtomic, acquireLock } from '../src/core/files.js';
import { ensureBuilt } from './helpers/built.js';
import { runCli as cli } from './helpers/cli.js';
import { hhatVersion } from '../src/core/provenance.js';

const root = join(__dirname, '..');
const bin = join(root, 'bin', 'hhat.js');
const dir = mkdtempSync(join(tmpdir(), 'hhat-files-'));
const PLAN = [
  '--scenario',
  'normal',
  '--scenario',
  'uniform',
  '--n',
  '100,1000',
  '--replicates',
  '40',
  '--estimator',
  'kozachenko-leonenko',
  '--estimator',
  'vasicek',
];

const estimates = (path: string) => readRunFile(path).cells.map((c) => [c.scenario, c.estimator, c.n, c.estimates]);

let reference: string | undefined;
async function referenceRun(): Promise<string> {
  if (!reference) {
    reference = join(dir, 'reference.json');
    expect((await cli(['bench', ...PLAN, '--out', reference, '--quiet'])).code).toBe(0);
  }
  return reference;
}

function tryMount(target: string, options: string): boolean {
  mkdirSync(target, { recursive: true });
  try {
    execFileSync('mount', ['-t', 'tmpfs', '-o', options, 'tmpfs', target], { stdio: 'ignore' });
    return true;
  } catch {
    return false;
  }
}
const mounts: string[] = [];
afterAll(() => {
  for (const m of mounts) spawnSync('umount', [m]);
});
const canMount = tryMount(join(dir, 'probe'), 'size=64k') && (mounts.push(join(dir, 'probe')), true);
if (!canMount) console.warn('test/files.test.ts: cannot mount tmpfs here (not root?); the full-disk and read-only tests are skipped');

describe('where results go', () => {
  it('bench from an empty folder writes results/ there; a missing --out folder is created', () => {
    ensureBuilt(['src/commands/bench.ts', 'src/core/files.ts', 'src/harness/runner.ts', 'src/harness/pool.ts']);
    const empty = mkdtempSync(join(tmpdir(), 'hhat-empty-'));
    const first = spawnSync(process.execPath, [bin, 'bench', '--scenario', 'normal', '--n', '100', '--replicates', '4', '--quiet'], {
      cwd: empty,
      encoding: 'utf8',
    });
    expect(first.stderr).toBe('');
    expect(first.status).toBe(0);
    expect(readdirSync(join(empty, 'results')).filter((f) => f.endsWith('.json'))).toHaveLength(1);
    const nested = join(empty, 'a', 'b', 'run.json');
    const second = spawnSync(process.execPath, [bin, 'bench', '--scenario', 'normal', '--n', '100', '--replicates', '4', '--out', nested, '--quiet'], {
      cwd: empty,
      encoding: 'utf8',
    });
    expect(second.status).toBe(0);
    expect(existsSync(nested)).toBe(true);
    // Nothing but the run file is left: no lock, no checkpoint, no temporary.
    expect(readdirSync(join(empty, 'a', 'b'))).toEqual(['run.json']);
  });

  it('a finished run is not overwritten without --force; --resume of it says so and exits 0', async () => {
    const out = join(dir, 'finished.json');
    expect((await cli(['bench', '--scenario', 'normal', '--n', '100', '--replicates', '4', '--out', out, '--quiet'])).code).toBe(0);
    const before = readFileSync(out, 'utf8');
    const again = await cli(['bench', '--scenario', 'normal', '--n', '100', '--replicates', '5', '--out', out, '--quiet']);
    expect(again.code).toBe(2);
    expect(again.err).toMatch(/already holds a finished run .*; add --force to replace it, or choose another --out/);
    expect(readFileSync(out, 'utf8')).toBe(before);
    const resumed = await cli(['bench', '--scenario', 'normal', '--n', '100', '--replicates', '4', '--out', out, '--quiet', '--resume']);
    expect(resumed.code).toBe(0);
    // --quiet: the path alone on stdout; the note that nothing ran on stderr.
    expect(resumed.out).toBe(`${out}\n`);
    expect(resumed.err).toBe(`hhat: ${out} is already a finished run of this plan; nothing to resume\n`);
    expect(readFileSync(out, 'utf8')).toBe(before);
    const forced = await cli(['bench', '--scenario', 'normal', '--n', '100', '--replicates', '5', '--out', out, '--quiet', '--force']);
    expect(forced.code).toBe(0);
    expect(readRunFile(out).plan.replicates).toBe(5);
  });

  // Found by a tester: each of these replaced the file and exited 0.
  it('an output never replaces another output of the run, nor, without --force, a file hhat did not write', async () => {
    const at = mkdtempSync(join(dir, 'clash-'));
    const bench = ['bench', '--scenario', 'normal', '--estimator', 'gaussian', '--n', '50', '--replicates', '3', '--quiet'];
    const data = join(at, 'data.csv');
    writeFileSync(data, '1\n2\n3\n');
    const run = join(at, 'run.json');
    for (const [args, message] of [
      [['--out', run, '--report', run], `--report ${run} is the same file as --out; give it another name`],
      [['--out', run, '--csv', run], `--csv ${run} is the same file as --out; give it another name`],
      [['--out', run, '--report', join(at, 'r.html'), '--csv', join(at, 'r.html')], `--csv ${join(at, 'r.html')} is the same file as --report`],
      [['--out', data], `--out ${data} is an existing file that is not an hhat run file; add --force to replace it, or choose another --out`],
      [['--out', run, '--csv', data], `--csv ${data} is an existing file that is not hhat's score table; add --force`],
      [['--out', run, '--report', data], `--report ${data} is an existing file that is not an HTML page; add --force`],
    ] as const) {
      const result = await cli([...bench, ...args]);
      expect(result.code, args.join(' ')).toBe(2);
      expect(result.err).toContain(message);
      expect(readFileSync(data, 'utf8')).toBe('1\n2\n3\n');
      expect(existsSync(run)).toBe(false);
    }
    // What hhat wrote is replaced as before; an empty file (mktemp's) is free to take.
    const csv = join(at, 'scores.csv');
    expect((await cli([...bench, '--out', run, '--csv', csv])).code).toBe(0);
    expect((await cli([...bench, '--out', run, '--csv', csv, '--force'])).code).toBe(0);
    const empty = join(at, 'empty.json');
    writeFileSync(empty, '');
    expect((await cli([...bench, '--out', empty])).code).toBe(0);
    // The report and merge commands: never over their input, nor over a file that is not theirs.
    for (const [args, message] of [
      [['report', run, '--out', run], `--out ${run} is the same file as the run file`],
      [['report', run, '--out', data], `--out ${data} is an existing file that is not an HTML page`],
      [['merge', run, '--out', data], `--out ${data} is an existing file that is not an hhat run file`],
    ] as const) {
      const result = await cli([...args]);
      expect(result.code, args.join(' ')).toBe(2);
      expect(result.err).toContain(message);
    }
    expect(readFileSync(data, 'utf8')).toBe('1\n2\n3\n');
    readRunFile(run);
    // With --force, the user's word stands.
    expect((await cli([...bench, '--out', data, '--force'])).code).toBe(0);
    readRunFile(data);
  });

  // Node 20's recursive mkdirSync loops for ever on /proc/x (ENOENT under a folder that exists); found by hand.
  it.runIf(existsSync('/proc/self'))('an --out under a folder that cannot hold folders is one line and exit 1, not a hang', async () => {
    for (const out of ['/proc/hhat-test/run.json', '/proc/hhat-test/a/run.json']) {
      const result = await cli(['bench', '--scenario', 'normal', '--n', '100', '--replicates', '4', '--out', out, '--quiet']);
      expect(result.code).toBe(1);
      expect(result.err).toBe(
        `hhat: cannot create the folder ${dirname(out)}: /proc does not allow a folder there (no such file or directory); choose another --out\n`,
      );
    }
    // A file in the way keeps its own wording.
    const file = join(dir, 'a-file');
    writeFileSync(file, '');
    const blocked = await cli(['bench', '--scenario', 'normal', '--n', '100', '--replicates', '4', '--out', join(file, 'run.json'), '--quiet']);
    expect(blocked.code).toBe(1);
    expect(blocked.err).toMatch(/cannot create the folder .*a-file: a file of that name is in the way/);
  });
});

describe('full and read-only disks (tmpfs)', () => {
  it.skipIf(!canMount)(
    'a disk that fills up: one line, exit 1, the checkpoint kept; resumed after space is freed, the same estimates',
    async () => {
      const disk = join(dir, 'small-disk');
      expect(tryMount(disk, 'size=16k')).toBe(true);
      mounts.push(disk);
      const out = join(disk, 'run.json');
      const full = await cli(['bench', ...PLAN, '--out', out, '--quiet']);
      expect(full.code).toBe(1);
      expect(full.err.trim().split('\n')).toHaveLength(1);
      expect(full.err).toMatch(/^hhat: the disk is full: cannot (write|append to) .*; .*rerun with --resume --out /);
      expect(full.err).not.toMatch(/internal error/);
      // No partial run file, no temporary, no lock: only the checkpoint, with its header.
      expect(readdirSync(disk)).toEqual(['run.json.checkpoint.jsonl']);
      expect(JSON.parse(readFileSync(join(disk, 'run.json.checkpoint.jsonl'), 'utf8').split('\n')[0]).kind).toBe('hhat-checkpoint');
      execFileSync('mount', ['-o', 'remount,size=4m', disk]);
      const resumed = await cli(['bench', ...PLAN, '--out', out, '--quiet', '--resume']);
      expect(resumed.code).toBe(0);
      expect(estimates(out)).toEqual(estimates(await referenceRun()));
    },
    60_000,
  );

  it.skipIf(!canMount)('a read-only folder: one line naming it, exit 1', async () => {
    const disk = join(dir, 'read-only');
    expect(tryMount(disk, 'size=64k,ro')).toBe(true);
    mounts.push(disk);
    const result = await cli(['bench', '--scenario', 'normal', '--n', '100', '--replicates', '4', '--out', join(disk, 'run.json'), '--quiet']);
    expect(result.code).toBe(1);
    expect(result.err.trim().split('\n')).toHaveLength(1);
    expect(result.err).toMatch(/is on a read-only file system: cannot .*; choose another --out/);
  });

  it.skipIf(!canMount)('hhat draw on a disk that fills up: one line, exit 1, no file or temporary left', async () => {
    const disk = join(dir, 'small-draw-disk');
    expect(tryMount(disk, 'size=16k')).toBe(true);
    mounts.push(disk);
    // 3 × 1000 × 2 doubles = 48 kB of data: the disk fills up part way through the stack.
    const result = await cli(['draw', 'gaussian:dim=2', '--n', '1000', '--replicates', '3', '--out', join(disk, 'draws.npy')]);
    expect(result.code).toBe(1);
    expect(result.err.trim().split('\n')).toHaveLength(1);
    expect(result.err).toMatch(/^hhat: the disk is full: cannot write .*draws\.npy/);
    expect(readdirSync(disk)).toEqual([]);
  });
});

describe('one output, one process', () => {
  it('a second run on the same --out is refused while the first lives; a stale lock is taken over', async () => {
    ensureBuilt(['src/commands/bench.ts', 'src/core/files.ts']);
    const out = join(dir, 'shared.json');
    const first = spawn(
      process.execPath,
      [bin, 'bench', '--scenario', 'normal', '--n', '20000', '--replicates', '200', '--estimator', 'kozachenko-leonenko', '--out', out, '--quiet'],
      { stdio: 'ignore' },
    );
    // Wait until the first run holds the lock.
    for (let i = 0; i < 1200 && !existsSync(`${out}.lock`); i++) await new Promise((r) => setTimeout(r, 25));
    expect(existsSync(`${out}.lock`)).toBe(true);
    // Linked into place whole: the moment it exists it names its holder (never an empty file to take over).
    expect(JSON.parse(readFileSync(`${out}.lock`, 'utf8'))).toMatchObject({ pid: first.pid });
    const second = await cli([
      'bench',
      '--scenario',
      'normal',
      '--n',
      '20000',
      '--replicates',
      '200',
      '--estimator',
      'kozachenko-leonenko',
      '--out',
      out,
      '--quiet',
      '--resume',
    ]);
    expect(second.code).toBe(1);
    expect(second.err).toMatch(new RegExp(`is being written by process ${first.pid} on .*; wait for it to finish, or choose another --out`));
    first.kill('SIGKILL');
    await new Promise((r) => first.once('exit', r));
    // The killed run left its lock behind: its process is gone, so the lock is stale and the next taker gets it.
    expect(existsSync(`${out}.lock`)).toBe(true);
    const release = acquireLock(out);
    expect(readdirSync(dir).filter((f) => f.startsWith('shared.json.lock.'))).toEqual([]);
    release();
    expect(existsSync(`${out}.lock`)).toBe(false);
    rmSync(`${out}.checkpoint.jsonl`, { force: true });
  }, 60_000);
});

describe('checkpoints', () => {
  it('an empty checkpoint (a crash before its header) is started afresh by --resume, never refused', async () => {
    const out = join(dir, 'empty-checkpoint.json');
    writeFileSync(`${out}.checkpoint.jsonl`, '');
    const resumed = await cli(['bench', ...PLAN, '--out', out, '--quiet', '--resume']);
    expect(resumed.err).toBe(
      `hhat: nothing to resume at ${out} (its checkpoint ${out}.checkpoint.jsonl is empty, from a crash before the first unit); starting the run afresh\n`,
    );
    expect(resumed.code).toBe(0);
    expect(estimates(out)).toEqual(estimates(await referenceRun()));
  }, 60_000);

  it('--resume with nothing to resume (a mistyped --out) runs afresh, and says so', async () => {
    const out = join(dir, 'never-started.json');
    const resumed = await cli([
      'bench',
      '--scenario',
      'normal',
      '--estimator',
      'gaussian',
      '--n',
      '20',
      '--replicates',
      '2',
      '--out',
      out,
      '--quiet',
      '--resume',
    ]);
    expect(resumed.code).toBe(0);
    expect(resumed.err).toBe(`hhat: nothing to resume at ${out} (no checkpoint ${out}.checkpoint.jsonl); starting the run afresh\n`);
    expect(existsSync(out)).toBe(true);
  });
});

describe('atomic writes', () => {
  it('leave no temporary behind, and leftovers from a crash are removed', () => {
    const target = join(dir, 'atomic', 'file.txt');
    writeFileAtomic(target, 'one');
    writeFileAtomic(target, 'two');
    expect(readFileSync(target, 'utf8')).toBe('two');
    expect(readdirSync(join(dir, 'atomic'))).toEqual(['file.txt']);
    writeFileSync(`${target}.0123456789abcdef.tmp`, 'torn');
    expect(removeLeftoverTemporaries(target)).toBe(1);
    expect(readdirSync(join(dir, 'atomic'))).toEqual(['file.txt']);
  });

  it("the lock removes a draft left by a killed process of this machine, and keeps a live one's and another machine's", () => {
    const target = join(dir, 'drafts', 'run.json');
    mkdirSync(dirname(target), { recursive: true });
    const host = hostname().replace(/[^A-Za-z0-9-]/g, '-');
    // A process that has exited: its pid is free (reused pids are possible, and then the draft stays, which is safe).
    const gone = spawnSync(process.execPath, ['-e', 'process.stdout.write(String(process.pid))']).stdout.toString();
    const dead = `run.json.lock.${host}.${gone}.0123abcd.tmp`;
    const live = `run.json.lock.${host}.${process.pid}.4567cdef.tmp`;
    const remote = `run.json.lock.${host}x.${gone}.89abcdef.tmp`;
    for (const name of [dead, live, remote]) writeFileSync(join(dirname(target), name), '{}');
    const release = acquireLock(target);
    expect(readdirSync(dirname(target)).sort()).toEqual([live, remote, 'run.json.lock'].sort());
    release();
  });

  it('write content given as chunks (text and bytes) one after another', () => {
    const target = join(dir, 'atomic', 'chunks.bin');
    writeFileAtomic(target, ['ab', Uint8Array.from([0, 255]), 'c']);
    expect([...readFileSync(target)]).toEqual([0x61, 0x62, 0, 255, 0x63]);
  });

  it('through a symbolic link write the file it points to and keep the link', () => {
    const real = join(dir, 'atomic', 'linked-target.csv');
    const link = join(dir, 'atomic', 'link.csv');
    writeFileSync(real, 'old');
    symlinkSync(real, link);
    writeFileAtomic(link, 'new');
    expect(lstatSync(link).isSymbolicLink()).toBe(true);
    expect(readFileSync(real, 'utf8')).toBe('new');
    rmSync(link);
    rmSync(real);
  });

  it('to a pipe write into it, and leave it a pipe (a device such as /dev/null likewise is never replaced)', async () => {
    const fifo = join(dir, 'atomic', 'fifo');
    execFileSync('mkfifo', [fifo]);
    const reader = spawn('cat', [fifo]);
    let received = '';
    reader.stdout.on('data', (d) => (received += d));
    const closed = new Promise((resolve) => reader.once('close', resolve));
    writeFileAtomic(fifo, 'through the pipe');
    await closed;
    expect(received).toBe('through the pipe');
    expect(statSync(fifo).isFIFO()).toBe(true);
    // bench's run file needs a real file beside its checkpoint and lock: refused before any work.
    const { code, err } = await cli(['bench', '--scenario', 'normal', '--estimator', 'gaussian', '--n', '20', '--replicates', '2', '--out', fifo]);
    expect(code).toBe(2);
    expect(err).toBe(
      `hhat: --out ${fifo} is a device, pipe or socket; a run file must be a file, with its checkpoint and lock beside it (write the tables with --csv, or the path with --quiet)\n`,
    );
    rmSync(fifo);
  });

  it('pass on an error thrown while producing a chunk, leaving the old file and no temporary', () => {
    const target = join(dir, 'atomic', 'chunks.bin');
    const failing = function* () {
      yield 'partial';
      throw new RangeError('the producer broke');
    };
    expect(() => writeFileAtomic(target, failing())).toThrow(RangeError);
    expect([...readFileSync(target)]).toEqual([0x61, 0x62, 0, 255, 0x63]);
    expect(readdirSync(join(dir, 'atomic')).sort()).toEqual(['chunks.bin', 'file.txt']);
  });
});

describe('code versions are never mixed', () => {
  it('resume refuses a checkpoint written by another build of hhat, saying which', async () => {
    const out = join(dir, 'versions.json');
    const controller = new AbortController();
    // Interrupt a run after its first unit (the runner's own signal, as Ctrl-C would).
    const { runPlan } = await import('../src/harness/runner.js');
    const { resolvePlan } = await import('../src/harness/plan.js');
    const { plan } = resolvePlan({ scenarios: ['normal', 'uniform'], estimators: ['vasicek'], sampleSizes: [100, 1000], replicates: 40, seed: 3 });
    await runPlan(plan, { workers: 1, checkpointPath: `${out}.checkpoint.jsonl`, signal: controller.signal, onProgress: () => controller.abort() });
    const lines = readFileSync(`${out}.checkpoint.jsonl`, 'utf8').split('\n');
    const header = JSON.parse(lines[0]);
    const write = (hhat: object) =>
      writeFileSync(
        `${out}.checkpoint.jsonl`,
        [JSON.stringify({ ...header, fingerprint: '0'.repeat(64), code: { ...header.code, hhat } }), ...lines.slice(1)].join('\n'),
      );
    const version = hhatVersion().replace(/\./g, '\\.');
    write({ ...header.code.hhat, version: '0.0.9', build: 'f'.repeat(64) });
    await expect(runPlan(plan, { workers: 1, checkpointPath: `${out}.checkpoint.jsonl`, resume: true })).rejects.toThrow(
      new RegExp(
        `cannot be resumed: it was made by hhat 0\\.0\\.9 \\(build ffffffffffff\\) and this is hhat ${version} \\(build [0-9a-f]{12}\\); resuming would mix estimates of two versions of the code`,
      ),
    );
    // The same build with another version of a package it draws from (the samplers come from @stdlib).
    const dependencies = header.code.hhat.dependencies.map((d: string) =>
      d.startsWith('@stdlib/random-base-normal@') ? '@stdlib/random-base-normal@0.0.1' : d,
    );
    write({ ...header.code.hhat, dependencies });
    await expect(runPlan(plan, { workers: 1, checkpointPath: `${out}.checkpoint.jsonl`, resume: true })).rejects.toThrow(
      /cannot be resumed: the packages hhat uses differ \(@stdlib\/random-base-normal@0\.0\.1 then, @stdlib\/random-base-normal@\d+\.\d+\.\d+ now\)/,
    );
  });

  it('resume refuses when a file that a module imports was edited; merge refuses shards of different code', async () => {
    const moduleDir = join(dir, 'module');
    mkdirSync(moduleDir, { recursive: true });
    const helper = join(moduleDir, 'helper.mjs');
    const estimatorModule = join(moduleDir, 'estimator.mjs');
    writeFileSync(helper, 'export const offset = 0;\n');
    writeFileSync(
      estimatorModule,
      [
        "import { offset } from './helper.mjs';",
        'export const estimators = [{ id: "lab-mean", family: "test", quantity: "entropy", summary: "a test module", settings: [], dims: [1, 1], reference: "test",',
        '  estimate: (s) => { let m = 0; for (let i = 0; i < s.n; i++) m += s.data[i]; return m / s.n + offset; } }];',
      ].join('\n'),
    );
    const out = join(dir, 'module-run.json');
    const args = [
      'bench',
      '--scenario',
      'normal',
      '--n',
      '100,1000',
      '--replicates',
      '40',
      '--estimator',
      'lab-mean',
      '--estimator-module',
      estimatorModule,
      '--out',
      out,
      '--quiet',
    ];
    // A checkpoint of the same plan, as an interrupted run leaves it: made here by running one shard and
    // keeping its checkpoint would need a kill; instead, write the header the runner writes and no units.
    const { resolvePlan, planCode, planFingerprint } = await import('../src/harness/plan.js');
    const { useEstimatorModules } = await import('../src/harness/modules.js');
    await useEstimatorModules([estimatorModule]);
    const { plan } = resolvePlan({ scenarios: ['normal'], estimators: ['lab-mean'], sampleSizes: [100, 1000], replicates: 40, modules: [estimatorModule] });
    const code = planCode(plan);
    writeFileSync(
      `${out}.checkpoint.jsonl`,
      `${JSON.stringify({ kind: 'hhat-checkpoint', version: 2, fingerprint: planFingerprint(plan, code), shard: null, code })}\n`,
    );
    writeFileSync(helper, 'export const offset = 0.5;\n');
    const refused = await cli([...args, '--resume']);
    expect(refused.code).toBe(2);
    expect(refused.err).toMatch(/cannot be resumed: module .*estimator\.mjs or a file it imports changed since/);

    // Two shards, one made before and one after an edit of the helper: merge refuses, naming the module.
    const shard = (i: number) => join(dir, `module-shard-${i}.json`);
    rmSync(`${out}.checkpoint.jsonl`);
    expect((await cli([...args.slice(0, -3), '--shard', '1/2', '--out', shard(1), '--quiet'])).code).toBe(0);
    writeFileSync(helper, 'export const offset = 0.25;\n');
    expect((await cli([...args.slice(0, -3), '--shard', '2/2', '--out', shard(2), '--quiet'])).code).toBe(0);
    expect(() => mergeShards([1, 2].map((i) => ({ path: shard(i), run: readRunFile(shard(i)) })))).toThrow(
      /were computed by different code: .*module .*estimator\.mjs or a file it imports changed since/,
    );
  }, 60_000);
});
