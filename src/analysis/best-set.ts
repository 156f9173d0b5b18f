/**
 * The set of estimators that cannot be told apart from the best: the Model Confidence Set of Hansen, Lunde
 * and Nason (Econometrica 79(2):453–497, 2011), with their range statistic T_R, on paired losses (here the
 * squared errors of every estimator on the same replicates).
 *
 *   const result = modelConfidenceSet([lossesA, lossesB, lossesC], { level: 0.95, seed: 'cell key' });
 *   result.inSet    // [true, true, false]: A and B cannot be told apart from the best at level 0.95
 *   result.pValues  // MCS p-values: an estimator is in the set when its p-value is ≥ 1 − level
 *
 * The procedure (HLN 2011, §3.1.2, the T_R statistic and its elimination rule):
 *   t_ij = (L̄_i − L̄_j)/√v̂_ij, v̂_ij the bootstrap variance of L̄_i − L̄_j.
 *   M ← every estimator. Repeat:
 *     T = max_{i,j∈M} |t_ij|, and its bootstrap distribution T*_b = max_{i,j∈M} |ζ_b,i − ζ_b,j|/√v̂_ij, where
 *       ζ_b,i is resample b's mean loss of i minus the full-sample one: T under "all of M are equally good";
 *     p = #{b : T*_b ≥ T}/B; the estimator with the largest max_j t_ij leaves M with MCS p-value
 *       max(p, the p-values of those eliminated before it)
 *   until |M| = 1 (the last one's p-value is 1). The set at level 1 − α is {i : p_i ≥ α}.
 * Under its assumptions the set holds every best estimator with probability at least 1 − α as the number
 * of replicates grows (HLN 2011, Theorem 1). The pairwise statistic is used rather than T_max (each model
 * against the average of M) because one very noisy estimator would inflate that average and shield every
 * other estimator from elimination.
 *
 * Replicates are independent draws, so the bootstrap resamples single replicates (HLN's block bootstrap
 * with block length 1). Resampling is seeded: the same losses and seed give the same set on every machine.
 * p counts T*_b ≥ T (not >) so that estimators with identical losses stay together instead of one being
 * eliminated by a zero-width comparison.
 */
import { rngFromSeed } from '../core/rng.js';

export const DEFAULT_BOOTSTRAP_RESAMPLES = 2000;

export interface BestSetOptions {
  /** Confidence level 1 − α of the set (e.g. 0.95). */
  level: number;
  /** Seed string of the bootstrap resampling. */
  seed: string;
  resamples?: number;
  /**
   * Replicate indices of the resamples, row-major (resamples × replicates); drawn from `seed` when absent.
   * Tests pass their own to compare with an independent implementation.
   */
  indices?: Uint32Array;
}

export interface BestSetResult {
  /** MCS p-value of each estimator, in input order. */
  pValues: number[];
  /** Whether each estimator is in the set at the requested level. */
  inSet: boolean[];
  /** Input positions in the order they left the set (the survivors last). */
  eliminationOrder: number[];
  resamples: number;
}

/** Uniform replicate indices for `resamples` bootstrap resamples of `replicates` replicates. */
export function bootstrapIndices(seed: string, replicates: number, resamples: number): Uint32Array {
  const rng = rngFromSeed(`hhat-best-set-v1\n${seed}`);
  const indices = new Uint32Array(resamples * replicates);
  for (let p = 0; p < indices.length; p++) indices[p] = Math.floor(rng() * replicates);
  return indices;
}

/**
 * The Model Confidence Set of `losses` (one array per estimator, all of the same length, every value finite).
 * Lower loss is better.
 */
