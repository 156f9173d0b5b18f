/**
 * Whole-process wall time and peak memory of `hhat estimate FILE` and `hhat advise FILE` on a large CSV:
 * 5·10^6 rows × 3 columns (about 200 MB), written seeded to a temporary folder.
 *
 *   npm run build && npx tsx bench/large-file.ts [--rows 5000000] [--keep] [--file PATH] [--only estimate|advise]
 *   npx tsx bench/large-file.ts --calibrate     # the cost model's predictions against measured seconds
 *
 * The data stand in for a long recording of three strain gauges on a footbridge deck: two regimes (quiet
 * and pedestrian traffic) with different spreads and correlations, written with 10 decimals. Each command
 * runs as its own process under /usr/bin/time -v (GNU time: "Maximum resident set size"); where that is
 * missing, the child's own process.resourceUsage() is used through a tiny wrapper.
 */
import { spawnSync } from 'node:child_process';
import { closeSync, existsSync, mkdtempSync, openSync, rmSync, statSync, writeSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { rngFromSeed } from '../src/core/rng.js';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const bin = join(root, 'bin', 'hhat.js');

function option(name: string): string | undefined {
  const at = process.argv.indexOf(name);
  return at >= 0 ? process.argv[at + 1] : undefined;
}

/** Writes `rows` seeded rows of three correlated gauge readings (µm/m) to `path`, 10^5 rows per write. */
export function writeGaugeCsv(path: string, rows: number, seed = 'footbridge-gauges'): void {
  const rng = rngFromSeed(seed);
  const normal = (): number => Math.sqrt(-2 * Math.log(1 - rng())) * Math.cos(2 * Math.PI * rng());
  const file = openSync(path, 'w');
  try {
    writeSync(file, 'gauge_north,gauge_mid,gauge_south\n');
    const block = 100_000;
    for (let start = 0; start < rows; start += block) {
      const lines: string[] = [];
      for (let i = start; i < Math.min(rows, start + block); i++) {
        const busy = rng() < 0.3;
        const spread = busy ? 4 : 1;
        const a = normal();
        const b = 0.8 * a + 0.6 * normal();
        const c = 0.5 * b + 0.87 * normal();
        lines.push(`${(spread * a + (busy ? 3 : 0)).toFixed(10)},${(spread * b).toFixed(10)},${(spread * c - (busy ? 2 : 0)).toFixed(10)}`);
      }
      writeSync(file, lines.join('\n') + '\n');
    }
  } finally {
    closeSync(file);
  }
}

interface Measured {
  command: string;
  exitCode: number | null;
  wallSeconds: number;
  maxRssMb: number;
  stdout: string;
  stderr: string;
}

/** Runs `node bin/hhat.js ARGS` as a whole process and measures it. */
function measure(args: string[]): Measured {
  const command = `node bin/hhat.js ${args.join(' ')}`;
  const started = process.hrtime.bigint();
  if (existsSync('/usr/bin/time')) {
    const child = spawnSync('/usr/bin/time', ['-v', process.execPath, bin, ...args], { cwd: root, encoding: 'utf8', maxBuffer: 1 << 28 });
    const wallSeconds = Number(process.hrtime.bigint() - started) / 1e9;
    const rss = /Maximum resident set size \(kbytes\): (\d+)/.exec(child.stderr);
    const stderr = child.stderr.replace(/\n?\tCommand being timed:[\s\S]*$/, '');
    return { command, exitCode: child.status, wallSeconds, maxRssMb: rss ? Number(rss[1]) / 1024 : NaN, stdout: child.stdout, stderr };
  }
  // Fallback: the child reports its own peak RSS (process.resourceUsage().maxRSS, in kilobytes) on exit.
  const wrapper = `process.on('exit',()=>process.stderr.write('\\nmaxRSS '+process.resourceUsage().maxRSS+'\\n'));process.argv.splice(1,1);await import(${JSON.stringify(pathToFileURL(bin).href)});`;
  const child = spawnSync(process.execPath, ['--input-type=module', '-e', wrapper, bin, ...args], { cwd: root, encoding: 'utf8', maxBuffer: 1 << 28 });
  const wallSeconds = Number(process.hrtime.bigint() - started) / 1e9;
  const rss = /maxRSS (\d+)/.exec(child.stderr);
  return {
    command,
    exitCode: child.status,
    wallSeconds,
    maxRssMb: rss ? Number(rss[1]) / 1024 : NaN,
    stdout: child.stdout,
    stderr: child.stderr.replace(/\nmaxRSS \d+\n$/, ''),
  };
}

/**
 * Predicted (src/harness/cost-model.ts) against measured seconds for each estimator of the default sets, on the
 * gauge data's law (d = 3) and its first column (d = 1), at sizes whose prediction is under a minute:
 * the figures behind the model's constants. A ratio measured/predicted above 1 means the model errs fast.
 */
async function calibrate(): Promise<void> {
  const { parseEstimatorSpec } = await import('../estimators/index.js');
  const { predictedSeconds } = await import('../src/harness/cost-model.js');
  const { defaultEstimatorsFor } = await import('../src/commands/estimate.js');
  const rng = rngFromSeed('footbridge-calibration');
  const normal = (): number => Math.sqrt(-2 * Math.log(1 - rng())) * Math.cos(2 * Math.PI * rng());
  console.log('d  estimator                      n         predicted s  measured s  measured/predicted');
  for (const dim of [1, 2, 3, 6]) {
    for (const n of [10_000, 100_000, 1_000_000]) {
      const data = new Float64Array(n * dim);
      for (let i = 0; i < data.length; i++) data[i] = normal() * (rng() < 0.3 ? 4 : 1);
      for (const id of defaultEstimatorsFor(dim)) {
        const configured = parseEstimatorSpec(id);
        const predicted = predictedSeconds(configured, n, dim)!;
        if (predicted > 60) continue;
        const started = process.hrtime.bigint();
        configured.estimator.estimate({ n, dim, data }, configured.settings);
        const measured = Number(process.hrtime.bigint() - started) / 1e9;
        console.log(
          `${dim}  ${id.padEnd(29)}  ${String(n).padEnd(8)}  ${predicted.toPrecision(3).padStart(11)}  ${measured.toPrecision(3).padStart(10)}  ${(measured / predicted).toFixed(2).padStart(18)}`,
        );
      }
    }
  }
}

async function main(): Promise<void> {
  if (process.argv.includes('--calibrate')) return calibrate();
  const rows = Number(option('--rows') ?? 5_000_000);
  const given = option('--file');
  const only = option('--only');
  const dir = given ? undefined : mkdtempSync(join(tmpdir(), 'hhat-large-'));
  const path = given ?? join(dir!, 'gauges.csv');
  try {
    if (!given || !existsSync(path)) {
      const started = process.hrtime.bigint();
      writeGaugeCsv(path, rows);
      console.log(
        `wrote ${path}: ${rows} rows × 3, ${(statSync(path).size / 1e6).toFixed(0)} MB in ${(Number(process.hrtime.bigint() - started) / 1e9).toFixed(1)} s`,
      );
    }
    const runs: string[][] = [];
    if (only === undefined || only === 'estimate') runs.push(['estimate', path], ['estimate', path, '--json']);
    if (only === undefined || only === 'advise') runs.push(['advise', path]);
    for (const args of runs) {
      const result = measure(args);
      console.log(`\n$ ${result.command}\nexit ${result.exitCode}, wall ${result.wallSeconds.toFixed(1)} s, max RSS ${result.maxRssMb.toFixed(0)} MB`);
      if (result.stderr.trim()) console.log(`stderr:\n${result.stderr.trim()}`);
      console.log(`stdout:\n${result.stdout.trim()}`);
    }
  } finally {
    if (dir && !process.argv.includes('--keep')) rmSync(dir, { recursive: true, force: true });
  }
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) await main();
