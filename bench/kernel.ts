/**
 * Speed of the kernel entropy estimator: the 1-D estimate (Silverman bandwidth, standard normal data) at
 * n = 10⁴, 10⁵, 10⁶ and the d = 2 and d = 3 estimates at n = 10⁴..10⁵, each with its fitted growth exponent
 * (least-squares slope of log time on log n, medians of repeated runs, the load average beside them); the
 * d = 2, 3 grid path's error against the exact path at n = 20000; and the binning error of the 1-D FFT path
 * against its exact path.
 *
 * Run alone: npx tsx bench/kernel.ts
 */
import { loadavg } from 'node:os';
import { pathToFileURL } from 'node:url';
import normalFactory from '@stdlib/random-base-normal';
import exponentialFactory from '@stdlib/random-base-exponential';
import type { Sample } from '../src/core/contracts.js';
import { rngFromSeed } from '../src/core/rng.js';
import { parseScenario } from '../scenarios/index.js';
import { kernelEstimator } from '../estimators/kernel.js';
import { univariateLogKernelSums } from '../estimators/kernel/univariate.js';
import { univariateRuleBandwidth } from '../estimators/kernel/bandwidth.js';
import { multivariateLogKernelSums } from '../estimators/kernel/multivariate.js';
import { kernelEntropy, prepareKernelData, ruleBandwidth } from '../estimators/kernel/resubstitution.js';
import { GRID_TOLERANCE, planGrid } from '../estimators/kernel/grid.js';

function normalSample(seed: string, n: number, dim: number): Sample {
  const draw = normalFactory.factory(0, 1, { prng: rngFromSeed(seed) });
  const data = new Float64Array(n * dim);
  for (let p = 0; p < data.length; p++) data[p] = draw();
  return { n, dim, data };
}

/**
 * Median wall and CPU time in milliseconds of `repeats` runs, after one warm-up run. CPU time (this process,
 * user + system) is shown too because wall time on a shared machine includes waiting for a core.
 */
function medianTime(run: () => void, repeats: number): { wall: number; cpu: number } {
  run();
  const walls: number[] = [];
  const cpus: number[] = [];
  for (let r = 0; r < repeats; r++) {
    const cpuStart = process.cpuUsage();
    const start = performance.now();
    run();
    walls.push(performance.now() - start);
    const cpu = process.cpuUsage(cpuStart);
    cpus.push((cpu.user + cpu.system) / 1000);
  }
  const median = (values: number[]): number => values.sort((a, b) => a - b)[Math.floor(values.length / 2)];
  return { wall: median(walls), cpu: median(cpus) };
}

function slope(xs: number[], ys: number[]): number {
  const mx = xs.reduce((a, b) => a + b, 0) / xs.length;
  const my = ys.reduce((a, b) => a + b, 0) / ys.length;
  let sxy = 0;
  let sxx = 0;
  for (let i = 0; i < xs.length; i++) {
    sxy += (xs[i] - mx) * (ys[i] - my);
    sxx += (xs[i] - mx) ** 2;
  }
  return sxy / sxx;
}

function binningError(name: string, draw: () => number, n: number): string {
  const sorted = new Float64Array(n);
  for (let i = 0; i < n; i++) sorted[i] = draw();
  sorted.sort();
  const bandwidth = univariateRuleBandwidth('silverman', sorted);
  const mean = (values: Float64Array): number => values.reduce((a, b) => a + b, 0) / values.length;
  const exact = mean(univariateLogKernelSums(sorted, bandwidth, 'exact').logSums);
  const binned = mean(univariateLogKernelSums(sorted, bandwidth, 'binned').logSums);
  return `1-D binned vs exact path, ${name}, n = ${n}: |ΔĤ| = ${Math.abs(binned - exact).toExponential(2)} nats`;
}

/** The 1-minute load average, as `uptime` prints it: the machine is shared, so figures carry it. */
function load(): string {
  return `load ${loadavg()[0].toFixed(2)}`;
}

/**
 * d = 2, 3 on standard normal data at the default (rule) bandwidth through the public estimator, so
 * whitening, the bandwidth and the path choice are included: times, the path auto took, the grid's memory,
 * and the growth exponent over n = 1e4..1e5.
 */