export function modelConfidenceSet(losses: ArrayLike<number>[], options: BestSetOptions): BestSetResult {
  const models = losses.length;
  const replicates = models ? losses[0].length : 0;
  for (const l of losses) {
    if (l.length !== replicates) throw new Error('modelConfidenceSet: every estimator needs a loss for the same replicates');
    for (let r = 0; r < replicates; r++) if (!Number.isFinite(l[r])) throw new Error('modelConfidenceSet: losses must be finite');
  }
  const resamples = options.resamples ?? DEFAULT_BOOTSTRAP_RESAMPLES;
  const alpha = 1 - options.level;
  if (models === 0) return { pValues: [], inSet: [], eliminationOrder: [], resamples };
  if (models === 1 || replicates < 2) {
    // Nothing to compare with, or no spread to compare by: every estimator stays.
    return { pValues: new Array<number>(models).fill(1), inSet: new Array<boolean>(models).fill(true), eliminationOrder: [...Array(models).keys()], resamples };
  }
  const indices = options.indices ?? bootstrapIndices(options.seed, replicates, resamples);
  if (indices.length !== resamples * replicates) throw new Error('modelConfidenceSet: indices must hold resamples × replicates entries');

  // Each step is its own function over typed rows: one function holding every loop was recompiled by V8
  // again and again (each call reached a loop whose feedback the optimised code did not have).
  const rows = losses.map((l) => Float64Array.from(l));
  const mean = meanLosses(rows, replicates);
  const zeta = bootstrapDeviations(rows, mean, indices, resamples, replicates);
  const pairScale = pairSpreads(zeta, models, resamples);
  const t = (i: number, j: number) => studentised(mean[i] - mean[j], pairScale[i * models + j]);

  const alive: number[] = [...Array(models).keys()];
  const pValues = new Array<number>(models).fill(1);
  const eliminationOrder: number[] = [];
  let runningP = 0;
  while (alive.length > 1) {
    let statistic = 0;
    let worst = alive[0];
    let worstScore = -Infinity;
    for (const i of alive) {
      let largest = -Infinity;
      for (const j of alive) if (j !== i) largest = Math.max(largest, t(i, j));
      statistic = Math.max(statistic, Math.abs(largest));
      // The estimator most clearly worse than some other leaves; equal scores: the larger mean loss, then the later one.
      if (largest > worstScore || (largest === worstScore && mean[i] >= mean[worst])) {
        worstScore = largest;
        worst = i;
      }
    }
    const atLeast = resamplesAtLeast(zeta, pairScale, Int32Array.from(alive), models, resamples, statistic);
    runningP = Math.max(runningP, atLeast / resamples);
    pValues[worst] = runningP;
    eliminationOrder.push(worst);
    alive.splice(alive.indexOf(worst), 1);
  }
  pValues[alive[0]] = 1;
  eliminationOrder.push(alive[0]);
  return { pValues, inSet: pValues.map((p) => p >= alpha), eliminationOrder, resamples };
}

/** Each estimator's mean loss. */
function meanLosses(rows: Float64Array[], replicates: number): Float64Array {
  const mean = new Float64Array(rows.length);
  for (let i = 0; i < rows.length; i++) {
    const l = rows[i];
    let sum = 0;
    for (let r = 0; r < replicates; r++) sum += l[r];
    mean[i] = sum / replicates;
  }
  return mean;
}

/**
 * zeta[b·models + i]: resample b's mean loss of estimator i minus the full-sample mean, computed once and reused
 * by every elimination step (HLN use the same resamples throughout).
 */
function bootstrapDeviations(rows: Float64Array[], mean: Float64Array, indices: Uint32Array, resamples: number, replicates: number): Float64Array {
  const models = rows.length;
  const zeta = new Float64Array(resamples * models);
  for (let b = 0; b < resamples; b++) {
    const row = b * replicates;
    for (let i = 0; i < models; i++) {
      const l = rows[i];
      let sum = 0;
      for (let r = 0; r < replicates; r++) sum += l[indices[row + r]];
      zeta[b * models + i] = sum / replicates - mean[i];
    }
  }
  return zeta;
}

