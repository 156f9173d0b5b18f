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
 *   const interrupted = await runOnPool(plan, units, { size: 2, onResult, signal });
 */
import { rmSync } from 'node:fs';
import type { Worker } from 'node:worker_threads';
import { EnvironmentError, UsageError } from '../core/errors.js';
import { estimateTimeLimit, timeLimitText, type Plan } from './plan.js';
import { processMemoryLimitBytes } from '../core/memory.js';
import { markerViews, type WorkerJob, type WorkerMessage, type WorkerSetup } from './pool-protocol.js';
import { releaseEarlyWorkers, spawnWorker, takeEarlyWorker } from './threads.js';
import { addReplicate, emptyUnitResult, type Unit, type UnitResult } from './work.js';
import { killCommandProcess } from './external/kill.js';

export interface PoolOptions {
  size: number;
  onResult: (result: UnitResult) => void;
  signal?: AbortSignal;
  /** How often the watchdog looks at the running estimates, ms. */
  watchInterval?: number;
  onWarning?: (text: string) => void;
  /** Passed to each worker's context (work.ts, WorkContext.replicateOffset). */
  replicateOffset?: number;
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
  /** The code family of the last unit it ran (work.ts, Unit.codeFamily), or null before its first. */
  codeFamily: string | null;
  /** The pids of its running estimator-command processes (shared with its broker thread; 0: none there). */
  commandPids: Int32Array;
  /** The temporary folders its estimator commands read from: removed when it ends. */
  commandFolders: string[];
}

/** The supervisor's state: the jobs not yet handed out, the live workers, and how the run ends. */
interface Supervisor {
  plan: Plan;
  options: PoolOptions;
  pending: Job[];
  workers: Set<Slot>;
  finished: boolean;
  /** Whether any worker has started: a worker that fails to start after that fails on the machine, not the input. */
  everReady: boolean;
  watchdog: ReturnType<typeof setInterval> | undefined;
  resolve: (interrupted: boolean) => void;
  reject: (error: unknown) => void;
}

/** Ends the run once: stops the watchdog and every worker, then settles with `interrupted` or the error. */
function finish(run: Supervisor, interrupted: boolean, error?: unknown): void {
  if (run.finished) return;
  run.finished = true;
  if (run.watchdog) clearInterval(run.watchdog);
  // Now, not on each thread's exit event: a run stopped by a signal may end the process before those come, and
  // a command sleeping in an estimate never reads the end of its input.
  for (const w of run.workers) stopCommands(w);
  for (const w of run.workers) void w.thread.terminate();
  if (error) run.reject(error);
  else run.resolve(interrupted);
}

/** Hands a free worker the next job; ends the run when interrupted, or when no job is left and every worker is idle. */
function dispatch(run: Supervisor, slot: Slot): void {
  if (run.finished) return;
  if (run.options.signal?.aborted) return finish(run, true);
  const job = run.pending.splice(nextJob(run, slot), 1)[0] as Job | undefined;
  if (job) {
    slot.job = job;
    slot.codeFamily = job.unit.codeFamily;
    const message: WorkerJob = { unit: job.unit, from: job.from, skip: job.skip };
    slot.thread.postMessage(message);
  } else if ([...run.workers].every((w) => w.job === null)) {
    finish(run, false);
  }
}

/**
 * Which pending job a free worker gets (an index into `pending`, ordered by cost): the costliest of the code family
 * it ran last, or, for its first, the costliest of a family no other worker runs; else the costliest of all.
 * Every worker compiles and warms up its own copy of the code it runs, so keeping the families apart spares the
 * second worker much of that; since each family is taken costliest first, both workers still end on small units.
 */
export function pickJob(pending: readonly { unit: Pick<Unit, 'codeFamily'> }[], own: string | null, others: readonly (string | null)[]): number {
  const i = own === null ? pending.findIndex((j) => !others.includes(j.unit.codeFamily)) : pending.findIndex((j) => j.unit.codeFamily === own);
  return i < 0 ? 0 : i;
}

function nextJob(run: Supervisor, slot: Slot): number {
  const others = [...run.workers].filter((w) => w !== slot).map((w) => w.codeFamily);
  return pickJob(run.pending, slot.codeFamily, others);
}

/**
 * The estimate a dead worker was running, else the one blamed for a callback it scheduled, else the last
 * one it started; 'other unit' when the blame falls on a unit already finished (a late callback).
 */
