/**
 * `hhat advise --n N --dim D [--tails T] [--support S]`: which estimator to use in a described situation.
 *
 *   const advice = await adviseSituation({ n: 800, dim: 2, tails: 'heavy', budgetSeconds: 20 });
 *   advice.match.scenarios, advice.estimators (by mean RMSE), advice.recommendation.reason
 *
 * Scenario choice. Catalog scenarios of dimension exactly D, with the tail class and support when given.
 * When the catalog has nothing at d = D, the catalog's families with a dimension parameter (Gaussian, uniform
 * box and ball, multivariate Student t and lognormal) are rebuilt at d = D with the catalog's other values.
 * When the tail class or support still matches nothing, the nearest are used, fewest differences first, and
 * the advice says so. More than `maxScenarios` matches are thinned to one per family, spread round-robin
 * over the (tails, support) classes in catalog order.
 *
 * Then a benchmark at n with as many replicates as the budget allows, including a small robustness section
 * at n (a unit change, recording to 0.01 and 0.1 SD, 1% of far outliers).
 */
import type { Scenario, Support, Tails } from '../../core/contracts.js';
import { UsageError } from '../../core/errors.js';
import { catalog, listFamilies, parseScenario } from '../../../scenarios/index.js';
import { applicableEstimators, DEFAULT_BUDGET_SECONDS, FEWEST_USEFUL_REPLICATES, runTargeted } from './benchmark.js';
import { parseEstimatorSpec } from '../../../estimators/index.js';
import type { CommandDeclaration } from '../../harness/external/declaration.js';
import { describeSeconds, predictedReplicateSeconds } from '../../harness/cost-model.js';
import { defaultWorkers } from '../../harness/runner.js';
import { recommend, summarise, type EstimatorSummary, type Recommendation } from './recommend.js';

export interface SituationAdviceOptions {
  n: number;
  dim: number;
  tails?: Tails;
  support?: Support;
  budgetSeconds?: number;
  seed?: number;
  workers?: number;
  maxScenarios?: number;
  minReplicates?: number;
  /** Exactly this many replicates per scenario (the budget no longer sizes them). */
  replicates?: number;
  /** Estimator commands, registered in this thread already; they join the estimators compared where their dims allow. */
  commands?: CommandDeclaration[];
  onStage?: (stage: string) => void;
}

export interface ScenarioMatch {
  /** Scenarios benchmarked. */
  scenarios: { id: string; dim: number; tails: Tails; support: Support }[];
  /** How many scenarios matched before thinning. */
  matched: number;
  /** True when every benchmarked scenario has d = D and the tails and support asked for. */
  exact: boolean;
  /** Scenarios were rebuilt at d = D from families with a dimension parameter. */
  rebuilt: boolean;
  /** A plain sentence on how the scenarios were chosen. */
  note: string;
}

export interface SituationAdvice {
  n: number;
  dim: number;
  tails: Tails | null;
  support: Support | null;
  budgetSeconds: number;
  match: ScenarioMatch;
  benchmark: { replicates: number; seconds: number; minimumForced: boolean; workers: number; perturbations: string[] };
  estimators: EstimatorSummary[];
  recommendation: Recommendation;
  warnings: string[];
  seconds: number;
}

/** The robustness section of the advice for a described situation: a unit change, rounding at two steps, far outliers. */
export const ADVICE_QUANTIZE_STEPS = [0.01, 0.1];
export const ADVICE_PERTURBATIONS = ['rescale:c=1000', ...ADVICE_QUANTIZE_STEPS.map((step) => `quantize:step=${step}`), 'contaminate:fraction=0.01'];
export const DEFAULT_MAX_SCENARIOS = 6;

function entropyCatalog(): Scenario[] {
  return catalog().filter((s) => s.quantity === 'entropy');
}

