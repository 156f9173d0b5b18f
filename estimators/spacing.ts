/**
 * Spacing (m-spacing) estimators of one-dimensional differential entropy: Vasicek, van Es, Ebrahimi and
 * Correa. Each sorts the sample once and reads the density off the gaps between order statistics m apart:
 * F(X(i+m)) − F(X(i−m)) ≈ 2m/n, so f(X(i)) ≈ 2m / (n (X(i+m) − X(i−m))).
 *
 * Boundary conventions follow the papers as implemented by SciPy's `scipy.stats.differential_entropy`
 * (checked against its source, SciPy 1.17): order statistics outside 1..n are clamped to X(1) and X(n).
 * The fixture test/fixtures/spacing.json holds SciPy's values on fixed samples.
 *
 * Ties: a spacing of zero would make a log −Infinity, so it is reported as an EstimateError('ties') with
 * the number of zero spacings, of repeated values, and the longest run of equal values L (m ≥ L avoids
 * them all). Repeated values that leave every spacing positive are ordinary input for these methods.
 *
 *   const h = vasicekEntropy(sortAscending(Float64Array.of(...)), 3);   // sortAscending: src/math/sort.ts
 */
import {
  defineEstimator,
  type DefaultSets,
  type Estimator,
  type EstimatorFile,
  type Sample,
  TUNING_SCALE_FACTORS,
  type SettingSpec,
} from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { sharedSortedValues } from './shared/sorted-values.js';
import { checkFiniteValues } from '../src/core/sample.js';
import { spreadUnitOfRange, toUnit } from './shared/scaling.js';

/**
 * Default window m = floor(sqrt(n) + 0.5): the heuristic of Grzegorzewski & Wieczorkowski (1999, Commun.
 * Statist. Theory Methods 28(5)), also SciPy's default, so results compare directly.
 */
export function defaultWindow(n: number): number {
  return Math.floor(Math.sqrt(n) + 0.5);
}

const WINDOW_SETTING = {
  name: 'm',
  meaning: "window: spacings span order statistics m apart on each side; 'auto' = floor(sqrt(n) + 0.5)",
  default: 'auto',
  kind: 'choice-or-integer',
  choices: ['auto'],
  min: 1,
} as const satisfies SettingSpec;

/** The tuning grid: the default window ×TUNING_SCALE_FACTORS, rounded, each m once, 1 ≤ m < n/2. */
function windowGrid(n: number): number[] {
  const m0 = defaultWindow(n);
  return [...new Set(TUNING_SCALE_FACTORS.map((f) => Math.max(1, Math.round(m0 * f))).filter((m) => m < n / 2))];
}

/** The window for n points: 'auto' resolved, and m < n/2 checked (the setting itself is already an integer ≥ 1). */
function windowFor(id: string, n: number, given: number | 'auto'): number {
  const m = given === 'auto' ? defaultWindow(n) : given;
  if (2 * m >= n) {
    // The smallest window, m = 1, needs 3 points: below that no m helps.
    const fix = n < 3 ? 'it needs at least 3 points' : `use m ≤ ${Math.ceil(n / 2) - 1} or at least ${2 * m + 1} points`;
    throw new EstimateError('too-few-points', `${id}: window m = ${m} needs m < n/2, but n = ${n}; ${fix}`);
  }
  return m;
}

/** The sample's values (one-dimensional, as `dims` declares), checked finite, sorted ascending; shared, read-only. */
function sortedFiniteValues(id: string, sample: Sample): Float64Array {
  checkFiniteValues(id, sample);
  return sharedSortedValues(sample.data.subarray(0, sample.n));
}

/**
 * Builds the error for spacings that are zero or overflow. Zero spacings come from repeated values: a run
 * of L equal values makes some spacing zero whenever m < L, so m ≥ L is always a way out.
 */
function spacingFailure(id: string, sorted: Float64Array, m: number, zeroSpacings: number, spacingCount: number, spacingName: string): EstimateError {
  if (zeroSpacings === 0) {
    return new EstimateError(
      'numeric',
      `${id}: a spacing overflows the double range (data span ${sorted[0]} .. ${sorted[sorted.length - 1]}); rescale the data`,
    );
  }
  let repeatedValues = 0;
  let longestRun = 1;
  let run = 1;
  for (let i = 1; i < sorted.length; i++) {
    if (sorted[i] === sorted[i - 1]) {
      repeatedValues++;
      run++;
      if (run > longestRun) longestRun = run;
    } else run = 1;
  }
  const n = sorted.length;
  const widerWindow = 2 * longestRun < n ? `use m ≥ ${longestRun}, or ` : '';
  return new EstimateError(
    'ties',
    `${id}: ${zeroSpacings} of ${spacingCount} spacings ${spacingName} are zero because of ties ` +
      `(${repeatedValues} of ${n} values repeat an earlier one; longest run of equal values ${longestRun}, m = ${m}); ` +
      `${widerWindow}undo the rounding of the data (e.g. add uniform jitter of one resolution step)`,
  );
}

