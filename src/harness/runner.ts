/**
 * Runs a plan's units on worker threads, appending each finished unit to a checkpoint so an interrupted run
 * resumes without recomputing anything, and reporting progress as it goes.
 */
import { existsSync, readFileSync, statSync, truncateSync } from 'node:fs';
import { EnvironmentError, UsageError } from '../core/errors.js';
import { buildContext } from './context.js';
import { checkPlanInput, codeDifference, isResolvedPlan, MAX_WORKERS, planCode, planFingerprint, type Plan, type PlanCode } from './plan.js';
import { checkSampleMemory } from '../core/memory.js';
import { checkIntegerArgument } from '../core/options.js';
import { describeValue } from '../core/spec.js';
import type { Sample, Scenario } from '../core/contracts.js';
import { describeFileError, openAppender, writeFileAtomic, type Appender } from '../core/files.js';
import { executeUnit, planUnits, type Skip, type Unit, type UnitResult, type WorkContext } from './work.js';
import { runOnPool } from './pool.js';
import { perturbationRangeProblem, pilotRangeProblem, scenarioRangeProblem } from './draw-range.js';
import { drawCheckedReplicate } from '../core/rng.js';
import { perturbedCopy } from './perturb.js';
import { defaultWorkers } from './threads.js';

export { defaultWorkers };
import { inProcessOnlyIds } from '../../estimators/index.js';
import { hasOption, hhatCommand } from '../core/shell.js';

export interface Shard {
  /** 1-based. */
  index: number;
  count: number;
}

export interface Progress {
  unitsDone: number;
  unitsTotal: number;
  cellsDone: number;
  cellsTotal: number;
  failures: number;
  elapsedMs: number;
  /** Estimated from the cost of the units done so far; null until that says something (see timeLeftMs). */
  remainingMs: number | null;
}

/** The share of this session's predicted work, and the count of its units, that must finish before a time left is given. */
export const TIME_LEFT_MIN_SHARE = 0.05;
export const TIME_LEFT_MIN_UNITS = 2;

/**
 * Time left, extrapolated from this session's rate, or null while that rate says little. The first units
 * carry the start-up (workers loading, the code digest) and one unit's cost prediction can be far off, so the
 * guess waits until at least 5% of the session's predicted work and 2 of its units have finished: earlier it
 * swings by factors and reads as a promise it cannot keep.
 */
export function timeLeftMs(elapsedMs: number, costDoneThisRun: number, costThisRun: number, unitsThisRun: number, costLeft: number): number | null {
  if (unitsThisRun < TIME_LEFT_MIN_UNITS || costDoneThisRun <= 0 || costDoneThisRun < TIME_LEFT_MIN_SHARE * costThisRun) return null;
  return (elapsedMs * costLeft) / costDoneThisRun;
}

export interface RunOptions {
  workers?: number;
  /**
   * 'threads' (the default): units run on supervised worker threads, where a hung, crashing or memory-hungry
   * estimate is a failure with its reason (src/harness/pool.ts). 'in-process': on this thread, unsupervised; for
   * estimators registered in this process only (not loaded from a module), such as tests use.
   */
  isolation?: 'threads' | 'in-process';
  shard?: Shard;
  /** Append-only record of finished units; required for --resume. */
  checkpointPath?: string;
  resume?: boolean;
  onProgress?: (progress: Progress) => void;
  signal?: AbortSignal;
  /** Added to file-system error messages: how to resume after fixing the problem. */
  checkpointHint?: string;
  onWarning?: (text: string) => void;
  /**
   * The command line that started the run (its arguments after `hhat`), kept in the checkpoint's header so a
   * resume with another plan can say which command made it.
   */
  command?: string[];
  /**
   * Replicate r draws the seed's replicate r + replicateOffset (work.ts, WorkContext): a run that continues an
   * earlier one's draws. Only for runs kept in memory: a checkpoint records replicates by their own number.
   */
  replicateOffset?: number;
}

