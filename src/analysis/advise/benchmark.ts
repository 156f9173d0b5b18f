/**
 * A benchmark sized to a time budget:
 *
 *   1. a pilot on one thread runs one replicate of every estimator on each scenario in turn and measures its
 *      wall time (first calls include compilation, so the estimate errs on the slow side); scenarios the pilot
 *      could not reach within PILOT_SHARE of the budget are cut;
 *   2. when the minimum replicate count does not fit what is left, the benchmark is scaled down, in this
 *      order: the robustness perturbations are dropped, then scenarios from the end of the list; when one
 *      scenario at the fewest useful replicates still cannot fit, the budget is refused with the time it would
 *      take (a usage error naming --budget), rather than overrun;
 *   3. round one gets the replicates that fill about half of what is left on the worker threads;
 *   4. round two gets what the rest of the budget allows at the throughput round one achieved (the machine
 *      may be shared, so measured wall time is the better guide), on the same seed's next replicates, so that
 *      R replicates in all are the same draws however the rounds split them, and the same as `--replicates R`;
 *      the two rounds' estimates are joined cell by cell and scored as one run.
 * Every cut is listed in `cuts`, in words, for the advice to say.
 *
 *   const bench = await runTargeted({ scenarios, estimators, n: 800, budgetSeconds: 12 });
 *   bench.run        // a RunFile: cells, scores with Monte-Carlo SEs, rankings, robustness section
 *
 * The joined run is for advice only: its plan is round one's with the joined replicate count, and its
 * fingerprints describe round one.
 */
import { listEstimators, parseEstimatorSpec } from '../../../estimators/index.js';
import type { Plan } from '../../harness/plan.js';
import { resolveCheckedPlan } from '../../harness/plan.js';
import { assembleRun, cellKey, finishRun, type Cell, type RunFile } from '../results.js';
import { defaultWorkers, runPlan } from '../../harness/runner.js';
import { replicatesPerUnit } from '../../harness/work.js';
import { UsageError } from '../../core/errors.js';
import type { CommandDeclaration } from '../../harness/external/declaration.js';
import { DEFAULT_SEED } from '../../core/rng.js';

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
  /** Where the rounds run: supervised worker threads (default), or this thread (built-in estimators only, no limits). */
  isolation?: 'threads' | 'in-process';
  minReplicates?: number;
  maxReplicates?: number;
  /** The user's whole --budget and what was spent before this benchmark, for messages about the budget. */
  budget?: { total: number; spent: number };
  /** Dimension of the scenarios, to size the units that spread over the workers. */
  dim?: number;
  /** Estimator commands among `estimators`, registered in this thread already; the plan carries them to the workers. */
  commands?: CommandDeclaration[];
}

export interface TargetedBenchmark {
  run: RunFile;
  plan: Plan;
  /** Replicates per cell over both rounds. */
  replicates: number;
  rounds: { seed: number; replicates: number; wallSeconds: number }[];
  /** Measured on the pilot: estimator seconds per replicate, all scenarios, before perturbations (NaN: no pilot). */
  secondsPerReplicate: number;
  /** The budget asked for fewer than minReplicates; the fewest useful replicates ran instead. */
  minimumForced: boolean;
  /** What was cut to fit the budget, in words (empty when nothing was). */
  cuts: string[];
  /** The scenarios benchmarked (the given ones, less any cut). */
  scenarios: string[];
  /** Whether the robustness perturbations ran. */
  perturbed: boolean;
  wallSeconds: number;
  workers: number;
}

export const DEFAULT_BUDGET_SECONDS = 20;

/** Every registered entropy estimator that supports d, at default settings. */
export function applicableEstimators(dim: number): string[] {
  return (
    listEstimators()
      // The lattice estimator refuses data on no lattice: advice offers it for recorded data only (file.ts).
      .filter((e) => e.quantity === 'entropy' && e.family !== 'lattice' && e.dims[0] <= dim && dim <= e.dims[1])
      .map((e) => parseEstimatorSpec(e.id).spec)
  );
}

