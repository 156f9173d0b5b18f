/**
 * From a targeted run to advice: each estimator's expected error (the mean of its RMSE over the scenarios,
 * with the Monte-Carlo error of that mean and the spread across scenarios), the recommended estimator, and
 * one plain sentence saying why it comes first.
 *
 *   const summaries = summarise(run);          // sorted by mean RMSE, unusable ones last
 *   const choice = recommend(run, summaries);  // { recommended, runnerUp, reason }
 *
 * The recommended estimator is the first by mean RMSE among those that did not fail any scenario (the run's
 * failure rule: README, "Ranks and the best set"); "in best set" counts the scenarios where it is in the best set
 * (the model confidence set at the run's level).
 */
import type { ValueWithSe } from '../score.js';
import type { Cell, RankEntry, RunFile, ScenarioInfo } from '../results.js';
import type { Verdict } from '../robustness.js';
import { estimatorLabel } from '../../../estimators/index.js';
import { squaredDeviations } from '../../math/moments.js';

export interface ScenarioScore {
  scenario: string;
  tails: string;
  support: string;
  bias: ValueWithSe;
  sd: number;
  rmse: ValueWithSe;
  failures: number;
  replicates: number;
  /** Rank among the estimators on this scenario (1 for every member of the best set). */
  rank: number | null;
  /** In the scenario's best set. */
  best: boolean;
  /** Failed the scenario under the run's failure rule (ranked last). */
  failed: boolean;
  meanMs: number;
}

export interface RobustnessFlag {
  verdict: Verdict;
  /** rescale: unit drift in nats; quantize: the largest safe step in SDs; contaminate: nats per 1% of outliers. */
  value: number | null;
  detail: string;
  /** rescale and contaminate: the value in the estimator's SDs, the unit their verdicts are judged in. */
  sd?: number;
}

export interface EstimatorSummary {
  /** Canonical spec. */
  estimator: string;
  /** Short label: the id, plus settings that differ from the defaults. */
  label: string;
  scenarios: ScenarioScore[];
  /** Mean of the per-scenario RMSEs, SE = √(Σ SE²)/S. */
  meanRmse: ValueWithSe;
  /** Smallest and largest per-scenario RMSE. */
  rmseRange: [number, number];
  /** Mean of the per-scenario biases, SE likewise. */
  meanBias: ValueWithSe;
  failures: number;
  replicates: number;
  failureRate: number;
  msPerEstimate: number;
  /** Scenarios where it is in the best set. */
  wins: number;
  /** Scenarios it failed under the run's failure rule. */
  failedScenarios: number;
  robustness: Record<string, RobustnessFlag> | null;
}

export interface Recommendation {
  /** Null when no estimator is usable here; `reason` says why. */
  recommended: EstimatorSummary | null;
  runnerUp: EstimatorSummary | null;
  /** Scenarios where the runner-up and the recommended estimator are both in the best set. */
  runnerUpTiedOn: string[];
  reason: string;
}

export const ROBUSTNESS_FLAGS = ['rescale', 'quantize', 'contaminate'] as const;

function meanOf(values: ValueWithSe[]): ValueWithSe {
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
  const ranks = new Map<string, RankEntry>();
  for (const ranking of run.rankings) {
    if (ranking.perturbation !== null) continue;
    for (const entry of ranking.entries) ranks.set(`${ranking.scenario}|${entry.estimator}`, entry);
  }
  const byEstimator = new Map<string, Cell[]>();
  for (const cell of mainCells(run)) {
    if (!byEstimator.has(cell.estimator)) byEstimator.set(cell.estimator, []);
    byEstimator.get(cell.estimator)!.push(cell);
  }
  const summaries: EstimatorSummary[] = [...byEstimator.entries()].map(([estimator, cells]) => {
    const entryOf = (c: Cell) => ranks.get(`${c.scenario}|${estimator}`);
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
        rank: entryOf(c)?.rank ?? null,
        best: entryOf(c)?.best ?? false,
        failed: entryOf(c)?.status === 'failed',
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
      wins: scenarios.filter((s) => s.best).length,
      failedScenarios: scenarios.filter((s) => s.failed).length,
      robustness: row
        ? Object.fromEntries(
            ROBUSTNESS_FLAGS.map((k) => [
              k,
              { verdict: row.columns[k]?.verdict ?? 'n/a', value: row.columns[k]?.value ?? null, detail: row.columns[k]?.detail ?? '', sd: row.columns[k]?.sd },
            ]),
          )
        : null,
    };
  });
  return summaries.sort((a, b) => {
    const x = Number.isFinite(a.meanRmse.value) ? a.meanRmse.value : Infinity;
    const y = Number.isFinite(b.meanRmse.value) ? b.meanRmse.value : Infinity;
    return x - y || a.estimator.localeCompare(b.estimator);
  });
}

