/**
 * From a targeted run to advice: each estimator's expected error (the mean of its RMSE over the scenarios,
 * with the Monte-Carlo error of that mean and the spread across scenarios), the recommended estimator, and
 * one plain sentence saying why it comes first.
 *
 *   const summaries = summarise(run);          // sorted by mean RMSE, unusable ones last
 *   const choice = recommend(run, summaries);  // { recommended, runnerUp, reason }
 *
 * The recommended estimator is the first by mean RMSE among those failing on at most 1% of replicates; a
 * rank shared under the run's paired test (|z| < 2 on squared errors) counts as best on that scenario.
 */
import type { Estimate } from '../score.js';
import { pairedSquaredErrorDifference } from '../score.js';
import type { Cell, RunFile, ScenarioInfo } from '../results.js';
import type { Verdict } from '../robustness.js';
import { estimatorLabel } from '../tables.js';

export interface ScenarioScore {
  scenario: string;
  tails: string;
  support: string;
  bias: Estimate;
  sd: number;
  rmse: Estimate;
  failures: number;
  replicates: number;
  /** Rank among the estimators on this scenario (shared ranks when the paired test cannot separate). */
  rank: number | null;
  meanMs: number;
}

export interface RobustnessFlag {
  verdict: Verdict;
  /** rescale: unit drift in nats; quantize: the largest safe step in SDs; contaminate: nats per 1% of outliers. */
  value: number | null;
  detail: string;
}

export interface EstimatorSummary {
  /** Canonical spec. */
  estimator: string;
  /** Short label: the id, plus settings that differ from the defaults. */
  label: string;
  scenarios: ScenarioScore[];
  /** Mean of the per-scenario RMSEs, SE = √(Σ SE²)/S. */
  meanRmse: Estimate;
  /** Smallest and largest per-scenario RMSE. */
  rmseRange: [number, number];
  /** Mean of the per-scenario biases, SE likewise. */
  meanBias: Estimate;
  failures: number;
  replicates: number;
  failureRate: number;
  msPerEstimate: number;
  /** Scenarios where it has rank 1 (shared ranks included). */
  wins: number;
  robustness: Record<string, RobustnessFlag> | null;
}

export interface Recommendation {
  recommended: EstimatorSummary;
  runnerUp: EstimatorSummary | null;
  /** Scenarios where the paired test cannot separate the runner-up from the recommended estimator. */
  runnerUpTiedOn: string[];
  reason: string;
}

/** Failure rate above which an estimator is not recommended. */
export const MAX_RECOMMENDED_FAILURE_RATE = 0.01;
export const ROBUSTNESS_FLAGS = ['rescale', 'quantize', 'contaminate'] as const;

function meanOf(values: Estimate[]): Estimate {
  if (!values.length || values.some((v) => !Number.isFinite(v.value))) return { value: NaN, se: NaN };
  const value = values.reduce((s, v) => s + v.value, 0) / values.length;
  const se = Math.sqrt(values.reduce((s, v) => s + (Number.isFinite(v.se) ? v.se * v.se : 0), 0)) / values.length;
  return { value, se };
}

function mainCells(run: RunFile): Cell[] {
  return run.cells.filter((c) => c.role === 'main');
}

export function summarise(run: RunFile): EstimatorSummary[] {
  const info = new Map(run.scenarios.map((s) => [s.id, s]));
  const ranks = new Map<string, number>();
  for (const ranking of run.rankings) {
    if (ranking.perturbation !== null) continue;
    for (const entry of ranking.entries) ranks.set(`${ranking.scenario}|${entry.estimator}`, entry.rank);
  }
  const byEstimator = new Map<string, Cell[]>();
  for (const cell of mainCells(run)) {
    if (!byEstimator.has(cell.estimator)) byEstimator.set(cell.estimator, []);
    byEstimator.get(cell.estimator)!.push(cell);
  }
  const summaries: EstimatorSummary[] = [...byEstimator.entries()].map(([estimator, cells]) => {
    const scenarios: ScenarioScore[] = cells.map((c) => {
      const s = info.get(c.scenario)!;
      return {
        scenario: c.scenario,
        tails: s.tails,
        support: s.support,
        bias: c.scores.bias,
        sd: c.scores.sd.value,
        rmse: c.scores.rmse,
        failures: c.scores.failures,
        replicates: c.scores.replicates,
        rank: ranks.get(`${c.scenario}|${estimator}`) ?? null,
        meanMs: c.timing.meanMs,
      };
    });
    const rmses = scenarios.map((s) => s.rmse.value).filter(Number.isFinite);
    const failures = scenarios.reduce((s, c) => s + c.failures, 0);
    const replicates = scenarios.reduce((s, c) => s + c.replicates, 0);
    const row = run.robustness?.table.find((r) => r.estimator === estimator);
    return {
      estimator,
      label: estimatorLabel(estimator),
      scenarios,
      meanRmse: meanOf(scenarios.map((s) => s.rmse)),
      rmseRange: rmses.length ? [Math.min(...rmses), Math.max(...rmses)] : [NaN, NaN],
      meanBias: meanOf(scenarios.map((s) => s.bias)),
      failures,
      replicates,
      failureRate: replicates ? failures / replicates : 0,
      msPerEstimate: scenarios.reduce((s, c) => s + c.meanMs, 0) / Math.max(1, scenarios.length),
      wins: scenarios.filter((s) => s.rank === 1).length,
      robustness: row ? Object.fromEntries(ROBUSTNESS_FLAGS.map((k) => [k, { verdict: row.columns[k]?.verdict ?? 'n/a', value: row.columns[k]?.value ?? null, detail: row.columns[k]?.detail ?? '' }])) : null,
    };
  });
  return summaries.sort((a, b) => {
    const x = Number.isFinite(a.meanRmse.value) ? a.meanRmse.value : Infinity;
    const y = Number.isFinite(b.meanRmse.value) ? b.meanRmse.value : Infinity;
    return x - y || a.estimator.localeCompare(b.estimator);
  });
}

