/**
 * Ranks of the estimators in each cell (scenario × n) and their averages, with failures counted against the
 * estimator that failed.
 *
 * Per cell (one rule, also in the README, "Ranks and the best set"):
 * 1. An estimator whose failure rate exceeds the plan's `maxFailureRate` (default 0: any failure) did not run
 *    the cell: it is listed after every estimator that did, marked with its failure count, and takes the
 *    cell's last rank (the number of estimators in the cell). Its RMSE over the replicates that succeeded is
 *    shown but decides nothing, since failures are seldom a random subset of the draws.
 * 2. An estimator with a finite RMSE whose squared error overflowed is not failed but cannot be compared by
 *    mean loss either; it comes after the comparable ones, before the failed ones.
 * 3. The rest are compared on their squared errors over the replicates where all of them succeeded (every
 *    replicate when maxFailureRate is 0). The best set is their Model Confidence Set (src/analysis/best-set.ts), less
 *    any member that another member beats on significantly more draws than it loses to it, a failure losing to
 *    an estimate (the sign-test guard below); the two checks share α = 1 − level by Bonferroni, α/2 each. What the set aims to
 *    hold is therefore not every estimator of smallest mean squared error, but every such estimator that no
 *    other one beats on more than half of the draws: an estimator of equal mean squared error that loses on
 *    most draws is left out on purpose. Best-set members share rank 1; the others follow by RMSE with ordinal
 *    ranks; within each part, estimators with (allowed) failures come after those without.
 *
 * Average ranks per dimension/tail group run over the same cells for every estimator: all the group's cells
 * it could run by design (a cell exists for it), failed ones counted as last. Cells it cannot run by design
 * (dimension) hold no cell and do not enter its average.
 */
import { modelConfidenceSet } from './best-set.js';
import { signTestAbove } from './exact-tests.js';
import { holmAdjusted } from './holm.js';
import type { CellScores } from './score.js';
import type { VerdictSettings } from '../harness/plan.js';

/** What ranking needs of a cell. */
export interface RankableCell {
  scenario: string;
  estimator: string;
  n: number;
  perturbation: string | null;
  estimates: (number | null)[];
  scores: CellScores;
}

export type RankStatus = 'ranked' | 'unbounded-error' | 'failed';

export interface RankEntry {
  estimator: string;
  rank: number;
  /** ranked: compared in the best-set procedure; unbounded-error: squared error overflowed; failed: failure rate above maxFailureRate. */
  status: RankStatus;
  /** In the best set: cannot be told apart from the best at the ranking's level. */
  best: boolean;
  /** The estimator's MCS p-value (null unless ranked). */
  pValue: number | null;
  /**
   * Confidence-set members: the smallest one-sided exact sign-test p that it is worse than another member on more
   * draws than better (before Holm's adjustment over all pairs of members); null for the others.
   */
  signP: number | null;
  rmse: number;
  rmseSe: number;
  failures: number;
  replicates: number;
}

export interface Ranking {
  scenario: string;
  n: number;
  perturbation: string | null;
  level: number;
  /** Replicates on which the ranked estimators were compared (those where every one of them succeeded). */
  comparedReplicates: number;
  /** Entries in printed order: best set, the rest of the ranked by RMSE, unbounded errors, failed. */
  entries: RankEntry[];
}

export interface GroupRank {
  meanRank: number;
  /**
   * Mean of (rank − 1)/(K − 1) over the cells, K the estimators ranked in each: 0 = best, 1 = last. Within a
   * dimension/tail group every estimator meets the same competitors, but over all cells an estimator for one
   * dimension meets fewer than one for any (9 against 5 in the default plan's higher dimensions), so only this
   * puts their "all" averages on one scale. Set on `all` only.
   */
  meanRelativeRank?: number;
  /** Cells averaged (scenario × n). */
  cells: number;
  /** Of those, cells it failed (ranked last). */
  failedCells: number;
}

export interface OverallRank {
  estimator: string;
  /** Per group "d=1/light" etc.; absent where the estimator has no cell (cannot run by design). */
  groups: Record<string, GroupRank>;
  /** Over every cell it could run. */
  all: GroupRank;
}

function failed(cell: RankableCell, settings: VerdictSettings): boolean {
  return cell.scores.replicates > 0 && cell.scores.failures / cell.scores.replicates > settings.maxFailureRate;
}

/** By RMSE, a missing or infinite one last, then by name. */
function byRmse(a: RankableCell, b: RankableCell): number {
  const x = Number.isFinite(a.scores.rmse.value) ? a.scores.rmse.value : Infinity;
  const y = Number.isFinite(b.scores.rmse.value) ? b.scores.rmse.value : Infinity;
  return x - y || a.estimator.localeCompare(b.estimator);
}