/** Catalog scenarios of families with a `dim` parameter, rebuilt at dimension d (duplicates dropped). */
function rebuiltAt(dim: number, from: Scenario[]): Scenario[] {
  const out = new Map<string, Scenario>();
  for (const s of from) {
    const family = listFamilies().find((f) => f.id === s.family && f.params.some((p) => p.name === 'dim'));
    if (!family) continue;
    try {
      const rebuilt = family.create({ ...s.params, dim });
      out.set(rebuilt.id, parseScenario(rebuilt.id));
    } catch (error) {
      // A parameter set that is invalid at this dimension (an equicorrelation too negative) is simply skipped.
      if (!(error instanceof UsageError)) throw error;
    }
  }
  return [...out.values()];
}

function describe(tails?: Tails, support?: Support): string {
  const parts = [tails ? `${tails} tails` : '', support ? `${support === 'half' ? 'half-bounded' : support} support` : ''].filter(Boolean);
  return parts.length ? ` with ${parts.join(' and ')}` : '';
}

/** Thins to at most `max` scenarios: one per family, round-robin over (tails, support) classes. */
export function thinScenarios(scenarios: Scenario[], max: number): Scenario[] {
  if (scenarios.length <= max) return scenarios;
  const classes = new Map<string, Scenario[]>();
  for (const s of scenarios) {
    const key = `${s.tails}/${s.support}`;
    if (!classes.has(key)) classes.set(key, []);
    classes.get(key)!.push(s);
  }
  const chosen: Scenario[] = [];
  const families = new Set<string>();
  const queues = [...classes.values()].map((list) => [...list]);
  // First pass: new families only; later passes allow repeats, so the cap is always reached.
  for (const allowRepeat of [false, true]) {
    let progress = true;
    while (chosen.length < max && progress) {
      progress = false;
      for (const queue of queues) {
        if (chosen.length >= max) break;
        const index = queue.findIndex((s) => allowRepeat || !families.has(s.family));
        if (index < 0) continue;
        const [s] = queue.splice(index, 1);
        chosen.push(s);
        families.add(s.family);
        progress = true;
      }
    }
  }
  return chosen;
}

export function matchScenarios(dim: number, tails: Tails | undefined, support: Support | undefined, max: number): ScenarioMatch {
  const all = entropyCatalog();
  let pool = all.filter((s) => s.dim === dim);
  let rebuilt = false;
  if (!pool.length) {
    pool = rebuiltAt(dim, all);
    rebuilt = pool.length > 0;
  }
  const mismatches = (s: Scenario) => Number(tails !== undefined && s.tails !== tails) + Number(support !== undefined && s.support !== support);
  let notes: string[] = [];
  let exact = true;
  if (!pool.length) {
    // Nothing at this dimension and no family to rebuild: the nearest dimension.
    const nearest = Math.min(...all.map((s) => Math.abs(s.dim - dim)));
    pool = all.filter((s) => Math.abs(s.dim - dim) === nearest);
    exact = false;
    notes.push(`the catalog has nothing at d = ${dim}; using the nearest dimension, d = ${[...new Set(pool.map((s) => s.dim))].join(' and ')}`);
  } else if (rebuilt) {
    notes.push(`the catalog lists nothing at d = ${dim}; its families with a dimension parameter were rebuilt at d = ${dim}`);
  }
  const best = Math.min(...pool.map(mismatches));
  const matched = pool.filter((s) => mismatches(s) === best);
  if (best > 0) {
    exact = false;
    const have = [...new Set(matched.map((s) => `${s.tails} tails, ${s.support === 'half' ? 'half-bounded' : s.support} support`))].join('; ');
    notes.push(
      `no scenario${rebuilt ? '' : ' in the catalog'} at d = ${dim} has${describe(tails, support).replace(/^ with/, '')}; the nearest differ in ${best === 2 ? 'both' : 'one'} of them (${have})`,
    );
  }
  const chosen = thinScenarios(matched, max);
  const count = `${chosen.length === matched.length ? `all ${matched.length}` : `${chosen.length} of ${matched.length}`} matching scenario${matched.length === 1 ? '' : 's'}`;
  const thinned = chosen.length < matched.length ? ' (one per family, spread over tail and support classes)' : '';
  notes = notes.length ? [...notes, `benchmarking ${count}${thinned}`] : [`benchmarking ${count} at d = ${dim}${describe(tails, support)}${thinned}`];
  return {
    scenarios: chosen.map((s) => ({ id: s.id, dim: s.dim, tails: s.tails, support: s.support })),
    matched: matched.length,
    exact,
    rebuilt,
    note: `${notes.join('; ')}.`.replace(/^./, (c) => c.toUpperCase()),
  };
}

