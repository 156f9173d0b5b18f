/**
 * `hhat advise FILE`: which estimator to use on this sample, and what it says.
 *
 *   const advice = await adviseFile(sample, { budgetSeconds: 20, level: 0.95, columnNames });
 *   advice.recommendation.reason, advice.estimate.value, advice.estimate.interval, advice.estimate.corrected
 *
 * Steps, each within a share of the time budget: profile the sample (profile.ts); fit its look-alike
 * (lookalike.ts) and compute the look-alike's entropy; benchmark every applicable estimator on look-alike
 * draws at the sample's n (about 60% of what is left); estimate the sample with each estimator; a smoothed
 * bootstrap interval for the recommended one (the rest, at least 100 resamples); and the look-alike bias
 * correction Ĥ − bias, shown beside the raw value, never instead of it.
 *
 * Large files. A benchmark at the file's n must run every estimator dozens of times at that n, which for
 * millions of rows no budget covers (a d ≥ 2 kernel estimate alone grows like n²). So when the file has
 * more rows than the budget can analyse (`analysisRows`: the cost model's prediction of the benchmark's
 * minimum replicates, src/harness/cost-model.ts), every step above runs on a seeded uniform subsample of that many
 * rows, and the advice says so: the profile, look-alike, benchmark, estimates, interval and bias correction
 * are all for those rows, consistently. The chosen estimator is then also run on as many of the file's rows
 * as ALL_ROWS_SHARE of the budget is predicted to allow (all of them when they fit), a value whose
 * interval would be narrower than the subsample's. The bootstrap is left out, with a note, when even its
 * minimum resamples are predicted to overrun the budget.
 */
import type { Sample } from '../../core/contracts.js';
import { EstimateError, UsageError } from '../../core/errors.js';
import { DEFAULT_SEED } from '../../core/rng.js';
import { MAX_BUDGET_SECONDS, tooFewPoints } from './situation.js';
import { dequantizedVariant, parseEstimatorSpec, runEstimator, type ConfiguredEstimator } from '../../../estimators/index.js';
import { detectSteps } from '../../math/lattice.js';
import { normalQuantile } from '../../math/special.js';
import type { CommandDeclaration } from '../../harness/external/declaration.js';
import { describeSeconds, largestRowsWhere, predictedReplicateSeconds, predictedSeconds, rowsWithin } from '../../harness/cost-model.js';
import { defaultWorkers } from '../../harness/runner.js';
import { seededRowSubsample } from '../../core/sample.js';
import type { ValueWithSe } from '../score.js';
import { applicableEstimators, DEFAULT_BUDGET_SECONDS, runTargeted, type TargetedBenchmark } from './benchmark.js';
import { smoothedBootstrap, type BootstrapInterval } from './bootstrap.js';
import { buildLookalike, type Lookalike } from './lookalike.js';
import { COARSE_STEP, profileSample, type DataProfile } from './profile.js';
import { recommend, summarise, type EstimatorSummary, type Recommendation } from './recommend.js';

export interface FileAdviceOptions {
  /** Seconds for the whole advice (default 20). */
  budgetSeconds?: number;
  /** Interval coverage (default 0.95); null: no interval. */
  level?: number | null;
  seed?: number;
  workers?: number;
  /** Where the look-alike benchmark runs (see TargetedOptions.isolation). */
  isolation?: 'threads' | 'in-process';
  /** Estimator specs to compare (default: every entropy estimator that supports the dimension, default settings). */
  estimators?: string[];
  /** Estimator commands, registered in this thread already; they join the estimators compared. */
  commands?: CommandDeclaration[];
  columnNames?: readonly string[];
  maxComponents?: number;
  /** Least look-alike replicates, whatever the budget (default 20). */
  minReplicates?: number;
  /** Least bootstrap resamples, whatever the budget (default 100). */
  minResamples?: number;
  /** Exactly this many look-alike replicates (the budget no longer sizes them): reproducible advice. */
  replicates?: number;
  /** Exactly this many bootstrap resamples. */
  resamples?: number;
  onStage?: (stage: string) => void;
  /** Seconds already spent on this advice before the call (reading the file): they count against the budget. */
  elapsedBeforeSeconds?: number;
}

/** The file's rows, when the advice worked on a subsample of them. */
export interface AdviceSubsample {
  rows: number;
  of: number;
  seed: number;
  reason: string;
}

