/**
 * Worker-thread entry: builds the context from the plan, then runs units as they arrive, one message per
 * replicate, so that a supervisor (src/pool.ts) that has to stop this thread loses at most one replicate.
 *
 * Before each estimate it writes which one is running, and when it started, into memory shared with the
 * supervisor: a hung estimator never returns, so it could never say so itself. Callbacks an estimate schedules
 * (timers, immediates, ticks, microtasks) carry its tag, so an error they throw later is charged to it.
 */
import { parentPort, workerData } from 'node:worker_threads';
import { buildContext } from './context.js';
import type { Plan } from './plan.js';
import { executeReplicate, type Unit } from './work.js';
import { useEstimatorModules } from './modules.js';
import { markerViews, type WorkerJob, type WorkerMessage } from './pool-protocol.js';

const { plan, marker } = workerData as { plan: Plan; marker: SharedArrayBuffer };
const { slots, clock } = markerViews(marker);

/** The estimate running now (series, replicate, unit), or null. */
let running: [number, number, number] | null = null;

function blame(tag: [number, number, number]): void {
  slots[2] = tag[0];
  slots[3] = tag[1];
  slots[4] = tag[2];
}

function tagged<A extends unknown[], R>(callback: (...args: A) => R): (...args: A) => R {
  const tag = running;
  if (!tag || typeof callback !== 'function') return callback;
  return function (this: unknown, ...args: A): R {
    blame(tag);
    return callback.apply(this, args);
  };
}

type Scheduler = (callback: (...args: unknown[]) => unknown, ...rest: unknown[]) => unknown;

/** The scheduler with every callback tagged; its own properties (such as promisified forms) kept. */
function wrapScheduler(scheduler: unknown): never {
  const original = scheduler as Scheduler;
  const wrapped: Scheduler = (callback, ...rest) => original(tagged(callback), ...rest);
  return Object.assign(wrapped, original) as never;
}

globalThis.setTimeout = wrapScheduler(globalThis.setTimeout);
globalThis.setInterval = wrapScheduler(globalThis.setInterval);
globalThis.setImmediate = wrapScheduler(globalThis.setImmediate);
globalThis.queueMicrotask = wrapScheduler(globalThis.queueMicrotask);
process.nextTick = wrapScheduler(process.nextTick);

// The user's estimators must be registered here too before the plan's estimator specs resolve.
await useEstimatorModules(plan.modules);
const context = buildContext(plan);

function post(message: WorkerMessage, transfer: ArrayBuffer[] = []): void {
  parentPort!.postMessage(message, transfer);
}

/** Lets callbacks that the unit's estimates scheduled with a short delay run (and fail) before it counts as done. */
function settle(): Promise<void> {
  return new Promise((resolve) => setTimeout(resolve, 2));
}

parentPort!.on('message', async (job: WorkerJob) => {
  const unit: Unit = job.unit;
  const skipped = new Set(job.skip.map((s) => `${s.series}|${s.replicate}`));
  for (let replicate = job.from; replicate < unit.repEnd; replicate++) {
    const result = executeReplicate(unit, context, replicate, {
      skip: (series) => skipped.has(`${series}|${replicate}`),
      onStart: (series, r) => {
        running = [series, r, unit.index];
        slots[0] = series;
        slots[1] = r;
        blame(running);
        clock[0] = Date.now();
      },
      onEnd: () => {
        running = null;
        slots[0] = -1;
      },
    });
    post({ kind: 'replicate', unit: unit.index, result }, [result.values.buffer as ArrayBuffer, result.timeMs.buffer as ArrayBuffer]);
  }
  await settle();
  post({ kind: 'unit-done', unit: unit.index });
});
post({ kind: 'ready' });