function multivariateGrowth(dim: number): string[] {
  const lines: string[] = [];
  const sizes = [1e4, 2e4, 5e4, 1e5];
  const walls: number[] = [];
  const cpus: number[] = [];
  for (const n of sizes) {
    const sample = normalSample(`bench-kernel-${dim}d-${n}`, n, dim);
    const data = prepareKernelData(sample);
    const h = ruleBandwidth(data, 'silverman');
    const path = multivariateLogKernelSums(data.points, n, dim, h).path;
    const plan = planGrid(data.points, n, dim, h);
    const grid = plan ? `grid ${plan.nodes.join('×')} = ${((plan.totalNodes * 8) / 2 ** 20).toFixed(1)} MiB` : 'no grid';
    const time = medianTime(() => kernelEstimator.estimate(sample, { bandwidth: 'silverman', scale: 1 }), n >= 5e4 ? 3 : 5);
    walls.push(time.wall);
    cpus.push(time.cpu);
    lines.push(
      `kernel d = ${dim} (silverman, normal) n = ${n.toExponential(0)}: ${time.wall.toFixed(0)} ms wall, ${time.cpu.toFixed(0)} ms CPU (${path} path; ${grid}; ${load()})`,
    );
  }
  const logSizes = sizes.map(Math.log);
  lines.push(
    `kernel d = ${dim} growth exponent (slope of log time on log n, n = 1e4..1e5): ${slope(logSizes, walls.map(Math.log)).toFixed(2)} wall, ${slope(logSizes, cpus.map(Math.log)).toFixed(2)} CPU`,
  );
  return lines;
}

/** Three tight normal clusters (SD 0.15) a few units apart. */
function clusteredSample(seed: string, n: number, dim: number): Sample {
  const sample = normalSample(seed, n, dim);
  for (let i = 0; i < n; i++) {
    for (let k = 0; k < dim; k++) sample.data[i * dim + k] = 0.15 * sample.data[i * dim + k] + (i % 3 === 0 ? 0 : i % 3 === 1 ? 4 : k === 0 ? -3 : 2);
  }
  return sample;
}

/** |Ĥ_grid − Ĥ_exact| (the cell list as reference) at the rule's h, h/4 and 4h, against the grid's derived bound. */
function fastVersusExact(n: number): string[] {
  const lines: string[] = [];
  let worst = 0;
  for (const dim of [2, 3]) {
    for (const [name, sample] of [
      ['normal', normalSample(`bench-kernel-error-normal-${dim}`, n, dim)],
      ['lognormal σ = 1 (skewed)', parseScenario(`lognormal-mv:dim=${dim},sigma=1`).sample(rngFromSeed(`bench-kernel-error-skewed-${dim}`), n)],
      ['3 clusters', clusteredSample(`bench-kernel-error-clusters-${dim}`, n, dim)],
    ] as const) {
      const data = prepareKernelData(sample);
      const rule = ruleBandwidth(data, 'silverman');
      const errors: string[] = [];
      for (const [label, h] of [
        ['h', rule],
        ['h/4', rule / 4],
        ['4h', 4 * rule],
      ] as const) {
        const error = Math.abs(kernelEntropy(data, h, { multivariate: 'grid' }) - kernelEntropy(data, h, { multivariate: 'cells' }));
        worst = Math.max(worst, error);
        errors.push(`${label} ${error.toExponential(1)}`);
      }
      lines.push(`kernel d = ${dim} grid vs exact path, ${name}, n = ${n}: |ΔĤ| = ${errors.join(', ')} nats`);
    }
  }
  lines.push(`kernel grid vs exact, largest |ΔĤ| = ${worst.toExponential(1)} nats (derived bound ${(2 * GRID_TOLERANCE).toExponential(0)}; ${load()})`);
  return lines;
}

export async function benchKernel(): Promise<string[]> {
  const lines: string[] = [];
  const sizes = [1e4, 1e5, 1e6];
  const walls: number[] = [];
  const cpus: number[] = [];
  for (const n of sizes) {
    const sample = normalSample(`bench-kernel-1d-${n}`, n, 1);
    const time = medianTime(() => kernelEstimator.estimate(sample, { bandwidth: 'silverman', scale: 1 }), n >= 1e6 ? 5 : n >= 1e5 ? 9 : 21);
    walls.push(time.wall);
    cpus.push(time.cpu);
    lines.push(`kernel 1-D (silverman, normal) n = ${n.toExponential(0)}: ${time.wall.toFixed(1)} ms wall, ${time.cpu.toFixed(1)} ms CPU`);
  }
  const logSizes = sizes.map(Math.log);
  lines.push(
    `kernel 1-D growth exponent (slope of log time on log n, n = 1e4..1e6): ${slope(logSizes, walls.map(Math.log)).toFixed(2)} wall, ${slope(logSizes, cpus.map(Math.log)).toFixed(2)} CPU`,
  );

  for (const dim of [2, 3]) lines.push(...multivariateGrowth(dim));
  lines.push(...fastVersusExact(20000));

  lines.push(binningError('normal', normalFactory.factory(0, 1, { prng: rngFromSeed('bench-kernel-bin-normal') }), 20000));
  lines.push(binningError('exponential', exponentialFactory.factory(1, { prng: rngFromSeed('bench-kernel-bin-exp') }), 20000));
  return lines;
}

if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  for (const line of await benchKernel()) console.log(line);
}
