/**
 * Ranks and best sets: the model confidence set against an independent implementation, the verdict on
 * constructed cases whose answer is known, and failures counted against the estimator that failed.
 */
import { describe, expect, it } from 'vitest';
import normalRandom from '@stdlib/random-base-normal';
import normalEntropy from '@stdlib/stats-base-dists-normal-entropy';
import { bootstrapIndices, modelConfidenceSet } from '../src/analysis/best-set.js';
import { overallRanks, rankCell, type RankableCell, type Ranking } from '../src/analysis/ranking.js';
import { scoreCell } from '../src/analysis/score.js';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun } from '../src/analysis/results.js';
import { rngFromSeed } from '../src/core/rng.js';
import { registerEstimator, listEstimators } from '../estimators/index.js';
import { rankText } from '../src/views/verdict-text.js';
import { flakyExact } from './fixtures/flaky-exact-estimator.js';
import reference from './fixtures/best-set.json' with { type: 'json' };

describe('model confidence set (reference: NumPy implementation of Hansen, Lunde & Nason 2011, test/fixtures/make_best_set_fixture.py)', () => {
  it.each(reference.cases.map((c) => [c.name, c] as const))('%s: the same p-values and elimination order on the same resamples', (_name, c) => {
    const result = modelConfidenceSet(c.losses, { level: 0.95, seed: 'unused', resamples: c.resamples, indices: Uint32Array.from(c.indices) });
    expect(result.pValues).toEqual(c.pValues);
    expect(result.eliminationOrder).toEqual(c.eliminationOrder);
    expect(result.inSet).toEqual(c.pValues.map((p) => p >= 0.05));
  });

  it('is deterministic: the same seed gives the same indices and set; another seed other indices', () => {
    expect(bootstrapIndices('cell a', 30, 50)).toEqual(bootstrapIndices('cell a', 30, 50));
    expect(bootstrapIndices('cell a', 30, 50)).not.toEqual(bootstrapIndices('cell b', 30, 50));
    const losses = reference.cases[0].losses;
    expect(modelConfidenceSet(losses, { level: 0.9, seed: 's' })).toEqual(modelConfidenceSet(losses, { level: 0.9, seed: 's' }));
  });

  it('gives the same p-values to losses near the top of the double range as to the same losses scaled down', () => {
    // The statistic is a ratio, so a common scale cannot change it. Squared bootstrap deviations of losses near
    // 1e200 (an estimate 1e100 off) overflowed to +∞: the spread was +∞, t = 0, and the worst estimator's p-value
    // was 1 (found by a statistician's review: such an estimator ranked "1=").
    for (const c of reference.cases) {
      const options = { level: 0.95, seed: 'unused', resamples: c.resamples, indices: Uint32Array.from(c.indices) };
      const scaled = modelConfidenceSet(
        c.losses.map((l) => l.map((x) => x * 2 ** 700)),
        options,
      );
      expect(scaled.pValues, c.name).toEqual(modelConfidenceSet(c.losses, options).pValues);
    }
    // An exact estimator against one that is 30 off on 3 of 30 draws and exact elsewhere, and the same with the
    // far-off losses 2^600 times larger (errors near 1e92): the same p-value, not 1.
    const exact = new Array<number>(30).fill(0);
    const ordinary = exact.map((_x, r) => (r % 10 === 3 ? 900 : 0));
    const wild = ordinary.map((x) => x * 2 ** 600);
    const [pOrdinary, pWild] = [ordinary, wild].map((l) => modelConfidenceSet([exact, l], { level: 0.95, seed: 'wild' }).pValues[1]);
    expect(pOrdinary).toBeLessThan(1);
    expect(pWild).toBe(pOrdinary);
  });

  it('keeps one estimator, or identical ones, without a test', () => {
    expect(modelConfidenceSet([[1, 2, 3]], { level: 0.95, seed: 's' }).inSet).toEqual([true]);
    const same = [0.3, 0.1, 0.7, 0.2];
    expect(modelConfidenceSet([same, same, same], { level: 0.95, seed: 's' }).inSet).toEqual([true, true, true]);
    // A constant gap on every replicate is certain, however small.
    expect(modelConfidenceSet([same, same.map((x) => x + 1e-6)], { level: 0.95, seed: 's' }).inSet).toEqual([true, false]);
  });
});

