/**
 * Work shared within a replicate: the Kozachenko–Leonenko estimates a default plan makes on one draw at the
 * robustness size (the main k = 3, the weighted estimator's default, and both tuning grids: k = 1..10 and
 * 2, 4, …, 20) with one neighbour search shared per draw, against the same estimates each on a fresh copy
 * of the data (so nothing is shared: one tree and one search per estimate). Interleaved, medians of 9; the
 * two must give bit-identical estimates.
 *
 * Run alone: npx tsx bench/shared-work.ts
 */
import { execSync } from 'node:child_process';
import normalFactory from '@stdlib/random-base-normal';
import { rngFromSeed } from '../src/core/rng.js';
import { parseEstimatorSpec, runEstimator } from '../estimators/index.js';

const specs = [
  'kozachenko-leonenko',
  'kozachenko-leonenko-weighted',
  ...[1, 2, 3, 4, 5, 6, 7, 8, 9, 10].map((k) => `kozachenko-leonenko:k=${k}`),
  ...[2, 4, 6, 8, 12, 16, 20].map((k) => `kozachenko-leonenko-weighted:k=${k}`),
].map((s) => parseEstimatorSpec(s));

function draw(n: number, dim: number, seed: string): Float64Array {
  const normal = normalFactory.factory(0, 1, { prng: rngFromSeed(seed) });
  return Float64Array.from({ length: n * dim }, () => normal());
}

function allEstimates(data: Float64Array, n: number, dim: number, fresh: boolean): number[] {
  return specs.map((c) => runEstimator(c, { n, dim, data: fresh ? Float64Array.from(data) : data }).value);
}

const median = (xs: number[]) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];

console.log(
  `load: ${execSync('uptime')
    .toString()
    .trim()
    .replace(/.*load average: /, '')}`,
);
console.log('n      d  shared ms  separate ms  ratio  identical');
for (const [n, dim] of [
  [500, 1],
  [500, 3],
  [2000, 3],
  [20000, 3],
]) {
  const shared: number[] = [];
  const separate: number[] = [];
  let identical = true;
  for (let r = 0; r < 9; r++) {
    const data = draw(n, dim, `shared-work-${n}-${dim}-${r}`);
    let t = performance.now();
    const a = allEstimates(data, n, dim, false);
    shared.push(performance.now() - t);
    t = performance.now();
    const b = allEstimates(data, n, dim, true);
    separate.push(performance.now() - t);
    identical &&= a.every((v, i) => Object.is(v, b[i]));
  }
  const s = median(shared);
  const p = median(separate);
  console.log(`${String(n).padEnd(6)} ${dim}  ${s.toFixed(1).padStart(9)}  ${p.toFixed(1).padStart(11)}  ${(s / p).toFixed(2).padStart(5)}  ${identical}`);
}
