/**
 * Error against recording step: a normal and a lognormal law recorded to a lattice of step δ (a fraction of the
 * law's SD), n points, and the estimators a user with recorded data chooses between: Kozachenko–Leonenko and
 * Vasicek as the data arrive (they fail on ties) and with dequantize=auto, the lattice estimator, and a
 * histogram. Prints, per law and step, each estimator's RMSE against the underlying continuous entropy (with
 * the share of replicates that failed), and the lattice estimator's bias against its own target, the exact
 * discrete entropy of the recorded values plus log δ (the scenario's `recorded` facts).
 *
 * Run: npm run bench:recorded [-- n replicates]   (defaults 1000 and 100)
 */
import { execSync } from 'node:child_process';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { DEFAULT_SEED } from '../src/core/rng.js';
import { assembleRun } from '../src/analysis/results.js';
import { parseScenario } from '../scenarios/index.js';

const n = Number(process.argv[2] ?? 1000);
const replicates = Number(process.argv[3] ?? 100);
const fractions = [0.001, 0.003, 0.01, 0.03, 0.1, 0.3];
const laws = [
  { base: 'normal', label: 'normal (SD 1)', sd: 1 },
  // SD of the lognormal with μ = 0, σ = 1: sqrt((e − 1)·e).
  { base: 'lognormal', label: 'lognormal (μ = 0, σ = 1; SD 2.161)', sd: Math.sqrt((Math.E - 1) * Math.E) },
];
const estimators = [
  'kozachenko-leonenko',
  'kozachenko-leonenko:dequantize=auto',
  'vasicek',
  'vasicek:dequantize=auto',
  'lattice',
  'lattice:correction=miller-madow',
  'histogram',
];

const step = (fraction: number, sd: number) => Number((fraction * sd).toPrecision(4));
const scenarios = laws.flatMap((law) => fractions.map((f) => `recorded[step=${step(f, law.sd)};${law.base}]`));
const { plan } = resolvePlan({ name: 'recording steps', scenarios, estimators, sampleSizes: [n], replicates, seed: DEFAULT_SEED });

const load = execSync('uptime')
  .toString()
  .trim()
  .replace(/.*load average: /, '');
const started = performance.now();
const run = assembleRun(await runPlan(plan), null);
console.log(`n = ${n}, ${replicates} replicates, seed ${DEFAULT_SEED}; ${((performance.now() - started) / 1000).toFixed(0)} s; load ${load}`);

const short = (spec: string) => spec.replace('kozachenko-leonenko', 'KL').replace(':dequantize=auto', ' +jitter').replace(':correction=miller-madow', ' (MM)');
for (const law of laws) {
  console.log(`\n${law.label}: RMSE against the continuous h, nats (failed replicates in brackets)`);
  console.log(['| δ / SD | δ', ...estimators.map(short), 'lattice: bias against its own target |'].join(' | '));
  console.log(`|${' --- |'.repeat(estimators.length + 3)}`);
  for (const f of fractions) {
    const id = parseScenario(`recorded[step=${step(f, law.sd)};${law.base}]`).id;
    const cells = run.cells.filter((c) => c.scenario === id && c.role === 'main');
    const values = estimators.map((spec) => {
      const cell = cells.find((c) => c.estimator === parseSpecOf(spec, cells));
      if (!cell) return '–';
      const failed = cell.scores.failures;
      if (failed === replicates) return 'fails';
      const rmse = cell.scores.rmse.value.toFixed(4);
      return failed ? `${rmse} [${failed}]` : rmse;
    });
    const lattice = cells.find((c) => c.estimatorId === 'lattice' && !c.estimator.includes('miller'));
    const target = parseScenario(id).recorded?.latticeEntropy ?? null;
    const own = lattice && target !== null ? (lattice.scores.mean.value - target).toExponential(1) : '–';
    console.log(`| ${f} | ${step(f, law.sd)} | ${values.join(' | ')} | ${own} |`);
  }
}

/** The cell's canonical spec for a spec as written here (defaults spelled out). */
function parseSpecOf(spec: string, cells: { estimator: string; estimatorId: string }[]): string | undefined {
  const id = spec.split(':')[0];
  const options = cells.filter((c) => c.estimatorId === id);
  const rest = spec.includes(':') ? spec.slice(spec.indexOf(':') + 1) : '';
  return options.find((c) => (rest ? c.estimator.includes(rest) : !/dequantize=|correction=miller/.test(c.estimator)))?.estimator;
}