/** A cell of replicate estimates, scored as the harness scores it. */
function cell(estimator: string, estimates: (number | null)[], truth: number): RankableCell {
  return {
    scenario: 's',
    estimator,
    n: 100,
    perturbation: null,
    estimates,
    scores: scoreCell(
      estimates.map((v) => (v === null ? NaN : v)),
      truth,
      100,
    ),
  };
}

/** Paired z of the squared-error difference a − b (mean over its SE), computed directly. */
function pairedZ(a: number[], b: number[], truth: number): number {
  const d = a.map((x, r) => (x - truth) ** 2 - (b[r] - truth) ** 2);
  const mean = d.reduce((s, x) => s + x, 0) / d.length;
  const variance = d.reduce((s, x) => s + (x - mean) ** 2, 0) / (d.length - 1);
  return mean / Math.sqrt(variance / d.length);
}

describe('best set verdicts on constructed cases', () => {
  it('an estimator the neighbour chain would rank 1= but whose paired z against the leader is above 3 is not in the best set', () => {
    // Errors share a draw-to-draw component (the same samples) and a common bias. A and C follow it closely,
    // C 0.015 nats higher, so their paired comparison is precise; B has no extra bias but noise of its own,
    // so it cannot be separated from either neighbour. The neighbour chain A – B – C would give C "1=".
    const normal = normalRandom.factory({ prng: rngFromSeed('chain') });
    const R = 40;
    const shared = Array.from({ length: R }, () => 0.05 + normal(0, 0.05));
    const a = shared.map((s) => s + normal(0, 0.005));
    const b = shared.map((s) => s + normal(0, 0.02));
    const c = shared.map((s) => s + 0.015 + normal(0, 0.005));
    const ranking = rankCell([cell('C', c, 0), cell('B', b, 0), cell('A', a, 0)], 0, { level: 0.95, maxFailureRate: 0 }, 'chain');
    // The chain's premises, computed directly: RMSE order A < B < C, adjacent pairs within |z| < 2, C against A above 3.
    expect(ranking.entries.map((e) => e.estimator)).toEqual(['A', 'B', 'C']);
    expect(Math.abs(pairedZ(b, a, 0))).toBeLessThan(2);
    expect(Math.abs(pairedZ(c, b, 0))).toBeLessThan(2);
    expect(pairedZ(c, a, 0)).toBeGreaterThan(3);
    expect(ranking.entries.map((e) => [e.estimator, e.rank, e.best])).toEqual([
      ['A', 1, true],
      ['B', 1, true],
      ['C', 3, false],
    ]);
    expect(ranking.entries[2].pValue).toBeLessThan(0.05);
  });

  it('a member the mean cannot separate, because one far-off draw dominates its squared errors, is dropped when it loses on most draws', () => {
    const normal = normalRandom.factory({ prng: rngFromSeed('guard') });
    const a = Array.from({ length: 30 }, () => normal(0, 0.05));
    // B is 1.5 times further from the truth than A on every draw, and 50 nats off on one of them.
    const b = a.map((e, r) => (r === 7 ? 50 : 1.5 * e));
    const squared = (x: number[]) => x.map((e) => e * e);
    // The confidence set alone keeps B (level 0.975, as in the ranking): its mean loss is too noisy.
    expect(modelConfidenceSet([squared(a), squared(b)], { level: 0.975, seed: 'guard' }).inSet).toEqual([true, true]);
    const ranking = rankCell([cell('A', a, 0), cell('B', b, 0)], 0, { level: 0.95, maxFailureRate: 0 }, 'guard');
    const entry = ranking.entries.find((e) => e.estimator === 'B')!;
    // B is worse on all 30 draws: one-sided sign-test p = 2^-30 (the binomial tail, by hand).
    expect(entry.signP).toBeCloseTo(2 ** -30, 20);
    expect(entry.best).toBe(false);
    expect(entry.rank).toBe(2);
  });

  it('of two estimators of equal mean squared error, keeps the one closer on most draws and drops the other, whichever leads (400 simulations)', () => {
    // A is 1 off on every draw; B is √0.5 off on 80% of draws and √3 off on the rest: E[loss] = 1 for both
    // (0.8·0.5 + 0.2·3 = 1, by hand). The set aims at the estimators of smallest mean squared error that no other
    // beats on more than half of the draws: B, not A (B beats A on 80% of draws). B should be in the set in at
    // least 95% of simulations; A is dropped by the sign-test guard, also when its sample RMSE is the smaller
    // (every pair of members is tested, not members against a leader).
    const uniform = rngFromSeed('equal mse');
    const R = 100;
    const simulations = 400;
    let missedB = 0;
    let droppedA = 0;
    let droppedAWhileLeading = 0;
    for (let s = 0; s < simulations; s++) {
      const a = Array.from({ length: R }, () => 1);
      const b = Array.from({ length: R }, () => (uniform() < 0.8 ? Math.sqrt(0.5) : Math.sqrt(3)));
      const ranking = rankCell([cell('A', a, 0), cell('B', b, 0)], 0, { level: 0.95, maxFailureRate: 0 }, `equal mse ${s}`);
      const [entryA, entryB] = ['A', 'B'].map((id) => ranking.entries.find((e) => e.estimator === id)!);
      if (!entryB.best) missedB++;
      if (!entryA.best) {
        droppedA++;
        if (entryA.rmse < entryB.rmse) droppedAWhileLeading++;
      }
    }
    // Binomial 99.9% bound for 400 draws at 5%: 8.4%, allowed as 8.5% (as in the next test). Measured when
    // written: B missed in 2 of 400; A dropped in 398 of 400, 169 of them while its RMSE was the smaller (the
    // guard against the leader dropped A in 188, never while A led).
    expect(missedB / simulations).toBeLessThan(0.085);
    expect(droppedA / simulations).toBeGreaterThan(0.95);
    expect(droppedAWhileLeading).toBeGreaterThan(0);
  });

  it('keeps every one of eight equally good estimators in at least about 95% of simulated benchmarks (400 simulations)', () => {
    // Exchangeable estimators (errors share the draw's component, plus noise of their own of one law): each is a
    // target of the set, and each beats each other on half of the draws. Testing members against the leader (the
    // member of smallest RMSE, chosen from the same draws) dropped one in 9% of these simulations, at a nominal
    // 5% (found by a statistician's review); every pair tested, with Holm, holds the level.
    const normal = normalRandom.factory({ prng: rngFromSeed('exchangeable') });
    const R = 30;
    const simulations = 400;
    let missed = 0;
    for (let s = 0; s < simulations; s++) {
      const shared = Array.from({ length: R }, () => normal(0, 0.1));
      const cells = Array.from({ length: 8 }, (_, i) =>
        cell(
          `E${i}`,
          shared.map((x) => x + normal(0, 0.05)),
          0,
        ),
      );
      const ranking = rankCell(cells, 0, { level: 0.95, maxFailureRate: 0 }, `exchangeable ${s}`);
      if (ranking.entries.some((e) => !e.best)) missed++;
    }
    // Binomial 99.9% bound for 400 draws at 5%: 8.4%, allowed as 8.5%. Measured when written: 20 of 400 (5.0%;
    // the confidence set and the guard spend 2.5% each). The guard against the leader: 36 of 400 (9%).
    expect(missed / simulations).toBeLessThan(0.085);
  });

  it('misses a best estimator in at most about 5% of simulated benchmarks (two equally good, three worse; 400 simulations)', () => {
    // Under the null for the two best, the set should miss either of them in at most 5% of simulations; the
    // binomial 99.9% bound for 400 draws at 5% is 5% + 3.1·√(0.05·0.95/400) ≈ 8.4%, allowed here as 8.5%.
    const normal = normalRandom.factory({ prng: rngFromSeed('coverage') });
    const R = 30;
    let missed = 0;
    let excludedWorst = 0;
    const simulations = 400;
    for (let s = 0; s < simulations; s++) {
      const shared = Array.from({ length: R }, () => normal(0, 0.1));
      const losses = [0, 0, 0.02, 0.04, 0.15].map((bias) => shared.map((x) => (x + bias + normal(0, 0.05)) ** 2));
      const result = modelConfidenceSet(losses, { level: 0.95, seed: `coverage ${s}`, resamples: 500 });
      if (!result.inSet[0] || !result.inSet[1]) missed++;
      if (!result.inSet[4]) excludedWorst++;
    }
    // Measured when written: 3.75% missed, the worst excluded in 96.25%.
    expect(missed / simulations).toBeLessThan(0.085);
    // And it has power: the clearly worse estimator (bias 0.15 against errors of SD 0.11) is excluded nearly always.
    expect(excludedWorst / simulations).toBeGreaterThan(0.95);
  });

  it('with failures allowed, an estimator that fails on the draws it would get wrong loses those draws in the sign test', () => {
    // C answers exactly as B where B is within 0.03 of the truth and fails elsewhere (about half the draws), so on
    // the draws both answered the two tie, and C's RMSE over its own answers is the smaller. Found by a
    // statistician's review: C led the set. Counting each failure as a loss to B's estimate, C loses about 30
    // draws and wins none.
    const normal = normalRandom.factory({ prng: rngFromSeed('selective failures') });
    const b = Array.from({ length: 60 }, () => normal(0, 0.05));
    const c = b.map((e) => (Math.abs(e) <= 0.03 ? e : null));
    const failures = c.filter((e) => e === null).length;
    expect(failures).toBeGreaterThan(20);
    const ranking = rankCell([cell('C', c, 0), cell('B', b, 0)], 0, { level: 0.95, maxFailureRate: 0.8 }, 'selective');
    expect(ranking.entries.map((e) => [e.estimator, e.rank, e.best, e.status])).toEqual([
      ['B', 1, true, 'ranked'],
      ['C', 2, false, 'ranked'],
    ]);
    // One-sided sign test: C worse on every draw it failed, better on none: p = 2^-failures (by hand).
    expect(ranking.entries[1].signP).toBeCloseTo(2 ** -failures, 20);
    expect(ranking.entries[1].rmse).toBeLessThan(ranking.entries[0].rmse);
  });

  it('a failing estimator is listed after every one that ran and takes the last rank; an overflowing error comes before it', () => {
    const truth = 1;
    const good = [1.1, 0.9, 1.05, 0.95, 1.02, 0.97];
    const ranking = rankCell(
      [
        cell('flaky', [1, 1, null, 1, 1, 1], truth),
        cell('good', good, truth),
        cell(
          'wild',
          good.map((v, r) => (r === 2 ? 1e200 : v)),
          truth,
        ),
        cell(
          'fine',
          good.map((v) => v + 0.01),
          truth,
        ),
      ],
      truth,
      { level: 0.95, maxFailureRate: 0 },
      'x',
    );
    expect(ranking.entries.map((e) => [e.estimator, e.rank, e.status])).toEqual([
      ['good', 1, 'ranked'],
      ['fine', 1, 'ranked'],
      ['wild', 3, 'unbounded-error'],
      ['flaky', 4, 'failed'],
    ]);
    expect(rankText(ranking.entries[3], ranking)).toBe('4 (failed 1/6)');
    expect(rankText(ranking.entries[0], ranking)).toBe('1=');
    // With a failure allowance the flaky one is compared, on the replicates where every estimator ran.
    const lenient = rankCell([cell('flaky', [1, 1, null, 1, 1, 1], truth), cell('good', good, truth)], truth, { level: 0.95, maxFailureRate: 0.2 }, 'x');
    expect(lenient.comparedReplicates).toBe(5);
    expect(lenient.entries.every((e) => e.status === 'ranked')).toBe(true);
  });

  it('average ranks run over the same cells for everyone, failed cells last, cells it cannot run by design left out', () => {
    const entry = (estimator: string, rank: number, status: 'ranked' | 'failed' = 'ranked') => ({
      estimator,
      rank,
      status,
      best: rank === 1,
      pValue: null,
      signP: null,
      rmse: 0,
      rmseSe: 0,
      failures: 0,
      replicates: 10,
    });
    const rankings: Ranking[] = [
      { scenario: 'a', n: 10, perturbation: null, level: 0.95, comparedReplicates: 10, entries: [entry('x', 1), entry('y', 2)] },
      { scenario: 'b', n: 10, perturbation: null, level: 0.95, comparedReplicates: 10, entries: [entry('x', 1), entry('y', 2, 'failed')] },
      { scenario: 'c', n: 10, perturbation: null, level: 0.95, comparedReplicates: 10, entries: [entry('x', 1)] },
    ];
    const overall = overallRanks(rankings, (s) => (s === 'c' ? 'd=3' : 'd=1'));
    const y = overall.find((o) => o.estimator === 'y')!;
    expect(y.groups['d=3']).toBeUndefined();
    expect(y.groups['d=1']).toEqual({ meanRank: 2, cells: 2, failedCells: 1 });
    expect(overall.find((o) => o.estimator === 'x')!.all).toEqual({ meanRank: 1, meanRelativeRank: 0, cells: 3, failedCells: 0 });
  });

  it('"all" puts estimators that meet different numbers of competitors on one scale: (rank − 1)/(K − 1)', () => {
    const entry = (estimator: string, rank: number) =>
      ({ estimator, rank, status: 'ranked', best: rank === 1, pValue: null, signP: null, rmse: 0, rmseSe: 0, failures: 0, replicates: 10 }) as const;
    const cell = (scenario: string, entries: ReturnType<typeof entry>[]): Ranking => ({
      scenario,
      n: 10,
      perturbation: null,
      level: 0.95,
      comparedReplicates: 10,
      entries,
    });
    // A one-dimensional specialist s is 2nd of 9 in one cell; a generalist g is 1st of 9 there and 3rd of 3 in a
    // 3-D cell. Plain mean ranks, 2 against 2, tie; relative ranks, 1/8 against (0 + 1)/2, do not.
    const nine = ['g', 's', 'a', 'b', 'c', 'd', 'e', 'f', 'h'].map((e, i) => entry(e, i + 1));
    const overall = overallRanks([cell('one', nine), cell('three', [entry('x', 1), entry('y', 2), entry('g', 3)])], (s) => s);
    const of = (e: string) => overall.find((o) => o.estimator === e)!.all;
    expect(of('s').meanRank).toBe(of('g').meanRank);
    expect(of('s').meanRelativeRank).toBe(1 / 8);
    expect(of('g').meanRelativeRank).toBe(0.5);
  });
});

