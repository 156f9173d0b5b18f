/**
 * How much a paired comparison gains over an unpaired one: kozachenko-leonenko against the same estimator
 * with every estimate moved by a small shift (default 0.005 nats), at 200 replicates, on a few scenarios.
 * For each cell it prints the p-value of the paired t test on per-replicate differences of squared errors
 * (what `hhat compare` uses when both runs drew the same samples) and of Welch's t test on the squared errors
 * (what it falls back to when they did not).
 *
 *   npx tsx bench/paired-power.ts [shift] [replicates]
 *
 * Both tests ask whether the MSE changed. A shift δ changes it by δ(2·bias + δ): where the estimator is biased
 * the paired test sees that far below the Monte-Carlo error of either run; where bias ≈ −δ/2 the MSE really
 * does not move, and no test should flag it (the mean shift column still shows the change itself).
 * Plans run in-process (one worker), with the shifted copy registered under the built-in's id.
 */
import { compareRuns } from '../src/analysis/compare.js';
import { formatP } from '../src/views/compare-format.js';
import { renderTable } from '../src/core/format.js';
import { registerUserEstimators } from '../src/harness/modules.js';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { DEFAULT_SEED } from '../src/core/rng.js';
import { assembleRun, type RunFile } from '../src/analysis/results.js';
import { getEstimator, replaceEstimator } from '../estimators/index.js';

const shift = Number(process.argv[2] ?? 0.005);
const replicates = Number(process.argv[3] ?? 200);

const { plan } = resolvePlan({
  name: 'paired power',
  scenarios: ['normal', 'exponential', 'student-t:nu=5', 'gaussian:dim=2', 'gaussian:dim=3'],
  estimators: ['kozachenko-leonenko'],
  sampleSizes: [200, 2000],
  replicates,
  seed: DEFAULT_SEED,
});

async function run(): Promise<RunFile> {
  return assembleRun(await runPlan(plan, { workers: 1 }), null);
}

const started = performance.now();
const base = await run();
const builtIn = getEstimator('kozachenko-leonenko');
registerUserEstimators([{ ...builtIn, estimate: (sample, settings) => builtIn.estimate(sample, settings) + shift }], { replace: true });
let shifted: RunFile;
try {
  shifted = await run();
} finally {
  replaceEstimator(builtIn);
}

const paired = compareRuns(base, shifted);
const unpaired = compareRuns(base, shifted, { pairing: 'unpaired' });
const digits = (x: number) => (Number.isFinite(x) ? x.toFixed(4) : '–');
const rows = paired.cells.map((c, i) => {
  const u = unpaired.cells[i];
  return [
    c.scenario,
    String(c.n),
    digits(c.bias.base.value),
    digits(c.sd.base.value),
    `${c.rmse.change >= 0 ? '+' : ''}${c.rmse.change.toFixed(5)} ± ${c.rmse.changeSe.toFixed(4)}`,
    c.shift ? c.shift.value.toFixed(5) : '–',
    c.test ? formatP(c.test.p) : '–',
    c.status,
    u.test ? formatP(u.test.p) : '–',
    u.status,
  ];
});
console.log(`kozachenko-leonenko vs the same + ${shift} nats, ${replicates} replicates per cell (${paired.pairing.paired ? 'same draws' : 'different draws'})`);
console.log(
  renderTable(['scenario', 'n', 'bias (base)', 'SD (base)', 'ΔRMSE ± SE', 'mean shift', 'p paired', 'paired verdict', 'p unpaired', 'unpaired verdict'], rows, {
    align: ['left', 'right', 'right', 'right', 'right', 'right', 'right', 'left', 'right', 'left'],
  }),
);
console.log(`${((performance.now() - started) / 1000).toFixed(1)} s`);