export interface RunOutcome {
  plan: Plan;
  /** The plan's work context, as the run built it (assembling the run file reuses it). */
  context: WorkContext;
  fingerprint: string;
  /** The code that ran it (what the fingerprint digests). */
  code: PlanCode;
  units: Unit[];
  /** Indices of the units this run (or shard) owns. */
  owned: number[];
  results: Map<number, UnitResult>;
  skipped: Skip[];
  wallMs: number;
  workers: number;
  resumedUnits: number;
  interrupted: boolean;
  /** Earlier sessions (from the checkpoint) and this one. */
  sessions: Session[];
}

/** Units owned by shard i of N: round-robin over the plan's units ordered by cost, so shards balance. */
export function shardUnits(units: Unit[], shard?: Shard): number[] {
  const all = units.map((u) => u.index);
  if (!shard) return all;
  const byCost = [...units].sort((a, b) => b.cost - a.cost || a.index - b.index);
  return byCost
    .filter((_, i) => i % shard.count === shard.index - 1)
    .map((u) => u.index)
    .sort((a, b) => a - b);
}

/**
 * Version 2 names the code that wrote the checkpoint, so a resume can say why it refuses to mix. `command`
 * (optional, so checkpoints written before it still resume) is the command line that started the run and
 * the folder it ran in.
 */
interface CheckpointHeader {
  kind: 'hhat-checkpoint';
  version: 2;
  fingerprint: string;
  shard: Shard | null;
  code: PlanCode;
  command?: { args: string[]; cwd: string };
}

/** Why a checkpoint of another plan or shard cannot be resumed, and the command that can resume it when the header names one. */
function otherPlanMessage(path: string, header: CheckpointHeader, command: string[] | undefined): string {
  const started = header.command;
  if (!started || !Array.isArray(started.args)) {
    return `${path} belongs to a different plan or shard; run without --resume after deleting it, or resume with the plan that made it`;
  }
  const where = started.cwd && started.cwd !== process.cwd() ? ` (in ${started.cwd})` : '';
  const withoutResume = (args: string[]) => hhatCommand(args.filter((a) => a !== '--resume'));
  if (command && withoutResume(command) === withoutResume(started.args)) {
    return `${path} was started by this same command${where}, but the plan or shard it gives differs now (a --plan file changed, or --shard auto read another slice); restore that to resume, or delete the checkpoint to start over`;
  }
  const resume = hhatCommand(hasOption(started.args, '--resume') ? started.args : [...started.args, '--resume']);
  return `${path} belongs to another plan or shard; continue it with the command that started it${where}: \`${resume}\`, or delete the checkpoint to start this plan over`;
}

/** One stretch of work on a run: a fresh start or a resume. Runs record them all, so resumed runs report true totals. */
export interface Session {
  workers: number;
  wallSeconds: number;
  /** Units finished in this session. */
  units: number;
}

function serialiseResult(result: UnitResult): string {
  return JSON.stringify({
    unit: result.unit,
    estimates: result.estimates.map((values) => Array.from(values, (v) => (Number.isNaN(v) ? null : v))),
    timeMs: result.timeMs,
    failures: result.failures,
  });
}

interface SerialisedResult {
  unit: number;
  estimates: (number | null)[][];
  timeMs: number[];
  failures: UnitResult['failures'];
}

function parseResult(raw: SerialisedResult): UnitResult {
  return {
    unit: raw.unit,
    estimates: raw.estimates.map((values) => Float64Array.from(values, (v) => (v === null ? NaN : v))),
    timeMs: raw.timeMs,
    failures: raw.failures,
  };
}

function sameShard(a: Shard | null, b: Shard | null): boolean {
  return (a === null && b === null) || (a !== null && b !== null && a.index === b.index && a.count === b.count);
}

interface LoadedCheckpoint {
  done: Map<number, UnitResult>;
  sessions: Session[];
  /** False for an empty file (a crash before its header was written): the header must be written again. */
  hasHeader: boolean;
}

/**
 * The checkpoint's complete lines. A torn last line (a crash mid-write) is cut off the file, so the lines
 * appended next start on a line of their own instead of being glued to the fragment and lost with it.
 */
function readCheckpointLines(path: string): string[] {
  try {
    const bytes = readFileSync(path);
    const end = bytes.lastIndexOf(0x0a) + 1;
    if (end < bytes.length) truncateSync(path, end);
    return bytes
      .subarray(0, end)
      .toString('utf8')
      .split('\n')
      .filter((l) => l.trim() !== '');
  } catch (error) {
    throw new EnvironmentError(describeFileError(error, 'read the checkpoint', path));
  }
}

