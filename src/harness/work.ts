/**
 * The unit of work: one scenario at one sample size for a block of replicates. Each replicate's sample is
 * drawn once (from its own seed); every estimator runs on it, tuning variants too at the robustness size, and
 * every applicable perturbation is applied to a copy of it, so all comparisons are paired. Units depend only
 * on the plan, never on the worker count, so results are bit-identical for any worker count, shard split or
 * resume point.
 */
import type { Sample, Scenario } from '../core/contracts.js';
import { EstimateError } from '../core/errors.js';
import type { ConfiguredEstimator } from '../../estimators/index.js';
import { dimsRange, runEstimator, supportsDimension } from '../../estimators/index.js';
import type { Plan } from './plan.js';
import { perturbedCopy, type Perturbation, type PreparedPerturbation } from './perturb.js';
import { drawCheckedReplicate } from '../core/rng.js';
import { nonFiniteCount, outOfRangeMessage } from './draw-range.js';
import type { TuningPoint } from './tuning.js';

/** A series of estimates: one estimator (index into the context's `all` list) on one variant of the sample. */
export interface Series {
  /** 0 = the sample as drawn; p + 1 = perturbation p of the plan. */
  variant: number;
  estimator: number;
}

/** A plan estimator (index `base`) run with dequantize=auto on quantized copies of the sample. */
export interface DequantizedTwin {
  base: number;
  configured: ConfiguredEstimator;
}

export interface Unit {
  index: number;
  scenario: number;
  n: number;
  repStart: number;
  repEnd: number;
  series: Series[];
  /** Relative cost, for scheduling the largest units first. */
  cost: number;
  /**
   * Which code the unit's estimators run: one-dimensional samples take other paths (spacings, binned kernel sums,
   * FFT) than samples in several dimensions (k-d trees, whitening, grid kernel sums). The pool keeps a worker on
   * one code family while it can, so each worker compiles and warms up only the code it runs (pool.ts, nextJob).
   */
  codeFamily: string;
}

export interface Skip {
  scenario: string;
  estimator: string;
  reason: string;
}

export interface WorkContext {
  plan: Plan;
  scenarios: Scenario[];
  /** The plan's estimators. */
  estimators: ConfiguredEstimator[];
  /** Tuning points that are not already a plan estimator (run at the robustness size only). */
  tuning: TuningPoint[];
  /** Plan estimators with dequantize=auto, run on the quantize perturbations only (context.ts, dequantizedTwins). */
  dequantized: DequantizedTwin[];
  /** Plan estimators, then the tuning points' estimators, then the dequantized twins: what Series.estimator indexes. */
  all: ConfiguredEstimator[];
  perturbations: Perturbation[];
  /** Per scenario and perturbation: the prepared perturbation, or why it does not apply. */
  prepared: (PreparedPerturbation | { skip: string })[][];
  /**
   * Replicate r of this run draws the seed's replicate r + replicateOffset: a second run of the same plan that
   * continues the first's draws instead of starting over (advice's second round). 0 for every saved run.
   */
  replicateOffset: number;
}

/**
 * About this many coordinates (points × dimension) per unit: small enough to balance two workers, large
 * enough to amortise messages. Estimator cost grows with both n and d, so high-dimensional cells get smaller
 * blocks of replicates and still spread over the workers.
 */
const COORDINATES_PER_UNIT = 20000;

/** Replicates per unit of a cell with n points in dim dimensions. */
export function replicatesPerUnit(n: number, dim: number, replicates: number): number {
  return Math.max(1, Math.min(replicates, Math.floor(COORDINATES_PER_UNIT / (n * dim))));
}

/** Why an estimator cannot run on a scenario, or null when it can. */
export function incompatibility(estimator: ConfiguredEstimator, scenario: Scenario): string | null {
  if (!supportsDimension(estimator.estimator, scenario.dim)) {
    return `${estimator.estimator.id} needs ${dimsRange(estimator.estimator.dims)}; the scenario has d = ${scenario.dim}`;
  }
  if (estimator.estimator.quantity !== scenario.quantity) {
    return `${estimator.estimator.id} estimates ${estimator.estimator.quantity}; the scenario's quantity is ${scenario.quantity}`;
  }
  return null;
}

export function planUnits(context: WorkContext): { units: Unit[]; skipped: Skip[] } {
  const { plan, scenarios, estimators, tuning } = context;
  const units: Unit[] = [];
  const skipped: Skip[] = [];
  const robustnessN = plan.robustness?.sampleSize;
  scenarios.forEach((scenario, s) => {
    const runnable: number[] = [];
    estimators.forEach((estimator, e) => {
      const reason = incompatibility(estimator, scenario);
      if (reason) skipped.push({ scenario: scenario.id, estimator: estimator.spec, reason });
      else runnable.push(e);
    });
    if (!runnable.length) return;
    const tuned = tuning
      .map((t, i) => ({ t, i }))
      .filter(({ t }) => runnable.includes(t.base))
      .map(({ i }) => estimators.length + i);
    const perturbed: Series[] = [];
    context.perturbations.forEach((p, k) => {
      const prepared = context.prepared[s][k];
      if ('skip' in prepared) {
        skipped.push({ scenario: scenario.id, estimator: `(all, under ${p.spec})`, reason: prepared.skip });
        return;
      }
      for (const e of runnable) perturbed.push({ variant: k + 1, estimator: e });
      if (p.kind !== 'quantize') return;
      const twinsFrom = estimators.length + tuning.length;
      context.dequantized.forEach((twin, t) => {
        if (runnable.includes(twin.base)) perturbed.push({ variant: k + 1, estimator: twinsFrom + t });
      });
    });
    const codeFamily = `${scenario.quantity}:${scenario.dim === 1 ? 'univariate' : 'multivariate'}`;
    for (const n of plan.sampleSizes) {
      const series: Series[] = runnable.map((e) => ({ variant: 0, estimator: e }));
      if (n === robustnessN) series.push(...tuned.map((e) => ({ variant: 0, estimator: e })), ...perturbed);
      const block = replicatesPerUnit(n, scenario.dim, plan.replicates);
      for (let start = 0; start < plan.replicates; start += block) {
        const end = Math.min(plan.replicates, start + block);
        units.push({
          index: units.length,
          scenario: s,
          n,
          repStart: start,
          repEnd: end,
          series,
          cost: (end - start) * n * scenario.dim * series.length,
          codeFamily,
        });
      }
    }
  });
  return { units, skipped };
}