/** The chosen estimator on (many more of) the file's rows than the advice analysed. */
export interface AllRowsEstimate {
  estimator: string;
  label: string;
  /** Rows used: all of the file's when they fit ALL_ROWS_SHARE of the budget, else a seeded uniform subsample. */
  rows: number;
  of: number;
  value: number | null;
  error?: string;
  seconds: number;
}

export interface UserEstimate {
  estimator: string;
  label: string;
  value: number | null;
  error?: string;
}

export interface FileAdvice {
  /** Rows analysed: the file's, or the subsample's when `subsample` is set. */
  n: number;
  dim: number;
  /** Rows in the file. */
  fileRows: number;
  subsample: AdviceSubsample | null;
  allRows: AllRowsEstimate | null;
  budgetSeconds: number;
  profile: DataProfile;
  lookalike: Lookalike;
  benchmark: { replicates: number; seconds: number; minimumForced: boolean; workers: number; estimators: EstimatorSummary[] };
  recommendation: Recommendation;
  /** Every estimator on the user's sample. */
  userEstimates: UserEstimate[];
  /** The estimator actually used for the estimate (the recommended one unless it fails on these data). */
  estimate: {
    estimator: string;
    label: string;
    value: number;
    interval: BootstrapInterval | null;
    /** Expected bias on the look-alike, with its Monte-Carlo SE. */
    bias: ValueWithSe;
    /** value − bias */
    corrected: number;
    /**
     * The interval shifted by −bias and widened, on each side, for the bias's own uncertainty: √(h² + (z·s)²), h
     * the side's half-width, s² = SE(bias)² + the look-alike truth's SE², z the normal quantile of the level
     * (independent errors added in quadrature; a large-sample combination, common practice).
     */
    correctedInterval: { lower: number; upper: number } | null;
    /** The look-alike truth's Monte-Carlo SE (0 when it comes from quadrature), part of the bias's uncertainty. */
    truthSe: number;
  } | null;
  warnings: string[];
  seconds: number;
  /** Seconds per stage: profile, look-alike (EM and its entropy), benchmark, estimates, bootstrap. */
  timings: Record<string, number>;
}

const BENCHMARK_SHARE = 0.6;
const MAX_RESAMPLES = 2000;
/**
 * Share of the budget for the least useful benchmark (its minimum replicates on all worker threads), by
 * which `analysisRows` sizes a large file's subsample: the benchmark's share (60%) of what is left after
 * reading, the profile and look-alike, halved for its first round, with room for the benchmark's pilot,
 * whose first calls run slower than the cost model predicts (on a 5·10^6-row CSV at the default 20 s
 * budget, shares of 0.25 and 0.2 left the first round short of the 20 replicates asked for).
 */
export const ANALYSIS_SHARE = 0.15;
/** Share of the budget for the bootstrap's minimum resamples, by which `analysisRows` also sizes the subsample. */
export const BOOTSTRAP_SHARE = 0.25;
/** Share of the budget for the chosen estimator on the file's rows beyond the subsample. */
export const ALL_ROWS_SHARE = 0.1;
/** Below this many rows (or what a budget allows) the benchmark says too little: the budget is refused instead. */
export const FEWEST_ANALYSIS_ROWS = 200;
/** Thread start-up and scheduling on top of the predicted estimator time. */
const PREDICTION_OVERHEAD = 1.1;
/** The bootstrap may overrun what is left of the budget by this much before the interval is left out instead. */
const BOOTSTRAP_SLACK = 0.2;

/**
 * The most rows advice can analyse within the budget: the largest m ≤ n at which (1) the predicted cost of
 * `replicates` benchmark replicates on `workers` threads is within `benchmarkShare` of the budget (ANALYSIS_SHARE
 * for the minimum of a budgeted benchmark; BENCHMARK_SHARE for a fixed count, which has no pilot and no second
 * round to make room for), and (2)
 * `resamples` bootstrap resamples (on one thread) of the slowest estimator whose cost grows no faster than
 * about n log n are within BOOTSTRAP_SHARE of it; rounded down to two digits. Estimators whose cost grows
 * like n² (a d ≥ 2 kernel) are left out of (2): shrinking every analysis to fit their interval would cost
 * more than it gives, so when one of them is chosen its interval may be left out instead, with a note. A
 * fixed function of its arguments, so the same command picks the same rows.
 */
