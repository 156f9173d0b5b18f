/**
 * `npm run bench:parallel`: wall time of the built-in default plan with 1 and with 2 workers, in one run.
 * Estimates are identical either way (checked here too); only the time may differ.
 */
import { defaultPlan } from '../src/default-plan.js';
import { resolvePlan } from '../src/plan.js';
import { runPlan } from '../src/runner.js';

const { plan } = resolvePlan(defaultPlan());
const times: Record<number, number> = {};
let reference: string | undefined;
for (const workers of [1, 2]) {
  const started = performance.now();
  const outcome = await runPlan(plan, { workers });
  times[workers] = (performance.now() - started) / 1000;
  const estimates = JSON.stringify([...outcome.results.entries()].sort((a, b) => a[0] - b[0]).map(([, r]) => r.estimates.map((values) => Array.from(values))));
  if (reference === undefined) reference = estimates;
  console.log(`workers=${workers}: ${times[workers].toFixed(1)} s wall${estimates === reference ? '' : ' (ESTIMATES DIFFER)'}`);
}
console.log(`speed-up with 2 workers: ${(times[1] / times[2]).toFixed(2)}x`);