export interface UnitFailure {
  series: number;
  replicate: number;
  message: string;
}

export interface UnitResult {
  unit: number;
  /** estimates[k][r] for unit.series[k] and replicate repStart + r; NaN = failure. */
  estimates: Float64Array[];
  /** Total milliseconds per series. */
  timeMs: number[];
  failures: UnitFailure[];
}

function describeFailure(error: unknown): string {
  if (error instanceof EstimateError) return `${error.code}: ${error.message}`;
  if (error instanceof Error) return `${error.name}: ${error.message}`;
  return String(error);
}

/** One replicate of a unit: every series' estimate, its time, and the failures with their reasons. */
export interface ReplicateResult {
  replicate: number;
  /** values[k] for unit.series[k]; NaN = failure (or skipped). */
  values: Float64Array;
  timeMs: Float64Array;
  failures: UnitFailure[];
}

export interface ReplicateHooks {
  /** Series not to run on this replicate (already recorded as failures elsewhere, e.g. a time-out). */
  skip?: (series: number) => boolean;
  /** Called just before each estimate, so a supervisor knows which one is running. */
  onStart?: (series: number, replicate: number) => void;
  onEnd?: () => void;
}

/** Runs every series of a unit on one replicate's sample (drawn from its own seed, so any replicate can run alone). */
export function executeReplicate(unit: Unit, context: WorkContext, replicate: number, hooks: ReplicateHooks = {}): ReplicateResult {
  const { plan, scenarios, all } = context;
  const scenario = scenarios[unit.scenario];
  const values = new Float64Array(unit.series.length).fill(NaN);
  const timeMs = new Float64Array(unit.series.length);
  const failures: UnitFailure[] = [];
  // Every estimate already failed elsewhere (a worker died drawing this sample, say): do not draw it again.
  if (hooks.skip && unit.series.every((_, k) => hooks.skip!(k))) return { replicate, values, timeMs, failures };
  const variants = [...new Set(unit.series.map((s) => s.variant))];
  const drawn = replicate + context.replicateOffset;
  const original = drawCheckedReplicate(scenario, plan.seed, unit.n, drawn);
  // A draw beyond the double range (a law hhat could not check in advance: src/harness/draw-range.ts) is the
  // scenario's failure on this replicate, and a perturbed copy taken there the perturbation's: no estimator runs on it.
  const drawnOutOfRange = nonFiniteCount(original) > 0;
  for (const v of variants) {
    const sample: Sample =
      v > 0 && !drawnOutOfRange ? perturbedCopy(original, context.prepared[unit.scenario][v - 1] as PreparedPerturbation, drawn, plan.seed) : original;
    const outOfRange = drawnOutOfRange
      ? outOfRangeMessage(scenario, null)
      : v > 0 && nonFiniteCount(sample) > 0
        ? outOfRangeMessage(scenario, context.perturbations[v - 1].spec)
        : null;
    unit.series.forEach((series, k) => {
      if (series.variant !== v || hooks.skip?.(k)) return;
      if (outOfRange !== null) {
        failures.push({ series: k, replicate, message: outOfRange });
        return;
      }
      hooks.onStart?.(k, replicate);
      const started = performance.now();
      let value: number;
      try {
        value = runEstimator(all[series.estimator], sample).value;
        if (!Number.isFinite(value)) {
          failures.push({ series: k, replicate, message: `numeric: the estimate is ${value}` });
          value = NaN;
        }
      } catch (error) {
        failures.push({ series: k, replicate, message: describeFailure(error) });
        value = NaN;
      }
      timeMs[k] = performance.now() - started;
      hooks.onEnd?.();
      values[k] = value;
    });
  }
  return { replicate, values, timeMs, failures };
}

/** An empty result for a unit, to be filled replicate by replicate. */
export function emptyUnitResult(unit: Unit): UnitResult {
  const reps = unit.repEnd - unit.repStart;
  return { unit: unit.index, estimates: unit.series.map(() => new Float64Array(reps).fill(NaN)), timeMs: unit.series.map(() => 0), failures: [] };
}

/** Adds one replicate's results to a unit's. */
export function addReplicate(unit: Unit, result: UnitResult, replicate: ReplicateResult): void {
  const r = replicate.replicate - unit.repStart;
  for (let k = 0; k < unit.series.length; k++) {
    result.estimates[k][r] = replicate.values[k];
    result.timeMs[k] += replicate.timeMs[k];
  }
  result.failures.push(...replicate.failures);
}

/** Runs a whole unit in this thread (no time or memory limits: see src/harness/pool.ts for those). */
export function executeUnit(unit: Unit, context: WorkContext): UnitResult {
  const result = emptyUnitResult(unit);
  for (let replicate = unit.repStart; replicate < unit.repEnd; replicate++) addReplicate(unit, result, executeReplicate(unit, context, replicate));
  return result;
}
