/**
 * The unit of work: one scenario at one sample size for a block of replicates. Each replicate's sample is
 * drawn once (from its own seed) and every estimator of the plan runs on it, so estimators are compared on
 * identical draws. Units depend only on the plan, never on the worker count, so results are bit-identical
 * for any worker count, shard split or resume point.
 */
import type { Sample, Scenario } from './contracts.js';
import { EstimateError } from './errors.js';
import type { ConfiguredEstimator } from '../estimators/index.js';
import { runEstimator } from '../estimators/index.js';
import type { Plan } from './plan.js';
import { replicateRng } from './rng.js';

export interface Unit {
  index: number;
  scenario: number;
  n: number;
  repStart: number;
  repEnd: number;
  /** Estimators (indices into the plan) that can run on this scenario. */
  estimators: number[];
  /** Relative cost, for scheduling the largest units first. */
  cost: number;
}

export interface Skip {
  scenario: string;
  estimator: string;
  reason: string;
}

/** About this many sample points per unit: small enough to balance two workers, large enough to amortise messages. */
const POINTS_PER_UNIT = 20000;

/** Why an estimator cannot run on a scenario, or null when it can. */
export function incompatibility(estimator: ConfiguredEstimator, scenario: Scenario): string | null {
  const [minDim, maxDim] = estimator.estimator.dims;
  if (scenario.dim < minDim || scenario.dim > maxDim) {
    const range = maxDim === Infinity ? `d ≥ ${minDim}` : minDim === maxDim ? `d = ${minDim}` : `${minDim} ≤ d ≤ ${maxDim}`;
    return `${estimator.estimator.id} needs ${range}; the scenario has d = ${scenario.dim}`;
  }
  if (estimator.estimator.quantity !== scenario.quantity) {
    return `${estimator.estimator.id} estimates ${estimator.estimator.quantity}; the scenario's quantity is ${scenario.quantity}`;
  }
  return null;
}

export function planUnits(plan: Plan, scenarios: Scenario[], estimators: ConfiguredEstimator[]): { units: Unit[]; skipped: Skip[] } {
  const units: Unit[] = [];
  const skipped: Skip[] = [];
  scenarios.forEach((scenario, s) => {
    const runnable: number[] = [];
    estimators.forEach((estimator, e) => {
      const reason = incompatibility(estimator, scenario);
      if (reason) skipped.push({ scenario: scenario.id, estimator: estimator.spec, reason });
      else runnable.push(e);
    });
    if (!runnable.length) return;
    for (const n of plan.sampleSizes) {
      const block = Math.max(1, Math.min(plan.replicates, Math.floor(POINTS_PER_UNIT / n)));
      for (let start = 0; start < plan.replicates; start += block) {
        const end = Math.min(plan.replicates, start + block);
        units.push({
          index: units.length,
          scenario: s,
          n,
          repStart: start,
          repEnd: end,
          estimators: runnable,
          cost: (end - start) * n * scenario.dim * runnable.length * Math.max(1, plan.perturbations.length + 1),
        });
      }
    }
  });
  return { units, skipped };
}

export interface UnitFailure {
  perturbation: number;
  estimator: number;
  replicate: number;
  message: string;
}

export interface UnitResult {
  unit: number;
  /** estimates[perturbation][k][r]: perturbation 0 is the unperturbed sample; k indexes unit.estimators. NaN = failure. */
  estimates: Float64Array[][];
  /** Total milliseconds per [perturbation][k]. */
  timeMs: number[][];
  failures: UnitFailure[];
}

/** Applies a perturbation to a sample; filled in by the perturbation module (index 0 = none). */
export type PerturbationRunner = (sample: Sample, scenario: Scenario, replicate: number) => Sample;

export interface WorkContext {
  plan: Plan;
  scenarios: Scenario[];
  estimators: ConfiguredEstimator[];
  /** One per plan perturbation, in order (the unperturbed sample is always run first). */
  perturbations: PerturbationRunner[];
}

function describeFailure(error: unknown): string {
  if (error instanceof EstimateError) return `${error.code}: ${error.message}`;
  if (error instanceof Error) return `${error.name}: ${error.message}`;
  return String(error);
}

export function executeUnit(unit: Unit, context: WorkContext): UnitResult {
  const { plan, scenarios, estimators, perturbations } = context;
  const scenario = scenarios[unit.scenario];
  const reps = unit.repEnd - unit.repStart;
  const variants = 1 + perturbations.length;
  const estimates = Array.from({ length: variants }, () => unit.estimators.map(() => new Float64Array(reps)));
  const timeMs = Array.from({ length: variants }, () => unit.estimators.map(() => 0));
  const failures: UnitFailure[] = [];
  for (let r = 0; r < reps; r++) {
    const replicate = unit.repStart + r;
    const original = scenario.sample(replicateRng(plan.seed, scenario.id, unit.n, replicate), unit.n);
    for (let v = 0; v < variants; v++) {
      const sample = v === 0 ? original : perturbations[v - 1]({ ...original, data: Float64Array.from(original.data) }, scenario, replicate);
      unit.estimators.forEach((e, k) => {
        const started = performance.now();
        let value = NaN;
        try {
          value = runEstimator(estimators[e], sample).value;
          if (!Number.isFinite(value)) {
            failures.push({ perturbation: v, estimator: e, replicate, message: `numeric: the estimate is ${value}` });
            value = NaN;
          }
        } catch (error) {
          failures.push({ perturbation: v, estimator: e, replicate, message: describeFailure(error) });
          value = NaN;
        }
        timeMs[v][k] += performance.now() - started;
        estimates[v][k][r] = value;
      });
    }
  }
  return { unit: unit.index, estimates, timeMs, failures };
}