/** Loads finished units from a checkpoint. */
function loadCheckpoint(path: string, fingerprint: string, shard: Shard | null, code: PlanCode, command: string[] | undefined): LoadedCheckpoint {
  const lines = readCheckpointLines(path);
  const done = new Map<number, UnitResult>();
  const sessions: Session[] = [];
  if (!lines.length) return { done, sessions, hasHeader: false };
  let header: CheckpointHeader;
  try {
    header = JSON.parse(lines[0]) as CheckpointHeader;
  } catch {
    throw new UsageError(`${path} is not an hhat checkpoint; delete it or choose another --out`);
  }
  if (header.kind !== 'hhat-checkpoint') throw new UsageError(`${path} is not an hhat checkpoint; delete it or choose another --out`);
  if (header.version !== 2) {
    throw new UsageError(
      `${path} was written by an older hhat (checkpoint version ${String(header.version)}), whose estimates must not be mixed with this version's; delete it to start over`,
    );
  }
  if (header.fingerprint !== fingerprint || !sameShard(header.shard, shard)) {
    const difference = codeDifference(header.code, code);
    if (difference) {
      throw new UsageError(
        `${path} cannot be resumed: ${difference}; resuming would mix estimates of two versions of the code. Delete it to start over with this code, or resume with the code that made it`,
      );
    }
    throw new UsageError(otherPlanMessage(path, header, command));
  }
  for (const line of lines.slice(1)) {
    try {
      const parsed = JSON.parse(line) as SerialisedResult | { session: Session };
      if ('session' in parsed) sessions.push(parsed.session);
      else done.set(parsed.unit, parseResult(parsed));
    } catch {
      // A line spoilt otherwise (edited by hand, a disk error): that unit simply runs again.
    }
  }
  return { done, sessions, hasHeader: true };
}

/** Whether `path` is a checkpoint of a run (a file with at least a header); false for a missing or empty file. */
export function checkpointStarted(path: string): boolean {
  if (!existsSync(path)) return false;
  const stat = statSync(path);
  if (stat.isDirectory()) throw new UsageError(`${path} is a folder, where hhat keeps this run's checkpoint; move it away or choose another --out`);
  return stat.size > 0;
}

/** Refuses estimators registered by code in this process when units run on worker threads, which cannot see them. */
function refuseUnseenOnThreads(context: WorkContext, isolation: RunOptions['isolation']): void {
  if (isolation === 'in-process') return;
  const unseen = inProcessOnlyIds(context.all.map((c) => c.estimator.id));
  if (unseen.length) {
    throw new UsageError(
      `${unseen.map((id) => `"${id}"`).join(', ')} ${unseen.length === 1 ? 'was' : 'were'} registered in this process by code, which worker threads cannot see (they would fail, or run the built-in of that id); load ${unseen.length === 1 ? 'it' : 'them'} from a module file, or run with isolation 'in-process'`,
    );
  }
}

/** Refuses a plan with no units: an empty run file would read as a finished benchmark, so say why nothing runs. */
function refuseEmptyPlan(units: Unit[], skipped: Skip[]): void {
  if (units.length) return;
  const first = skipped[0];
  throw new UsageError(
    `the plan has no cells to run: every estimator–scenario pair is skipped${first ? ` (on ${first.scenario}: ${first.reason})` : ''}; \`hhat scenarios\` and \`hhat estimators\` list dimensions`,
  );
}

interface OpenedCheckpoint {
  /** The owned units the checkpoint already holds (empty without --resume). */
  restored: Map<number, UnitResult>;
  /** Its earlier sessions. */
  sessions: Session[];
  appender: Appender | null;
}