/**
 * Σ log(terms[i]) for i < length. Logs dominate the cost once the data are sorted, so products of 8 terms
 * go through one log; a group whose product leaves [2^−960, 2^960] (or holds a zero) is summed term by
 * term, so a zero term still gives −Infinity. Callers scale their terms to be near 1. Group logs are added
 * in blocks, so the rounding error grows like (block + n/block)·eps rather than n·eps.
 */
export function sumOfLogs(terms: Float64Array, length: number): number {
  const PRODUCT_MIN = 2 ** -960;
  const PRODUCT_MAX = 2 ** 960;
  let total = 0;
  let block = 0;
  let i = 0;
  const groupedEnd = length - (length % 8);
  for (; i < groupedEnd; i += 8) {
    const product = terms[i] * terms[i + 1] * terms[i + 2] * terms[i + 3] * terms[i + 4] * terms[i + 5] * terms[i + 6] * terms[i + 7];
    if (product > PRODUCT_MIN && product < PRODUCT_MAX) block += Math.log(product);
    else for (let j = i; j < i + 8; j++) block += Math.log(terms[j]);
    if ((i & 4095) === 4088) {
      total += block;
      block = 0;
    }
  }
  for (; i < length; i++) block += Math.log(terms[i]);
  return total + block;
}

/**
 * Writes (X(min(i+m, n)) − X(max(i−m, 1))) · scale for i = 1..n into `out`: the clamped 2m-spacings shared
 * by Vasicek, Ebrahimi (and Correa's zero check).
 */
function clampedSpacings(sorted: Float64Array, m: number, scale: number, out: Float64Array): void {
  const n = sorted.length;
  const first = sorted[0];
  const last = sorted[n - 1];
  for (let i = 0; i < m; i++) out[i] = (sorted[i + m] - first) * scale;
  for (let i = m; i < n - m; i++) out[i] = (sorted[i + m] - sorted[i - m]) * scale;
  for (let i = n - m; i < n; i++) out[i] = (last - sorted[i - m]) * scale;
}

function countZeros(values: Float64Array, length: number): number {
  let zeros = 0;
  for (let i = 0; i < length; i++) if (values[i] === 0) zeros++;
  return zeros;
}

/**
 * Mean log of n/(2m) · (X(i+m) − X(i−m)) over i = 1..n with clamped indices. Terms are divided by the data
 * range R so they are near 1 for any unit, and log R is added back.
 */
function meanLogClampedSpacings(id: string, sorted: Float64Array, m: number): number {
  const n = sorted.length;
  const range = sorted[n - 1] - sorted[0];
  const terms = new Float64Array(n);
  clampedSpacings(sorted, m, n / (2 * m) / range, terms);
  const sumLog = sumOfLogs(terms, n);
  if (!Number.isFinite(sumLog) || !(range > 0 && range < Infinity)) {
    clampedSpacings(sorted, m, 1, terms);
    throw spacingFailure(id, sorted, m, countZeros(terms, n), n, 'X(i+m) − X(i−m)');
  }
  return sumLog / n + Math.log(range);
}

/**
 * Vasicek (1976): H = (1/n) Σ_i log( n/(2m) · (X(i+m) − X(i−m)) ), with X(j) = X(1) for j < 1 and X(n)
 * for j > n.
 */
export function vasicekEntropy(sorted: Float64Array, m: number, id = 'vasicek'): number {
  return meanLogClampedSpacings(id, sorted, m);
}

/**
 * van Es (1992): H = 1/(n−m) Σ_{i=1}^{n−m} log( (n+1)/m · (X(i+m) − X(i)) ) + Σ_{k=m}^{n} 1/k + log(m/(n+1)).
 */
export function vanEsEntropy(sorted: Float64Array, m: number, id = 'van-es'): number {
  const n = sorted.length;
  const count = n - m;
  const range = sorted[n - 1] - sorted[0];
  const scale = (n + 1) / m / range;
  const terms = new Float64Array(count);
  for (let i = 0; i < count; i++) terms[i] = (sorted[i + m] - sorted[i]) * scale;
  const sumLog = sumOfLogs(terms, count);
  if (!Number.isFinite(sumLog) || !(range > 0 && range < Infinity)) {
    for (let i = 0; i < count; i++) terms[i] = sorted[i + m] - sorted[i];
    throw spacingFailure(id, sorted, m, countZeros(terms, count), count, 'X(i+m) − X(i)');
  }
  let harmonicTail = 0;
  for (let k = n; k >= m; k--) harmonicTail += 1 / k; // smallest terms first
  return sumLog / count + Math.log(range) + harmonicTail + Math.log(m / (n + 1));
}

