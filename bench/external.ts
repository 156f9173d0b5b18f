/**
 * `npm run bench:external`: what an estimate costs through the estimator-command protocol, against the built-in
 * Kozachenko–Leonenko estimate of the same samples in the same run. At n = 1000, d = 3 (and n = 10^4):
 *   - protocol:  bench/echo_command.py, which answers without reading the .npy: writing the .npy, the request,
 *                the broker thread's hand-over and the reply, i.e. the overhead every command pays;
 *   - example:   examples/knn_entropy.py, a real Kozachenko–Leonenko estimate in Python (reads the .npy);
 *   - built-in:  kozachenko-leonenko in this process.
 * Each is timed over the same R samples after a warm-up (the command's start-up is not counted: it is paid
 * once per worker); medians in ms per estimate, and the ratio to the built-in.
 *
 *   npx tsx bench/external.ts [--reps 200]
 */
import { loadavg } from 'node:os';
import { resolve } from 'node:path';
import { parseScenario } from '../scenarios/index.js';
import { replicateRng } from '../src/core/rng.js';
import { parseEstimatorSpec, runEstimator } from '../estimators/index.js';
import { normalizeCommand } from '../src/harness/external/declaration.js';
import { closeEstimatorCommands, useEstimatorCommands } from '../src/harness/external/client.js';
import type { Sample } from '../src/core/contracts.js';

const repsAt = process.argv.indexOf('--reps');
const reps = repsAt >= 0 ? Number(process.argv[repsAt + 1]) : 200;

function median(values: number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  return sorted[Math.floor(sorted.length / 2)];
}

const commands = [
  normalizeCommand({ id: 'protocol', command: ['python3', resolve('bench/echo_command.py')] }, 'entropy', process.cwd(), 'bench'),
  normalizeCommand({ id: 'example', command: ['python3', resolve('examples/knn_entropy.py')] }, 'entropy', process.cwd(), 'bench'),
];
useEstimatorCommands(commands);

console.log(`load average at start: ${loadavg()[0].toFixed(2)}; ${reps} estimates each, after a warm-up of 5`);
for (const n of [1000, 10000]) {
  const scenario = parseScenario('gaussian:dim=3');
  const samples: Sample[] = Array.from({ length: reps }, (_, r) => scenario.sample(replicateRng(1, scenario.id, n, r), n));
  const configured = ['protocol', 'example', 'kozachenko-leonenko'].map((spec) => parseEstimatorSpec(spec));
  const times = configured.map(() => [] as number[]);
  for (const c of configured) for (let r = 0; r < 5; r++) runEstimator(c, samples[r]);
  // Interleaved, so a machine that slows down during the run slows all three alike.
  for (const sample of samples) {
    configured.forEach((c, i) => {
      const started = performance.now();
      runEstimator(c, sample);
      times[i].push(performance.now() - started);
    });
  }
  const builtIn = median(times[2]);
  console.log(`n = ${n}, d = 3:`);
  configured.forEach((c, i) => {
    const m = median(times[i]);
    console.log(`  ${c.estimator.id.padEnd(20)} ${m.toFixed(3).padStart(8)} ms per estimate   ${(m / builtIn).toFixed(2)}× the built-in`);
  });
}
closeEstimatorCommands();
