/**
 * The supervised thread on which `hhat estimate` and `hhat check` run the estimators of the user's modules. A
 * module's estimate is code hhat did not write: run in hhat's own thread, a `process.exit` in it ended hhat (exit 0,
 * nothing printed, a CI gate passed), a loop that never ends hung it, and an estimate that allocated without end
 * crashed V8. On this thread, as on a benchmark's workers (pool.ts), each of those ends that one estimate with its
 * reason, and the thread is started again for the next one. Built-in estimators still run in the calling thread.
 *
 *   const thread = new ModuleThread(['/abs/lab.mjs'], parseLimits(options));
 *   const { value } = await estimateOnThread(thread, configured, sample);   // throws ModuleError when stopped
 *   thread.close();
 *
 * Jobs run one at a time. The thread is spawned as a benchmark's workers are (threads.ts: the heap limit), marks in
 * the same shared memory (pool-protocol.ts) when its running estimate started and its sample size, and a watchdog
 * here stops it when that estimate passes its time limit or the process passes its memory limit.
 */
import type { Worker } from 'node:worker_threads';
import type { Sample, Settings } from '../core/contracts.js';
import { EstimateError, ModuleError } from '../core/errors.js';
import { processMemoryLimitBytes } from '../core/memory.js';
import { MAX_ESTIMATE_SECONDS, parseIntegerOption, parseSeconds, WORKER_MEMORY_MIB } from '../core/options.js';
import type { ConfiguredEstimator, EstimateResolution } from '../../estimators/index.js';
import type { EstimateJob, EstimateReply, ModuleJob, ModuleThreadMessage, ModuleThreadSetup } from './module-protocol.js';
import { DEFAULT_LIMITS, estimateTimeLimit, type Limits } from './plan.js';
import { markerViews } from './pool-protocol.js';
import { spawnWorker } from './threads.js';
import { MODULE_LOAD_SECONDS } from './modules.js';

export type { JobContext, ModuleJob } from './module-protocol.js';

/** Why a job gave no result: its estimate passed the time or memory limit, or the thread ended or threw. */
export type Stop = 'time' | 'memory' | 'exit' | 'error';

export type JobOutcome<T> = { ok: true; result: T } | { ok: false; stop: Stop; reason: string };

/**
 * --time-limit and --memory-limit of estimate and check, as bench reads them: one time limit whatever n, and the
 * thread's heap limit; without them a benchmark's defaults (60 s + 0.001 s × n, 4096 MiB).
 */
export function parseLimits(options: { timeLimit?: string; memoryLimit?: string }): Limits {
  return {
    ...DEFAULT_LIMITS,
    ...(options.timeLimit !== undefined
      ? { estimateSeconds: parseSeconds('--time-limit', options.timeLimit, MAX_ESTIMATE_SECONDS), estimateSecondsPerPoint: 0 }
      : {}),
    ...(options.memoryLimit !== undefined
      ? { workerMemoryMiB: parseIntegerOption('--memory-limit', options.memoryLimit, WORKER_MEMORY_MIB.minimum, WORKER_MEMORY_MIB.maximum) }
      : {}),
  };
}

/** "60.3 s (the limit at n = 300: ...)": the time limit at n and where it comes from, for a failure's reason. */
export function limitText(limits: Limits, n: number): string {
  const seconds = +estimateTimeLimit(limits, n).toPrecision(3);
  return limits.estimateSecondsPerPoint === 0
    ? `${seconds} s (--time-limit)`
    : `${seconds} s (the limit at n = ${n}: ${limits.estimateSeconds} s + ${limits.estimateSecondsPerPoint} s × n; --time-limit sets one for every n)`;
}

function moduleWorkerEntry(): URL {
  // From the TypeScript sources (tests, tsx) the thread needs the TypeScript loader; built code runs as is.
  return import.meta.url.endsWith('.ts') ? new URL('./dev-module-worker.mjs', import.meta.url) : new URL('./module-worker.js', import.meta.url);
}

/** How often the watchdog looks at the running estimate, ms. */
const WATCH_MS = 100;

interface Running {
  thread: Worker;
  slots: Int32Array;
  clock: Float64Array;
  /** Why the watchdog stopped it, or the error it died of, so its exit is reported with that reason. */
  stop: { stop: Stop; reason: string } | null;
  /** Settles the job in flight; null while idle. */
  settle: ((outcome: JobOutcome<unknown>) => void) | null;
}

export class ModuleThread {
  private running: Running | null = null;
  private jobs = 0;

  constructor(
    private readonly modules: readonly string[],
    readonly limits: Limits,
    private readonly handler?: URL,
  ) {}

