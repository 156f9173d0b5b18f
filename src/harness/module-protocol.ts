/**
 * What estimate and check (module-thread.ts) and the thread that runs a module's estimators (module-worker.ts) say
 * to each other. Besides these messages the thread marks in the shared memory of pool-protocol.ts, slots[0] ≥ 0
 * while an estimate runs, slots[1] its sample size and clock[0] when it started.
 */
import type { Estimator, Sample, Settings } from '../core/contracts.js';
import type { EstimateErrorCode } from '../core/errors.js';
import type { ConfiguredEstimator, EstimateResolution } from '../../estimators/index.js';

/** The thread's first message: the modules it loads, and the module that handles its jobs other than estimates. */
export interface ModuleThreadSetup {
  modules: string[];
  /** URL of a module exporting `handleJob(job, context)` (conformance-job.ts for `hhat check`). */
  handler?: string;
}

export interface ModuleJob {
  kind: string;
  [field: string]: unknown;
}

/** What a job handler on the thread is given: the modules' estimators by id, and the clock of the time limit. */
export interface JobContext {
  estimators: Map<string, Estimator>;
  /** Restarts the clock for an estimate on n points (its time limit is estimateTimeLimit at n). */
  mark: (n: number) => void;
}

export type ModuleThreadMessage = { kind: 'result'; job: number; result: unknown };

/** An estimate job: the configured estimator without its object (the thread has its own, from the module) and the sample. */
export interface EstimateJob extends ModuleJob {
  kind: 'estimate';
  id: string;
  configured: Omit<ConfiguredEstimator, 'estimator'>;
  sample: Sample;
}

export type EstimateReply =
  { ok: true; value: number; settings: Settings; resolution?: EstimateResolution } | { ok: false; code?: EstimateErrorCode; message: string };
