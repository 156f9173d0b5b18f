/**
 * Speed of the kernel entropy estimator: the 1-D estimate (Silverman bandwidth, standard normal data) at
 * n = 10⁴, 10⁵, 10⁶ with the fitted growth exponent (least-squares slope of log time on log n), the
 * d = 3, n = 20000 estimate, and the binning error of the 1-D FFT path against the exact path.
 *
 * Run alone: npx tsx bench/kernel.ts
 */
import { pathToFileURL } from 'node:url';
import normalFactory from '@stdlib/random-base-normal';
import exponentialFactory from '@stdlib/random-base-exponential';
import type { Sample } from '../src/contracts.js';
import { rngFromSeed } from '../src/rng.js';
import { kernelEstimator } from '../estimators/kernel.js';
import { univariateLogKernelSums } from '../estimators/kernel/univariate.js';
import { univariateRuleBandwidth } from '../estimators/kernel/bandwidth.js';
import { multivariateLogKernelSums } from '../estimators/kernel/multivariate.js';
import { prepareKernelData, ruleBandwidth } from '../estimators/kernel/resubstitution.js';

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

export async function benchKernel(): Promise<string[]> {
  const lines: string[] = [];
  const sizes = [1e4, 1e5, 1e6];
  const walls: number[] = [];
  const cpus: number[] = [];
  for (const n of sizes) {
    const sample = normalSample(`bench-kernel-1d-${n}`, n, 1);
    const time = medianTime(() => kernelEstimator.estimate(sample, { bandwidth: 'silverman' }), n >= 1e6 ? 5 : n >= 1e5 ? 9 : 21);
    walls.push(time.wall);
    cpus.push(time.cpu);
    lines.push(`kernel 1-D (silverman, normal) n = ${n.toExponential(0)}: ${time.wall.toFixed(1)} ms wall, ${time.cpu.toFixed(1)} ms CPU`);
  }
  const logSizes = sizes.map(Math.log);
  lines.push(
    `kernel 1-D growth exponent (slope of log time on log n, n = 1e4..1e6): ${slope(logSizes, walls.map(Math.log)).toFixed(2)} wall, ${slope(logSizes, cpus.map(Math.log)).toFixed(2)} CPU`,
  );

  const sample3 = normalSample('bench-kernel-3d', 20000, 3);
  const data3 = prepareKernelData(sample3);
  const path3 = multivariateLogKernelSums(data3.points, 20000, 3, ruleBandwidth(data3, 'silverman')).path;
  const time3 = medianTime(() => kernelEstimator.estimate(sample3, { bandwidth: 'silverman' }), 3);
  lines.push(`kernel d = 3 (silverman, normal) n = 20000: ${time3.wall.toFixed(0)} ms wall, ${time3.cpu.toFixed(0)} ms CPU (${path3} path)`);

  lines.push(binningError('normal', normalFactory.factory(0, 1, { prng: rngFromSeed('bench-kernel-bin-normal') }), 20000));
  lines.push(binningError('exponential', exponentialFactory.factory(1, { prng: rngFromSeed('bench-kernel-bin-exp') }), 20000));
  return lines;
}

if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  for (const line of await benchKernel()) console.log(line);
}
