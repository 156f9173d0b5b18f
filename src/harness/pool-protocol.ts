/**
 * What the supervisor (src/harness/pool.ts) and its worker threads (src/harness/worker.ts) say to each other, and the shared
 * memory in which a worker marks the estimate it is running.
 */
import type { Plan } from './plan.js';
import type { ReplicateResult, Unit } from './work.js';
import { COMMAND_PID_SLOTS } from './external/protocol.js';

/** A worker's first message: the plan its units come from (the worker loads its modules before it is sent). */
export interface WorkerSetup {
  plan: Plan;
  /** work.ts, WorkContext.replicateOffset. */
  replicateOffset: number;
}

/** Run `unit` from replicate `from` on, leaving out estimates already recorded as failures. */
export interface WorkerJob {
  unit: Unit;
  from: number;
  skip: { series: number; replicate: number }[];
}

export type WorkerMessage =
  | { kind: 'ready' }
  | { kind: 'replicate'; unit: number; result: ReplicateResult }
  | { kind: 'unit-done'; unit: number }
  /** The worker made the temporary folder its estimator commands read their samples from. */
  | { kind: 'command-folder'; folder: string };

/**
 * slots: [running series or −1, its replicate, blamed series or −1, its replicate, its unit, 1 when the running
 * estimate is an estimator command's (else 0)];
 * clock: [when the running estimate started, ms since the epoch];
 * commandPids: the pids of the estimator-command processes running for the worker (0: a free place), written by
 * its broker thread the moment one starts, so the supervisor can stop them while the worker waits in an estimate.
 * "Blamed" is the last estimate started, or, while a timer or other callback that an estimate scheduled runs,
 * that estimate: an error thrown asynchronously is then charged to the estimator that caused it.
 */
export function markerViews(buffer: SharedArrayBuffer): { slots: Int32Array; clock: Float64Array; commandPids: Int32Array } {
  return { slots: new Int32Array(buffer, 0, 6), clock: new Float64Array(buffer, 24, 1), commandPids: new Int32Array(buffer, 32, COMMAND_PID_SLOTS) };
}

export function newMarker(): SharedArrayBuffer {
  const buffer = new SharedArrayBuffer(32 + 4 * COMMAND_PID_SLOTS);
  new Int32Array(buffer, 0, 6).fill(-1);
  return buffer;
}