function culprit(slot: Slot, unit: Unit): { series: number; replicate: number } | 'other unit' | null {
  if (slot.slots[0] >= 0) return { series: slot.slots[0], replicate: slot.slots[1] };
  if (slot.slots[2] >= 0) return slot.slots[4] === unit.index ? { series: slot.slots[2], replicate: slot.slots[3] } : 'other unit';
  return null;
}

/** The estimates a worker's death is charged to: the culprit, or, when nothing was running, every estimate of the replicate in flight. */
function failedEstimates(run: Supervisor, slot: Slot, job: Job, reason: string): { series: number; replicate: number }[] {
  const blamed = culprit(slot, job.unit);
  if (blamed === 'other unit') {
    // A late callback of a unit already recorded cannot be charged any more; this unit runs on, unharmed.
    run.options.onWarning?.(`an error from an estimate of an earlier unit arrived late and stopped a worker: ${reason}`);
    return [];
  }
  if (blamed) return [blamed];
  // Nothing was running (the sample itself, say): every estimate of the replicate in flight fails.
  return job.unit.series.map((_s, series) => ({ series, replicate: job.from }));
}

/** Records each failed estimate once, with its reason, and has the job's next worker skip it. */
function chargeFailures(job: Job, failed: { series: number; replicate: number }[], reason: string): void {
  for (const f of failed) {
    if (job.skip.some((s) => s.series === f.series && s.replicate === f.replicate)) continue;
    job.skip.push(f);
    job.result.estimates[f.series][f.replicate - job.unit.repStart] = NaN;
    job.result.failures.push({ series: f.series, replicate: f.replicate, message: reason });
  }
}

/** A worker died: at start-up that ends the run; else its culprit fails, its job goes back first, and a fresh worker replaces it. */
function onDeath(run: Supervisor, slot: Slot, reason: string): void {
  if (slot.dead || run.finished) return;
  slot.dead = true;
  run.workers.delete(slot);
  if (!slot.ready) {
    // The first workers fail to start on what the user gave (a module that does not load); a replacement
    // for a worker that died, after others started fine, fails on the machine (memory, threads).
    finish(
      run,
      false,
      run.everReady
        ? new EnvironmentError(`a replacement worker thread could not start: ${reason}`)
        : new UsageError(`a worker thread could not start: ${reason}`),
    );
    return;
  }
  const job = slot.job;
  if (job) {
    job.deaths++;
    const unit = job.unit;
    chargeFailures(job, failedEstimates(run, slot, job, reason), reason);
    if (job.deaths > unit.series.length * (unit.repEnd - unit.repStart) + 1) {
      finish(
        run,
        false,
        new EnvironmentError(
          `worker threads kept dying on the draws of ${run.plan.scenarios[unit.scenario]} at n = ${unit.n} (last: ${reason}); the finished units are kept in the checkpoint`,
        ),
      );
      return;
    }
    run.pending.unshift(job);
  }
  startWorker(run);
}

/** Follows a worker's messages: ready (give it work), a replicate (keep it), its unit done (report it, give it more). */
function onMessage(run: Supervisor, slot: Slot, message: WorkerMessage): void {
  if (message.kind === 'command-folder') {
    slot.commandFolders.push(message.folder);
    return;
  }
  if (run.finished || slot.dead) return;
  if (message.kind === 'ready') {
    slot.ready = true;
    run.everReady = true;
    dispatch(run, slot);
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
    // The worker gets its next unit before this one is saved (an fsync of the checkpoint), so it does not wait
    // for the disk; the last unit is saved before the run can end.
    if (run.pending.length) dispatch(run, slot);
    try {
      run.options.onResult(job.result);
    } catch (error) {
      finish(run, false, error);
      return;
    }
    if (!slot.job) dispatch(run, slot);
  }
}

/** The failure reason of a worker's 'error' event: its heap limit, or an error that escaped the estimator. */
function errorReason(plan: Plan, error: Error & { code?: string }): string {
  return error.code === 'ERR_WORKER_OUT_OF_MEMORY'
    ? `out of memory: the worker's heap passed its limit of ${plan.limits.workerMemoryMiB} MiB (--memory-limit, or plan limits.workerMemoryMiB)`
    : `an error escaped the estimator (thrown asynchronously or while loading): ${error.message.split('\n')[0]}`;
}

/** Kills the estimator-command processes a worker started (a stopped worker cannot) and removes their temporary files. */
function stopCommands(slot: Slot): void {
  for (let i = 0; i < slot.commandPids.length; i++) {
    const pid = Atomics.exchange(slot.commandPids, i, 0);
    if (pid > 0) killCommandProcess(pid);
  }
  for (const folder of slot.commandFolders) rmSync(folder, { recursive: true, force: true });
  slot.commandFolders = [];
}

