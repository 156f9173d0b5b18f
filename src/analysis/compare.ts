/**
 * Comparing two run files cell by cell, to track changes in estimator code as regressions.
 *
 * When both runs drew the same samples (equal draws fingerprints), each replicate of a cell is the same
 * sample in both runs, so the comparison is paired. Per replicate where both succeeded,
 * d_r = (Ĥ_new,r − H)² − (Ĥ_base,r − H)², and three paired tests, sharing α = 1 − level by Bonferroni within
 * the cell and by Holm's step-down across the cells whose estimates changed (so the chance that any cell whose
 * code did not change its behaviour is called worse or improved is at most α, however many cells changed):
 *   - a t test on the mean of d_r: the change in mean squared error, the quantity RMSE measures; the
 *     draw-to-draw noise that dominates either run's RMSE cancels in d_r, so it detects changes far below
 *     the Monte-Carlo error of either run (bench/paired-power.ts shows how far);
 *   - an exact sign test on the d_r: how many draws got worse against how many got better, which one huge
 *     value cannot sway (it moves the mean and inflates its SE, hiding a change on every other draw);
 *   - an exact McNemar test on failures: draws where only the new run failed against draws where only the
 *     base run failed.
 * A new estimate far outside anything the base run produced in that cell (a "wild" value: more than
 * WILD_FACTOR times the base's largest error away from the truth, or a squared error that overflows) is
 * worse on its own: no mean over the other draws should dilute it.
 * When the draws differ, the squared errors are independent samples: Welch's t test on them and Fisher's
 * exact test on the failure counts (α shared the same way, two tests per cell).
 *
 *   const comparison = compareRuns(readRunFile('base.json'), readRunFile('new.json'), { tolerance: parseTolerance('5%') });
 */
import { UsageError } from '../core/errors.js';
import { describeValue } from '../core/spec.js';
import { cellKey, type Cell, type RunFile, type ScenarioInfo } from './results.js';
import type { Plan } from '../harness/plan.js';
import type { Environment } from '../core/provenance.js';
import type { ValueWithSe } from './score.js';
import { fisherExact, signTest, signTestOf, type SignTest } from './exact-tests.js';
import { quantileOfSorted, squaredDeviations } from '../math/moments.js';
import { DEFAULT_LEVEL, pairedTTest, welchTTest, type TTest } from './t-tests.js';

/** What a comparison reads of a cell. */
export type ComparedCell = Pick<Cell, 'scenario' | 'estimator' | 'n' | 'perturbation' | 'estimates' | 'scores'>;

/**
 * What a comparison reads of a run: a run file, or a committed baseline rebuilt from its compact form
 * (src/baseline-file.ts), which keeps no date, machine or commit, and whose fingerprint leaves the code out.
 */
export interface ComparableRun {
  createdAt: string | null;
  environment: Pick<Environment, 'hhatVersion' | 'git'>;
  plan: Pick<Plan, 'seed' | 'replicates' | 'sampleSizes' | 'scenarios'>;
  fingerprint: string;
  drawsFingerprint: string;
  shard: RunFile['shard'];
  complete: boolean;
  scenarios: Pick<ScenarioInfo, 'id' | 'truth'>[];
  cells: ComparedCell[];
}

export type CellStatus = 'worse' | 'improved' | 'changed-within-noise' | 'unchanged';
export const STATUS_ORDER: readonly CellStatus[] = ['worse', 'improved', 'changed-within-noise', 'unchanged'];

/**
 * The smallest change in RMSE that counts as a change, in nats or as a fraction of the base cell's RMSE.
 * Written `0.01` (nats) or `5%` (of the base RMSE) on the command line.
 */
export type Tolerance = { kind: 'nats'; value: number } | { kind: 'ratio'; value: number };

export { DEFAULT_LEVEL, pairedTTest, welchTTest, type TTest };