export function analysisRows(
  n: number,
  dim: number,
  estimators: readonly string[],
  budgetSeconds: number,
  workers: number,
  replicates: number,
  resamples = 100,
  benchmarkShare = ANALYSIS_SHARE,
): number {
  const configured = estimators.map((spec) => parseEstimatorSpec(spec));
  const cost = (c: ConfiguredEstimator, m: number): number => predictedSeconds(c, m, dim) ?? 0;
  // Superlinear: doubling the rows more than (say) 2.5-folds the predicted time, at the sizes that matter here.
  const nearLinear = configured.filter((c) => cost(c, 20000) <= 2.5 * cost(c, 10000));
  const fits = (m: number): boolean =>
    predictedReplicateSeconds(configured, m, dim) * PREDICTION_OVERHEAD * replicates <= benchmarkShare * budgetSeconds * workers &&
    nearLinear.reduce((most, c) => Math.max(most, cost(c, m)), 0) * resamples <= BOOTSTRAP_SHARE * budgetSeconds;
  return largestRowsWhere(n, fits);
}

function fmt(x: number, digits = 3): string {
  return Number.isFinite(x) ? Number(x.toPrecision(digits)).toString() : '–';
}

/** Plain warnings for what the look-alike cannot imitate, each with what to do. */
function profileWarnings(profile: DataProfile, lookalike: Lookalike, command: string): string[] {
  const warnings: string[] = [];
  const jitter = `add uniform noise one recording step wide to each value (the jittered data's entropy is the discrete entropy plus the log of the step, close to the underlying h when the step is small against the spread), or ask for advice on the setting instead: ${command}`;
  const coarse = profile.columns.some((c) => c.relativeStep !== null && c.relativeStep >= COARSE_STEP);
  if (profile.repeats.repeatedRows > 0) {
    warnings.push(
      `${profile.repeats.repeatedRows} of ${profile.n} rows repeat an earlier row exactly: repeats are zero distances, on which nearest-neighbour${profile.dim === 1 ? ' and spacing' : ''} estimators break down (they fail once a point has as many copies as the neighbour order), and a Gaussian mixture cannot imitate them. Remove pasted duplicates if that is what they are; if the values were rounded when recorded, ${coarse ? 'see the next note' : jitter}.`,
    );
  }
  for (const c of profile.columns) {
    if (c.relativeStep !== null && c.relativeStep >= COARSE_STEP) {
      warnings.push(
        `${c.name} looks recorded in steps of ${fmt(c.step!)} (${fmt(100 * c.relativeStep, 2)}% of its SD; ${(100 * c.tiedFraction).toFixed(0)}% of its values are tied): at that resolution rounding moves estimates (the quantize column of ${command} shows by how much for each estimator), and the look-alike has no grid. To remove the grid, ${jitter}.`,
      );
    }
  }
  if (lookalike.nearSingular) {
    warnings.push(
      `a component of the look-alike is nearly flat: its SD along some direction is ${fmt(100 * lookalike.smallestSdRatio, 2)}% of the data's (a near-singular covariance). The data may repeat values or lie near a lower-dimensional set (a column derived from others), where differential entropy heads to −∞ and no estimator is reliable. Look for duplicated or derived columns and drop them, or jitter repeated values.`,
    );
  }
  for (const c of profile.columns) {
    if (c.tail?.tails === 'heavy') {
      warnings.push(
        `${c.name} has heavy tails (Hill tail index ${fmt(c.tail.alpha, 2)} ± ${fmt(c.tail.alphaSe, 1)} on the top ${c.tail.k} distances from the median); a Gaussian mixture's tails are light, so the look-alike understates tail-driven error. Consider a transform such as log or asinh (then h(g(X)) = h(X) + E log|g′(X)|, so the entropy of the original follows), and compare with ${command} --tails heavy.`,
      );
    }
  }
  const edged = profile.columns.filter((c) => c.edges && (c.edges.lower.edge || c.edges.upper.edge));
  if (edged.length) {
    const where = edged
      .map((c) => `${c.name} (${[c.edges!.lower.edge ? 'lower' : '', c.edges!.upper.edge ? 'upper' : ''].filter(Boolean).join(' and ')} end)`)
      .join(', ');
    warnings.push(
      `${where} seem${edged.length === 1 ? 's' : ''} to stop at a hard edge: the outermost gaps are no wider than the ones inside them. The look-alike spills past edges, so boundary bias (largest for nearest-neighbour and kernel estimators) is understated; compare with ${command} --support ${profile.support === 'bounded' ? 'bounded' : 'half'}.`,
    );
  }
  return warnings;
}

