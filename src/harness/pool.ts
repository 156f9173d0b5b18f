/**
 * Runs units on worker threads under supervision, so that an estimator that hangs, runs out of memory, ends
 * its thread or throws asynchronously costs one failed estimate, never the run.
 *
 * Each worker marks in shared memory the estimate it is running and when it started (src/harness/pool-protocol.ts).
 * A watchdog stops a worker whose estimate exceeds its time limit; a worker whose heap passes its limit, that
 * exits or that throws outside an estimate dies on its own. Either way the supervisor records that estimate
 * (the running one, else the last one started) as a failure with the reason, starts a fresh worker, and hands
 * it the rest of the unit without that estimate. Replicates already reported are kept; the one in flight runs
 * again from its seed, so estimates are the same as in a run without the fault.
 *
 *   const interrupted = await runOnPool(plan, units, { size: 2, entry, onResult, signal });
 */
import { Worker } from 'node:worker_threads';
import { EnvironmentError, UsageError } from '../core/errors.js';
import { estimateTimeLimit, type Plan } from './plan.js';
import { processMemoryLimitBytes } from '../core/memory.js';
import { markerViews, newMarker, type WorkerJob, type WorkerMessage } from './pool-protocol.js';
import { addReplicate, emptyUnitResult, type Unit, type UnitResult } from './work.js';

export interface PoolOptions {
  size: number;
  /** The worker script. */
  entry: URL;
  onResult: (result: UnitResult) => void;
  signal?: AbortSignal;
  /** How often the watchdog looks at the running estimates, ms. */
  watchInterval?: number;
  onWarning?: (text: string) => void;
}

interface Job {
  unit: Unit;
  /** The next replicate not yet reported. */
  from: number;
  skip: { series: number; replicate: number }[];
  result: UnitResult;
  deaths: number;
}

interface Slot {
  thread: Worker;
  slots: Int32Array;
  clock: Float64Array;
  ready: boolean;
  job: Job | null;
  /** Why the supervisor stopped it (a time-out), so its exit is reported with that reason. */
  stopReason: string | null;
  dead: boolean;
}