/** Ranks one cell's estimators (all on the same scenario, n and perturbation). */
export function rankCell(group: RankableCell[], truth: number, settings: VerdictSettings, seed: string): Ranking {
  const last = group.length;
  const failing = group.filter((c) => failed(c, settings));
  const running = group.filter((c) => !failed(c, settings));
  const comparable = running.filter((c) => Number.isFinite(c.scores.rmse.value));
  const unbounded = running.filter((c) => !Number.isFinite(c.scores.rmse.value));

  // Replicates where every comparable estimator succeeded; their squared errors are the paired losses.
  const replicates = group[0]?.estimates.length ?? 0;
  const common: number[] = [];
  for (let r = 0; r < replicates; r++) if (comparable.every((c) => c.estimates[r] !== null)) common.push(r);
  const losses = comparable.map((c) => common.map((r) => (c.estimates[r]! - truth) ** 2));
  const usable = losses.every((l) => l.every(Number.isFinite));
  // Two checks share α by Bonferroni: the confidence set on mean squared error, then the sign-test guard.
  const alpha = 1 - settings.level;
  const result = usable ? modelConfidenceSet(losses, { level: 1 - alpha / 2, seed }) : null;
  const pOf = new Map(comparable.map((c, i) => [c, result ? result.pValues[i] : 1]));
  const members = comparable.filter((_c, i) => (result ? result.inSet[i] : true));
  const guard = signGuard(members, truth, alpha / 2);
  const inSet = (c: RankableCell) => members.includes(c) && !guard.dropped.has(c);

  // Within the set and below it, an estimator with failures (allowed by maxFailureRate) comes after those without:
  // its RMSE is over the draws it answered, which may be the easy ones, so it cannot head the list by that RMSE.
  const byFailuresThenRmse = (a: RankableCell, b: RankableCell) => Number(a.scores.failures > 0) - Number(b.scores.failures > 0) || byRmse(a, b);
  const best = comparable.filter(inSet).sort(byFailuresThenRmse);
  const rest = comparable.filter((c) => !inSet(c)).sort(byFailuresThenRmse);
  const entry = (c: RankableCell, rank: number, status: RankStatus): RankEntry => ({
    estimator: c.estimator,
    rank,
    status,
    best: status === 'ranked' && inSet(c),
    pValue: status === 'ranked' ? pOf.get(c)! : null,
    signP: status === 'ranked' ? (guard.p.get(c) ?? null) : null,
    rmse: c.scores.rmse.value,
    rmseSe: c.scores.rmse.se,
    failures: c.scores.failures,
    replicates: c.scores.replicates,
  });
  const entries: RankEntry[] = [
    ...best.map((c) => entry(c, 1, 'ranked')),
    ...rest.map((c, i) => entry(c, best.length + i + 1, 'ranked')),
    ...unbounded.sort((a, b) => a.estimator.localeCompare(b.estimator)).map((c, i) => entry(c, comparable.length + i + 1, 'unbounded-error')),
    ...failing.sort((a, b) => a.scores.failures - b.scores.failures || byRmse(a, b)).map((c) => entry(c, last, 'failed')),
  ];
  return { scenario: group[0].scenario, n: group[0].n, perturbation: group[0].perturbation, level: settings.level, comparedReplicates: common.length, entries };
}

/**
 * The second check on the best set: a member that another member beats on significantly more draws than it loses
 * to it is dropped. For every ordered pair of members (c, d), a one-sided exact sign test on the paired squared
 * errors over all the cell's draws, a failure losing to an estimate (drawsWorseAndBetter), that c is worse than d
 * on more draws than better (ties dropped); Holm's step-down over all K(K − 1) of
 * them (Holm, Scand. J. Statist. 6:65–70, 1979) at `level`. A mean cannot separate an estimator whose squared
 * errors are dominated by a few far-off draws (the same draws inflate the mean's SE), however often it loses; the
 * sign test counts every draw once. (The confidence set's bootstrap also assumes loss differences with finite
 * variance, which such errors may not have.)
 *
 * Every pair is tested, not each member against a leader chosen from the same draws: the member of smallest RMSE
 * is the one that did best on these draws, so among equally good estimators it wins more than half of its
 * pairings by selection, and testing against it dropped an equally good estimator far more often than `level`
 * (9% of cells for eight exchangeable estimators at a nominal 2.5%). With the pairs fixed in advance each test
 * holds its level, and Holm holds the family's. Should every member be beaten by another (a cycle, which sign
 * tests allow), the guard drops none: it cannot say which of them is best.
 */
