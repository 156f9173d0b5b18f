/** Worker-thread entry: builds the context from the plan, then executes units as they arrive. */
import { parentPort, workerData } from 'node:worker_threads';
import { buildContext } from './context.js';
import type { Plan } from './plan.js';
import { executeUnit, type Unit } from './work.js';

const context = buildContext((workerData as { plan: Plan }).plan);

parentPort!.on('message', (unit: Unit) => {
  const result = executeUnit(unit, context);
  const buffers = result.estimates.flatMap((variant) => variant.map((values) => values.buffer as ArrayBuffer));
  parentPort!.postMessage(result, buffers);
});
parentPort!.postMessage({ ready: true });