/** The pilot stops starting new scenarios once it has used this share of the budget. */
const PILOT_SHARE = 0.3;
/** Below this many replicates the Monte-Carlo errors and best sets say too little to advise on. */
export const FEWEST_USEFUL_REPLICATES = 5;
/** A benchmark may run this much past the budget before the budget is refused instead. */
const BUDGET_SLACK = 0.2;
/** Thread start-up and scheduling on top of the pilot's per-replicate time. */
const OVERHEAD_FACTOR = 1.1;
const FIRST_ROUND_SHARE = 0.5;
/**
 * A run's fixed cost beyond its replicates: worker threads loading hhat, estimators compiling again in each
 * (the pilot ran warm, on this thread), then scoring. Measured at d = 500, n = 600: 5 replicates predicted at
 * about 5.8 s in all took 6.5–6.9 s; without this term such a run went past budget × (1 + BUDGET_SLACK).
 */
const RUN_START_SECONDS = 1;
/** Round two aims a little short of the deadline: its throughput is an estimate too. */
const SECOND_ROUND_SHARE = 0.85;

/** Joins the cells of two runs of the same plan, the second continuing the first's draws: estimates and failures concatenated. */
function joinRuns(first: RunFile, second: RunFile): RunFile {
  const later = new Map(second.cells.map((c) => [cellKey(c), c]));
  const offset = first.plan.replicates;
  const cells: Cell[] = first.cells.map((c) => {
    const extra = later.get(cellKey(c));
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
    code: first.code,
    shard: null,
    complete: true,
    workers: Math.max(first.workers, second.workers),
    wallSeconds: first.wallSeconds + second.wallSeconds,
    sessions: [...first.sessions, ...second.sessions],
    scenarios: first.scenarios,
    skipped: first.skipped,
    cells,
  });
}