describe('a benchmark with an estimator that fails on 40% of draws and is exact otherwise', () => {
  it('is never in the best set of a cell where it failed, and its average rank is worse than a working estimator', async () => {
    if (!listEstimators().some((e) => e.id === flakyExact.id)) registerEstimator(flakyExact);
    const { plan } = resolvePlan({
      scenarios: ['normal'],
      estimators: ['flaky-exact', 'kozachenko-leonenko'],
      sampleSizes: [50, 200, 800],
      replicates: 20,
      seed: 11,
    });
    const run = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
    const flaky = run.cells.filter((c) => c.estimator.startsWith('flaky-exact'));
    // The fixture really is exact where it runs and fails on roughly 40% (here: every cell has failures).
    for (const c of flaky) {
      expect(c.scores.failures).toBeGreaterThan(0);
      for (const v of c.estimates) if (v !== null) expect(v).toBe(normalEntropy(0, 1));
    }
    const total = flaky.reduce((s, c) => s + c.scores.failures, 0);
    expect(total / (flaky.length * 20)).toBeGreaterThan(0.25);
    // Every cell had failures (above), so in every one it is out of the best set and last.
    for (const ranking of run.rankings) {
      const entry = ranking.entries.find((e) => e.estimator.startsWith('flaky-exact'))!;
      expect(entry.failures).toBeGreaterThan(0);
      expect(entry.best).toBe(false);
      expect(entry.rank).toBe(ranking.entries.length);
    }
    const average = (id: string) => run.overall.find((o) => o.estimator.startsWith(id))!.all;
    expect(average('flaky-exact').meanRank).toBeGreaterThan(average('kozachenko-leonenko').meanRank);
    expect(average('flaky-exact').cells).toBe(average('kozachenko-leonenko').cells);
  });
});