/** Resolves to true when the run was interrupted (signal), false when every unit finished. */
export function runOnPool(plan: Plan, units: Unit[], options: PoolOptions): Promise<boolean> {
  return new Promise((resolve, reject) => {
    const pending: Job[] = units.map((unit) => ({ unit, from: unit.repStart, skip: [], result: emptyUnitResult(unit), deaths: 0 }));
    const workers = new Set<Slot>();
    let finished = false;
    // eslint-disable-next-line prefer-const -- finish() below may run before the watchdog is started
    let watchdog: ReturnType<typeof setInterval> | undefined;

    const finish = (interrupted: boolean, error?: unknown) => {
      if (finished) return;
      finished = true;
      if (watchdog) clearInterval(watchdog);
      for (const w of workers) void w.thread.terminate();
      // eslint-disable-next-line @typescript-eslint/prefer-promise-reject-errors -- a worker's error is passed on as it came
      if (error) reject(error);
      else resolve(interrupted);
    };

    let everReady = false;
    const dispatch = (slot: Slot) => {
      if (finished) return;
      if (options.signal?.aborted) return finish(true);
      const job = pending.shift();
      if (job) {
        slot.job = job;
        const message: WorkerJob = { unit: job.unit, from: job.from, skip: job.skip };
        slot.thread.postMessage(message);
      } else if ([...workers].every((w) => w.job === null)) {
        finish(false);
      }
    };

    /**
     * The estimate a dead worker was running, else the one blamed for a callback it scheduled, else the last
     * one it started; 'other unit' when the blame falls on a unit already finished (a late callback).
     */
    const culprit = (slot: Slot, unit: Unit): { series: number; replicate: number } | 'other unit' | null => {
      if (slot.slots[0] >= 0) return { series: slot.slots[0], replicate: slot.slots[1] };
      if (slot.slots[2] >= 0) return slot.slots[4] === unit.index ? { series: slot.slots[2], replicate: slot.slots[3] } : 'other unit';
      return null;
    };

    const onDeath = (slot: Slot, reason: string) => {
      if (slot.dead || finished) return;
      slot.dead = true;
      workers.delete(slot);
      if (!slot.ready) {
        // The first workers fail to start on what the user gave (a module that does not load); a replacement
        // for a worker that died, after others started fine, fails on the machine (memory, threads).
        finish(false, everReady ? new EnvironmentError(`a replacement worker thread could not start: ${reason}`) : new UsageError(`a worker thread could not start: ${reason}`));
        return;
      }
      const job = slot.job;
      if (job) {
        job.deaths++;
        const unit = job.unit;
        const blamed = culprit(slot, unit);
        // A late callback of a unit already recorded cannot be charged any more; this unit runs on, unharmed.
        if (blamed === 'other unit') options.onWarning?.(`an error from an estimate of an earlier unit arrived late and stopped a worker: ${reason}`);
        const failed =
          blamed === 'other unit'
            ? []
            : blamed
              ? [blamed]
              : // Nothing was running (the sample itself, say): every estimate of the replicate in flight fails.
                unit.series.map((_s, series) => ({ series, replicate: job.from }));
        for (const f of failed) {
          if (job.skip.some((s) => s.series === f.series && s.replicate === f.replicate)) continue;
          job.skip.push(f);
          job.result.estimates[f.series][f.replicate - unit.repStart] = NaN;
          job.result.failures.push({ series: f.series, replicate: f.replicate, message: reason });
        }
        if (job.deaths > unit.series.length * (unit.repEnd - unit.repStart) + 1) {
          finish(false, new EnvironmentError(`worker threads kept dying on the draws of ${plan.scenarios[unit.scenario]} at n = ${unit.n} (last: ${reason}); the finished units are kept in the checkpoint`));
          return;
        }
        pending.unshift(job);
      }
      start();
    };

    const start = () => {
      if (finished) return;
      const marker = newMarker();
      const { slots, clock } = markerViews(marker);
      const thread = new Worker(options.entry, {
        workerData: { plan, marker },
        resourceLimits: { maxOldGenerationSizeMb: plan.limits.workerMemoryMiB },
      });
      const slot: Slot = { thread, slots, clock, ready: false, job: null, stopReason: null, dead: false };
      workers.add(slot);
      thread.on('message', (message: WorkerMessage) => {
        if (finished || slot.dead) return;
        if (message.kind === 'ready') {
          slot.ready = true;
          everReady = true;
          dispatch(slot);
        } else if (message.kind === 'replicate') {
          const job = slot.job!;
          const result = message.result;
          // Estimates recorded as failures here stay failures (the worker skipped them and reports NaN).
          addReplicate(job.unit, job.result, result);
          job.from = result.replicate + 1;
        } else {
          const job = slot.job!;
          slot.job = null;
          job.result.failures.sort((a, b) => a.replicate - b.replicate || a.series - b.series);
          try {
            options.onResult(job.result);
          } catch (error) {
            finish(false, error);
            return;
          }
          dispatch(slot);
        }
      });
      thread.on('error', (error: Error & { code?: string }) => {
        const reason =
          error.code === 'ERR_WORKER_OUT_OF_MEMORY'
            ? `out of memory: the worker's heap passed its limit of ${plan.limits.workerMemoryMiB} MiB (plan limits.workerMemoryMiB)`
            : `an error escaped the estimator (thrown asynchronously or while loading): ${error.message.split('\n')[0]}`;
        onDeath(slot, reason);
      });
      thread.on('exit', (code) => {
        onDeath(slot, slot.stopReason ?? `the estimator ended its worker thread (exit code ${code})`);
      });
    };

    options.signal?.addEventListener('abort', () => finish(true), { once: true });
    // Typed arrays live outside a worker's heap, so its heap limit cannot stop an estimator that hoards them:
    // the process as a whole is held to the workers' limits plus room for the supervisor.
    const processLimitBytes = processMemoryLimitBytes(options.size, plan.limits.workerMemoryMiB);
    watchdog = setInterval(() => {
      const now = Date.now();
      if (process.memoryUsage.rss() > processLimitBytes) {
        // The estimate running longest is the likeliest hoarder; stopping it frees its thread's memory.
        const running = [...workers].filter((w) => w.job && w.slots[0] >= 0 && !w.stopReason).sort((a, b) => a.clock[0] - b.clock[0]);
        if (running.length) {
          running[0].stopReason = `out of memory: the process passed ${Math.round(processLimitBytes / 2 ** 20)} MiB while this estimate ran (plan limits.workerMemoryMiB per worker; typed arrays count here, outside the worker's heap)`;
          void running[0].thread.terminate();
        }
      }
      for (const slot of workers) {
        if (!slot.job || slot.slots[0] < 0 || slot.stopReason) continue;
        const limit = estimateTimeLimit(plan.limits, slot.job.unit.n);
        if (now - slot.clock[0] > limit * 1000) {
          slot.stopReason = `timed out after ${+limit.toPrecision(3)} s (the limit at n = ${slot.job.unit.n}: plan limits.estimateSeconds + estimateSecondsPerPoint × n)`;
          void slot.thread.terminate();
        }
      }
    }, options.watchInterval ?? 200);
    if (!pending.length) return finish(false);
    for (let i = 0; i < Math.max(1, Math.min(options.size, pending.length)); i++) start();
  });
}
