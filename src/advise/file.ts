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
 */
import type { Sample } from '../contracts.js';
import { EstimateError, UsageError } from '../errors.js';
import { tooFewPoints } from './setting.js';
import { parseEstimatorSpec, runEstimator } from '../../estimators/index.js';
import type { Estimate } from '../score.js';
import { ADVICE_SEED, applicableEstimators, DEFAULT_BUDGET_SECONDS, runTargeted } from './benchmark.js';
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
  /** Estimator specs to compare (default: every entropy estimator that supports the dimension, default settings). */
  estimators?: string[];
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
}

export interface UserEstimate {
  estimator: string;
  label: string;
  value: number | null;
  error?: string;
}

export interface FileAdvice {
  n: number;
  dim: number;
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
    bias: Estimate;
    /** value − bias */
    corrected: number;
    correctedInterval: { lower: number; upper: number } | null;
  } | null;
  warnings: string[];
  seconds: number;
  /** Seconds per stage: profile, look-alike (EM and its entropy), benchmark, estimates, bootstrap. */
  timings: Record<string, number>;
}

const BENCHMARK_SHARE = 0.6;
const MAX_RESAMPLES = 2000;

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
    const where = edged.map((c) => `${c.name} (${[c.edges!.lower.edge ? 'lower' : '', c.edges!.upper.edge ? 'upper' : ''].filter(Boolean).join(' and ')} end)`).join(', ');
    warnings.push(
      `${where} seem${edged.length === 1 ? 's' : ''} to stop at a hard edge: the outermost gaps are no wider than the ones inside them. The look-alike spills past edges, so boundary bias (largest for nearest-neighbour and kernel estimators) is understated; compare with ${command} --support ${profile.support === 'bounded' ? 'bounded' : 'half'}.`,
    );
  }
  return warnings;
}

export async function adviseFile(sample: Sample, options: FileAdviceOptions = {}): Promise<FileAdvice> {
  const started = performance.now();
  const elapsed = () => (performance.now() - started) / 1000;
  const budget = options.budgetSeconds ?? DEFAULT_BUDGET_SECONDS;
  const level = options.level === undefined ? 0.95 : options.level;
  const seed = options.seed ?? ADVICE_SEED;
  const { n, dim } = sample;
  if (n < 20) throw new UsageError(`the sample has ${n} rows; advice needs at least 20 (a benchmark at smaller n says little)`);
  const degenerate = tooFewPoints(n, dim);
  if (degenerate) throw new EstimateError('too-few-points', `no estimator is usable on this file: ${degenerate}`);
  const names = options.columnNames ?? [];
  const stage = options.onStage ?? (() => {});

  const timings: Record<string, number> = {};
  let mark = 0;
  const lap = (name: string) => {
    timings[name] = elapsed() - mark;
    mark = elapsed();
  };
  stage('profiling the sample');
  const profile = profileSample(sample, names);
  lap('profile');
  stage('fitting the look-alike (EM, K chosen by BIC)');
  const lookalike = buildLookalike(sample, { seed: `${seed}`, maxComponents: options.maxComponents, columnNames: profile.columns.map((c) => c.name) });
  lap('lookalike');
  const estimators = options.estimators?.map((s) => parseEstimatorSpec(s).spec) ?? applicableEstimators(dim);
  if (!estimators.length) throw new UsageError(`no entropy estimator supports d = ${dim}`);

  stage('benchmarking estimators on look-alike draws');
  const bench = await runTargeted({
    scenarios: [lookalike.spec],
    estimators,
    n,
    budgetSeconds: Math.max(0, budget - elapsed()) * (level === null ? 0.9 : BENCHMARK_SHARE),
    seed,
    workers: options.workers,
    minReplicates: options.replicates ?? options.minReplicates ?? 20,
    maxReplicates: options.replicates,
    budget: { total: budget, spent: elapsed() },
    dim,
  });
  const summaries = summarise(bench.run);
  const recommendation = recommend(bench.run, summaries, 'look-alike');
  lap('benchmark');

  stage('estimating your data');
  const userEstimates: UserEstimate[] = summaries.map((s) => {
    try {
      const value = runEstimator(parseEstimatorSpec(s.estimator), sample).value;
      if (!Number.isFinite(value)) return { estimator: s.estimator, label: s.label, value: null, error: `the estimate is ${value}` };
      return { estimator: s.estimator, label: s.label, value };
    } catch (error) {
      return { estimator: s.estimator, label: s.label, value: null, error: error instanceof Error ? error.message : String(error) };
    }
  });
  lap('estimates');
  const command = `hhat advise --n ${n} --dim ${dim}`;
  const warnings = profileWarnings(profile, lookalike, command);
  for (const cut of bench.cuts) warnings.push(`to fit the ${budget} s budget, left out ${cut}. Raise --budget to include them.`);
  if (bench.minimumForced) {
    warnings.push(`the time budget covered fewer look-alike replicates than advice wants; ${bench.replicates} ran (${bench.wallSeconds.toFixed(1)} s), so the Monte-Carlo errors are large. Raise --budget for smaller ones.`);
  }
  if (lookalike.fittedPoints < n) warnings.push(`the look-alike was fitted on a random ${lookalike.fittedPoints} of the ${n} rows (EM time grows with n); the benchmark still runs at n = ${n}.`);

  // The recommended estimator, or the next by look-alike RMSE that works on these data; none when nothing is usable.
  const recommended = recommendation.recommended;
  const order = recommended ? [recommended, ...summaries.filter((s) => s !== recommended)] : [];
  const usable = order.find((s) => userEstimates.find((u) => u.estimator === s.estimator)?.value !== null && s.failedScenarios === 0);
  let estimate: FileAdvice['estimate'] = null;
  if (!usable) {
    if (recommended) warnings.push('no estimator that works on the look-alike works on your data; see the errors beside each estimate.');
  } else {
    if (recommended && usable !== recommended) {
      const failed = userEstimates.find((u) => u.estimator === recommended.estimator);
      warnings.push(`${recommended.label} fails on your data (${failed?.error ?? 'no value'}); the estimate below uses ${usable.label}, next by look-alike RMSE.`);
    }
    const value = userEstimates.find((u) => u.estimator === usable.estimator)!.value!;
    const bias = usable.scenarios[0].bias;
    let interval: BootstrapInterval | null = null;
    if (level !== null) {
      stage('bootstrapping the interval');
      // As many resamples as the rest of the budget allows, measured as they run: 100 at least, 2000 at most.
      const remainingMs = Math.max(0, (budget - elapsed()) * 1000);
      const minResamples = options.resamples ?? options.minResamples ?? 100;
      interval = smoothedBootstrap(sample, parseEstimatorSpec(usable.estimator), value, {
        resamples: options.resamples ?? Math.max(minResamples, MAX_RESAMPLES),
        level,
        seed: `${seed}`,
        minResamples,
        deadlineMs: options.resamples === undefined ? remainingMs : undefined,
      });
      lap('bootstrap');
      if (interval.failures > 0.05 * (interval.resamples + interval.failures)) {
        warnings.push(`${interval.failures} of ${interval.resamples + interval.failures} bootstrap resamples failed; the interval rests on the rest.`);
      }
    }
    estimate = {
      estimator: usable.estimator,
      label: usable.label,
      value,
      interval,
      bias,
      corrected: value - bias.value,
      correctedInterval: interval ? { lower: interval.lower - bias.value, upper: interval.upper - bias.value } : null,
    };
  }
  return {
    n,
    dim,
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
