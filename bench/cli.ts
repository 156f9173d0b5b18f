/**
 * `npm run bench:cli`: hhat as a user meets it, whole processes timed from outside. Each pair runs A and B in
 * turn (A B A B ...), after a warm-up of each, and prints the medians and the median of the per-pair ratios
 * A/B, so a machine that speeds up or slows down during the run affects both sides alike.
 *
 *   npx tsx bench/cli.ts [--runs 7]
 *
 * Pairs: `hhat --version` and `hhat --help` against `node -e 0`; `hhat estimate` of 100 values against
 * `node -e 0`; k-NN (k = 5) at n = 2e5, d = 3, and Vasicek at n = 10^6 against the SciPy script
 * bench/scipy_cli.py on the same .npy file. hhat runs its built command (node bin/hhat.js), without npm.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import normalRandom from '@stdlib/random-base-normal';
import { rngFromSeed } from '../src/core/rng.js';
import { quantileOfSorted } from '../src/math/moments.js';
import { npyBytes } from './data.js';

const runsAt = process.argv.indexOf('--runs');
const runs = runsAt >= 0 ? Number(process.argv[runsAt + 1]) : 7;
if (!(Number.isInteger(runs) && runs >= 3)) throw new Error(`--runs ${process.argv[runsAt + 1]}: give an integer ≥ 3`);
const dir = mkdtempSync(join(tmpdir(), 'hhat-bench-cli-'));
const bin = resolve('bin/hhat.js');

function writeNpy(name: string, n: number, d: number): string {
  const draw = normalRandom.factory(0, 1, { prng: rngFromSeed(`bench-cli ${name}`) });
  const values = Float64Array.from({ length: n * d }, () => draw());
  const path = join(dir, name);
  writeFileSync(path, npyBytes(values, d));
  return path;
}

function seconds(command: string[]): number {
  const started = performance.now();
  const result = spawnSync(command[0], command.slice(1), { stdio: ['ignore', 'ignore', 'pipe'], encoding: 'utf8' });
  if (result.status !== 0) throw new Error(`${command.join(' ')} failed: ${result.stderr}`);
  return (performance.now() - started) / 1000;
}

/** The last number a command prints: the estimate, on both sides. */
function printedValue(command: string[]): number {
  const out = spawnSync(command[0], command.slice(1), { encoding: 'utf8' }).stdout;
  const numbers = out.match(/-?\d+\.\d+(e-?\d+)?/g) ?? [];
  return Number(numbers[numbers.length - 1]);
}

const median = (xs: number[]) => quantileOfSorted(Float64Array.from(xs).sort(), 0.5);

/** Times A and B in turn; when both print an estimate (`compareValues`), checks they did the same work. */
function pair(label: string, a: string[], b: string[], target: number, compareValues = false): void {
  if (compareValues) {
    const [va, vb] = [printedValue(a), printedValue(b)];
    if (!(Math.abs(va - vb) <= 1e-6 * Math.max(1, Math.abs(vb))))
      throw new Error(`${label}: hhat printed ${va}, the SciPy script ${vb}; they did not compute the same estimate`);
  }
  seconds(a);
  seconds(b);
  const as: number[] = [];
  const bs: number[] = [];
  const ratios: number[] = [];
  for (let i = 0; i < runs; i++) {
    const ta = seconds(a);
    const tb = seconds(b);
    as.push(ta);
    bs.push(tb);
    ratios.push(ta / tb);
  }
  const ratio = median(ratios);
  const range = `${Math.min(...ratios).toFixed(2)}–${Math.max(...ratios).toFixed(2)}`;
  console.log(
    `${label.padEnd(44)} A ${median(as).toFixed(3)} s  B ${median(bs).toFixed(3)} s  A/B ${ratio.toFixed(2)} (${range}; target ≤ ${target})${ratio <= target ? '' : '  ABOVE TARGET'}`,
  );
}

const small = join(dir, 'small.csv');
writeFileSync(small, `${Array.from({ length: 100 }, (_, i) => Math.sin(i * 1.7) * 3 + i / 50).join('\n')}\n`);
const cloud = writeNpy('cloud-3d.npy', 200_000, 3);
const line = writeNpy('line-1d.npy', 1_000_000, 1);
const node = [process.execPath, '-e', '0'];

console.log(
  `whole processes, ${runs} pairs each after a warm-up; medians (and the range of the ratios); Node ${process.version}; load ${loadavg()[0].toFixed(2)}`,
);
pair('hhat --version vs node -e 0', [process.execPath, bin, '--version'], node, 2.5);
pair('hhat --help vs node -e 0', [process.execPath, bin, '--help'], node, 2.5);
pair('hhat estimate (100 values) vs node -e 0', [process.execPath, bin, 'estimate', small, '--estimator', 'kozachenko-leonenko'], node, 4);
pair(
  'k-NN k=5, n=2e5, d=3: hhat vs SciPy script',
  [process.execPath, bin, 'estimate', cloud, '--estimator', 'kozachenko-leonenko:k=5'],
  ['python3', 'bench/scipy_cli.py', 'knn', cloud, '5'],
  1.2,
  true,
);
pair(
  'Vasicek, n=1e6: hhat vs SciPy script',
  [process.execPath, bin, 'estimate', line, '--estimator', 'vasicek'],
  ['python3', 'bench/scipy_cli.py', 'vasicek', line],
  1.0,
  true,
);
console.log(
  `load while measuring: ${loadavg()
    .map((x) => x.toFixed(2))
    .join(', ')} (1, 5, 15 min); figures taken above a load of 1 are worth taking again`,
);