/** Opens the checkpoint for appending: restores its owned units on resume, refuses a started one otherwise, writes a missing header. */
function openCheckpoint(options: RunOptions, owned: number[], fingerprint: string, shard: Shard | null, code: PlanCode): OpenedCheckpoint {
  const restored = new Map<number, UnitResult>();
  if (!options.checkpointPath) return { restored, sessions: [], appender: null };
  const path = options.checkpointPath;
  const hint = options.checkpointHint;
  const started = checkpointStarted(path);
  let sessions: Session[] = [];
  let needsHeader = true;
  if (options.resume && started) {
    const ownedSet = new Set(owned);
    const loaded = loadCheckpoint(path, fingerprint, shard, code, options.command);
    for (const [k, v] of loaded.done) if (ownedSet.has(k)) restored.set(k, v);
    sessions = loaded.sessions;
    needsHeader = !loaded.hasHeader;
  } else if (!options.resume && started) {
    throw new UsageError(`${path} exists from an interrupted run; add --resume to continue it, or delete it to start over`);
  }
  if (needsHeader) {
    // Written whole and renamed into place: a checkpoint is never empty or headless, even after a crash here.
    const header: CheckpointHeader = { kind: 'hhat-checkpoint', version: 2, fingerprint, shard, code };
    if (options.command) header.command = { args: options.command, cwd: process.cwd() };
    writeFileAtomic(path, `${JSON.stringify(header)}\n`, hint);
  }
  return { restored, sessions, appender: openAppender(path, hint) };
}

/** The (scenario, n) group of a unit: its cells are the group's estimators, done when all its owned units are. */
function groupOf(u: Unit): string {
  return `${u.scenario}|${u.n}`;
}

/** Owned units per group and cells (estimators) per group, for counting finished cells. */
function cellGroups(units: Unit[], owned: number[]): { groupUnits: Map<string, number>; groupEstimators: Map<string, number> } {
  const groupUnits = new Map<string, number>();
  const groupEstimators = new Map<string, number>();
  for (const i of owned) {
    const u = units[i];
    groupUnits.set(groupOf(u), (groupUnits.get(groupOf(u)) ?? 0) + 1);
    groupEstimators.set(groupOf(u), u.series.length);
  }
  return { groupUnits, groupEstimators };
}

/** Failures of the plan's own estimators in a result; robustness variants fail by design (ties after rounding). */
function planFailures(u: Unit, result: UnitResult, planEstimators: number): number {
  return result.failures.filter((f) => u.series[f.series].variant === 0 && u.series[f.series].estimator < planEstimators).length;
}

interface Bookkeeping {
  units: Unit[];
  owned: number[];
  /** How many of the context's estimators are the plan's own (the rest are tuning points). */
  planEstimators: number;
  /** Finished units, filled in as they are recorded. */
  results: Map<number, UnitResult>;
  appender: Appender | null;
  /** performance.now() when the run started. */
  started: number;
  onProgress?: (progress: Progress) => void;
}

/**
 * Records finished units: counts cells, failures and cost, appends fresh results to the checkpoint. Fresh units
 * report progress as they finish; restored ones are counted silently, and `report` then shows them at once.
 */
function progressRecorder(book: Bookkeeping): { record: (result: UnitResult, fresh: boolean) => void; report: () => void } {
  const { units, owned, results, started } = book;
  const { groupUnits, groupEstimators } = cellGroups(units, owned);
  const groupDone = new Map<string, number>();
  let cellsDone = 0;
  let failures = 0;
  let costDone = 0;
  const costTotal = owned.reduce((s, i) => s + units[i].cost, 0);
  // This session's predicted work is what the checkpoint did not hold: costTotal less the restored units' cost.
  let costDoneThisRun = 0;
  let unitsThisRun = 0;
  const cellsTotal = [...groupEstimators.values()].reduce((a, b) => a + b, 0);
  const report = () => {
    const elapsedMs = performance.now() - started;
    book.onProgress?.({
      unitsDone: results.size,
      unitsTotal: owned.length,
      cellsDone,
      cellsTotal,
      failures,
      elapsedMs,
      remainingMs: timeLeftMs(elapsedMs, costDoneThisRun, costTotal - costDone + costDoneThisRun, unitsThisRun, costTotal - costDone),
    });
  };
  const record = (result: UnitResult, fresh: boolean) => {
    results.set(result.unit, result);
    const u = units[result.unit];
    const g = groupOf(u);
    const count = (groupDone.get(g) ?? 0) + 1;
    groupDone.set(g, count);
    if (count === groupUnits.get(g)) cellsDone += groupEstimators.get(g)!;
    failures += planFailures(u, result, book.planEstimators);
    costDone += u.cost;
    if (!fresh) return;
    costDoneThisRun += u.cost;
    unitsThisRun++;
    book.appender?.append(serialiseResult(result));
    report();
  };
  return { record, report };
}

