/**
 * `npm run track`: the project tracking itself. Reruns the built-in default plan, compares it with the committed
 * results/baseline.json (paired: same seed, same draws), and fails when any cell got worse. On the platform that
 * made the baseline every estimate is bit-identical, so every cell should be `unchanged`; elsewhere pass a
 * tolerance (HHAT_TRACK_TOLERANCE=1e-9) for last-digit differences of the math library.
 *
 * `npm run baseline` refreshes the baseline on purpose, after a deliberate change to an estimator or scenario.
 */
import { resolve } from 'node:path';
import { defaultPlan } from '../src/harness/default-plan.js';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun, readRunFile, writeRunFile } from '../src/analysis/results.js';
import { compareRuns, parseTolerance } from '../src/analysis/compare.js';

const baselinePath = resolve('results/baseline.json');
const latestPath = resolve('results/latest.json');
const refresh = process.argv.includes('--refresh');

const { plan } = resolvePlan(defaultPlan());
const started = performance.now();
const run = assembleRun(await runPlan(plan), null);
const seconds = ((performance.now() - started) / 1000).toFixed(1);

if (refresh) {
  writeRunFile(baselinePath, run);
  console.log(`baseline refreshed: ${run.cells.length} cells in ${seconds} s → ${baselinePath}`);
  process.exit(0);
}

writeRunFile(latestPath, run);
const baseline = readRunFile(baselinePath);
const tolerance = parseTolerance(process.env.HHAT_TRACK_TOLERANCE ?? '0');
const comparison = compareRuns(baseline, run, { tolerance }, { base: 'results/baseline.json', next: 'this checkout' });
const { counts } = comparison;
console.log(`default plan rerun in ${seconds} s; compared with results/baseline.json (${comparison.pairing.paired ? 'paired' : `unpaired: ${comparison.pairing.reason}`})`);
console.log(
  `cells: ${counts.unchanged} unchanged, ${counts['changed-within-noise']} changed within noise, ${counts.improved} improved, ${counts.worse} worse, ${counts.added} added, ${counts.removed} removed`,
);
if (baseline.environment.node !== process.version) console.log(`note: the baseline was made with Node ${baseline.environment.node}, this is ${process.version}`);
for (const cell of comparison.cells.filter((c) => c.status === 'worse')) {
  console.log(`worse: ${cell.scenario} | ${cell.estimator} | n=${cell.n}${cell.perturbation ? ` | ${cell.perturbation}` : ''}: ${cell.reasons[0] ?? ''}`);
}
for (const cell of comparison.removed) console.log(`missing: ${cell.scenario} | ${cell.estimator} | n=${cell.n}${cell.perturbation ? ` | ${cell.perturbation}` : ''}`);
if (counts.worse || counts.removed || counts.added) {
  console.log('If the change is deliberate, refresh the baseline: npm run baseline (see results/README.md).');
}
const failed = counts.worse + counts.removed;
console.log(`track: ${comparison.cells.length - counts.worse} passed, ${failed} failed`);
process.exitCode = failed ? 1 : 0;
