/**
 * `hhat check` on a module's estimators, on the supervised thread of src/harness/module-thread.ts: the thread runs
 * one check of the suite per job (handleJob, loaded by the thread), and checkOnThread assembles the report here. An
 * estimate that passes its time or memory limit, or ends its thread, fails the check it ran in, with the reason as
 * its evidence; the other checks run on a fresh thread.
 */
import type { Estimator, Sample, Settings, SettingValue } from '../core/contracts.js';
import type { JobContext, ModuleJob, ModuleThread } from '../harness/module-thread.js';
import { checksFor, runConformance, type CheckName, type CheckResult, type ConformanceReport } from './conformance.js';

export interface CheckJob extends ModuleJob {
  kind: 'check';
  id: string;
  settings: Record<string, SettingValue>;
  check: CheckName;
  /** Run no estimate (an earlier one passed a limit): the check gives its result only if it needs none. */
  noEstimates: boolean;
}

/** A check's result, and whether it wanted an estimate that noEstimates kept from running (its result then says nothing). */
export interface CheckReply {
  result: CheckResult;
  wantedEstimate: boolean;
}

/** On the thread: one check on the module's estimator, each of its estimates under the time limit. */
export function handleJob(job: CheckJob, context: JobContext): CheckReply {
  const estimator = context.estimators.get(job.id)!;
  let wantedEstimate = false;
  // The estimator with each estimate restarting the thread's clock: the limit is per estimate, as in a benchmark.
  const timed = Object.create(estimator, {
    estimate: {
      value(this: Estimator, sample: Sample, settings: Settings): unknown {
        if (job.noEstimates) {
          wantedEstimate = true;
          throw new Error('not run');
        }
        context.mark(sample.n);
        return estimator.estimate.call(this, sample, settings);
      },
    },
  }) as Estimator;
  return { result: runConformance(timed, { settings: job.settings, only: [job.check] }).checks[0], wantedEstimate };
}

/** The URL of this module as the thread imports it: the source under tsx, the built file otherwise. */
export function conformanceJobUrl(): URL {
  return new URL(import.meta.url);
}

/** A check kept from its estimates: failed, or, where the estimator declares it lacks the invariance, still not applicable. */
function notMeasured(check: CheckName, result: CheckResult, notRun: string): CheckResult {
  if (!result.declared) return { check, status: 'fail', evidence: notRun };
  const { invariance, reason } = result.declared;
  return { check, status: 'not-applicable', evidence: `declared lacking (lacks.${invariance}): ${reason}; ${notRun}`, declared: { invariance, reason } };
}

/**
 * The suite on a module's estimator, check by check on the thread. After an estimate stopped by the time or memory
 * limit, the later checks that need an estimate fail without running one (each could cost as much again), saying
 * so; after any other stop they run on, on a fresh thread.
 */
export async function checkOnThread(thread: ModuleThread, estimator: Estimator, settings: Record<string, SettingValue>): Promise<ConformanceReport> {
  const started = performance.now();
  // No check runs here: this validates the settings (a UsageError) and names the law and the spec.
  const report = runConformance(estimator, { settings, only: [] });
  const checks: CheckResult[] = [];
  let notRun: string | null = null;
  for (const check of checksFor(estimator.quantity)) {
    const job: CheckJob = { kind: 'check', id: estimator.id, settings, check, noEstimates: notRun !== null };
    const outcome = await thread.run<CheckReply>(job);
    if (outcome.ok) {
      checks.push(outcome.result.wantedEstimate ? notMeasured(check, outcome.result.result, notRun!) : outcome.result.result);
      continue;
    }
    checks.push({ check, status: 'fail', evidence: `an estimate was stopped: ${outcome.reason}` });
    if (outcome.stop === 'time' || outcome.stop === 'memory')
      notRun ??= `not run: an estimate in ${check} passed the ${outcome.stop} limit, and each further one could too`;
  }
  return { ...report, checks, passed: checks.every((c) => c.status !== 'fail'), milliseconds: performance.now() - started };
}