/** The owned units not yet finished, largest first, so the last units to finish are small ones and workers idle least. */
function pendingUnits(units: Unit[], owned: number[], results: Map<number, UnitResult>): Unit[] {
  const pending = owned.filter((i) => !results.has(i)).map((i) => units[i]);
  pending.sort((a, b) => b.cost - a.cost || a.index - b.index);
  return pending;
}

/** Runs units one by one on this thread, unsupervised; resolves to true when the signal stopped it. */
async function runInProcess(pending: Unit[], context: WorkContext, record: (result: UnitResult) => void, signal?: AbortSignal): Promise<boolean> {
  for (const unit of pending) {
    if (signal?.aborted) return true;
    record(executeUnit(unit, context));
    // Yield so a signal handler can run between units.
    await new Promise((resolve) => setImmediate(resolve));
  }
  return false;
}

/** Runs the pending units in process or on the supervised pool; resolves to true when the run was interrupted. */
async function runPending(pending: Unit[], context: WorkContext, workers: number, options: RunOptions, record: (result: UnitResult) => void): Promise<boolean> {
  if (options.isolation === 'in-process') return runInProcess(pending, context, record, options.signal);
  if (!pending.length) return false;
  return runOnPool(context.plan, pending, {
    size: workers,
    onResult: record,
    signal: options.signal,
    onWarning: options.onWarning,
    replicateOffset: context.replicateOffset,
  });
}

/** Appends the session's line (workers, wall time, units) to the checkpoint and closes it. */
function closeCheckpoint(appender: Appender | null, session: Session): void {
  try {
    appender?.append(JSON.stringify({ session }));
  } catch {
    // The units are saved; a lost session line only makes the reported wall time short.
  }
  appender?.close();
}

/**
 * Refuses, before any work, a plan whose largest sample would not fit in memory on `workers` threads (each under
 * the plan's limits.workerMemoryMiB), or on this thread for an in-process run; `raise` says how to raise the limit.
 */
export function checkPlanMemory(plan: Plan, scenarios: readonly Scenario[], workers: number, isolation: RunOptions['isolation'], raise: string): void {
  const largestN = Math.max(...plan.sampleSizes);
  const dim = Math.max(...scenarios.map((x) => x.dim));
  checkSampleMemory(`n = ${largestN}`, largestN, dim, isolation === 'in-process' ? {} : { workers, workerMemoryMiB: plan.limits.workerMemoryMiB, raise });
}

/**
 * Checks runPlan's arguments from code as the command line checks its flags: a plan this process did not
 * resolve against the plan schema, and each option against the range its flag allows (--workers, --shard).
 */
function checkRunArguments(plan: Plan, options: RunOptions): void {
  if (typeof plan !== 'object' || plan === null || !isResolvedPlan(plan)) checkPlanInput(plan, 'runPlan: plan');
  if (typeof options !== 'object' || options === null) throw new UsageError(`runPlan: options must be an object (RunOptions); got ${describeValue(options)}`);
  const { workers, isolation, shard, replicateOffset } = options;
  if (workers !== undefined) checkIntegerArgument('runPlan: options.workers', workers, 1, MAX_WORKERS);
  if (isolation !== undefined && isolation !== 'threads' && isolation !== 'in-process')
    throw new UsageError(`runPlan: options.isolation ${JSON.stringify(isolation)} is not allowed; it must be 'threads' or 'in-process'`);
  if (
    shard !== undefined &&
    !(
      typeof shard === 'object' &&
      shard !== null &&
      Number.isInteger(shard.count) &&
      Number.isInteger(shard.index) &&
      shard.index >= 1 &&
      shard.index <= shard.count
    )
  )
    throw new UsageError(`runPlan: options.shard ${JSON.stringify(shard)} is not allowed; it must be { index, count }, integers with 1 ≤ index ≤ count`);
  if (replicateOffset !== undefined) checkIntegerArgument('runPlan: options.replicateOffset', replicateOffset, 0);
  if (replicateOffset && options.checkpointPath)
    throw new UsageError(
      "runPlan: options.replicateOffset cannot be combined with options.checkpointPath: a run that continues another run's draws keeps no checkpoint",
    );
}