/**
 * Why no estimator can work with n points in d dimensions, or null when n > d. n points span an affine flat
 * of dimension at most n − 1, so with n ≤ d the sample says nothing about the spread in the other directions:
 * any value an estimator returns comes from its assumptions, not from the data.
 */
export function tooFewPoints(n: number, dim: number): string | null {
  if (n > dim) return null;
  return (
    `n = ${n} points in d = ${dim} dimensions lie in a flat of at most ${n - 1} dimension${n - 1 === 1 ? '' : 's'}, so they say nothing about the spread in the other ` +
    `${dim - n + 1} direction${dim - n + 1 === 1 ? '' : 's'} and no estimator can recover it: the sample covariance is singular (the Gaussian and kernel estimators cannot run) and ` +
    `nearest-neighbour and histogram values would come from their assumptions, not the data. Collect more than d points (common practice asks for many times d), or reduce the dimension first.`
  );
}

/** A benchmark may run this much past the budget before the budget is refused instead (as in benchmark.ts). */
const MODEL_MARGIN = 4;
/** The largest --budget the command accepts (a day). */
export const MAX_BUDGET_SECONDS = 86400;

/**
 * Refuses, before any of it is spent, a budget that the fewest useful replicates at n would overrun by far on
 * the cost model's prediction (src/harness/cost-model.ts): at large n the benchmark's own pilot (one replicate of every
 * estimator, on one thread) could otherwise take many times the budget just to find that out. The model is
 * a fixed formula per method and can be several times off on a given machine and setting (it over-predicts
 * d = 500 by about 7×), so only a prediction beyond MODEL_MARGIN times the budget is refused here; closer
 * calls go to the pilot, which measures (src/analysis/advise/benchmark.ts).
 */
function refuseUnaffordableBudget(n: number, dim: number, estimators: readonly string[], budget: number, workers: number, fewest: number): void {
  const perReplicate = predictedReplicateSeconds(
    estimators.map((spec) => parseEstimatorSpec(spec)),
    n,
    dim,
  );
  // The pilot runs one replicate on one thread; the rounds share the rest over the workers.
  const needed = perReplicate + (fewest * perReplicate) / Math.max(1, workers);
  if (needed <= budget * MODEL_MARGIN) return;
  const suggested = Math.ceil(needed * 1.3);
  const remedy =
    suggested <= MAX_BUDGET_SECONDS
      ? `give --budget ${suggested} or more, or a smaller --n`
      : `no --budget up to ${MAX_BUDGET_SECONDS} s covers that; give a smaller --n`;
  throw new UsageError(
    `--budget ${budget} is too small here: one replicate of one matching scenario at n = ${n} is predicted to take about ${describeSeconds(perReplicate)} (the cost model in src/harness/cost-model.ts), and advice needs at least ${fewest} replicates (about ${describeSeconds(needed)} in all on ${workers} worker${workers === 1 ? '' : 's'}); ${remedy}`,
  );
}