/**
 * The chosen estimator on as many of the file's rows as ALL_ROWS_SHARE of the budget is predicted to allow
 * (all when they fit): a seeded uniform subsample otherwise.
 */
function allRowsEstimate(
  fileSample: Sample,
  chosen: ConfiguredEstimator,
  label: string,
  budget: number,
  seed: string,
  stage: (text: string) => void,
): AllRowsEstimate {
  const { n, dim } = fileSample;
  const used = rowsWithin(chosen, n, dim, ALL_ROWS_SHARE * budget);
  stage(`${label} on ${used === n ? 'all' : used} of your ${n} rows`);
  const started = performance.now();
  try {
    const value = runEstimator(chosen, seededRowSubsample(fileSample, used, seed)).value;
    const seconds = (performance.now() - started) / 1000;
    return Number.isFinite(value)
      ? { estimator: chosen.spec, label, rows: used, of: n, value, seconds }
      : { estimator: chosen.spec, label, rows: used, of: n, value: null, error: `the estimate is ${value}`, seconds };
  } catch (error) {
    if (!(error instanceof EstimateError)) throw error;
    return { estimator: chosen.spec, label, rows: used, of: n, value: null, error: error.message, seconds: (performance.now() - started) / 1000 };
  }
}

/** What the steps of one advice share: its settings, the clock and the stage reports. */
interface AdviceContext {
  options: FileAdviceOptions;
  budget: number;
  /** Interval coverage; null: no interval. */
  level: number | null;
  seed: number;
  workers: number;
  minimumReplicates: number;
  stage: (text: string) => void;
  /** Seconds since the advice started, reading the file included. */
  elapsed: () => number;
  /** Records the seconds since the previous lap under `name`. */
  lap: (name: string) => void;
}

/**
 * Recorded data (some column has tied values and every such column is on a lattice, src/math/lattice.ts): the
 * look-alike is benchmarked as recorded[step=…;LOOK-ALIKE], rounded to the data's own steps, against the
 * continuous look-alike's entropy, and the estimators built for recorded data join the comparison: each
 * estimator that takes dequantize, with dequantize=auto, and the lattice estimator when every column is on a
 * lattice. Null for data with no ties, or ties off any lattice (pasted rows), which the profile's notes cover.
 */
function recordedAdvice(
  sample: Sample,
  profile: DataProfile,
  estimators: string[],
): { scenario: (lookalike: string) => string; estimators: string[]; note: string } | null {
  const tied = profile.repeats.columns.map((c) => c.tiedValues > 0);
  if (!tied.some(Boolean)) return null;
  const steps = detectSteps(sample);
  if (steps.some((s, j) => tied[j] && s.step === null)) return null;
  const configured = estimators.map((spec) => parseEstimatorSpec(spec));
  const added = [
    ...configured.flatMap((c) => {
      const variant = dequantizedVariant(c);
      return variant && !estimators.includes(variant.spec) ? [variant.spec] : [];
    }),
    ...(steps.every((s) => s.step !== null) && !estimators.some((e) => e.startsWith('lattice')) ? [parseEstimatorSpec('lattice').spec] : []),
  ];
  const stepText = steps.map((s) => (s.step === null ? 0 : Number(s.step.toPrecision(12)))).join('/');
  const where = steps
    .map((s, j) => (s.step === null ? null : `${profile.columns[j].name}: ${s.detail}`))
    .filter(Boolean)
    .join('; ');
  return {
    scenario: (lookalike) => `recorded[step=${stepText};${lookalike}]`,
    estimators: [...estimators, ...added],
    note: `your data are recorded data (${where}; ${profile.repeats.repeatedRows} of ${profile.n} rows repeat an earlier row). The look-alike was recorded at the same steps, its truth the continuous look-alike's, and the benchmark compared ${added.length} estimators built for such data (dequantize=auto: jitter within the step; lattice: discrete entropy plus the log of the step) with the others.`,
  };
}