/**
 * √v̂_ij for every pair, symmetric (v̂_ij does not depend on M: one pass over the resamples serves every step).
 * Each pair's sum of squares is taken in units of s_ij = max_b |ζ_bi| + max_b |ζ_bj| ≥ |ζ_bi − ζ_bj|, so that no
 * square overflows: an estimator 1e100 off on a few draws has deviations near 1e200, whose squares are +∞ in
 * double precision; v̂ was then +∞, its t statistics 0 and its p-value 1, the set's highest.
 */
function pairSpreads(zeta: Float64Array, models: number, resamples: number): Float64Array {
  // Two functions, one loop nest each: V8 compiled the first loop while it ran, without type information for
  // the second, and threw that code away on reaching it, again for every cell (30 times in a default run).
  const largest = largestDeviations(zeta, models, resamples);
  const pairScale = pairSquareSums(zeta, largest, models, resamples);
  for (let i = 0; i < models; i++) {
    for (let j = i + 1; j < models; j++) {
      const unit = largest[i] + largest[j];
      const sd = unit > 0 ? unit * Math.sqrt(pairScale[i * models + j] / resamples) : 0;
      pairScale[i * models + j] = sd;
      pairScale[j * models + i] = sd;
    }
  }
  return pairScale;
}

/** max_b |ζ_bi| for each estimator i. */
function largestDeviations(zeta: Float64Array, models: number, resamples: number): Float64Array {
  const largest = new Float64Array(models);
  for (let b = 0; b < resamples; b++) {
    const row = b * models;
    for (let i = 0; i < models; i++) largest[i] = Math.max(largest[i], Math.abs(zeta[row + i]));
  }
  return largest;
}

/** Σ_b ((ζ_bi − ζ_bj)/s_ij)² for every pair i < j, at [i·models + j] (s_ij as in pairSpreads; 0 where s_ij is 0). */
function pairSquareSums(zeta: Float64Array, largest: Float64Array, models: number, resamples: number): Float64Array {
  // Each pair's unit once, not once per resample. A division below, not a product with 1/s: 1/s overflows where s
  // is subnormal. |ζ_bi − ζ_bj| ≤ s, so a unit of 0 (both deviations 0 in every resample) is the only case skipped.
  const unit = new Float64Array(models * models);
  for (let i = 0; i < models; i++) for (let j = i + 1; j < models; j++) unit[i * models + j] = largest[i] + largest[j];
  const pairScale = new Float64Array(models * models);
  for (let b = 0; b < resamples; b++) {
    const row = b * models;
    for (let i = 0; i < models; i++) {
      for (let j = i + 1; j < models; j++) {
        const s = unit[i * models + j];
        const difference = s > 0 ? (zeta[row + i] - zeta[row + j]) / s : 0;
        pairScale[i * models + j] += difference * difference;
      }
    }
  }
  return pairScale;
}

/** #{b : T*_b ≥ T} over the estimators still in M (a resample stops counting once it reaches T). */
function resamplesAtLeast(zeta: Float64Array, pairScale: Float64Array, alive: Int32Array, models: number, resamples: number, statistic: number): number {
  let atLeast = 0;
  for (let b = 0; b < resamples; b++) {
    const row = b * models;
    let largest = 0;
    for (let a = 0; a < alive.length && largest < statistic; a++) {
      const i = alive[a];
      for (let c = a + 1; c < alive.length; c++) {
        const j = alive[c];
        const value = Math.abs(studentised(zeta[row + i] - zeta[row + j], pairScale[i * models + j]));
        if (value > largest) largest = value;
      }
    }
    // Added on every resample, not incremented in a branch: code compiled before the first resample reached T
    // had no type information for the increment, and was thrown away when one did.
    atLeast += largest >= statistic ? 1 : 0;
  }
  return atLeast;
}

/** d/s, with a zero spread read as certainty: the sign of d decides, and 0/0 is 0. */
function studentised(deviation: number, spread: number): number {
  if (spread > 0) return deviation / spread;
  return deviation > 0 ? Infinity : deviation < 0 ? -Infinity : 0;
}
