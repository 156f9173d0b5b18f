/**
 * `npm run bench:parallel`: wall time of the whole `hhat bench` process (the built CLI, as a user runs it, on
 * the built-in default plan) with 1 and with 2 workers, alternating (1, 2, 1, 2, …) for ROUNDS rounds, with the
 * median speed-up. Beside it, the machine's own ceiling measured in the same run: a fixed arithmetic loop on 1
 * and on 2 threads at once, which no code of hhat's can beat. On a shared machine whose two cores are
 * contended, the plan's speed-up is to be read against that ceiling. Estimates are identical either way
 * (checked here too); only the time may differ.
 *
 * The whole process is timed, start-up and the final scoring included, because that is what a user waits for;
 * with one worker the second core is not idle either (V8 compiles and collects garbage on helper threads), so
 * the ratio is that of two honest wall times, not of worker busy time.
 *
 * It also prints where the time goes (Linux only: the CPU of a finished child is read from /proc/self/stat):
 * each process's CPU over all its threads, its serial part (process wall time minus the run's own session time,
 * which is when the workers run: loading before, scoring and writing after), and the second worker's extra CPU.
 * From these, the speed-up two workers would reach if the second cost no extra CPU at all: the 1-worker run's
 * CPU, less the serial part, spread over both cores, after the serial part,
 *
 *   T1 / (S2 + (C1 − S2) / 2)
 *
 * (T1 the 1-worker wall time, C1 its CPU, S2 the 2-worker run's serial time). It is an estimate, not a strict
 * bound: it takes the serial part to keep one core busy and the other idle. With one worker the second core
 * runs V8's compiling and collecting for free; with two it has to run them in the workers' time, which is why
 * this figure stays below the fixed-loop ceiling.
 *
 *   npm run build && npm run bench:parallel      # 3 rounds
 *   ROUNDS=5 npm run bench:parallel
 */
import { execFileSync, execSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Worker } from 'node:worker_threads';
import { quantileOfSorted } from '../src/math/moments.js';

const ROUNDS = Number(process.env.ROUNDS ?? 3);
const load = () =>
  execSync('uptime')
    .toString()
    .trim()
    .replace(/.*load average: /, '');
const median = (xs: number[]) => quantileOfSorted(Float64Array.from(xs).sort(), 0.5);
/** Median and range of `xs`, as every figure below is printed. */
const spread = (xs: number[], digits = 2) => `${median(xs).toFixed(digits)} (${Math.min(...xs).toFixed(digits)}–${Math.max(...xs).toFixed(digits)})`;
const bin = new URL('../bin/hhat.js', import.meta.url).pathname;
const folder = mkdtempSync(join(tmpdir(), 'hhat-parallel-'));

/** Wall seconds of `threads` threads each running the same fixed loop (2–3 s of arithmetic on one core here). */
async function spin(threads: number): Promise<number> {
  const source = `let x = 0; for (let i = 0; i < 1e8; i++) x = (x + i * 1e-9) % 1.7; require('node:worker_threads').parentPort.postMessage(x);`;
  const started = performance.now();
  await Promise.all(Array.from({ length: threads }, () => new Promise((resolve) => new Worker(source, { eval: true }).once('message', resolve))));
  return (performance.now() - started) / 1000;
}

/** Clock ticks per second of /proc's CPU times (getconf CLK_TCK); NaN where it cannot be read. */
const ticks = (() => {
  try {
    return Number(execSync('getconf CLK_TCK', { stdio: ['ignore', 'pipe', 'ignore'] }).toString());
  } catch {
    return NaN;
  }
})();

/**
 * CPU seconds of this process's finished children so far (user + system, every thread), from /proc/self/stat
 * (fields 16 and 17, cutime and cstime); NaN where there is no /proc.
 */
function childrenCpu(): number {
  try {
    const stat = readFileSync('/proc/self/stat', 'utf8');
    const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
    return (Number(fields[13]) + Number(fields[14])) / ticks;
  } catch {
    return NaN;
  }
}