/** The estimator specs to compare, after refusing a file too small for advice or a dimension no estimator supports. */
function adviceEstimators(fileSample: Sample, specs: string[] | undefined, commands: readonly CommandDeclaration[] = []): string[] {
  const { n: fileRows, dim } = fileSample;
  if (fileRows < 20) throw new UsageError(`the sample has ${fileRows} rows; advice needs at least 20 (a benchmark at smaller n says little)`);
  const degenerate = tooFewPoints(fileRows, dim);
  if (degenerate) throw new EstimateError('too-few-points', `no estimator is usable on this file: ${degenerate}`);
  const listed = specs?.map((s) => parseEstimatorSpec(s).spec) ?? applicableEstimators(dim);
  const estimators = [...listed, ...commands.filter((c) => !listed.some((spec) => spec.split(':')[0] === c.id)).map((c) => parseEstimatorSpec(c.id).spec)];
  if (!estimators.length) throw new UsageError(`no entropy estimator supports d = ${dim}`);
  return estimators;
}

/** Seconds per stage, each lap the time since the previous one; the seconds spent reading the file count as 'read'. */
function stageTimer(elapsed: () => number, elapsedBeforeSeconds: number | undefined): { timings: Record<string, number>; lap: (name: string) => void } {
  const timings: Record<string, number> = {};
  let mark = 0;
  if (elapsedBeforeSeconds) {
    timings.read = elapsedBeforeSeconds;
    mark = elapsedBeforeSeconds;
  }
  const lap = (name: string) => {
    timings[name] = elapsed() - mark;
    mark = elapsed();
  };
  return { timings, lap };
}

/** The file's rows, or a seeded subsample of as many as the budget can benchmark; refuses fewer than FEWEST_ANALYSIS_ROWS. */
function analysedSample(ctx: AdviceContext, fileSample: Sample, estimators: string[]): { sample: Sample; subsample: AdviceSubsample | null } {
  const { budget, workers, minimumReplicates, seed, options } = ctx;
  const { n: fileRows, dim } = fileSample;
  const rows = analysisRows(
    fileRows,
    dim,
    estimators,
    budget,
    workers,
    minimumReplicates,
    ctx.level === null ? 0 : (options.resamples ?? options.minResamples ?? 100),
    options.replicates === undefined ? ANALYSIS_SHARE : BENCHMARK_SHARE,
  );
  if (rows >= fileRows) return { sample: fileSample, subsample: null };
  const perReplicate = predictedReplicateSeconds(
    estimators.map((spec) => parseEstimatorSpec(spec)),
    fileRows,
    dim,
  );
  const cost = `one replicate of the ${estimators.length} estimators at n = ${fileRows} would take about ${describeSeconds(perReplicate)} by the cost model, and the benchmark needs ${minimumReplicates}; within the ${budget} s budget on ${workers} worker${workers === 1 ? '' : 's'}`;
  if (rows < FEWEST_ANALYSIS_ROWS) {
    // Within the rows that matter here the benchmark's cost grows at most like n² (a d ≥ 2 kernel sum).
    const needed = Math.ceil(budget * Math.pow(FEWEST_ANALYSIS_ROWS / Math.max(rows, 1), 2));
    const remedy =
      needed <= MAX_BUDGET_SECONDS ? `give --budget ${needed} or more` : `no --budget up to ${MAX_BUDGET_SECONDS} s covers it; select fewer columns`;
    throw new UsageError(`--budget ${budget} is too small for this file: ${cost}, not even ${FEWEST_ANALYSIS_ROWS} rows fit; ${remedy}`);
  }
  const resamples = ctx.level === null ? 0 : (options.resamples ?? options.minResamples ?? 100);
  const reason = resamples > 0 ? `${cost}, they and the bootstrap's ${resamples} resamples fit at n = ${rows}` : `${cost}, they fit at n = ${rows}`;
  return { sample: seededRowSubsample(fileSample, rows, `hhat-advise\n${seed}`), subsample: { rows, of: fileRows, seed, reason } };
}

