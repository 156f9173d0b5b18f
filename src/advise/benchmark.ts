/**
 * A benchmark sized to a time budget, in up to two rounds:
 *
 *   1. a pilot on one thread (after a one-replicate warm-up: first calls include compilation) measures the
 *      estimator time of one replicate, every estimator on every scenario;
 *   2. round one gets the replicates that fill about half of the budget at that cost on the worker threads;
 *   3. round two gets what the rest of the budget allows at the throughput round one actually achieved (the
 *      machine may be shared, so measured wall time is the better guide), with the next base seed so its draws
 *      are new; the two rounds' estimates are joined cell by cell and scored as one run.
 *
 *   const bench = await runTargeted({ scenarios, estimators, n: 800, budgetSeconds: 12 });
 *   bench.run        // a RunFile: cells, scores with Monte-Carlo SEs, rankings, robustness section
 *
 * The joined run is for advice only: its plan names round one's seed, and its fingerprints describe round one.
 */
import { listEstimators, parseEstimatorSpec } from '../../estimators/index.js';
import type { Plan } from '../plan.js';
import { resolvePlan } from '../plan.js';
import { assembleRun, finishRun, type Cell, type RunFile } from '../results.js';
import { defaultWorkers, runPlan } from '../runner.js';

export interface TargetedOptions {
  scenarios: string[];
  estimators: string[];
  n: number;
  /** Seconds for the pilot and the rounds together. */
  budgetSeconds: number;
  seed?: number;
  /** Perturbations for a robustness section at n (tuning grids off); none by default. */
  perturbations?: string[];
  workers?: number;
  minReplicates?: number;
  maxReplicates?: number;
}

export interface TargetedBenchmark {
  run: RunFile;
  plan: Plan;
  /** Replicates per cell over both rounds. */
  replicates: number;
  rounds: { seed: number; replicates: number; wallSeconds: number }[];
  /** Measured on the pilot: estimator seconds per replicate, all scenarios, before perturbations (NaN: no pilot). */
  secondsPerReplicate: number;
  /** The budget asked for fewer than minReplicates; the minimum ran anyway. */
  minimumForced: boolean;
  wallSeconds: number;
  workers: number;
}

export const ADVICE_SEED = 20261201;
export const DEFAULT_BUDGET_SECONDS = 20;

/** Every registered entropy estimator that supports d, at default settings. */
export function applicableEstimators(dim: number): string[] {
  return listEstimators()
    .filter((e) => e.quantity === 'entropy' && e.dims[0] <= dim && dim <= e.dims[1])
    .map((e) => parseEstimatorSpec(e.id).spec);
}

const PILOT_REPLICATES = 2;
/** Sampling and scheduling add to the estimators' own time. */
const OVERHEAD_FACTOR = 1.25;
const FIRST_ROUND_SHARE = 0.5;
/** Round two aims a little short of the deadline: its throughput is an estimate too. */
const SECOND_ROUND_SHARE = 0.85;

/** Joins the cells of two runs of the same plan with different seeds: estimates and failures concatenated. */
function joinRuns(first: RunFile, second: RunFile): RunFile {
  const key = (c: Cell) => `${c.scenario}|${c.estimator}|${c.n}|${c.perturbation ?? ''}|${c.role}`;
  const later = new Map(second.cells.map((c) => [key(c), c]));
  const offset = first.plan.replicates;
  const cells: Cell[] = first.cells.map((c) => {
    const extra = later.get(key(c));
    if (!extra) return c;
    return {
      ...c,
      estimates: [...c.estimates, ...extra.estimates],
      failures: [...c.failures, ...extra.failures.map((f) => ({ ...f, replicate: f.replicate + offset }))],
      timing: {
        totalMs: c.timing.totalMs + extra.timing.totalMs,
        meanMs: (c.timing.totalMs + extra.timing.totalMs) / Math.max(1, c.estimates.length + extra.estimates.length),
      },
    };
  });
  return finishRun({
    plan: { ...first.plan, replicates: first.plan.replicates + second.plan.replicates },
    fingerprint: first.fingerprint,
    shard: null,
    complete: true,
    workers: Math.max(first.workers, second.workers),
    wallSeconds: first.wallSeconds + second.wallSeconds,
    scenarios: first.scenarios,
    skipped: first.skipped,
    cells,
  });
}