/**
 * Starts a worker thread with its marker and heap limit (or adopts one the command started early), sends it the
 * plan, and supervises it until it dies.
 */
function startWorker(run: Supervisor): void {
  if (run.finished) return;
  const { plan } = run;
  const { thread, marker } = takeEarlyWorker(plan.limits.workerMemoryMiB) ?? spawnWorker(plan.limits.workerMemoryMiB);
  const { slots, clock, commandPids } = markerViews(marker);
  const setup: WorkerSetup = { plan, replicateOffset: run.options.replicateOffset ?? 0 };
  thread.postMessage(setup);
  const slot: Slot = { thread, slots, clock, commandPids, ready: false, job: null, stopReason: null, dead: false, commandFolders: [], codeFamily: null };
  run.workers.add(slot);
  thread.on('message', (message: WorkerMessage) => onMessage(run, slot, message));
  thread.on('error', (error: Error & { code?: string }) => onDeath(run, slot, errorReason(plan, error)));
  thread.on('exit', (code) => {
    stopCommands(slot);
    onDeath(run, slot, slot.stopReason ?? `the estimator ended its worker thread (exit code ${code})`);
  });
}

/** When the process passes its memory limit, stops the estimate running longest: the likeliest hoarder, whose thread's memory is freed. */
function stopMemoryHoarder(run: Supervisor, processLimitBytes: number): void {
  if (process.memoryUsage.rss() <= processLimitBytes) return;
  const running = [...run.workers].filter((w) => w.job && w.slots[0] >= 0 && !w.stopReason).sort((a, b) => a.clock[0] - b.clock[0]);
  if (running.length) {
    running[0].stopReason = `out of memory: the process passed ${Math.round(processLimitBytes / 2 ** 20)} MiB while this estimate ran (--memory-limit, or plan limits.workerMemoryMiB, per worker; typed arrays count here, outside the worker's heap)`;
    void running[0].thread.terminate();
  }
}

/**
 * Extra time the watchdog gives an estimator command's estimate. The broker holds the command to the limit itself,
 * from when it sends the request, and then stops only the command; the watchdog, counting from the estimate's
 * start, is the backstop for a broker that fails to. Without the margin a loaded machine let the watchdog win the
 * race now and then, and the whole worker was stopped instead of the command.
 */
export const COMMAND_GRACE_SECONDS = 2;

/** Stops every worker whose running estimate has passed its time limit at the unit's n (a command's: plus COMMAND_GRACE_SECONDS). */
function stopOverdue(run: Supervisor, now: number): void {
  for (const slot of run.workers) {
    if (!slot.job || slot.slots[0] < 0 || slot.stopReason) continue;
    const limit = estimateTimeLimit(run.plan.limits, slot.job.unit.n);
    const grace = slot.slots[5] === 1 ? COMMAND_GRACE_SECONDS : 0;
    if (now - slot.clock[0] > (limit + grace) * 1000) {
      slot.stopReason = `timed out after ${timeLimitText(run.plan.limits, slot.job.unit.n)}`;
      void slot.thread.terminate();
    }
  }
}

/** Resolves to true when the run was interrupted (signal), false when every unit finished. */
export function runOnPool(plan: Plan, units: Unit[], options: PoolOptions): Promise<boolean> {
  return new Promise((resolve, reject) => {
    const run: Supervisor = {
      plan,
      options,
      pending: units.map((unit) => ({ unit, from: unit.repStart, skip: [], result: emptyUnitResult(unit), deaths: 0 })),
      workers: new Set<Slot>(),
      finished: false,
      everReady: false,
      watchdog: undefined,
      resolve,
      reject,
    };
    options.signal?.addEventListener('abort', () => finish(run, true), { once: true });
    // Typed arrays live outside a worker's heap, so its heap limit cannot stop an estimator that hoards them:
    // the process as a whole is held to the workers' limits plus room for the supervisor.
    const processLimitBytes = processMemoryLimitBytes(options.size, plan.limits.workerMemoryMiB);
    run.watchdog = setInterval(() => {
      const now = Date.now();
      stopMemoryHoarder(run, processLimitBytes);
      stopOverdue(run, now);
    }, options.watchInterval ?? 200);
    if (!run.pending.length) {
      releaseEarlyWorkers();
      return finish(run, false);
    }
    for (let i = 0; i < Math.max(1, Math.min(options.size, run.pending.length)); i++) startWorker(run);
    // Replacements are started fresh; early workers this run did not need would only hold memory.
    releaseEarlyWorkers();
  });
}