interface Timing {
  /** Wall seconds of the whole process. */
  seconds: number;
  /** CPU seconds of the whole process, all threads. */
  cpu: number;
  /** Wall seconds outside the run's session (before the workers start and after they end). */
  serial: number;
  estimates: string;
}

/** One whole `hhat bench --workers W` process: its times, and its estimates (to check they agree). */
function bench(workers: number): Timing {
  const out = join(folder, `run-${workers}.json`);
  const cpuBefore = childrenCpu();
  const started = performance.now();
  execFileSync(process.execPath, [bin, 'bench', '--workers', String(workers), '--out', out, '--force', '--quiet'], { stdio: 'ignore' });
  const seconds = (performance.now() - started) / 1000;
  const cpu = childrenCpu() - cpuBefore;
  const run = JSON.parse(readFileSync(out, 'utf8')) as {
    wallSeconds: number;
    cells: { scenario: string; estimator: string; n: number; role: string; perturbation: unknown; tuning: unknown; estimates: unknown[] }[];
  };
  const estimates = JSON.stringify(run.cells.map((c) => [c.scenario, c.estimator, c.n, c.role, c.perturbation, c.tuning, c.estimates]));
  return { seconds, cpu, serial: seconds - run.wallSeconds, estimates };
}

const plan1: Timing[] = [];
const plan2: Timing[] = [];
const spin1: number[] = [];
const spin2: number[] = [];
let reference: string | undefined;
console.log(`load before: ${load()}`);
try {
  for (let round = 0; round < ROUNDS; round++) {
    for (const workers of [1, 2]) {
      const timing = bench(workers);
      (workers === 1 ? plan1 : plan2).push(timing);
      reference ??= timing.estimates;
      if (timing.estimates !== reference) console.log('ESTIMATES DIFFER between runs');
      (workers === 1 ? spin1 : spin2).push(await spin(workers));
    }
    console.log(
      `round ${round + 1}: hhat bench ${plan1.at(-1)!.seconds.toFixed(2)} s (CPU ${plan1.at(-1)!.cpu.toFixed(2)} s) with 1 worker, ${plan2.at(-1)!.seconds.toFixed(2)} s (CPU ${plan2.at(-1)!.cpu.toFixed(2)} s) with 2; fixed loop ${spin1.at(-1)!.toFixed(2)} s on 1 thread, ${spin2.at(-1)!.toFixed(2)} s on 2 (load ${load()})`,
    );
  }
} finally {
  rmSync(folder, { recursive: true, force: true });
}
const ratios = plan1.map((t, i) => t.seconds / plan2[i].seconds);
const ceilings = spin1.map((t, i) => (2 * t) / spin2[i]);
console.log(`speed-up with 2 workers (whole process), median (range): ${spread(ratios)}x over ${ROUNDS} rounds`);
if (plan1.every((t) => Number.isFinite(t.cpu))) {
  const extra = plan1.map((t, i) => plan2[i].cpu - t.cpu);
  const free = plan1.map((t, i) => t.seconds / (plan2[i].serial + (t.cpu - plan2[i].serial) / 2));
  console.log(
    `CPU of the whole process, median (range), s: ${spread(plan1.map((t) => t.cpu))} with 1 worker, ${spread(plan2.map((t) => t.cpu))} with 2; ` +
      `the second worker's extra ${spread(extra)}`,
  );
  console.log(
    `serial part (outside the workers' session), s: ${spread(plan1.map((t) => t.serial))} with 1 worker, ${spread(plan2.map((t) => t.serial))} with 2`,
  );
  console.log(`speed-up if the second worker cost no extra CPU (see the header): ${spread(free)}x`);
}
console.log(`the machine's ceiling (twice the work on 2 threads in the time of once on 1), median (range): ${spread(ceilings)}x`);