/** Scenarios where the paired test on squared errors cannot separate a and b (|z| < 2). */
export function tiedScenarios(run: RunFile, a: string, b: string): string[] {
  const truth = new Map(run.scenarios.map((s) => [s.id, s.truth]));
  const cells = mainCells(run);
  const out: string[] = [];
  for (const scenario of new Set(cells.map((c) => c.scenario))) {
    const x = cells.find((c) => c.scenario === scenario && c.estimator === a);
    const y = cells.find((c) => c.scenario === scenario && c.estimator === b);
    if (!x || !y) continue;
    const d = pairedSquaredErrorDifference(
      x.estimates.map((v) => v ?? NaN),
      y.estimates.map((v) => v ?? NaN),
      truth.get(scenario)!,
    );
    if (!(Math.abs(d.value) > 2 * d.se)) out.push(scenario);
  }
  return out;
}

function plural(count: number, word: string): string {
  return `${count} ${word}${count === 1 ? '' : 's'}`;
}

function formatNats(x: number): string {
  if (!Number.isFinite(x)) return '–';
  return Math.abs(x) >= 0.01 ? x.toFixed(3) : x.toPrecision(2);
}

/** "the light-tailed ones", "every one", or "2 of 5" for a subset of the scenarios. */
function describeSubset(subset: string[], all: ScenarioInfo[]): string {
  if (subset.length === all.length) return all.length === 1 ? 'it' : 'every one';
  if (!subset.length) return 'none';
  const chosen = all.filter((s) => subset.includes(s.id));
  const rest = all.filter((s) => !subset.includes(s.id));
  for (const key of ['tails', 'support'] as const) {
    const values = new Set(chosen.map((s) => s[key]));
    if (values.size === 1) {
      const value = [...values][0];
      if (!rest.some((s) => s[key] === value)) {
        const phrase = key === 'tails' ? `${value}-tailed` : value === 'half' ? 'half-bounded' : value;
        return `the ${phrase} one${chosen.length === 1 ? '' : 's'}`;
      }
    }
  }
  return `${subset.length} of ${all.length}`;
}

/**
 * `subject` names what the scores were measured on, for the sentence: 'look-alike' (file advice, one
 * scenario) or 'matching scenarios' (setting advice).
 */
export function recommend(run: RunFile, summaries: EstimatorSummary[], subject: 'look-alike' | 'matching scenarios' = 'matching scenarios'): Recommendation {
  if (!summaries.length) throw new Error('recommend: no estimator ran');
  const eligible = summaries.filter((s) => Number.isFinite(s.meanRmse.value) && s.failureRate <= MAX_RECOMMENDED_FAILURE_RATE);
  const recommended = eligible[0] ?? summaries[0];
  const runnerUp = summaries.find((s) => s !== recommended && Number.isFinite(s.meanRmse.value)) ?? null;
  const scenarios = run.scenarios;
  const count = scenarios.length;
  const failurePart =
    recommended.failures === 0 ? 'never fails' : `fails on ${recommended.failures} of ${recommended.replicates} draws (${(100 * recommended.failureRate).toFixed(1)}%)`;
  const lead =
    count === 1
      ? `${recommended.label} has the lowest RMSE on the ${subject === 'look-alike' ? 'look-alike' : 'matching scenario'} (${formatNats(recommended.meanRmse.value)} ± ${formatNats(recommended.meanRmse.se)} nats) and ${failurePart}`
      : `${recommended.label} has the lowest mean RMSE (${formatNats(recommended.meanRmse.value)} ± ${formatNats(recommended.meanRmse.se)} nats), is best on ${recommended.wins} of ${plural(count, 'matching scenario')} and ${failurePart}`;
  let tail = '';
  let runnerUpTiedOn: string[] = [];
  if (runnerUp) {
    runnerUpTiedOn = tiedScenarios(run, recommended.estimator, runnerUp.estimator);
    if (count === 1) {
      tail = runnerUpTiedOn.length
        ? `; the runner-up ${runnerUp.label} (${formatNats(runnerUp.meanRmse.value)}) is within noise of it`
        : `; the runner-up ${runnerUp.label} (${formatNats(runnerUp.meanRmse.value)}) is clearly worse on the same draws`;
    } else {
      tail = runnerUpTiedOn.length
        ? `; the runner-up ${runnerUp.label} is within noise on ${describeSubset(runnerUpTiedOn, scenarios)}`
        : `; the paired test separates it from the runner-up ${runnerUp.label} on every scenario`;
    }
  }
  const skipped = eligible[0] && eligible[0] !== summaries[0] ? ` (${summaries[0].label} has a lower RMSE but fails on ${(100 * summaries[0].failureRate).toFixed(1)}% of draws)` : '';
  return { recommended, runnerUp, runnerUpTiedOn, reason: `${lead}${tail}.${skipped}` };
}