export async function runTargeted(options: TargetedOptions): Promise<TargetedBenchmark> {
  const started = performance.now();
  const elapsed = () => (performance.now() - started) / 1000;
  const seed = options.seed ?? ADVICE_SEED;
  const minReplicates = options.minReplicates ?? 20;
  const maxReplicates = options.maxReplicates ?? 1000;
  const perturbations = options.perturbations ?? [];
  const planFor = (replicates: number, roundSeed: number, withRobustness: boolean) =>
    resolvePlan({
      name: 'advise',
      scenarios: options.scenarios,
      estimators: options.estimators,
      sampleSizes: [options.n],
      replicates,
      seed: roundSeed,
      robustness: withRobustness && perturbations.length ? { sampleSize: options.n, perturbations, tuning: false } : null,
    }).plan;

  const workers = Math.max(1, options.workers ?? defaultWorkers());
  const remaining = () => Math.max(0, options.budgetSeconds - elapsed());
  // A fixed replicate count (min = max) needs no pilot: the budget sizes nothing.
  const fixed = minReplicates >= maxReplicates;
  let secondsPerReplicate = NaN;
  let affordable = maxReplicates;
  if (!fixed) {
    await runPlan(planFor(1, seed, false), { workers: 1 });
    const pilot = await runPlan(planFor(PILOT_REPLICATES, seed, false), { workers: 1 });
    let estimatorMs = 0;
    for (const result of pilot.results.values()) for (const ms of result.timeMs) estimatorMs += ms;
    secondsPerReplicate = (estimatorMs / 1000 / PILOT_REPLICATES) * OVERHEAD_FACTOR;
    const costPerReplicate = secondsPerReplicate * (1 + perturbations.length);
    affordable = costPerReplicate > 0 ? Math.floor((remaining() * FIRST_ROUND_SHARE * workers) / costPerReplicate) : maxReplicates;
  }
  const firstReplicates = Math.min(maxReplicates, Math.max(minReplicates, affordable));
  const rounds: TargetedBenchmark['rounds'] = [];
  const roundStarted = performance.now();
  const firstOutcome = await runPlan(planFor(firstReplicates, seed, true), { workers });
  const firstWall = (performance.now() - roundStarted) / 1000;
  rounds.push({ seed, replicates: firstReplicates, wallSeconds: firstWall });
  let run = assembleRun(firstOutcome, null);
  let usedWorkers = firstOutcome.workers;

  const throughput = firstReplicates / Math.max(firstWall, 1e-3);
  const more = fixed ? 0 : Math.min(maxReplicates - firstReplicates, Math.floor(remaining() * SECOND_ROUND_SHARE * throughput));
  // A second round smaller than a fifth of the first would add little precision for its start-up cost.
  if (more >= Math.max(5, Math.ceil(firstReplicates / 5))) {
    const secondStarted = performance.now();
    const secondOutcome = await runPlan(planFor(more, seed + 1, true), { workers });
    rounds.push({ seed: seed + 1, replicates: more, wallSeconds: (performance.now() - secondStarted) / 1000 });
    run = joinRuns(run, assembleRun(secondOutcome, null));
    usedWorkers = Math.max(usedWorkers, secondOutcome.workers);
  }
  return {
    run,
    plan: run.plan,
    replicates: rounds.reduce((s, r) => s + r.replicates, 0),
    rounds,
    secondsPerReplicate,
    minimumForced: affordable < minReplicates,
    wallSeconds: elapsed(),
    workers: usedWorkers,
  };
}