export async function adviseSituation(options: SituationAdviceOptions): Promise<SituationAdvice> {
  const started = performance.now();
  const { n, dim } = options;
  if (!Number.isInteger(n) || n < 10) throw new UsageError(`--n ${n} is not allowed; it must be an integer ≥ 10`);
  if (!Number.isInteger(dim) || dim < 1) throw new UsageError(`--dim ${dim} is not allowed; it must be an integer ≥ 1`);
  const budget = options.budgetSeconds ?? DEFAULT_BUDGET_SECONDS;
  const stage = options.onStage ?? (() => {});
  const degenerate = tooFewPoints(n, dim);
  if (degenerate) {
    return {
      n,
      dim,
      tails: options.tails ?? null,
      support: options.support ?? null,
      budgetSeconds: budget,
      match: { scenarios: [], matched: 0, exact: true, rebuilt: false, note: 'No benchmark was run: its answer is known without one.' },
      benchmark: { replicates: 0, seconds: 0, minimumForced: false, workers: 0, perturbations: [] },
      estimators: [],
      recommendation: { recommended: null, runnerUp: null, runnerUpTiedOn: [], reason: `No estimator is usable here: ${degenerate}` },
      warnings: [],
      seconds: (performance.now() - started) / 1000,
    };
  }
  stage('choosing scenarios');
  const match = matchScenarios(dim, options.tails, options.support, options.maxScenarios ?? DEFAULT_MAX_SCENARIOS);
  const commands = (options.commands ?? []).filter((c) => c.quantity === 'entropy' && c.dims[0] <= dim && (c.dims[1] === null || dim <= c.dims[1]));
  const estimators = [...applicableEstimators(dim), ...commands.map((c) => parseEstimatorSpec(c.id).spec)];
  if (!estimators.length) throw new UsageError(`no entropy estimator supports d = ${dim}`);
  if (options.replicates === undefined)
    refuseUnaffordableBudget(n, dim, estimators, budget, options.workers ?? defaultWorkers(), Math.min(options.minReplicates ?? 10, FEWEST_USEFUL_REPLICATES));
  stage('benchmarking');
  const bench = await runTargeted({
    scenarios: match.scenarios.map((s) => s.id),
    estimators,
    n,
    budgetSeconds: Math.max(0, budget - (performance.now() - started) / 1000),
    seed: options.seed,
    perturbations: ADVICE_PERTURBATIONS,
    workers: options.workers,
    minReplicates: options.replicates ?? options.minReplicates ?? 10,
    maxReplicates: options.replicates,
    budget: { total: budget, spent: (performance.now() - started) / 1000 },
    dim,
    commands,
  });
  const summaries = summarise(bench.run);
  const recommendation = recommend(bench.run, summaries);
  const warnings: string[] = [];
  if (!match.exact) warnings.push(match.note);
  for (const cut of bench.cuts) warnings.push(`to fit the ${budget} s budget, left out ${cut}. Raise --budget to include them.`);
  if (bench.minimumForced)
    warnings.push(
      `the time budget covered fewer replicates than advice wants; ${bench.replicates} ran (${bench.wallSeconds.toFixed(1)} s), so the Monte-Carlo errors are large. Raise --budget for smaller ones.`,
    );
  const skippedPerturbations = bench.run.skipped.filter((s) => s.estimator.startsWith('(all, under'));
  if (skippedPerturbations.length)
    warnings.push(`some perturbations could not be applied: ${[...new Set(skippedPerturbations.map((s) => s.reason))].join('; ')}.`);
  return {
    n,
    dim,
    tails: options.tails ?? null,
    support: options.support ?? null,
    budgetSeconds: budget,
    match: { ...match, scenarios: match.scenarios.filter((m) => bench.scenarios.includes(m.id)) },
    benchmark: {
      replicates: bench.replicates,
      seconds: bench.wallSeconds,
      minimumForced: bench.minimumForced,
      workers: bench.workers,
      perturbations: bench.perturbed ? ADVICE_PERTURBATIONS : [],
    },
    estimators: summaries,
    recommendation,
    warnings,
    seconds: (performance.now() - started) / 1000,
  };
}
