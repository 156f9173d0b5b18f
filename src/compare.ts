/**
 * Comparing two run files cell by cell, to track changes in estimator code as regressions.
 *
 * When both runs drew the same samples (equal draws fingerprints), each replicate of a cell is the same
 * sample in both runs, so the comparison is paired: per replicate, d_r = (Ĥ_new,r − H)² − (Ĥ_base,r − H)²,
 * and a one-sample t test on the d_r. The draw-to-draw noise that dominates either run's RMSE cancels in
 * d_r, so a paired test detects changes far below the Monte-Carlo error of either run (bench/paired-power.ts
 * shows how far). When the draws differ, the squared errors of the two runs are independent samples and
 * Welch's unequal-variance t test compares their means (the two MSEs).
 *
 *   const comparison = compareRuns(readRunFile('base.json'), readRunFile('new.json'), { tolerance: parseTolerance('5%') });
 */
import tCdf from '@stdlib/stats-base-dists-t-cdf';
import tQuantile from '@stdlib/stats-base-dists-t-quantile';
import { UsageError } from './errors.js';
import type { Cell, RunFile, ScenarioInfo } from './results.js';
import type { Estimate } from './score.js';

export type CellStatus = 'worse' | 'improved' | 'changed-within-noise' | 'unchanged';
export const STATUS_ORDER: readonly CellStatus[] = ['worse', 'improved', 'changed-within-noise', 'unchanged'];

/**
 * The smallest change in RMSE that counts as a change, in nats or as a fraction of the base cell's RMSE.
 * Written `0.01` (nats) or `5%` (of the base RMSE) on the command line.
 */
export type Tolerance = { kind: 'nats'; value: number } | { kind: 'ratio'; value: number };

export const DEFAULT_LEVEL = 0.95;