export function parseTolerance(text: string): Tolerance {
  const trimmed = text.trim();
  const percent = /^(\d+(?:\.\d*)?|\.\d+)\s*%$/.exec(trimmed);
  if (percent) return { kind: 'ratio', value: Number(percent[1]) / 100 };
  const nats = /^(\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/.test(trimmed) ? Number(trimmed) : NaN;
  if (Number.isFinite(nats)) return { kind: 'nats', value: nats };
  throw new UsageError(
    `--tolerance ${text} is not allowed; give a change in RMSE in nats (e.g. 0.01) or a percentage of the base RMSE (e.g. 5%), not negative`,
  );
}

export function describeTolerance(tolerance: Tolerance): string {
  return tolerance.kind === 'nats' ? `${tolerance.value} nats` : `${+(tolerance.value * 100).toPrecision(12)}% of the base RMSE`;
}

export interface CompareOptions {
  tolerance?: Tolerance;
  /** 1 − α (default 0.95): the chance that any cell whose estimates did not change in distribution is called worse or improved is at most α. */
  level?: number;
  /** 'unpaired' compares as if the draws differed (Welch's t), even when they are the same. */
  pairing?: 'auto' | 'unpaired';
}

/**
 * A score in both runs and its change. Paired: the change and its SE over the replicates where both runs
 * succeeded, from the per-replicate differences (delta method). Unpaired: the scores' difference with the
 * two SEs combined as independent.
 */
export interface ScoreChange {
  base: ValueWithSe;
  next: ValueWithSe;
  change: number;
  changeSe: number;
  paired: boolean;
}

/** A replicate whose new estimate lies far outside what the base run produced in the cell. */
export interface WildEstimate {
  replicate: number;
  base: number | null;
  next: number;
  /** |Ĥ_new − H| divided by the base cell's largest |Ĥ_base − H|. */
  ratio: number;
}

/** A new estimate more than this many times the base cell's largest error away from the truth is wild. */
export const WILD_FACTOR = 100;

export interface FailureChange {
  base: number;
  next: number;
  /** Paired: replicates that fail only in the new run, and only in the base run. */
  onlyNext: number | null;
  onlyBase: number | null;
  /** Exact McNemar (paired) or Fisher (unpaired) two-sided p; null when neither run failed. */
  p: number | null;
}

export interface CellRef {
  scenario: string;
  estimator: string;
  n: number;
  perturbation: string | null;
}

export interface CellComparison extends CellRef {
  status: CellStatus;
  /** Why this status, in words, first reason first. */
  reasons: string[];
  paired: boolean;
  truth: { base: number; next: number };
  replicates: { base: number; next: number };
  failures: FailureChange;
  bias: ScoreChange;
  sd: ScoreChange;
  rmse: ScoreChange;
  /** Paired only: mean and SE of Ĥ_new,r − Ĥ_base,r over replicates where both succeeded. */
  shift: ValueWithSe | null;
  /** The t test on squared errors; null when either side has fewer than two usable replicates. */
  test: TTest | null;
  /** Paired only: the sign test on the per-replicate differences of squared errors. */
  sign: SignTest | null;
  /** Paired only: the median change of the absolute error |Ĥ − H|, nats (the sign test's magnitude). */
  medianChange: number | null;
  /** New estimates far outside the base run's range in this cell. */
  wild: WildEstimate[];
  /**
   * Level each of this cell's tests is held to: α shared by Holm's step-down over the changed cells, then
   * split by Bonferroni over the cell's tests (three paired, two unpaired).
   */
  testLevel: number;
  /**
   * Holm-adjusted p of the cell: its smallest p among the tests whose size condition holds, times its number
   * of tests, adjusted over the changed cells; null for cells that were not tested (bit-identical, or wild).
   * The cell is worse or improved by a test exactly when this is ≤ α.
   */
  adjustedP: number | null;
  /** The tolerance in nats for this cell (a ratio tolerance times the base RMSE). */
  toleranceNats: number;
}

export interface RunSummary {
  createdAt: string | null;
  hhatVersion: string;
  commit: string | null;
  fingerprint: string;
  drawsFingerprint: string;
  seed: number;
  replicates: number;
}

export interface Comparison {
  kind: 'hhat-comparison';
  base: RunSummary;
  next: RunSummary;
  pairing: { paired: boolean; reason: string };
  tolerance: Tolerance & { text: string };
  level: number;
  /**
   * α = 1 − level split by Bonferroni over a cell's tests (three paired, two unpaired): the level of the most
   * significant changed cell's tests, and the level of the intervals shown.
   */
  testLevel: number;
  /** Cells whose estimates changed and were tested (not bit-identical, not wild): Holm's step-down runs over these. */
  testedCells: number;
  counts: Record<CellStatus, number> & { added: number; removed: number };
  /** Cells in both runs, in the base run's order. */
  cells: CellComparison[];
  /** Cells only in the new run. */
  added: CellRef[];
  /** Cells only in the base run. */
  removed: CellRef[];
}

export type FailOn = 'worse' | 'changed';

function summary(run: ComparableRun): RunSummary {
  return {
    createdAt: run.createdAt,
    hhatVersion: run.environment.hhatVersion,
    commit: run.environment.git ? `${run.environment.git.commit}${run.environment.git.dirty ? ' (with uncommitted changes)' : ''}` : null,
    fingerprint: run.fingerprint,
    drawsFingerprint: run.drawsFingerprint,
    seed: run.plan.seed,
    replicates: run.plan.replicates,
  };
}

/** Why two runs did not draw the same samples, from the plan fields the draws fingerprint covers. */
function drawsDifference(base: ComparableRun, next: ComparableRun): string {
  const differences: string[] = [];
  if (base.plan.seed !== next.plan.seed) differences.push(`seed ${base.plan.seed} vs ${next.plan.seed}`);
  if (base.plan.replicates !== next.plan.replicates) differences.push(`replicates ${base.plan.replicates} vs ${next.plan.replicates}`);
  if (base.plan.sampleSizes.join() !== next.plan.sampleSizes.join())
    differences.push(`sample sizes ${base.plan.sampleSizes.join(',')} vs ${next.plan.sampleSizes.join(',')}`);
  if (JSON.stringify(base.plan.scenarios) !== JSON.stringify(next.plan.scenarios)) differences.push('different scenario lists');
  return differences.length ? differences.join(', ') : 'different draws fingerprints';
}

function decidePairing(base: ComparableRun, next: ComparableRun, pairing: CompareOptions['pairing']): { paired: boolean; reason: string } {
  if (pairing === 'unpaired') return { paired: false, reason: "unpaired on request; Welch's t test on the squared errors, Fisher's exact test on failures" };
  if (base.drawsFingerprint === next.drawsFingerprint) {
    return {
      paired: true,
      reason: `both runs drew the same samples (draws fingerprint ${base.drawsFingerprint.slice(0, 12)}); paired tests on per-replicate differences of squared errors and on failures`,
    };
  }
  // A replicate's sample depends only on the seed, the scenario, n and the replicate index: plans that differ in
  // their scenario lists or sizes draw the cells they share alike.
  if (base.plan.seed === next.plan.seed && base.plan.replicates === next.plan.replicates) {
    return {
      paired: true,
      reason: `the cells both runs hold drew the same samples (seed ${base.plan.seed}, ${base.plan.replicates} replicates; the plans differ otherwise: ${drawsDifference(base, next)}); paired tests on per-replicate differences of squared errors and on failures`,
    };
  }
  const overlap =
    base.plan.seed === next.plan.seed
      ? `; their first ${Math.min(base.plan.replicates, next.plan.replicates)} replicates are the same draws, which Welch's test treats as independent (conservative where their errors move together, as on the same draws)`
      : '';
  return {
    paired: false,
    reason: `the runs drew different samples (${drawsDifference(base, next)})${overlap}; Welch's t test on the squared errors, Fisher's exact test on failures`,
  };
}

/** A run file holds null where a score had no replicates to come from (all failed; an SE from one value). */
const known = (x: number | null): x is number => typeof x === 'number' && Number.isFinite(x);

function unpairedChange(base: ValueWithSe, next: ValueWithSe): ScoreChange {
  const change = known(next.value) && known(base.value) ? next.value - base.value : NaN;
  const changeSe = known(base.se) && known(next.se) ? Math.hypot(base.se, next.se) : NaN;
  return { base, next, change, changeSe, paired: false };
}

function meanAndVariance(values: number[]): { mean: number; variance: number } {
  const { mean, sumOfSquares } = squaredDeviations(Float64Array.from(values));
  return { mean, variance: values.length > 1 ? sumOfSquares / (values.length - 1) : NaN };
}

/**
 * Changes of bias, SD and RMSE on the replicates where both runs succeeded, with SEs from the paired
 * per-replicate quantities (delta method):
 *   Δbias = mean(new − base), SE = SD(new − base)/√m;
 *   ΔSD   = s_new − s_base, s² = Σ (x_r − mean x)²/(m − 1); SE = SD(w)/√m · m/(m − 1) with
 *           w_r = (new_r − mean new)²/(2 s_new) − (base_r − mean base)²/(2 s_base);
 *   ΔRMSE = RMSE_new − RMSE_base, RMSE² = mean e_r²; SE = SD(w)/√m with w_r = e_new,r²/(2 RMSE_new) − e_base,r²/(2 RMSE_base).
 * The w are the per-replicate terms of the delta method: the gradient of √a − √b is (1/(2√a), −1/(2√b)), taken
 * at each run's own value, so the SE holds however large the change (a common denominator √a + √b, exact for
 * the difference itself, gives an SE that is right only when the two are close). A run whose RMSE (or SD) is 0
 * has every error 0, and its term is 0.
 */
function pairedChanges(next: number[], base: number[], truthNext: number, truthBase: number): { bias: ScoreChange; sd: ScoreChange; rmse: ScoreChange } | null {
  const m = next.length;
  if (m < 2) return null;
  const shifts = next.map((v, r) => v - truthNext - (base[r] - truthBase));
  const shift = meanAndVariance(shifts);
  const a = meanAndVariance(next);
  const b = meanAndVariance(base);
  const biasNext = a.mean - truthNext;
  const biasBase = b.mean - truthBase;
  const sdNext = Math.sqrt(a.variance);
  const sdBase = Math.sqrt(b.variance);
  const mseNext = next.reduce((s, v) => s + (v - truthNext) ** 2, 0) / m;
  const mseBase = base.reduce((s, v) => s + (v - truthBase) ** 2, 0) / m;
  const rmseNext = Math.sqrt(mseNext);
  const rmseBase = Math.sqrt(mseBase);
  const half = (square: number, root: number) => (root > 0 ? square / (2 * root) : 0);
  const sdTerms = meanAndVariance(next.map((v, r) => half((v - a.mean) ** 2, sdNext) - half((base[r] - b.mean) ** 2, sdBase)));
  const rmseTerms = meanAndVariance(next.map((v, r) => half((v - truthNext) ** 2, rmseNext) - half((base[r] - truthBase) ** 2, rmseBase)));
  const withSe = (value: number, se: number): ValueWithSe => ({ value, se });
  return {
    bias: {
      base: withSe(biasBase, Math.sqrt(b.variance / m)),
      next: withSe(biasNext, Math.sqrt(a.variance / m)),
      change: shift.mean,
      changeSe: Math.sqrt(shift.variance / m),
      paired: true,
    },
    sd: {
      base: withSe(sdBase, NaN),
      next: withSe(sdNext, NaN),
      change: sdNext - sdBase,
      changeSe: Math.sqrt(sdTerms.variance / m) * (m / (m - 1)),
      paired: true,
    },
    rmse: {
      base: withSe(rmseBase, NaN),
      next: withSe(rmseNext, NaN),
      change: rmseNext - rmseBase,
      changeSe: Math.sqrt(rmseTerms.variance / m),
      paired: true,
    },
  };
}

/** x > tolerance beyond rounding: a shift of exactly the tolerance, computed as (e + t) − e, must not count. */
function exceeds(x: number, tolerance: number): boolean {
  return x - tolerance > 1e-12 * Math.max(1, Math.abs(x), tolerance);
}

function bitIdentical(a: (number | null)[], b: (number | null)[]): boolean {
  return a.length === b.length && a.every((v, i) => Object.is(v, b[i]));
}

function squaredErrors(cell: ComparedCell, truth: number): number[] {
  return cell.estimates.map((v) => (v === null ? NaN : (v - truth) ** 2));
}

function formatNumber(x: number): string {
  return Number.isFinite(x) ? String(+x.toPrecision(3)) : String(x);
}

/** New estimates more than WILD_FACTOR times the base's largest error from the truth, or whose squared error overflows. */
function wildEstimates(base: ComparedCell, next: ComparedCell, truthBase: number, truthNext: number, toleranceNats: number): WildEstimate[] {
  let largest = 0;
  for (const v of base.estimates) if (v !== null) largest = Math.max(largest, Math.abs(v - truthBase));
  const out: WildEstimate[] = [];
  next.estimates.forEach((v, r) => {
    if (v === null) return;
    const error = Math.abs(v - truthNext);
    const overflows = !Number.isFinite(error * error);
    if (overflows || (error > WILD_FACTOR * largest && exceeds(error - largest, toleranceNats))) {
      out.push({ replicate: r, base: base.estimates[r] ?? null, next: v, ratio: largest > 0 ? error / largest : Infinity });
    }
  });
  return out;
}

function failureChange(base: ComparedCell, next: ComparedCell, paired: boolean): FailureChange {
  const failedBase = base.scores.failures;
  const failedNext = next.scores.failures;
  if (!paired) {
    const p =
      failedBase + failedNext === 0 ? null : fisherExact(failedNext, next.estimates.length - failedNext, failedBase, base.estimates.length - failedBase);
    return { base: failedBase, next: failedNext, onlyNext: null, onlyBase: null, p };
  }
  let onlyNext = 0;
  let onlyBase = 0;
  base.estimates.forEach((b, r) => {
    const a = next.estimates[r];
    if (a === null && b !== null) onlyNext++;
    if (b === null && a !== null) onlyBase++;
  });
  return { base: failedBase, next: failedNext, onlyNext, onlyBase, p: failedBase + failedNext === 0 ? null : signTest(onlyNext, onlyBase).p };
}

/** Tests a cell gets: t, sign and McNemar paired; Welch and Fisher unpaired. */
function testsPerCell(paired: boolean): number {
  return paired ? 3 : 2;
}

type ScoreChanges = { bias: ScoreChange; sd: ScoreChange; rmse: ScoreChange };

/** What a cell's tests measured: the t test on squared errors, the score changes, and (paired) the sign test and shift. */
interface CellTests {
  test: TTest | null;
  changes: ScoreChanges;
  shift: ValueWithSe | null;
  sign: SignTest | null;
  medianChange: number | null;
}

/** The score changes with the two runs' SEs combined as independent. */
function unpairedChanges(base: ComparedCell, next: ComparedCell): ScoreChanges {
  return {
    bias: unpairedChange(base.scores.bias, next.scores.bias),
    sd: unpairedChange(base.scores.sd, next.scores.sd),
    rmse: unpairedChange(base.scores.rmse, next.scores.rmse),
  };
}

/** Different draws: Welch's t test on the two runs' squared errors, and the unpaired score changes. */
function unpairedTests(base: ComparedCell, next: ComparedCell, truthBase: number, truthNext: number, intervalLevel: number): CellTests {
  const test = welchTTest(squaredErrors(next, truthNext), squaredErrors(base, truthBase), intervalLevel);
  return { test, changes: unpairedChanges(base, next), shift: null, sign: null, medianChange: null };
}

/** The same draws: paired t and sign tests and paired score changes over the replicates where both runs succeeded. */
function pairedTests(base: ComparedCell, next: ComparedCell, truthBase: number, truthNext: number, intervalLevel: number, reasons: string[]): CellTests {
  // Fewer than two common replicates leave the unpaired changes; leaving replicates out earns a note in `reasons`.
  const nextValues: number[] = [];
  const baseValues: number[] = [];
  base.estimates.forEach((b, r) => {
    const a = next.estimates[r];
    if (a === null || b === null) return;
    nextValues.push(a);
    baseValues.push(b);
  });
  const common = nextValues.length;
  const differences = nextValues.map((a, r) => (a - truthNext) ** 2 - (baseValues[r] - truthBase) ** 2);
  const test = pairedTTest(differences, intervalLevel);
  const sign = signTestOf(differences);
  const errorChanges = Float64Array.from(nextValues, (a, r) => Math.abs(a - truthNext) - Math.abs(baseValues[r] - truthBase)).sort();
  const medianChange = errorChanges.length ? quantileOfSorted(errorChanges, 0.5) : null;
  let changes = unpairedChanges(base, next);
  let shift: ValueWithSe | null = null;
  const paired = pairedChanges(nextValues, baseValues, truthNext, truthBase);
  if (paired) {
    changes = paired;
    // The raw shift of the estimates is the bias change plus the change of the truth, with the same paired SE.
    shift = { value: paired.bias.change + (truthNext - truthBase), se: paired.bias.changeSe };
  }
  if (common < Math.min(base.scores.successes, next.scores.successes)) reasons.push(`changes are over the ${common} replicates where both runs succeeded`);
  return { test, changes, shift, sign, medianChange };
}

/** Everything a cell's verdict and its reasons are read from. */
interface CellEvidence extends CellTests {
  base: ComparedCell;
  next: ComparedCell;
  truthNext: number;
  paired: boolean;
  failures: FailureChange;
  toleranceNats: number;
  /** The level each of the cell's tests is held to. */
  testLevel: number;
}

type Verdict = 'worse' | 'improved' | null;

interface CellVerdicts {
  mean: Verdict;
  sign: Verdict;
  failure: Verdict;
  /** The t test's p is within the test level (whatever the tolerance says). */
  significant: boolean;
  /** The cell's p for Holm: the smallest p among the tests whose size condition holds, Bonferroni within the cell. */
  cellP: number;
}

/** Each test's verdict: significant at the test level and, for the t and sign tests, a change beyond the tolerance. */
function cellVerdicts(e: CellEvidence): CellVerdicts {
  const { test, sign, medianChange, failures, toleranceNats, testLevel, paired, base, next } = e;
  const significant = test !== null && test.p <= testLevel;
  const beyondTolerance = exceeds(Math.abs(e.changes.rmse.change), toleranceNats);
  const signBeyondTolerance = medianChange !== null && exceeds(Math.abs(medianChange), toleranceNats);
  const mean = significant && beyondTolerance ? (test.difference > 0 ? 'worse' : 'improved') : null;
  const signVerdict = sign && sign.p <= testLevel && signBeyondTolerance ? (sign.above > sign.below ? 'worse' : 'improved') : null;
  // Paired: which run failed on more of the same draws. Unpaired: which run's failure rate is higher (the runs may differ in size).
  const failedMore = paired ? failures.onlyNext! > failures.onlyBase! : failures.next / next.estimates.length > failures.base / base.estimates.length;
  const failure = failures.p !== null && failures.p <= testLevel ? (failedMore ? 'worse' : 'improved') : null;
  const qualifying = [beyondTolerance && test ? test.p : 1, signBeyondTolerance && sign ? sign.p : 1, failures.p ?? 1];
  const cellP = Math.min(1, testsPerCell(paired) * Math.min(...qualifying));
  return { mean, sign: signVerdict, failure, significant, cellP };
}

/** What the t test compares, in words. */
function squaredErrorTestName(paired: boolean): string {
  return paired ? 'mean paired difference of squared errors' : 'difference of mean squared errors';
}

/** Why the t test decided: its p within the level and the RMSE change beyond the tolerance. */
function meanReason(e: CellEvidence): string {
  return `the t test on the ${squaredErrorTestName(e.paired)} gives p = ${formatNumber(e.test!.p)} ≤ ${formatNumber(e.testLevel)} and |ΔRMSE| = ${formatNumber(Math.abs(e.changes.rmse.change))} exceeds the tolerance ${formatNumber(e.toleranceNats)} nats`;
}

/** Why the sign test decided: how many replicates moved which way, its p and the median change of |error|. */
function signReason(e: CellEvidence): string {
  const sign = e.sign!;
  return `${sign.above > sign.below ? sign.above : sign.below} of ${sign.above + sign.below} changed replicates got ${sign.above > sign.below ? 'worse' : 'better'} (sign test p = ${formatNumber(sign.p)} ≤ ${formatNumber(e.testLevel)}; median change of |error| ${formatNumber(e.medianChange!)} nats)`;
}

/** The failure counts and their exact test (McNemar paired, Fisher unpaired). */
function failureReason(e: CellEvidence): string {
  const { failures, base, next } = e;
  return e.paired
    ? `failures ${failures.base} → ${failures.next} of ${next.estimates.length}: ${failures.onlyNext} replicates fail only in the new run, ${failures.onlyBase} only in the base (exact McNemar p = ${formatNumber(failures.p!)})`
    : `failures ${failures.base} of ${base.estimates.length} → ${failures.next} of ${next.estimates.length} (Fisher exact p = ${formatNumber(failures.p!)})`;
}

/** The first wild estimate and how far it lies beyond the base run's largest error. */
function wildReason(wild: WildEstimate[], truthNext: number): string {
  const w = wild[0];
  const where = w.base === null ? 'where the base run failed' : `where the base gave ${formatNumber(w.base)}`;
  return `${wild.length} wild estimate${wild.length === 1 ? '' : 's'}: replicate ${w.replicate} gave ${formatNumber(w.next)} ${where}, ${Number.isFinite(w.ratio) ? `${formatNumber(w.ratio)} times` : 'far beyond'} the base run's largest error in this cell${Number.isFinite((w.next - truthNext) ** 2) ? '' : ' (its squared error overflows)'}`;
}

/** Why estimates that moved are within noise: no test, a change within the tolerance, or no significant test. */
function withinNoiseReasons(e: CellEvidence, v: CellVerdicts, reasons: string[]): void {
  const { test, sign, failures, testLevel } = e;
  if (failures.next !== failures.base) reasons.unshift(`${failureReason(e)}, not significant at ${formatNumber(testLevel)}`);
  if (test === null) reasons.unshift('too few successful replicates for a test');
  else if (v.significant)
    reasons.unshift(
      `significant (p = ${formatNumber(test.p)} ≤ ${formatNumber(testLevel)}) but |ΔRMSE| = ${formatNumber(Math.abs(e.changes.rmse.change))} is within the tolerance ${formatNumber(e.toleranceNats)} nats`,
    );
  else
    reasons.unshift(
      `the t test on the ${squaredErrorTestName(e.paired)} gives p = ${formatNumber(test.p)} > ${formatNumber(testLevel)}${sign ? `; sign test ${sign.above} worse, ${sign.below} better (p = ${formatNumber(sign.p)})` : ''}`,
    );
}

/** Bit-identical, else wild, else worse or improved by any test (worse wins), else within noise; tested: in Holm's step-down. */
function cellStatus(e: CellEvidence, wild: WildEstimate[], v: CellVerdicts, reasons: string[]): { status: CellStatus; tested: boolean } {
  if (bitIdentical(e.base.estimates, e.next.estimates)) {
    // Two runs whose every replicate failed hold the same nulls, but on other draws nothing is known to match.
    const none = e.base.estimates.every((x) => x === null);
    reasons.unshift(none ? 'no estimates in either run: every replicate failed in both' : 'every estimate is bit-identical');
    return { status: 'unchanged', tested: false };
  }
  if (wild.length) {
    reasons.unshift(wildReason(wild, e.truthNext));
    return { status: 'worse', tested: false };
  }
  for (const status of ['worse', 'improved'] as const) {
    if (v.mean !== status && v.sign !== status && v.failure !== status) continue;
    if (v.failure === status) reasons.unshift(failureReason(e));
    if (v.sign === status) reasons.unshift(signReason(e));
    if (v.mean === status) reasons.unshift(meanReason(e));
    return { status, tested: true };
  }
  // Estimates moved (even if every squared error happens to be equal, e.g. reflected about the truth).
  withinNoiseReasons(e, v, reasons);
  return { status: 'changed-within-noise', tested: true };
}

/**
 * `holmDivisor` is the number of hypotheses Holm's step-down still holds when it reaches this cell (the
 * cell's share of α is α/holmDivisor, then split over its tests); 1 before the cells are ordered.
 */
function compareCell(
  base: ComparedCell,
  next: ComparedCell,
  truthBase: number,
  truthNext: number,
  pairedRuns: boolean,
  tolerance: Tolerance,
  level: number,
  holmDivisor = 1,
): CellComparison {
  const reasons: string[] = [];
  const paired = pairedRuns && base.estimates.length === next.estimates.length;
  if (pairedRuns && !paired) reasons.push(`unpaired: ${base.estimates.length} vs ${next.estimates.length} replicates`);
  if (truthBase !== truthNext) reasons.push(`the true value changed (${truthBase} → ${truthNext}); each run is scored against its own`);
  const tests = testsPerCell(paired);
  // Intervals are shown at the cell's Bonferroni level alone; the verdict also takes Holm's share.
  const intervalLevel = 1 - (1 - level) / tests;
  const testLevel = (1 - level) / (tests * holmDivisor);
  const measured = paired
    ? pairedTests(base, next, truthBase, truthNext, intervalLevel, reasons)
    : unpairedTests(base, next, truthBase, truthNext, intervalLevel);

  const toleranceNats = tolerance.kind === 'nats' ? tolerance.value : tolerance.value * base.scores.rmse.value;
  const wild = wildEstimates(base, next, truthBase, truthNext, toleranceNats);
  const failures = failureChange(base, next, paired);
  const evidence: CellEvidence = { ...measured, base, next, truthNext, paired, failures, toleranceNats, testLevel };
  const verdicts = cellVerdicts(evidence);
  const { status, tested } = cellStatus(evidence, wild, verdicts, reasons);

  return {
    scenario: base.scenario,
    estimator: base.estimator,
    n: base.n,
    perturbation: base.perturbation,
    status,
    reasons,
    paired,
    truth: { base: truthBase, next: truthNext },
    replicates: { base: base.estimates.length, next: next.estimates.length },
    failures,
    bias: measured.changes.bias,
    sd: measured.changes.sd,
    rmse: measured.changes.rmse,
    shift: measured.shift,
    test: measured.test,
    sign: measured.sign,
    medianChange: measured.medianChange,
    wild,
    testLevel,
    adjustedP: tested ? verdicts.cellP : null,
    toleranceNats,
  };
}

/**
 * Holm's (1979) step-down over the tested cells' Bonferroni-within-cell p values p_(1) ≤ … ≤ p_(m): the
 * j-th is held to α/(m − j + 1) until the first that fails, and every later one is held to that one's level.
 * Returns each tested cell's divisor (m − j + 1, or the failing step's) and its Holm-adjusted p,
 * max_{i ≤ j} min(1, (m − i + 1)·p_(i)).
 */
function holmStepDown(cellPs: number[], alpha: number): { divisor: number[]; adjusted: number[] } {
  const m = cellPs.length;
  const order = cellPs.map((_, i) => i).sort((a, b) => cellPs[a] - cellPs[b]);
  const divisor = new Array<number>(m);
  const adjusted = new Array<number>(m);
  let running = 0;
  let stopped = -1;
  order.forEach((cell, j) => {
    running = Math.max(running, Math.min(1, (m - j) * cellPs[cell]));
    adjusted[cell] = running;
    if (stopped < 0 && cellPs[cell] > alpha / (m - j)) stopped = m - j;
    divisor[cell] = stopped < 0 ? m - j : stopped;
  });
  return { divisor, adjusted };
}

function ref(cell: ComparedCell): CellRef {
  return { scenario: cell.scenario, estimator: cell.estimator, n: cell.n, perturbation: cell.perturbation };
}

function truthOf(run: ComparableRun): Map<string, number> {
  return new Map(run.scenarios.map((s) => [s.id, s.truth]));
}

/**
 * Matches cells by scenario, estimator spec (settings included), n and perturbation, and compares each pair.
 * Cells in only one run are listed as added or removed. Shard files (incomplete runs) are refused: their
 * missing replicates would look like failures.
 */
/** Refuses, as one line, what a library caller may pass that no run file read by `hhat compare` can be. */
function checkCompareArguments(base: unknown, next: unknown, options: unknown, labels: { base: string; next: string }): void {
  for (const [run, label] of [
    [base, labels.base],
    [next, labels.next],
  ] as const) {
    const r = run as Partial<ComparableRun> | null;
    if (typeof r !== 'object' || r === null || !Array.isArray(r.cells) || !Array.isArray(r.scenarios) || typeof r.plan !== 'object')
      throw new UsageError(`${label} is not a run (${describeValue(run)}); pass a run file as readRunFile reads it, or a run from assembleRun`);
  }
  if (typeof options !== 'object' || options === null)
    throw new UsageError(`compareRuns: options must be an object (CompareOptions); got ${describeValue(options)}`);
  const { level, tolerance, pairing } = options as CompareOptions;
  if (level !== undefined && !(typeof level === 'number' && level > 0 && level < 1))
    throw new UsageError(`compareRuns: options.level ${String(level)} is not allowed; the confidence level is a number between 0 and 1 (e.g. 0.95)`);
  if (
    tolerance !== undefined &&
    !(
      typeof tolerance === 'object' &&
      tolerance !== null &&
      (tolerance.kind === 'nats' || tolerance.kind === 'ratio') &&
      Number.isFinite(tolerance.value) &&
      tolerance.value >= 0
    )
  )
    throw new UsageError(
      `compareRuns: options.tolerance ${JSON.stringify(tolerance) ?? describeValue(tolerance)} is not allowed; give { kind: 'nats' | 'ratio', value } with a value ≥ 0 (parseTolerance reads '0.01' or '5%')`,
    );
  if (pairing !== undefined && pairing !== 'auto' && pairing !== 'unpaired')
    throw new UsageError(`compareRuns: options.pairing ${String(pairing)} is not allowed; it must be 'auto' or 'unpaired'`);
}

export function compareRuns(base: ComparableRun, next: ComparableRun, options: CompareOptions = {}, labels = { base: 'BASE', next: 'NEW' }): Comparison {
  checkCompareArguments(base, next, options, labels);
  for (const [run, label] of [
    [base, labels.base],
    [next, labels.next],
  ] as const) {
    if (run.shard)
      throw new UsageError(`${label} is shard ${run.shard.index}/${run.shard.count} of a run; merge the shards (hhat merge) and compare the merged file`);
    if (!run.complete) throw new UsageError(`${label} is an incomplete run; finish it (bench --resume) before comparing`);
  }
  const tolerance = options.tolerance ?? { kind: 'nats', value: 0 };
  const level = options.level ?? DEFAULT_LEVEL;
  const pairing = decidePairing(base, next, options.pairing);
  const truthBase = truthOf(base);
  const truthNext = truthOf(next);
  const nextCells = new Map(next.cells.map((c) => [cellKey(c), c]));
  const baseKeys = new Set(base.cells.map(cellKey));

  const pairs: [ComparedCell, ComparedCell][] = [];
  const removed: CellRef[] = [];
  for (const cell of base.cells) {
    const other = nextCells.get(cellKey(cell));
    if (other) pairs.push([cell, other]);
    else removed.push(ref(cell));
  }
  // Nothing compared is no evidence of anything: a run of one quantity against another (MI against divergence)
  // would otherwise pass `--fail-on worse --allow-missing` with "0 worse".
  if (!pairs.length) {
    throw new UsageError(
      `${labels.base} and ${labels.next} have no cell in common (same scenario, estimator, n and role); compare runs of the same plan, or of plans that share cells`,
    );
  }
  const compare = ([cell, other]: [ComparedCell, ComparedCell], holmDivisor?: number) =>
    compareCell(cell, other, truthBase.get(cell.scenario)!, truthNext.get(other.scenario)!, pairing.paired, tolerance, level, holmDivisor);
  // First each cell alone, for its p; then again at its place in Holm's step-down over the tested cells.
  const cells = pairs.map((pair) => compare(pair));
  const tested = cells.flatMap((c, i) => (c.adjustedP === null ? [] : [i]));
  const holm = holmStepDown(
    tested.map((i) => cells[i].adjustedP!),
    1 - level,
  );
  tested.forEach((i, t) => {
    cells[i] = compare(pairs[i], holm.divisor[t]);
    cells[i].adjustedP = holm.adjusted[t];
  });
  const added = next.cells.filter((c) => !baseKeys.has(cellKey(c))).map(ref);

  const counts = { worse: 0, improved: 0, 'changed-within-noise': 0, unchanged: 0, added: added.length, removed: removed.length };
  for (const c of cells) counts[c.status]++;
  return {
    kind: 'hhat-comparison',
    base: summary(base),
    next: summary(next),
    pairing,
    tolerance: { ...tolerance, text: describeTolerance(tolerance) },
    level,
    testLevel: (1 - level) / testsPerCell(pairing.paired),
    testedCells: tested.length,
    counts,
    cells,
    added,
    removed,
  };
}

/**
 * Cells that fail a CI policy: 'worse' fails worse cells (see the file comment for the tests and the wild
 * rule); 'changed' fails every cell that is not bit-identical, which guards refactorings that should not move
 * any number.
 */
/** Whether a test found a change in the cell (p within the cell's test level), whatever its size against the tolerance. */
export function changeFound(c: CellComparison): boolean {
  return (c.test !== null && c.test.p <= c.testLevel) || (c.sign !== null && c.sign.p <= c.testLevel);
}

/**
 * The cells that fail a policy. 'changed' on the same draws: any cell whose estimates differ at all (a code
 * change shows even where accuracy does not move). On different draws every estimate differs, so there it
 * means a change the tests found: worse, improved, or found and within the tolerance.
 */
export function failingCells(comparison: Comparison, failOn: FailOn): CellComparison[] {
  if (failOn === 'worse') return comparison.cells.filter((c) => c.status === 'worse');
  return comparison.cells.filter((c) => c.status !== 'unchanged' && (comparison.pairing.paired || c.status !== 'changed-within-noise' || changeFound(c)));
}

/**
 * Whether the comparison fails the policy. A cell of the base run missing from the new one fails either
 * policy (a regression that removes its own evidence must not pass) unless `allowMissing`; a cell only in
 * the new run fails 'changed'.
 */
export function failsPolicy(comparison: Comparison, failOn: FailOn, allowMissing = false): boolean {
  const missing = allowMissing ? 0 : comparison.removed.length;
  const added = failOn === 'changed' ? comparison.added.length : 0;
  return failingCells(comparison, failOn).length > 0 || missing + added > 0;
}

export function parseFailOn(text: string): FailOn {
  if (text === 'worse' || text === 'changed') return text;
  throw new UsageError(
    `--fail-on ${text} is not allowed; it must be worse (a cell got worse beyond the tolerance) or changed (any cell differs; on different draws, any change the tests find)`,
  );
}