/**
 * Ebrahimi, Pflughoeft & Soofi (1994): H = (1/n) Σ_i log( n/(c_i m) · (X(i+m) − X(i−m)) ), with
 * c_i = 1 + (i−1)/m for i ≤ m, 2 for m < i ≤ n−m, 1 + (n−i)/m for i > n−m: the clamped windows at the
 * ends hold fewer than 2m spacings, and c_i m counts how many. This is Vasicek's value plus
 * log 2 − (1/n) Σ log c_i.
 */
export function ebrahimiEntropy(sorted: Float64Array, m: number, id = 'ebrahimi'): number {
  const n = sorted.length;
  const vasicek = meanLogClampedSpacings(id, sorted, m);
  // Σ log c_i: the two ends are mirror images (n−i runs over the same 0..m−1 as i−1).
  let endWeights = 0;
  for (let j = 0; j < m; j++) endWeights += Math.log1p(j / m);
  const sumLogWeights = 2 * endWeights + (n - 2 * m) * Math.LN2;
  return vasicek + Math.LN2 - sumLogWeights / n;
}

/**
 * Correa (1995): local linear regression of X(j) on j over the window j = i−m..i+m (clamped as above):
 * H = −(1/n) Σ_i log( Σ_j (X(j) − X̄(i))(j − i) / (n Σ_j (X(j) − X̄(i))²) ).
 *
 * The window sums slide in O(1) per point, relative to a reference value (the middle order statistic of the
 * window where they were last computed afresh). Sliding adds and removes terms, so the rounding error of a
 * sum is about eps times the magnitude of everything that has passed through it since the last fresh start;
 * that magnitude is tracked, and the sums are recomputed (O(m)) when it exceeds 2^8 times the quantity the
 * sum must deliver, and in any case every m steps. Fresh sums are centred at the window's median, where
 * the centred sum of squares loses at most 1 bit (|mean − median| ≤ SD) and the slope sum none (every
 * term (j − i)(X(j) − X(i)) is ≥ 0). So each window's term carries a relative error of order 2^8·eps.
 */
export function correaEntropy(sorted: Float64Array, m: number, id = 'correa'): number {
  const n = sorted.length;
  const width = 2 * m + 1;
  const range = sorted[n - 1] - sorted[0];
  const terms = new Float64Array(n);
  clampedSpacings(sorted, m, 1, terms);
  const zeroWindows = countZeros(terms, n);
  if (zeroWindows > 0) throw spacingFailure(id, sorted, m, zeroWindows, n, 'X(i+m) − X(i−m)');
  // padded[t] = X(t − m + 1) with clamping, so window i (0-based) is padded[i .. i + 2m].
  const padded = new Float64Array(n + 2 * m);
  padded.fill(sorted[0], 0, m);
  padded.set(sorted, m);
  padded.fill(sorted[n - 1], m + n);

  const ROUNDING_BUDGET = 2 ** 8;
  // Terms D/N are about one spacing; n/R makes them near 1 (see sumOfLogs).
  const scale = n / range;
  let reference = 0;
  let sum = 0; // Σ_j y_j, with y_j = X(j) − reference
  let sumSquares = 0; // Σ_j y_j²
  let slope = 0; // Σ_j (j − i) y_j
  let squaresMagnitude = 0; // Σ of |terms| added to or removed from sumSquares since the fresh start
  let slopeMagnitude = 0; // the same for slope
  let sinceFresh = m;
  for (let i = 0; i < n; i++) {
    let centredSquares = 0;
    let fresh = sinceFresh >= m;
    if (!fresh) {
      const leaving = padded[i - 1] - reference;
      const entering = padded[i + 2 * m] - reference;
      sum += entering - leaving;
      const leavingSquare = leaving * leaving;
      const enteringSquare = entering * entering;
      sumSquares += enteringSquare - leavingSquare;
      squaresMagnitude += enteringSquare + leavingSquare;
      // Shifting the window by one lowers every weight (j − i) by one: subtract the new window's sum.
      const leavingWeighted = m * leaving;
      const enteringWeighted = (m + 1) * entering;
      slope += leavingWeighted + enteringWeighted - sum;
      slopeMagnitude += Math.abs(leavingWeighted) + Math.abs(enteringWeighted) + Math.abs(sum);
      sinceFresh++;
      centredSquares = sumSquares - (sum * sum) / width;
      fresh = !(centredSquares * ROUNDING_BUDGET > squaresMagnitude && slope * ROUNDING_BUDGET > slopeMagnitude);
    }
    if (fresh) {
      reference = padded[i + m];
      sum = 0;
      sumSquares = 0;
      slope = 0;
      for (let offset = -m; offset <= m; offset++) {
        const y = padded[i + m + offset] - reference;
        sum += y;
        sumSquares += y * y;
        slope += offset * y;
      }
      squaresMagnitude = sumSquares;
      slopeMagnitude = slope;
      sinceFresh = 0;
      centredSquares = sumSquares - (sum * sum) / width;
    }
    terms[i] = (centredSquares / slope) * scale;
  }
  const sumLog = sumOfLogs(terms, n);
  if (!Number.isFinite(sumLog) || !(range < Infinity)) throw spacingFailure(id, sorted, m, 0, n, 'X(i+m) − X(i−m)');
  return sumLog / n + Math.log(range);
}

