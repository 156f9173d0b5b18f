/**
 * Starting worker threads, and starting them early: a worker spends about 0.3 s of CPU loading its modules
 * before it can run anything, and the supervisor about as long loading its own and resolving the plan. A
 * command that will run on workers starts them first (`startWorkersEarly`, from the command line alone), so both
 * loads overlap; the pool then adopts them (`takeEarlyWorker`) and sends each the plan. A worker takes its
 * setup from its first message (pool-protocol.ts, WorkerSetup), never from workerData, so an early worker and
 * one started later (a replacement after a crash) run the same way.
 *
 * This module stays light (no estimator, plan or schema code): the command line imports it before the command's
 * own modules.
 */
import { availableParallelism } from 'node:os';
import { setFlagsFromString } from 'node:v8';
import { Worker } from 'node:worker_threads';
import { newMarker } from './pool-protocol.js';

/** Worker threads of a run unless told otherwise: one per core. */
export function defaultWorkers(): number {
  return Math.max(1, availableParallelism());
}

/** The worker script: from the TypeScript sources (tests, tsx) it needs the TypeScript loader; built code runs as is. */
export function workerEntry(): URL {
  return import.meta.url.endsWith('.ts') ? new URL('./dev-worker.mjs', import.meta.url) : new URL('./worker.js', import.meta.url);
}

/**
 * A worker holds little that lives long (about 12 MiB) and allocates fast. From that small live size V8 sets a
 * small limit for the old generation, and starts a full marking whenever the room left under it is less than
 * the young generation: about 60 full collections in one worker's pass over the default plan, each marked on
 * V8's helper threads, which then take a core's time from the other worker. A larger first limit (V8 reads it
 * when it creates an isolate, so it is set before each worker starts) leaves about 15; the memory it lets a
 * worker use is within the plan's limit.
 */
function setWorkerHeapStart(workerMemoryMiB: number): void {
  setFlagsFromString(`--initial-old-space-size=${Math.max(1, Math.min(64, Math.floor(workerMemoryMiB / 2)))}`);
}

/** A started worker thread and the shared memory in which it marks its running estimate. */
export interface StartedWorker {
  thread: Worker;
  marker: SharedArrayBuffer;
}

/**
 * A new worker thread with a heap limit of `workerMemoryMiB`; it waits for its setup message. `entry`: a bench
 * worker, or the thread on which estimate and check run a module's estimators (module-thread.ts).
 */
export function spawnWorker(workerMemoryMiB: number, entry: URL = workerEntry()): StartedWorker {
  setWorkerHeapStart(workerMemoryMiB);
  const marker = newMarker();
  const thread = new Worker(entry, { workerData: { marker }, resourceLimits: { maxOldGenerationSizeMb: workerMemoryMiB }, stdout: true });
  // Standard output is hhat's own (tables, --quiet's one path, --json): what an estimator module prints goes to
  // standard error, as the estimator protocol asks of commands (found by a tester: console.log broke --quiet).
  thread.stdout.pipe(process.stderr, { end: false });
  return { thread, marker };
}

interface EarlyWorker extends StartedWorker {
  workerMemoryMiB: number;
  /** It ended (or failed to load) before a pool adopted it. */
  gone: boolean;
}

const early: EarlyWorker[] = [];

/** Early workers started, adopted by a run, and not yet ended (adopted or not), so far in this process: for tests and diagnostics. */
export const earlyWorkerCounts = { started: 0, adopted: 0, running: 0 };

/**
 * Starts `count` workers now, ahead of the run that will adopt them. They do not keep the process alive, and
 * one that fails before it is adopted is simply not used (the pool starts another and sees that one's error).
 */
export function startWorkersEarly(count: number, workerMemoryMiB: number): void {
  for (let i = 0; i < count; i++) {
    const worker: EarlyWorker = { ...spawnWorker(workerMemoryMiB), workerMemoryMiB, gone: false };
    worker.thread.unref();
    // Without a listener an 'error' event would throw on this thread.
    worker.thread.on('error', () => (worker.gone = true));
    worker.thread.on('exit', () => {
      worker.gone = true;
      earlyWorkerCounts.running--;
    });
    early.push(worker);
    earlyWorkerCounts.started++;
    earlyWorkerCounts.running++;
  }
}

/** An early worker started with this heap limit and still alive, now owned by the caller; undefined when none is left. */
export function takeEarlyWorker(workerMemoryMiB: number): StartedWorker | undefined {
  for (;;) {
    const worker = early.shift();
    if (!worker) return undefined;
    if (worker.gone || worker.workerMemoryMiB !== workerMemoryMiB) {
      void worker.thread.terminate();
      continue;
    }
    worker.thread.ref();
    earlyWorkerCounts.adopted++;
    return { thread: worker.thread, marker: worker.marker };
  }
}

/** Stops the early workers nobody adopted (a run needing fewer, a command that stopped before its run). */
export function releaseEarlyWorkers(): void {
  for (const worker of early.splice(0)) void worker.thread.terminate();
}