/**
 * Refuses a plan whose draws would leave the double range (src/harness/draw-range.ts): a scenario whose law puts
 * too much mass beyond ±1.8e308 for the values the plan draws of it, or a perturbation that carries those draws
 * there. The failures would otherwise be every estimator's, on every replicate.
 */
function refuseOutOfRangeDraws(context: WorkContext): void {
  const { plan, scenarios, perturbations, prepared } = context;
  const refuse = (problem: string | null) => {
    if (problem) throw new UsageError(problem);
  };
  // The pilot is the run's own first replicate (after any offset), so it costs one replicate's draws per cell.
  const pilot = context.replicateOffset;
  scenarios.forEach((scenario, s) => {
    refuse(scenarioRangeProblem(scenario, plan.replicates * plan.sampleSizes.reduce((a, b) => a + b, 0)));
    let original: Sample | undefined;
    for (const n of plan.sampleSizes) {
      const sample = drawCheckedReplicate(scenario, plan.seed, n, pilot);
      refuse(pilotRangeProblem(scenario, null, sample, pilot));
      if (n === plan.robustness?.sampleSize) original = sample;
    }
    if (!plan.robustness || !original) return;
    const values = plan.replicates * plan.robustness.sampleSize;
    const robustnessDraw = original;
    perturbations.forEach((perturbation, k) => {
      const ready = prepared[s][k];
      if ('skip' in ready) return;
      refuse(perturbationRangeProblem(scenario, perturbation.spec, ready, values));
      refuse(pilotRangeProblem(scenario, perturbation.spec, perturbedCopy(robustnessDraw, ready, pilot, plan.seed), pilot));
    });
  });
}

/** Runs the plan's owned units (after the checkpoint's, on resume) and returns their results with this session's record. */
export async function runPlan(plan: Plan, options: RunOptions = {}): Promise<RunOutcome> {
  const started = performance.now();
  checkRunArguments(plan, options);
  const replicateOffset = options.replicateOffset ?? 0;
  const context = buildContext(plan, { replicateOffset });
  refuseUnseenOnThreads(context, options.isolation);
  // Digesting the code reads every file of hhat and of the modules: once per run.
  const code = planCode(context.plan);
  const fingerprint = planFingerprint(context.plan, code);
  const { units, skipped } = planUnits(context);
  refuseEmptyPlan(units, skipped);
  const owned = shardUnits(units, options.shard);
  checkPlanMemory(
    context.plan,
    context.scenarios,
    Math.max(1, Math.min(options.workers ?? defaultWorkers(), owned.length)),
    options.isolation,
    "the plan's limits.workerMemoryMiB",
  );
  refuseOutOfRangeDraws(context);
  const checkpoint = openCheckpoint(options, owned, fingerprint, options.shard ?? null, code);
  const { appender } = checkpoint;
  const resumedUnits = checkpoint.restored.size;

  const results = new Map(checkpoint.restored);
  const { record, report } = progressRecorder({
    units,
    owned,
    planEstimators: context.estimators.length,
    results,
    appender,
    started,
    onProgress: options.onProgress,
  });
  for (const r of checkpoint.restored.values()) record(r, false);
  if (checkpoint.restored.size) report();

  const pending = pendingUnits(units, owned, results);
  const workers = Math.max(1, Math.min(options.workers ?? defaultWorkers(), pending.length || 1));
  let interrupted: boolean;
  const freshBefore = results.size;
  let sessions = checkpoint.sessions;
  try {
    interrupted = await runPending(pending, context, workers, options, (r) => record(r, true));
  } finally {
    const session: Session = { workers, wallSeconds: (performance.now() - started) / 1000, units: results.size - freshBefore };
    sessions = [...sessions, session];
    closeCheckpoint(appender, session);
  }
  return {
    plan: context.plan,
    context,
    fingerprint,
    code,
    units,
    owned,
    results,
    skipped,
    wallMs: performance.now() - started,
    workers,
    resumedUnits,
    interrupted,
    sessions,
  };
}