type SortedEntropy = (sorted: Float64Array, m: number, id: string) => number;

/**
 * The estimate on sorted values whose range is subnormal or near the top of the double range (or whose
 * values are), computed in a power-of-two unit near the range (exact: estimators/shared/scaling.ts) plus that
 * unit's log: in data units 1/range would overflow, or squares and spacings leave the double range. Where the unit change itself
 * merges values (the data span more than the double exponent range, so a spacing is below 2^−1074 of the
 * range), the failure says so rather than reporting ties the data do not have.
 */
function inSafeUnit(id: string, sorted: Float64Array, m: number, fromSorted: SortedEntropy): number {
  const n = sorted.length;
  const unit = spreadUnitOfRange(sorted[0], sorted[n - 1]);
  if (!unit) return fromSorted(sorted, m, id);
  const scaled = toUnit(sorted, n, 1, unit);
  try {
    return fromSorted(scaled, m, id) + unit.logJacobian;
  } catch (error) {
    let merged = 0;
    for (let i = 1; i < n; i++) if (scaled[i] === scaled[i - 1] && sorted[i] !== sorted[i - 1]) merged++;
    if (error instanceof EstimateError && merged > 0) {
      throw new EstimateError(
        'numeric',
        `${id}: the values span more than double precision can resolve (range ${sorted[0]} .. ${sorted[n - 1]}, yet ${merged} neighbouring values differ by less than 2^-1074 of it), so some spacings cannot be represented; transform the data (e.g. log or asinh) to a narrower range`,
      );
    }
    throw error;
  }
}

function spacingEstimator(id: string, summary: string, reference: string, fromSorted: SortedEntropy, defaultFor: DefaultSets): Estimator {
  return defineEstimator({
    id,
    family: 'spacing',
    quantity: 'entropy',
    summary,
    settings: [WINDOW_SETTING],
    dims: [1, 1],
    reference,
    tuning: (_base, n) => [{ setting: 'm', values: windowGrid(n) }],
    defaultFor,
    resolve(sample, settings) {
      return { ...settings, m: settings.m === 'auto' ? defaultWindow(sample.n) : settings.m };
    },
    estimate(sample, settings) {
      const m = windowFor(id, sample.n, settings.m);
      return inSafeUnit(id, sortedFiniteValues(id, sample), m, fromSorted);
    },
  });
}

export const spacingEstimators: Estimator[] = [
  spacingEstimator(
    'vasicek',
    'mean log of 2m-spacings of the order statistics (clamped at the ends)',
    'Vasicek, O. (1976). A test for normality based on sample entropy. J. R. Statist. Soc. B 38(1), 54–59.',
    vasicekEntropy,
    { estimate: [{ order: 30 }], bench: true },
  ),
  spacingEstimator(
    'van-es',
    'mean log of one-sided m-spacings plus a harmonic-sum bias correction',
    'van Es, B. (1992). Estimating functionals related to a density by a class of statistics based on spacings. Scand. J. Statist. 19(1), 61–72.',
    vanEsEntropy,
    { bench: true },
  ),
  spacingEstimator(
    'ebrahimi',
    'Vasicek with end windows weighted by the number of spacings they hold',
    'Ebrahimi, N., Pflughoeft, K. & Soofi, E. S. (1994). Two measures of sample entropy. Statist. Probab. Lett. 20(3), 225–234.',
    ebrahimiEntropy,
    { estimate: [{ order: 20 }], bench: true },
  ),
  spacingEstimator(
    'correa',
    'local linear regression of order statistics on their ranks over a 2m+1 window',
    'Correa, J. C. (1995). A new estimator of entropy. Commun. Statist. Theory Methods 24(10), 2439–2449.',
    correaEntropy,
    { bench: true },
  ),
];

export const registration: EstimatorFile = { catalogOrder: 20, estimators: spacingEstimators };