export async function runTargeted(options: TargetedOptions): Promise<TargetedBenchmark> {
  const started = performance.now();
  const elapsed = () => (performance.now() - started) / 1000;
  const seed = options.seed ?? DEFAULT_SEED;
  const minReplicates = options.minReplicates ?? 20;
  const maxReplicates = options.maxReplicates ?? 1000;
  let perturbations = options.perturbations ?? [];
  let scenarios = options.scenarios;
  // Built here, not given by a caller: its pilot's single replicate is below what a plan file may ask for.
  const planFor = (replicates: number, roundSeed: number, withRobustness: boolean, only = scenarios) =>
    resolveCheckedPlan({
      name: 'advise',
      scenarios: only,
      estimators: options.estimators,
      sampleSizes: [options.n],
      replicates,
      seed: roundSeed,
      robustness: withRobustness && perturbations.length ? { sampleSize: options.n, perturbations, tuning: false } : null,
      commands: options.commands,
    }).plan;

  const workers = Math.max(1, options.workers ?? defaultWorkers());
  const remaining = () => Math.max(0, options.budgetSeconds - elapsed());
  // A fixed replicate count (min = max) needs no pilot: the budget sizes nothing.
  const fixed = minReplicates >= maxReplicates;
  const cuts: string[] = [];
  let secondsPerReplicate = NaN;
  let affordable = maxReplicates;
  let minimumForced = false;
  if (!fixed) {
    const perScenario: number[] = [];
    for (const scenario of scenarios) {
      if (perScenario.length && elapsed() > PILOT_SHARE * options.budgetSeconds) break;
      const pilotStarted = performance.now();
      // The pilot measures the estimators' own cost, on this thread; the rounds run supervised on worker threads.
      await runPlan(planFor(1, seed, false, [scenario]), { workers: 1, isolation: 'in-process' });
      perScenario.push((performance.now() - pilotStarted) / 1000);
    }
    if (perScenario.length < scenarios.length) {
      cuts.push(
        `${scenarios.length - perScenario.length} of ${scenarios.length} scenarios (${scenarios.slice(perScenario.length).join(', ')}): one replicate of the first ${perScenario.length} already took ${perScenario.reduce((a, b) => a + b, 0).toFixed(1)} s`,
      );
      scenarios = scenarios.slice(0, perScenario.length);
    }
    const cost = (count: number, withPerturbations: boolean) =>
      perScenario.slice(0, count).reduce((a, b) => a + b, 0) * OVERHEAD_FACTOR * (1 + (withPerturbations ? perturbations.length : 0));
    // Units are blocks of replicates per scenario; fewer units than workers leave workers idle.
    const parallel = (count: number, replicates: number) =>
      Math.max(1, Math.min(workers, count * Math.ceil(replicates / replicatesPerUnit(options.n, options.dim ?? 1, replicates))));
    const fits = (count: number, withPerturbations: boolean, replicates: number) =>
      (replicates * cost(count, withPerturbations)) / parallel(count, replicates) <= remaining() * FIRST_ROUND_SHARE;
    if (perturbations.length && !fits(scenarios.length, true, minReplicates)) {
      cuts.push(
        `the robustness section (${perturbations.join(', ')}): with it, ${minReplicates} replicates would take about ${((minReplicates * cost(scenarios.length, true)) / workers).toFixed(0)} s`,
      );
      perturbations = [];
    }
    let count = scenarios.length;
    while (count > 1 && !fits(count, false, minReplicates)) count--;
    if (count < scenarios.length) {
      cuts.push(
        `${scenarios.length - count} more scenario${scenarios.length - count === 1 ? '' : 's'} (${scenarios.slice(count).join(', ')}), to run ${minReplicates} replicates of the rest`,
      );
      scenarios = scenarios.slice(0, count);
    }
    secondsPerReplicate = cost(scenarios.length, perturbations.length > 0);
    affordable = secondsPerReplicate > 0 ? Math.floor((remaining() * FIRST_ROUND_SHARE * workers) / secondsPerReplicate) : maxReplicates;
    while (affordable > 1 && (affordable * secondsPerReplicate) / parallel(scenarios.length, affordable) > remaining() * FIRST_ROUND_SHARE) affordable--;
    if (affordable < minReplicates) {
      minimumForced = true;
      const fewest = Math.min(minReplicates, FEWEST_USEFUL_REPLICATES);
      const spent = options.budget?.spent ?? 0;
      const total = options.budget?.total ?? options.budgetSeconds;
      const needed = spent + elapsed() + RUN_START_SECONDS + (fewest * secondsPerReplicate) / parallel(scenarios.length, fewest);
      if (needed > total * (1 + BUDGET_SLACK)) {
        throw new UsageError(
          `--budget ${total} is too small here: one replicate of ${scenarios.length === 1 ? 'one matching scenario' : `${scenarios.length} scenarios`} at n = ${options.n} takes about ${(secondsPerReplicate / OVERHEAD_FACTOR).toFixed(1)} s on this machine, and advice needs at least ${fewest} replicates (about ${needed.toFixed(0)} s in all); give --budget ${Math.ceil(needed * 1.3)} or more`,
        );
      }
      affordable = Math.max(affordable, fewest);
    }
  }
  const firstReplicates = Math.min(maxReplicates, minimumForced ? affordable : Math.max(minReplicates, affordable));
  const rounds: TargetedBenchmark['rounds'] = [];
  const roundStarted = performance.now();
  const firstOutcome = await runPlan(planFor(firstReplicates, seed, true), { workers, isolation: options.isolation });
  const firstWall = (performance.now() - roundStarted) / 1000;
  rounds.push({ seed, replicates: firstReplicates, wallSeconds: firstWall });
  let run = assembleRun(firstOutcome, null);
  let usedWorkers = firstOutcome.workers;

  const throughput = firstReplicates / Math.max(firstWall, 1e-3);
  const more = fixed ? 0 : Math.min(maxReplicates - firstReplicates, Math.floor(remaining() * SECOND_ROUND_SHARE * throughput));
  // A second round smaller than a fifth of the first would add little precision for its start-up cost.
  if (more >= Math.max(5, Math.ceil(firstReplicates / 5))) {
    const secondStarted = performance.now();
    const secondOutcome = await runPlan(planFor(more, seed, true), { workers, isolation: options.isolation, replicateOffset: firstReplicates });
    rounds.push({ seed, replicates: more, wallSeconds: (performance.now() - secondStarted) / 1000 });
    run = joinRuns(run, assembleRun(secondOutcome, null));
    usedWorkers = Math.max(usedWorkers, secondOutcome.workers);
  }
  return {
    run,
    plan: run.plan,
    replicates: rounds.reduce((s, r) => s + r.replicates, 0),
    rounds,
    secondsPerReplicate,
    minimumForced,
    cuts,
    scenarios,
    perturbed: perturbations.length > 0,
    wallSeconds: elapsed(),
    workers: usedWorkers,
  };
}
