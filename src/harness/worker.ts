/**
 * Worker-thread entry: builds the context from the plan, then runs units as they arrive, one message per
 * replicate, so that a supervisor (src/harness/pool.ts) that has to stop this thread loses at most one replicate.
 *
 * Before each estimate it writes which one is running, and when it started, into memory shared with the
 * supervisor: a hung estimator never returns, so it could never say so itself. Callbacks an estimate schedules
 * (timers, immediates, ticks, microtasks) and promises it creates carry its tag, so an error they throw or a
 * rejection nobody handles is charged to it. Before a replicate is reported, the worker lets pending
 * callbacks run (a macrotask turn, and a short wait while tagged timers are pending), so such an error stops
 * the worker while that replicate can still be charged with it, not after it was recorded.
 */
import { createHook } from 'node:async_hooks';
import { parentPort, workerData } from 'node:worker_threads';
import { buildContext } from './context.js';
import { executeReplicate, type Unit } from './work.js';
import { useEstimatorModules } from './modules.js';
import { isCommandEstimator, onCommandFolder, shareCommandPids, useEstimatorCommands } from './external/client.js';
import { markerViews, type WorkerJob, type WorkerMessage, type WorkerSetup } from './pool-protocol.js';
import { detachOnce } from '../math/wasm.js';

// First, before any estimator code is compiled (see detachOnce).
detachOnce();

const { slots, clock, commandPids } = markerViews((workerData as { marker: SharedArrayBuffer }).marker);

// One listener for the thread's whole life: the first message is the setup, every later one a unit. (Removing
// the last listener would let the thread's loop end while it loads the plan's estimator modules.)
let onJob: ((job: WorkerJob) => void) | null = null;
const { plan, replicateOffset } = await new Promise<WorkerSetup>((resolve) => {
  parentPort!.on('message', (message: WorkerSetup | WorkerJob) => (onJob ? onJob(message as WorkerJob) : resolve(message as WorkerSetup)));
});

/** The estimate running now (series, replicate, unit), or null. */
let running: [number, number, number] | null = null;

function blame(tag: [number, number, number]): void {
  slots[2] = tag[0];
  slots[3] = tag[1];
  slots[4] = tag[2];
}

/** Tagged callbacks scheduled and not yet run (a cleared timer stays counted; that only costs a short wait). */
let pendingTagged = 0;

function tagged<A extends unknown[], R>(callback: (...args: A) => R): (...args: A) => R {
  const tag = running;
  if (!tag || typeof callback !== 'function') return callback;
  pendingTagged++;
  let ran = false;
  return function (this: unknown, ...args: A): R {
    if (!ran) pendingTagged--;
    ran = true;
    blame(tag);
    return callback.apply(this, args);
  };
}

// Promises created during an estimate carry its tag, so an unhandled rejection names the estimate.
const promiseTags = new WeakMap<object, [number, number, number]>();
createHook({
  init(_id, type, _trigger, resource) {
    if (type === 'PROMISE' && running) promiseTags.set(resource, running);
  },
}).enable();
process.on('unhandledRejection', (reason, promise) => {
  const tag = promiseTags.get(promise);
  if (tag) blame(tag);
  throw reason instanceof Error ? reason : new Error(`a promise was rejected with ${String(reason)}`);
});

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
useEstimatorCommands(plan.commands, plan.limits);
// The main thread planned the units (and skipped the perturbations that do not apply) and scores them.
const context = buildContext(plan, { shifts: false, replicateOffset });

function post(message: WorkerMessage, transfer: ArrayBuffer[] = []): void {
  parentPort!.postMessage(message, transfer);
}

// A stopped thread cannot stop the command processes it started (a sleeping one never reads its closed stdin):
// the supervisor kills them, by the pids the broker keeps in shared memory, and removes their folder.
shareCommandPids(commandPids);
onCommandFolder((folder) => post({ kind: 'command-folder', folder }));

/**
 * Lets what the replicate's estimates left behind run, and fail, before the replicate is reported: one
 * macrotask turn (microtasks, ticks, immediates, unhandled rejections), and while tagged timers are still
 * pending a few short waits for them. Timers set further ahead than that are charged when they fire.
 */
async function settle(): Promise<void> {
  await new Promise((resolve) => setImmediate(resolve));
  for (let wait = 0; pendingTagged > 0 && wait < 3; wait++) await new Promise((resolve) => setTimeout(resolve, 2));
}

// A rejection here reaches the unhandledRejection handler above, which blames the running estimate.
// eslint-disable-next-line @typescript-eslint/no-misused-promises
onJob = async (job: WorkerJob) => {
  const unit: Unit = job.unit;
  const skipped = new Set(job.skip.map((s) => `${s.series}|${s.replicate}`));
  for (let replicate = job.from; replicate < unit.repEnd; replicate++) {
    // A death before this replicate's first estimate (drawing its sample, say) must not fall on the previous
    // replicate's last estimate, which is already reported.
    blame([-1, -1, -1]);
    const result = executeReplicate(unit, context, replicate, {
      skip: (series) => skipped.has(`${series}|${replicate}`),
      onStart: (series, r) => {
        running = [series, r, unit.index];
        // The start time first: the watchdog reads the running slot, then the clock, and must never pair a
        // new estimate with the previous one's start.
        clock[0] = Date.now();
        Atomics.store(slots, 5, isCommandEstimator(context.all[unit.series[series].estimator].estimator) ? 1 : 0);
        Atomics.store(slots, 1, r);
        Atomics.store(slots, 0, series);
        blame(running);
      },
      onEnd: () => {
        running = null;
        Atomics.store(slots, 0, -1);
      },
    });
    await settle();
    post({ kind: 'replicate', unit: unit.index, result }, [result.values.buffer as ArrayBuffer, result.timeMs.buffer as ArrayBuffer]);
  }
  post({ kind: 'unit-done', unit: unit.index });
};
post({ kind: 'ready' });
