/** Worker-thread entry: builds the context from the plan, then executes units as they arrive. */
import { parentPort, workerData } from 'node:worker_threads';
import { buildContext } from './context.js';
import type { Plan } from './plan.js';
import { executeUnit, type Unit } from './work.js';
import { useEstimatorModules } from './modules.js';

const { plan } = workerData as { plan: Plan };
// The user's estimators must be registered here too before the plan's estimator specs resolve.
await useEstimatorModules(plan.modules);
const context = buildContext(plan);

parentPort!.on('message', (unit: Unit) => {
  const result = executeUnit(unit, context);
  const buffers = result.estimates.map((values) => values.buffer as ArrayBuffer);
  parentPort!.postMessage(result, buffers);
});
parentPort!.postMessage({ ready: true });