/** The targeted benchmark on look-alike draws at the analysed n, within the benchmark's share of what is left of the budget. */
async function benchmarkLookalike(ctx: AdviceContext, scenario: string, estimators: string[], n: number, dim: number): Promise<TargetedBenchmark> {
  const { budget, level, elapsed } = ctx;
  ctx.stage('benchmarking estimators on look-alike draws');
  return runTargeted({
    scenarios: [scenario],
    estimators,
    n,
    budgetSeconds: Math.max(0, budget - elapsed()) * (level === null ? 0.9 : BENCHMARK_SHARE),
    seed: ctx.seed,
    workers: ctx.workers,
    isolation: ctx.options.isolation,
    minReplicates: ctx.minimumReplicates,
    maxReplicates: ctx.options.replicates,
    budget: { total: budget, spent: elapsed() },
    dim,
    commands: ctx.options.commands,
  });
}

/** Every benchmarked estimator on the analysed sample; a failure or a non-finite value is kept as null with its reason. */
function estimateSample(summaries: EstimatorSummary[], sample: Sample): UserEstimate[] {
  return summaries.map((s) => {
    try {
      const value = runEstimator(parseEstimatorSpec(s.estimator), sample).value;
      if (!Number.isFinite(value)) return { estimator: s.estimator, label: s.label, value: null, error: `the estimate is ${value}` };
      return { estimator: s.estimator, label: s.label, value };
    } catch (error) {
      return { estimator: s.estimator, label: s.label, value: null, error: error instanceof Error ? error.message : String(error) };
    }
  });
}

/** Notes on the analysis: what the look-alike cannot imitate, the subsample, and what the budget cut from the benchmark. */
function analysisWarnings(
  ctx: AdviceContext,
  profile: DataProfile,
  lookalike: Lookalike,
  bench: TargetedBenchmark,
  subsample: AdviceSubsample | null,
  n: number,
  recorded: boolean,
): string[] {
  const { budget, minimumReplicates } = ctx;
  const command = `hhat advise --n ${n} --dim ${profile.dim}`;
  const warnings = recorded ? [] : profileWarnings(profile, lookalike, command);
  if (subsample) {
    warnings.unshift(
      `your file has ${subsample.of} rows; the advice above works on a seeded uniform subsample of ${subsample.rows} of them (seed ${ctx.seed}): ${subsample.reason}. The profile, look-alike, benchmark, estimates, interval and bias correction are all at n = ${subsample.rows}; raise --budget (or --workers) for a larger subsample.`,
    );
  }
  for (const cut of bench.cuts) warnings.push(`to fit the ${budget} s budget, left out ${cut}. Raise --budget to include them.`);
  // A first round short of the minimum that a second round made up for has cut nothing worth a note.
  if (bench.minimumForced && bench.replicates < minimumReplicates) {
    warnings.push(
      `the time budget covered fewer look-alike replicates than advice wants; ${bench.replicates} ran (${bench.wallSeconds.toFixed(1)} s), so the Monte-Carlo errors are large. Raise --budget for smaller ones.`,
    );
  }
  if (lookalike.fittedPoints < n)
    warnings.push(
      `the look-alike was fitted on a random ${lookalike.fittedPoints} of the ${n} rows (EM time grows with n); the benchmark still runs at n = ${n}.`,
    );
  return warnings;
}

/** The recommended estimator, or the next by look-alike RMSE that works on these data; undefined when nothing is usable. */
function usableEstimator(recommended: EstimatorSummary | null, summaries: EstimatorSummary[], userEstimates: UserEstimate[]): EstimatorSummary | undefined {
  const order = recommended ? [recommended, ...summaries.filter((s) => s !== recommended)] : [];
  return order.find((s) => userEstimates.find((u) => u.estimator === s.estimator)?.value !== null && s.failedScenarios === 0);
}

/** The note for a chosen estimator that ran on fewer than all of the file's rows; null when it ran on all (or has no cost model). */
function allRowsNote(allRows: AllRowsEstimate, chosen: ConfiguredEstimator, fileSample: Sample): string | null {
  const cost = predictedSeconds(chosen, fileSample.n, fileSample.dim);
  if (allRows.rows >= fileSample.n || cost === null) return null;
  return `${allRows.label} on all ${fileSample.n} rows would take about ${describeSeconds(cost)} by its cost model; within ${ALL_ROWS_SHARE * 100}% of the budget it ran on a seeded uniform subsample of ${allRows.rows} rows. Raise --budget for more.`;
}