  /** Starts the thread now, so that it loads its modules while the caller goes on; a no-op while one runs. */
  start(): void {
    this.running ??= this.spawn();
  }

  /** Ends the thread (the end of the command). */
  close(): void {
    if (this.running) void this.running.thread.terminate();
    this.running = null;
  }

  /** Runs one job; resolves with its result, or with why the thread stopped (then the next job gets a fresh thread). */
  run<T>(job: ModuleJob): Promise<JobOutcome<T>> {
    const running = (this.running ??= this.spawn());
    const id = this.jobs++;
    const sent = Date.now();
    const processLimitBytes = processMemoryLimitBytes(1, this.limits.workerMemoryMiB);
    return new Promise((resolve) => {
      const watchdog = setInterval(() => {
        if (running.stop) return;
        const now = Date.now();
        if (Atomics.load(running.slots, 0) >= 0) {
          const n = Atomics.load(running.slots, 1);
          if (now - running.clock[0] > estimateTimeLimit(this.limits, n) * 1000)
            return this.stopThread(running, 'time', `timed out after ${limitText(this.limits, n)}`);
        } else if (now - sent > MODULE_LOAD_SECONDS * 1000) {
          // Loading a module is not an estimate (the main thread's load probe holds it to this limit too), but a
          // thread that never reaches the job must not hang the command either.
          return this.stopThread(
            running,
            'time',
            `the thread did not start the estimate in ${MODULE_LOAD_SECONDS} s: loading the module, or a callback an earlier estimate left behind, never ended`,
          );
        }
        if (process.memoryUsage.rss() > processLimitBytes) {
          this.stopThread(
            running,
            'memory',
            `out of memory: the process passed ${Math.round(processLimitBytes / 2 ** 20)} MiB while this estimate ran (the thread's --memory-limit plus room for hhat itself; typed arrays count here, outside the thread's heap)`,
          );
        }
      }, WATCH_MS);
      running.settle = (outcome) => {
        running.settle = null;
        clearInterval(watchdog);
        running.thread.unref();
        resolve(outcome as JobOutcome<T>);
      };
      running.thread.ref();
      running.thread.postMessage({ ...job, job: id });
    });
  }

  private stopThread(running: Running, stop: Stop, reason: string): void {
    running.stop = { stop, reason };
    void running.thread.terminate();
  }

  private spawn(): Running {
    const { thread, marker } = spawnWorker(this.limits.workerMemoryMiB, moduleWorkerEntry());
    const { slots, clock } = markerViews(marker);
    const running: Running = { thread, slots, clock, stop: null, settle: null };
    // Idle, it must not keep a finished command alive.
    thread.unref();
    const setup: ModuleThreadSetup = { modules: [...this.modules], ...(this.handler ? { handler: this.handler.href } : {}) };
    thread.postMessage(setup);
    thread.on('message', (message: ModuleThreadMessage) => {
      if (message.kind === 'result') running.settle?.({ ok: true, result: message.result });
    });
    thread.on('error', (error: Error & { code?: string }) => {
      running.stop ??=
        error.code === 'ERR_WORKER_OUT_OF_MEMORY'
          ? { stop: 'memory', reason: `out of memory: the thread's heap passed its limit of ${this.limits.workerMemoryMiB} MiB (--memory-limit)` }
          : { stop: 'error', reason: `an error escaped the estimator (thrown asynchronously or while loading): ${error.message.split('\n')[0]}` };
    });
    thread.on('exit', (code) => {
      if (this.running === running) this.running = null;
      running.settle?.({ ok: false, ...(running.stop ?? { stop: 'exit', reason: `the estimator ended its worker thread (exit code ${code})` }) });
    });
    return running;
  }
}

/**
 * runEstimator (estimators/index.ts) for a module's estimator, on the thread: its value and resolved settings, or
 * the EstimateError it threw; a ModuleError when it was stopped or threw anything else.
 */
export async function estimateOnThread(
  thread: ModuleThread,
  configured: ConfiguredEstimator,
  sample: Sample,
): Promise<{ value: number; settings: Settings; resolution?: EstimateResolution }> {
  const { estimator, settings, spec, thin, dequantize } = configured;
  const job: EstimateJob = { kind: 'estimate', id: estimator.id, configured: { settings, spec, thin, dequantize }, sample };
  const outcome = await thread.run<EstimateReply>(job);
  if (!outcome.ok) throw new ModuleError(`${estimator.id}: ${outcome.reason}`);
  const reply = outcome.result;
  if (reply.ok) return { value: reply.value, settings: reply.settings, ...(reply.resolution ? { resolution: reply.resolution } : {}) };
  throw reply.code ? new EstimateError(reply.code, reply.message) : new ModuleError(`${estimator.id}: ${reply.message}`);
}
