/**
 * `npm run test:kill`: interrupts `hhat bench` at random moments, by SIGKILL (nothing can be saved on the
 * way out) or SIGINT (the run stops itself), resumes it each time, and checks that the run file it finally
 * writes holds exactly the estimates of an uninterrupted run. Then it kills a run inside its final write
 * (between the flushed temporary file and the rename) and checks that the resume finishes from the checkpoint.
 *
 *   npx tsx test/scripts/kill-test.ts [--interruptions 24] [--seed 7]
 *
 * Exits 1 on the first mismatch. CI runs it (.ci/run).
 */
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { rngFromSeed } from '../../src/core/rng.js';

const args = process.argv.slice(2);
const option = (name: string, fallback: number) => {
  const i = args.indexOf(name);
  return i >= 0 ? Number(args[i + 1]) : fallback;
};
const wanted = option('--interruptions', 24);
const random = rngFromSeed(`kill-test ${option('--seed', 7)}`);
const bin = resolve('bin/hhat.js');
const dir = mkdtempSync(join(tmpdir(), 'hhat-kill-'));
const plan = [
  '--scenario',
  'normal',
  '--scenario',
  'exponential',
  '--scenario',
  'gaussian:dim=2',
  '--estimator',
  'kozachenko-leonenko',
  '--estimator',
  'histogram',
  '--estimator',
  'kernel',
  '--estimator',
  'gaussian',
  '--n',
  '200,2000',
  '--replicates',
  '60',
  '--quiet',
];

function estimates(path: string): string {
  const run = JSON.parse(readFileSync(path, 'utf8')) as { cells: { scenario: string; estimator: string; n: number; estimates: unknown }[] };
  return JSON.stringify(run.cells.map((c) => [c.scenario, c.estimator, c.n, c.estimates]));
}

function fail(message: string): never {
  console.error(`kill test: ${message}`);
  process.exit(1);
}

/** Starts a run; resolves with its exit status, after `signal` at `afterMs` (if it is still running then). */
function runAndInterrupt(
  out: string,
  resume: boolean,
  signal: NodeJS.Signals | null,
  afterMs: number,
  env: NodeJS.ProcessEnv = {},
): Promise<{ code: number | null; signal: NodeJS.Signals | null; interrupted: boolean }> {
  return new Promise((done) => {
    const child = spawn(process.execPath, [bin, 'bench', ...plan, '--out', out, ...(resume ? ['--resume'] : [])], {
      stdio: ['ignore', 'ignore', 'pipe'],
      env: { ...process.env, ...env },
    });
    let stderr = '';
    child.stderr.on('data', (d) => (stderr += d));
    let interrupted = false;
    const timer = signal
      ? setTimeout(() => {
          interrupted = child.exitCode === null;
          if (interrupted) child.kill(signal);
        }, afterMs)
      : undefined;
    child.on('exit', (code, sig) => {
      if (timer) clearTimeout(timer);
      if (code !== 0 && code !== 130 && sig === null) fail(`hhat exited with ${code}: ${stderr.trim()}`);
      if (/internal error/.test(stderr)) fail(`internal error: ${stderr.trim()}`);
      done({ code, signal: sig, interrupted });
    });
  });
}

const reference = join(dir, 'reference.json');
const started = performance.now();
if (spawnSync(process.execPath, [bin, 'bench', ...plan, '--out', reference], { stdio: 'inherit' }).status !== 0) fail('the reference run failed');
const referenceSeconds = (performance.now() - started) / 1000;
const expected = estimates(reference);
console.log(`reference run: ${referenceSeconds.toFixed(1)} s`);

let interruptions = 0;
let kills = 0;
let runs = 0;
while (interruptions < wanted) {
  runs++;
  const out = join(dir, `run-${runs}.json`);
  let resume = false;
  for (let attempt = 0; ; attempt++) {
    const signal: NodeJS.Signals = random() < 0.5 ? 'SIGKILL' : 'SIGINT';
    // Anywhere from start-up to past the end of an uninterrupted run.
    const afterMs = 100 + random() * referenceSeconds * 1000;
    const result = await runAndInterrupt(out, resume, attempt < 8 ? signal : null, afterMs);
    if (result.interrupted) {
      interruptions++;
      if (signal === 'SIGKILL') kills++;
    }
    resume = true;
    if (result.code === 0 && existsSync(out)) break;
  }
  if (estimates(out) !== expected) fail(`run ${runs} (resumed after interruptions) differs from the uninterrupted run`);
  console.log(`run ${runs}: identical to the uninterrupted run (${interruptions} interruptions so far, ${kills} by SIGKILL)`);
}

// A kill inside the final write: hold it between the flushed temporary and the rename, kill it there.
const out = join(dir, 'final-write.json');
const runTemporary = /^final-write\.json\.[0-9a-f]{16}\.tmp$/;
const child = spawn(process.execPath, [bin, 'bench', ...plan, '--out', out], {
  stdio: 'ignore',
  env: { ...process.env, HHAT_PAUSE_BEFORE_RENAME_MS: '30000' },
});
const exited = new Promise((r) => child.once('exit', r));
const deadline = Date.now() + 180_000;
// The checkpoint's header is written the same way: wait for the run file's own temporary.
while (!readdirSync(dir).some((f) => runTemporary.test(f))) {
  if (Date.now() > deadline) fail('the run never reached its final write');
  await new Promise((r) => setTimeout(r, 20));
}
child.kill('SIGKILL');
await exited;
if (existsSync(out)) fail('a run killed inside its final write left a run file');
if (!existsSync(`${out}.checkpoint.jsonl`)) fail('a run killed inside its final write lost its checkpoint');
const resumed = await runAndInterrupt(out, true, null, 0);
if (resumed.code !== 0 || estimates(out) !== expected) fail('the resume after a kill inside the final write differs from the uninterrupted run');
const leftovers = readdirSync(dir).filter((f) => f.endsWith('.tmp'));
if (leftovers.length > 0) fail(`temporaries were left behind: ${leftovers.join(', ')}`);
console.log('kill inside the final write: the resume finished from the checkpoint, identical, no temporary left');
console.log(
  `kill test passed: ${interruptions} interruptions (${kills} SIGKILL, ${interruptions - kills} SIGINT) over ${runs} runs, each resumed to the uninterrupted estimates`,
);
rmSync(dir, { recursive: true, force: true });