/**
 * Resamples a percentile interval at `level` needs for at least 5 of them beyond each end (common practice for
 * percentile intervals, which read their ends off the order statistics): 200 at 95%, 1000 at 99%, 10 000 at 99.9%.
 */
export function resamplesForLevel(level: number): number {
  return Math.ceil(10 / (1 - level) - 1e-9);
}

function formatLevel(level: number): string {
  return `${Number((level * 100).toPrecision(6))}%`;
}

/** The bootstrap interval within the rest of the budget; null, with a note, when even its minimum resamples would overrun it. */
function bootstrapInterval(
  ctx: AdviceContext,
  level: number,
  sample: Sample,
  chosen: ConfiguredEstimator,
  label: string,
  value: number,
  warnings: string[],
): BootstrapInterval | null {
  const { options, budget, elapsed } = ctx;
  const { n, dim } = sample;
  const minResamples = options.resamples ?? options.minResamples ?? 100;
  const bootstrapCost = predictedSeconds(chosen, n, dim);
  const remaining = Math.max(0, budget - elapsed());
  if (options.resamples === undefined && bootstrapCost !== null && minResamples * bootstrapCost > remaining * (1 + BOOTSTRAP_SLACK)) {
    const needed = Math.ceil(elapsed() + minResamples * bootstrapCost * 1.3);
    warnings.push(
      `no interval: ${minResamples} bootstrap resamples of ${label} at n = ${n} would take about ${describeSeconds(minResamples * bootstrapCost)}, and ${describeSeconds(remaining)} of the budget is left; give --budget ${needed} or more for one.`,
    );
    return null;
  }
  ctx.stage('bootstrapping the interval');
  // As many resamples as the rest of the budget allows, measured as they run: 100 at least, 2000 at most.
  const remainingMs = Math.max(0, (budget - elapsed()) * 1000);
  const interval = smoothedBootstrap(sample, chosen, value, {
    resamples: options.resamples ?? Math.max(minResamples, MAX_RESAMPLES),
    level,
    seed: `${ctx.seed}`,
    minResamples,
    deadlineMs: options.resamples === undefined ? remainingMs : undefined,
  });
  ctx.lap('bootstrap');
  if (interval.failures > 0.05 * (interval.resamples + interval.failures)) {
    warnings.push(`${interval.failures} of ${interval.resamples + interval.failures} bootstrap resamples failed; the interval rests on the rest.`);
  }
  const needed = resamplesForLevel(level);
  if (interval.resamples < needed) {
    const cause = options.resamples === undefined ? 'the budget allowed' : '--resamples gave';
    const remedy = options.resamples === undefined ? 'raise --budget' : `give --resamples ${needed} or more`;
    warnings.push(
      `${cause} ${interval.resamples} bootstrap resamples, fewer than the ${needed} that put 5 beyond each end of a ${formatLevel(level)} interval: its ends are rough; ${remedy}, or ask for a lower --interval.`,
    );
  }
  return interval;
}

/** The usable estimator's value, interval and bias correction, and with a subsample its value on more rows; null when none is usable. */
function chosenEstimate(
  ctx: AdviceContext,
  fileSample: Sample,
  sample: Sample,
  subsample: AdviceSubsample | null,
  recommended: EstimatorSummary | null,
  summaries: EstimatorSummary[],
  userEstimates: UserEstimate[],
  warnings: string[],
  truthSe: number,
): { estimate: FileAdvice['estimate']; allRows: AllRowsEstimate | null } {
  const usable = usableEstimator(recommended, summaries, userEstimates);
  if (!usable) {
    if (recommended) warnings.push('no estimator that works on the look-alike works on your data; see the errors beside each estimate.');
    return { estimate: null, allRows: null };
  }
  if (recommended && usable !== recommended) {
    const failed = userEstimates.find((u) => u.estimator === recommended.estimator);
    warnings.push(
      `${recommended.label} fails on your data (${failed?.error ?? 'no value'}); the estimate below uses ${usable.label}, next by look-alike RMSE.`,
    );
  }
  const value = userEstimates.find((u) => u.estimator === usable.estimator)!.value!;
  const bias = usable.scenarios[0].bias;
  const chosen = parseEstimatorSpec(usable.estimator);
  let allRows: AllRowsEstimate | null = null;
  if (subsample) {
    allRows = allRowsEstimate(fileSample, chosen, usable.label, ctx.budget, `hhat-advise-all\n${ctx.seed}`, ctx.stage);
    ctx.lap('all rows');
    const note = allRowsNote(allRows, chosen, fileSample);
    if (note) warnings.push(note);
  }
  const interval = ctx.level === null ? null : bootstrapInterval(ctx, ctx.level, sample, chosen, usable.label, value, warnings);
  const corrected = value - bias.value;
  let correctedInterval: { lower: number; upper: number } | null = null;
  if (interval) {
    const z = normalQuantile((1 + interval.level) / 2);
    const spread = z * Math.hypot(bias.se, truthSe);
    correctedInterval = { lower: corrected - Math.hypot(value - interval.lower, spread), upper: corrected + Math.hypot(interval.upper - value, spread) };
  }
  const estimate = { estimator: usable.estimator, label: usable.label, value, interval, bias, corrected, correctedInterval, truthSe };
  return { estimate, allRows };
}