function signGuard(members: RankableCell[], truth: number, level: number): { p: Map<RankableCell, number>; dropped: Set<RankableCell> } {
  const p = new Map<RankableCell, number>();
  const dropped = new Set<RankableCell>();
  if (members.length < 2) return { p, dropped };
  const tests: { loser: RankableCell; p: number }[] = [];
  for (const c of members) {
    for (const d of members) {
      if (d === c) continue;
      const { worse, better } = drawsWorseAndBetter(c.estimates, d.estimates, truth);
      const pValue = signTestAbove(worse, better);
      tests.push({ loser: c, p: pValue });
      p.set(c, Math.min(p.get(c) ?? 1, pValue));
    }
  }
  const adjusted = holmAdjusted(tests.map((t) => t.p));
  tests.forEach((t, i) => {
    if (adjusted[i] <= level) dropped.add(t.loser);
  });
  if (dropped.size === members.length) dropped.clear();
  return { p, dropped };
}

/**
 * On how many draws `mine` is further from the truth than `theirs`, and on how many closer. A failure (null) loses
 * to an estimate and ties with a failure: failures count against the estimator that failed, also where the plan
 * allows some, so an estimator that fails on the draws it would get wrong is not judged on the others alone.
 */
function drawsWorseAndBetter(mine: (number | null)[], theirs: (number | null)[], truth: number): { worse: number; better: number } {
  let worse = 0;
  let better = 0;
  for (let r = 0; r < mine.length; r++) {
    const a = mine[r];
    const b = theirs[r];
    if (a === null || b === null) {
      if (a === null && b !== null) worse++;
      else if (a !== null && b === null) better++;
      continue;
    }
    const lossA = (a - truth) ** 2;
    const lossB = (b - truth) ** 2;
    if (lossA > lossB) worse++;
    else if (lossA < lossB) better++;
  }
  return { worse, better };
}

/** Rankings of every (scenario, n, perturbation) group of cells; `seedOf` names each group's bootstrap seed. */
export function rankCells(
  cells: RankableCell[],
  truthOf: (scenario: string) => number,
  settings: VerdictSettings,
  seedOf: (scenario: string, n: number) => string,
): Ranking[] {
  const groups = new Map<string, RankableCell[]>();
  for (const c of cells) {
    const k = `${c.scenario}|${c.n}|${c.perturbation ?? ''}`;
    if (!groups.has(k)) groups.set(k, []);
    groups.get(k)!.push(c);
  }
  return [...groups.values()].map((group) => rankCell(group, truthOf(group[0].scenario), settings, seedOf(group[0].scenario, group[0].n)));
}

interface Tally {
  sum: number;
  relative: number;
  cells: number;
  failed: number;
}

function tally(into: Tally, entry: RankEntry, competitors: number): void {
  into.sum += entry.rank;
  into.relative += competitors > 1 ? (entry.rank - 1) / (competitors - 1) : 0;
  into.cells += 1;
  if (entry.status === 'failed') into.failed += 1;
}

/** Average ranks per group (named by `groupOf(scenario)`) and over all cells. */
export function overallRanks(rankings: Ranking[], groupOf: (scenario: string) => string): OverallRank[] {
  const rows = new Map<string, { groups: Map<string, Tally>; all: Tally }>();
  for (const ranking of rankings) {
    if (ranking.perturbation !== null) continue;
    const group = groupOf(ranking.scenario);
    for (const entry of ranking.entries) {
      let row = rows.get(entry.estimator);
      if (!row) rows.set(entry.estimator, (row = { groups: new Map(), all: { sum: 0, relative: 0, cells: 0, failed: 0 } }));
      if (!row.groups.has(group)) row.groups.set(group, { sum: 0, relative: 0, cells: 0, failed: 0 });
      tally(row.groups.get(group)!, entry, ranking.entries.length);
      tally(row.all, entry, ranking.entries.length);
    }
  }
  const summary = ({ sum, cells, failed }: Tally): GroupRank => ({ meanRank: sum / cells, cells, failedCells: failed });
  return [...rows.entries()].map(([estimator, row]) => ({
    estimator,
    groups: Object.fromEntries([...row.groups.entries()].map(([g, v]) => [g, summary(v)])),
    // Only "all" mixes cells with different numbers of competitors; within a group the plain mean compares.
    all: { ...summary(row.all), meanRelativeRank: row.all.relative / row.all.cells },
  }));
}