export function parseTolerance(text: string): Tolerance {
  const trimmed = text.trim();
  const percent = /^(\d+(?:\.\d*)?|\.\d+)\s*%$/.exec(trimmed);
  if (percent) return { kind: 'ratio', value: Number(percent[1]) / 100 };
  const nats = /^(\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/.test(trimmed) ? Number(trimmed) : NaN;
  if (Number.isFinite(nats)) return { kind: 'nats', value: nats };
  throw new UsageError(`--tolerance ${text} is not allowed; give a change in RMSE in nats (e.g. 0.01) or a percentage of the base RMSE (e.g. 5%), not negative`);
}

export function describeTolerance(tolerance: Tolerance): string {
  return tolerance.kind === 'nats' ? `${tolerance.value} nats` : `${+(tolerance.value * 100).toPrecision(12)}% of the base RMSE`;
}

export function parseLevel(text: string): number {
  const value = Number(text);
  if (text.trim() === '' || !(value > 0 && value < 1)) throw new UsageError(`--level ${text} is not allowed; the confidence level is a number between 0 and 1 (e.g. 0.95)`);
  return value;
}

export interface CompareOptions {
  tolerance?: Tolerance;
  /** Confidence level of the intervals (default 0.95): a cell is improved or worse when its interval excludes 0. */
  level?: number;
  /** 'unpaired' compares as if the draws differed (Welch's t), even when they are the same. */
  pairing?: 'auto' | 'unpaired';
}

export interface TTest {
  kind: 'paired-t' | 'welch-t';
  /** Paired: mean of d_r. Welch: MSE_new − MSE_base. Positive means the new run has the larger squared error. */
  difference: number;
  se: number;
  df: number;
  t: number;
  /** Two-sided. */
  p: number;
  interval: [number, number];
  level: number;
  /** Paired: pairs used; Welch: successes in the new and base runs. */
  count: number | { next: number; base: number };
}

/** A score in both runs and its change; changeSe combines the two scores' SEs as if independent (conservative when paired). */
export interface ScoreChange {
  base: Estimate;
  next: Estimate;
  change: number;
  changeSe: number;
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
  failures: { base: number; next: number };
  bias: ScoreChange;
  sd: ScoreChange;
  rmse: ScoreChange;
  /** Paired only: mean and SE of Ĥ_new,r − Ĥ_base,r over replicates where both succeeded. */
  shift: Estimate | null;
  /** The test on squared errors; null when either side has fewer than two usable replicates. */
  test: TTest | null;
  /** The tolerance in nats for this cell (a ratio tolerance times the base RMSE). */
  toleranceNats: number;
}

export interface RunSummary {
  createdAt: string;
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
  counts: Record<CellStatus, number> & { added: number; removed: number };
  /** Cells in both runs, in the base run's order. */
  cells: CellComparison[];
  /** Cells only in the new run. */
  added: CellRef[];
  /** Cells only in the base run. */
  removed: CellRef[];
}

export type FailOn = 'worse' | 'changed';

export function cellKey(cell: CellRef): string {
  return `${cell.scenario}|${cell.estimator}|${cell.n}|${cell.perturbation ?? ''}`;
}

function summary(run: RunFile): RunSummary {
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
function drawsDifference(base: RunFile, next: RunFile): string {
  const differences: string[] = [];
  if (base.plan.seed !== next.plan.seed) differences.push(`seed ${base.plan.seed} vs ${next.plan.seed}`);
  if (base.plan.replicates !== next.plan.replicates) differences.push(`replicates ${base.plan.replicates} vs ${next.plan.replicates}`);
  if (base.plan.sampleSizes.join() !== next.plan.sampleSizes.join()) differences.push(`sample sizes ${base.plan.sampleSizes.join(',')} vs ${next.plan.sampleSizes.join(',')}`);
  if (JSON.stringify(base.plan.scenarios) !== JSON.stringify(next.plan.scenarios)) differences.push('different scenario lists');
  return differences.length ? differences.join(', ') : 'different draws fingerprints';
}

function decidePairing(base: RunFile, next: RunFile, pairing: CompareOptions['pairing']): { paired: boolean; reason: string } {
  if (pairing === 'unpaired') return { paired: false, reason: "unpaired on request; Welch's t test on the squared errors" };
  if (base.drawsFingerprint === next.drawsFingerprint) {
    return { paired: true, reason: `both runs drew the same samples (draws fingerprint ${base.drawsFingerprint.slice(0, 12)}); paired t test on per-replicate differences of squared errors` };
  }
  return { paired: false, reason: `the runs drew different samples (${drawsDifference(base, next)}); Welch's t test on the squared errors` };
}

function finishTest(kind: TTest['kind'], difference: number, se: number, df: number, level: number, count: TTest['count']): TTest {
  if (se === 0) {
    // Every difference equal: no spread to test against, so the sign alone decides (p 0), or nothing changed (p 1).
    return { kind, difference, se, df, t: difference === 0 ? 0 : Math.sign(difference) * Infinity, p: difference === 0 ? 1 : 0, interval: [difference, difference], level, count };
  }
  const t = difference / se;
  const p = Math.min(1, 2 * tCdf(-Math.abs(t), df));
  const half = tQuantile(1 - (1 - level) / 2, df) * se;
  return { kind, difference, se, df, t, p, interval: [difference - half, difference + half], level, count };
}

/** One-sample t test on paired differences (NaN entries are left out). Null with fewer than two. */
export function pairedTTest(differences: ArrayLike<number>, level = DEFAULT_LEVEL): TTest | null {
  const values = Array.from(differences).filter(Number.isFinite);
  const m = values.length;
  if (m < 2) return null;
  const mean = values.reduce((s, d) => s + d, 0) / m;
  const variance = values.reduce((s, d) => s + (d - mean) ** 2, 0) / (m - 1);
  return finishTest('paired-t', mean, Math.sqrt(variance / m), m - 1, level, m);
}

/** Welch's t test of mean(next) − mean(base) with Welch–Satterthwaite degrees of freedom. Null with fewer than two on a side. */
export function welchTTest(next: ArrayLike<number>, base: ArrayLike<number>, level = DEFAULT_LEVEL): TTest | null {
  const a = Array.from(next).filter(Number.isFinite);
  const b = Array.from(base).filter(Number.isFinite);
  if (a.length < 2 || b.length < 2) return null;
  const mean = (xs: number[]) => xs.reduce((s, x) => s + x, 0) / xs.length;
  const variance = (xs: number[], mu: number) => xs.reduce((s, x) => s + (x - mu) ** 2, 0) / (xs.length - 1);
  const ma = mean(a);
  const mb = mean(b);
  const va = variance(a, ma) / a.length;
  const vb = variance(b, mb) / b.length;
  const se = Math.sqrt(va + vb);
  const df = se === 0 ? Infinity : (va + vb) ** 2 / (va ** 2 / (a.length - 1) + vb ** 2 / (b.length - 1));
  return finishTest('welch-t', ma - mb, se, df, level, { next: a.length, base: b.length });
}

function scoreChange(base: Estimate, next: Estimate): ScoreChange {
  return { base, next, change: next.value - base.value, changeSe: Math.hypot(base.se, next.se) };
}

function bitIdentical(a: (number | null)[], b: (number | null)[]): boolean {
  return a.length === b.length && a.every((v, i) => Object.is(v, b[i]));
}

function squaredErrors(cell: Cell, truth: number): number[] {
  return cell.estimates.map((v) => (v === null ? NaN : (v - truth) ** 2));
}

function formatNumber(x: number): string {
  return Number.isFinite(x) ? String(+x.toPrecision(3)) : String(x);
}

function compareCell(base: Cell, next: Cell, truthBase: number, truthNext: number, pairedRuns: boolean, tolerance: Tolerance, level: number): CellComparison {
  const reasons: string[] = [];
  const paired = pairedRuns && base.estimates.length === next.estimates.length;
  if (pairedRuns && !paired) reasons.push(`unpaired: ${base.estimates.length} vs ${next.estimates.length} replicates`);
  if (truthBase !== truthNext) reasons.push(`the true value changed (${truthBase} → ${truthNext}); each run is scored against its own`);

  let test: TTest | null;
  let shift: Estimate | null = null;
  if (paired) {
    const differences: number[] = [];
    const shifts: number[] = [];
    base.estimates.forEach((b, r) => {
      const a = next.estimates[r];
      if (a === null || b === null) return;
      differences.push((a - truthNext) ** 2 - (b - truthBase) ** 2);
      shifts.push(a - b);
    });
    test = pairedTTest(differences, level);
    const shiftTest = pairedTTest(shifts, level);
    shift = shiftTest ? { value: shiftTest.difference, se: shiftTest.se } : null;
  } else {
    test = welchTTest(squaredErrors(next, truthNext), squaredErrors(base, truthBase), level);
  }

  const rmse = scoreChange(base.scores.rmse, next.scores.rmse);
  const toleranceNats = tolerance.kind === 'nats' ? tolerance.value : tolerance.value * base.scores.rmse.value;
  const failureRate = (c: Cell) => (c.estimates.length ? c.scores.failures / c.estimates.length : 0);
  const failuresRose = failureRate(next) > failureRate(base);
  const failuresFell = failureRate(next) < failureRate(base);
  const significant = test !== null && (test.interval[0] > 0 || test.interval[1] < 0);
  const beyondTolerance = Math.abs(rmse.change) > toleranceNats;
  const pct = `${+(level * 100).toPrecision(6)}%`;
  const testName = paired ? 'mean paired difference of squared errors' : 'difference of mean squared errors';

  let status: CellStatus;
  if (bitIdentical(base.estimates, next.estimates)) {
    status = 'unchanged';
    reasons.unshift('every estimate is bit-identical');
  } else if (failuresRose) {
    status = 'worse';
    reasons.unshift(`failures rose from ${base.scores.failures} to ${next.scores.failures} of ${next.estimates.length}`);
  } else if (significant && beyondTolerance) {
    status = test!.difference > 0 ? 'worse' : 'improved';
    reasons.unshift(`the ${pct} interval of the ${testName} excludes 0 (p = ${formatNumber(test!.p)}) and |ΔRMSE| = ${formatNumber(Math.abs(rmse.change))} exceeds the tolerance ${formatNumber(toleranceNats)} nats`);
  } else if (failuresFell) {
    status = 'improved';
    reasons.unshift(`failures fell from ${base.scores.failures} to ${next.scores.failures} of ${next.estimates.length}`);
  } else if (paired && test !== null && test.difference === 0) {
    status = 'unchanged';
    reasons.unshift('the mean paired difference of squared errors is exactly 0');
  } else {
    status = 'changed-within-noise';
    if (test === null) reasons.unshift('too few successful replicates for a test');
    else if (significant) reasons.unshift(`significant (p = ${formatNumber(test.p)}) but |ΔRMSE| = ${formatNumber(Math.abs(rmse.change))} is within the tolerance ${formatNumber(toleranceNats)} nats`);
    else reasons.unshift(`the ${pct} interval of the ${testName} includes 0 (p = ${formatNumber(test.p)})`);
  }

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
    failures: { base: base.scores.failures, next: next.scores.failures },
    bias: scoreChange(base.scores.bias, next.scores.bias),
    sd: scoreChange(base.scores.sd, next.scores.sd),
    rmse,
    shift,
    test,
    toleranceNats,
  };
}

function ref(cell: Cell): CellRef {
  return { scenario: cell.scenario, estimator: cell.estimator, n: cell.n, perturbation: cell.perturbation };
}

function truthOf(run: RunFile): Map<string, number> {
  return new Map(run.scenarios.map((s: ScenarioInfo) => [s.id, s.truth]));
}

/**
 * Matches cells by scenario, estimator spec (settings included), n and perturbation, and compares each pair.
 * Cells in only one run are listed as added or removed. Shard files (incomplete runs) are refused: their
 * missing replicates would look like failures.
 */
export function compareRuns(base: RunFile, next: RunFile, options: CompareOptions = {}, labels = { base: 'BASE', next: 'NEW' }): Comparison {
  for (const [run, label] of [[base, labels.base], [next, labels.next]] as const) {
    if (run.shard) throw new UsageError(`${label} is shard ${run.shard.index}/${run.shard.count} of a run; merge the shards (hhat merge) and compare the merged file`);
    if (!run.complete) throw new UsageError(`${label} is an incomplete run; finish it (bench --resume) before comparing`);
  }
  const tolerance = options.tolerance ?? { kind: 'nats', value: 0 };
  const level = options.level ?? DEFAULT_LEVEL;
  const pairing = decidePairing(base, next, options.pairing);
  const truthBase = truthOf(base);
  const truthNext = truthOf(next);
  const nextCells = new Map(next.cells.map((c) => [cellKey(c), c]));
  const baseKeys = new Set(base.cells.map(cellKey));

  const cells: CellComparison[] = [];
  const removed: CellRef[] = [];
  for (const cell of base.cells) {
    const other = nextCells.get(cellKey(cell));
    if (!other) {
      removed.push(ref(cell));
      continue;
    }
    cells.push(compareCell(cell, other, truthBase.get(cell.scenario)!, truthNext.get(other.scenario)!, pairing.paired, tolerance, level));
  }
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
    counts,
    cells,
    added,
    removed,
  };
}

/**
 * Cells that fail a CI policy: 'worse' fails worse cells (failures rising, or significantly larger squared
 * errors beyond the tolerance); 'changed' fails every cell that is not bit-identical (or exactly equal in
 * mean squared error), which guards refactorings that should not move any number.
 */
export function failingCells(comparison: Comparison, failOn: FailOn): CellComparison[] {
  return comparison.cells.filter((c) => (failOn === 'worse' ? c.status === 'worse' : c.status !== 'unchanged'));
}

/** Whether the comparison fails the policy; under 'changed' a cell added or removed fails too. */
export function failsPolicy(comparison: Comparison, failOn: FailOn): boolean {
  return failingCells(comparison, failOn).length > 0 || (failOn === 'changed' && comparison.added.length + comparison.removed.length > 0);
}

export function parseFailOn(text: string): FailOn {
  if (text === 'worse' || text === 'changed') return text;
  throw new UsageError(`--fail-on ${text} is not allowed; it must be worse (a cell got worse beyond the tolerance) or changed (any cell differs)`);
}