/** The advice on a file's sample, each step within its share of the budget (see the file comment). */
export async function adviseFile(fileSample: Sample, options: FileAdviceOptions = {}): Promise<FileAdvice> {
  const started = performance.now() - 1000 * (options.elapsedBeforeSeconds ?? 0);
  const elapsed = () => (performance.now() - started) / 1000;
  const budget = options.budgetSeconds ?? DEFAULT_BUDGET_SECONDS;
  const level = options.level === undefined ? 0.95 : options.level;
  const seed = options.seed ?? DEFAULT_SEED;
  const { dim } = fileSample;
  const fileRows = fileSample.n;
  const estimators = adviceEstimators(fileSample, options.estimators, options.commands);
  const { timings, lap } = stageTimer(elapsed, options.elapsedBeforeSeconds);
  const ctx: AdviceContext = {
    options,
    budget,
    level,
    seed,
    workers: Math.max(1, options.workers ?? defaultWorkers()),
    minimumReplicates: options.replicates ?? options.minReplicates ?? 20,
    stage: options.onStage ?? (() => {}),
    elapsed,
    lap,
  };

  // A file larger than the budget can benchmark is analysed on a seeded uniform subsample (see the file comment).
  const { sample, subsample } = analysedSample(ctx, fileSample, estimators);
  const { n } = sample;
  if (subsample) lap('subsample');
  ctx.stage('profiling the sample');
  const profile = profileSample(sample, options.columnNames ?? []);
  lap('profile');
  ctx.stage('fitting the look-alike (EM, K chosen by BIC)');
  const lookalike = buildLookalike(sample, { seed: `${seed}`, maxComponents: options.maxComponents, columnNames: profile.columns.map((c) => c.name) });
  lap('lookalike');

  // Recorded data: the look-alike recorded at the data's own steps, and the estimators built for such data join.
  const recording = recordedAdvice(sample, profile, estimators);
  const bench = await benchmarkLookalike(ctx, recording ? recording.scenario(lookalike.spec) : lookalike.spec, recording?.estimators ?? estimators, n, dim);
  const summaries = summarise(bench.run);
  const recommendation = recommend(bench.run, summaries, 'look-alike');
  lap('benchmark');

  ctx.stage('estimating your data');
  const userEstimates = estimateSample(summaries, sample);
  lap('estimates');
  const warnings = analysisWarnings(ctx, profile, lookalike, bench, subsample, n, recording !== null);
  if (recording) warnings.unshift(recording.note);
  // The bias is measured against the look-alike's truth (recorded[...] keeps its base's), so that truth's
  // Monte-Carlo error is part of it; a quadrature's error estimate is not a standard error, and is far smaller.
  const truthSe = lookalike.truth.method === 'monte-carlo' ? lookalike.truth.error : 0;
  const { estimate, allRows } = chosenEstimate(ctx, fileSample, sample, subsample, recommendation.recommended, summaries, userEstimates, warnings, truthSe);
  return {
    n,
    dim,
    fileRows,
    subsample,
    allRows,
    budgetSeconds: budget,
    profile,
    lookalike,
    benchmark: { replicates: bench.replicates, seconds: bench.wallSeconds, minimumForced: bench.minimumForced, workers: bench.workers, estimators: summaries },
    recommendation,
    userEstimates,
    estimate,
    warnings,
    seconds: elapsed(),
    timings,
  };
}