/** Scenarios where `estimator` is in the best set. */
export function bestSetScenarios(run: RunFile, estimator: string): string[] {
  return run.rankings.filter((r) => r.perturbation === null && r.entries.some((e) => e.estimator === estimator && e.best)).map((r) => r.scenario);
}

function plural(count: number, word: string): string {
  return `${count} ${word}${count === 1 ? '' : 's'}`;
}

function formatNats(x: number): string {
  if (!Number.isFinite(x)) return '–';
  return Math.abs(x) >= 0.01 ? x.toFixed(3) : x.toPrecision(2);
}

/** Two values in nats with the fewest significant digits (at least formatNats's, at most 6) that tell them apart. */
export function distinguishable(a: number, b: number): [string, string] {
  if (!Number.isFinite(a) || !Number.isFinite(b)) return [formatNats(a), formatNats(b)];
  // formatNats shows 3 decimals from 0.01 up, else 2 significant digits.
  const shown = (x: number) => (Math.abs(x) >= 0.01 ? Math.max(1, 3 + Math.floor(Math.log10(Math.abs(x))) + 1) : 2);
  let digits = Math.min(shown(a), shown(b));
  while (digits < 6 && a.toPrecision(digits) === b.toPrecision(digits)) digits++;
  return [a.toPrecision(digits), b.toPrecision(digits)];
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

/** SD of the true values over the scenarios (NaN for fewer than two): how far apart the plausible answers lie. */
function truthSpread(scenarios: ScenarioInfo[]): number {
  if (scenarios.length < 2) return NaN;
  const { sumOfSquares } = squaredDeviations(Float64Array.from(scenarios, (x) => x.truth));
  return Math.sqrt(sumOfSquares / scenarios.length);
}

/**
 * `subject` names what the scores were measured on, for the sentence: 'look-alike' (file advice, one
 * scenario) or 'matching scenarios' (advice for a described situation).
 */
export function recommend(run: RunFile, summaries: EstimatorSummary[], subject: 'look-alike' | 'matching scenarios' = 'matching scenarios'): Recommendation {
  if (!summaries.length) throw new Error('recommend: no estimator ran');
  const eligible = summaries.filter((s) => Number.isFinite(s.meanRmse.value) && s.failedScenarios === 0);
  const scenarios = run.scenarios;
  const count = scenarios.length;
  const none = (reason: string): Recommendation => ({
    recommended: null,
    runnerUp: null,
    runnerUpTiedOn: [],
    reason: `No estimator is usable here: ${reason}`,
  });
  if (!eligible.length) {
    const fewest = [...summaries].sort((a, b) => a.failedScenarios - b.failedScenarios || a.failures - b.failures)[0];
    return none(
      `every one failed on some draws of ${count === 1 ? `the ${subject === 'look-alike' ? 'look-alike' : 'matching scenario'}` : 'the matching scenarios'} (the fewest failures: ${fewest.label}, ${fewest.failures} of ${fewest.replicates} draws).`,
    );
  }
  const spread = truthSpread(scenarios);
  if (Number.isFinite(spread) && eligible.every((s) => s.meanRmse.value > spread)) {
    return none(
      `the smallest mean RMSE, ${formatNats(eligible[0].meanRmse.value)} nats (${eligible[0].label}), is larger than the spread of the true values over the matching scenarios (SD ${formatNats(spread)} nats), so an estimate would tell less about the distribution than knowing the setting does.`,
    );
  }
  const recommended = eligible[0];
  // From the eligible ones only: a runner-up that fails on some draws would be offered as an equal choice.
  const runnerUp = eligible[1] ?? null;
  const failurePart =
    recommended.failures === 0
      ? 'never fails'
      : `fails on ${recommended.failures} of ${recommended.replicates} draws (${(100 * recommended.failureRate).toFixed(1)}%)`;
  const lead =
    count === 1
      ? `${recommended.label} has the lowest RMSE on the ${subject === 'look-alike' ? 'look-alike' : 'matching scenario'} (${formatNats(recommended.meanRmse.value)} ± ${formatNats(recommended.meanRmse.se)} nats) and ${failurePart}`
      : `${recommended.label} has the lowest mean RMSE (${formatNats(recommended.meanRmse.value)} ± ${formatNats(recommended.meanRmse.se)} nats), is in the best set on ${recommended.wins} of ${plural(count, 'matching scenario')} and ${failurePart}`;
  let tail = '';
  let runnerUpTiedOn: string[] = [];
  if (runnerUp) {
    // Within noise of the recommended one: scenarios where both are in the best set.
    const recommendedBest = new Set(bestSetScenarios(run, recommended.estimator));
    runnerUpTiedOn = bestSetScenarios(run, runnerUp.estimator).filter((s) => recommendedBest.has(s));
    if (count === 1) {
      // Enough digits that the two RMSEs differ in print: "0.070 is worse than 0.070" reads as a contradiction.
      const [mine, theirs] = distinguishable(recommended.meanRmse.value, runnerUp.meanRmse.value);
      tail = runnerUpTiedOn.length
        ? `; the runner-up ${runnerUp.label} (${theirs}) cannot be told apart from it on the same draws`
        : `; the runner-up ${runnerUp.label} (${theirs} against ${mine}) is outside the ${+(run.plan.verdicts.level * 100).toPrecision(6)}% best set on the same draws`;
    } else {
      // Where the runner-up is in the best set and the recommended one is not, it is the better choice: say so.
      const runnerUpAlone = bestSetScenarios(run, runnerUp.estimator).filter((s) => !recommendedBest.has(s));
      const alone = runnerUpAlone.length ? `in the best set without ${recommended.label} on ${describeSubset(runnerUpAlone, scenarios)}` : '';
      tail = runnerUpTiedOn.length
        ? `; the runner-up ${runnerUp.label} is in the best set too on ${describeSubset(runnerUpTiedOn, scenarios)}${alone ? `, and ${alone}` : ''}`
        : alone
          ? `; the runner-up ${runnerUp.label} is ${alone}`
          : `; the runner-up ${runnerUp.label} is outside the best set on every scenario`;
      // The mean RMSEs' SEs are taken as independent (conservative for estimators run on the same draws): a gap
      // within twice their combined SE does not rank the two, and the sentence must not read as if it did.
      const gap = runnerUp.meanRmse.value - recommended.meanRmse.value;
      if (gap <= 2 * Math.hypot(recommended.meanRmse.se, runnerUp.meanRmse.se)) {
        const [mine, theirs] = distinguishable(recommended.meanRmse.value, runnerUp.meanRmse.value);
        tail += `, and its mean RMSE (${theirs} ± ${formatNats(runnerUp.meanRmse.se)} against ${mine}) is within twice their combined SE: the data do not separate the two, and the pick follows the lower mean`;
      }
    }
  }
  const skipped =
    eligible[0] && eligible[0] !== summaries[0]
      ? ` (${summaries[0].label} has a lower RMSE but fails on ${(100 * summaries[0].failureRate).toFixed(1)}% of draws)`
      : '';
  return { recommended, runnerUp, runnerUpTiedOn, reason: `${lead}${tail}.${skipped}` };
}
