/**
 * Entry of the thread on which estimate and check run a module's estimators (module-thread.ts): loads the modules
 * named in its first message, then runs each job as it arrives, one at a time, and posts its result. Before each
 * estimate it marks in shared memory when the estimate started and on how many points, so that the supervisor can
 * stop an estimate that never returns.
 */
import { parentPort, workerData } from 'node:worker_threads';
import type { Sample } from '../core/contracts.js';
import { isEstimateError } from '../core/errors.js';
import { runEstimator } from '../../estimators/index.js';
import { loadEstimatorModules } from './modules.js';
import { markerViews } from './pool-protocol.js';
import type { EstimateJob, EstimateReply, JobContext, ModuleJob, ModuleThreadMessage, ModuleThreadSetup } from './module-protocol.js';

const { slots, clock } = markerViews((workerData as { marker: SharedArrayBuffer }).marker);

function mark(n: number): void {
  // The start time first: the watchdog reads the running slot, then the clock.
  clock[0] = Date.now();
  Atomics.store(slots, 1, n);
  Atomics.store(slots, 0, 1);
}

function idle(): void {
  Atomics.store(slots, 0, -1);
}

type Handler = (job: ModuleJob, context: JobContext) => unknown;

async function load(setup: ModuleThreadSetup): Promise<{ context: JobContext; handler: Handler | null }> {
  const estimators = await loadEstimatorModules(setup.modules);
  const handler = setup.handler ? ((await import(setup.handler)) as { handleJob: Handler }).handleJob : null;
  return { context: { estimators: new Map(estimators.map((e) => [e.id, e])), mark }, handler };
}

function describe(error: unknown): string {
  return error instanceof Error ? `${error.name}: ${error.message.split('\n')[0]}` : String(error);
}

function estimate({ id, configured, sample }: EstimateJob, context: JobContext): EstimateReply {
  try {
    const { value, settings, resolution } = runEstimator({ ...configured, estimator: context.estimators.get(id)! }, sample, { report: true });
    return { ok: true, value, settings, ...(resolution ? { resolution } : {}) };
  } catch (error) {
    if (isEstimateError(error)) return { ok: false, code: error.code, message: error.message };
    return { ok: false, message: `threw ${describe(error)}, not an EstimateError` };
  }
}

let loaded: ReturnType<typeof load> | null = null;
let queue: Promise<void> = Promise.resolve();

async function run(job: ModuleJob & { job: number }): Promise<void> {
  const { context, handler } = await loaded!;
  mark(job.kind === 'estimate' ? (job.sample as Sample).n : 0);
  const result = job.kind === 'estimate' ? estimate(job as unknown as EstimateJob, context) : handler!(job, context);
  // What the estimate left behind (a timer, a rejected promise) fails here, charged to this job, not the next.
  await new Promise((resolve) => setImmediate(resolve));
  idle();
  const message: ModuleThreadMessage = { kind: 'result', job: job.job, result };
  parentPort!.postMessage(message);
}

// One listener for the thread's whole life (without one the thread would end while it loads); a failure here is
// not handled on purpose: it ends the thread, and the supervisor reports the error.
parentPort!.on('message', (message: ModuleThreadSetup | (ModuleJob & { job: number })) => {
  if (!loaded) loaded = load(message as ModuleThreadSetup);
  else queue = queue.then(() => run(message as ModuleJob & { job: number }));
});
