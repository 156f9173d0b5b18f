/**
 * The recording step of a column: whether its values lie on a lattice {o + kΔ}, and Δ. Data recorded to a
 * finite resolution (a logger's 0.01 °C, six decimals of seconds, integer counts) lie on one; data drawn or
 * computed in double precision do not.
 *
 * Two ways, tried in turn:
 *   decimal places  every value times 10^p is an integer (to within a millionth of the step, far above the
 *                   rounding of decimal text read into doubles and far below the chance of a continuous value
 *                   landing there), for the smallest such p; Δ is then 10^-p times the exact integer gcd of the
 *                   differences between the scaled values, so values recorded to 0.1 but only ever at
 *                   halves have Δ = 0.5.
 *   common gap      every gap between sorted distinct values is a whole multiple of the smallest gap, or of a
 *                   common divisor found by Euclid's algorithm with a tolerance of a few units in the last place
 *                   (values such as δ·round(x/δ) for an irrational δ); refused when that divisor is under a
 *                   hundredth of the smallest gap, which continuous data reach at once, and for fewer than three
 *                   distinct values (two are always on the lattice of their gap).
 *
 * Why a tolerance in steps (absolute on the scaled values) rather than one relative to each value: scaled values
 * stay below MAX_SCALED = 1e9, where a double's rounding of decimal text (half a unit in the last place, times
 * the scaling) is under 2.3e-7, so 1e-6 of a step accepts every value read from text with room to spare, while a
 * continuous value lands that close to an integer with probability 2e-6: all of even 3 distinct values about
 * 1e-17 per p tried. Values larger than that in steps (6 decimals of numbers above 1000) go to the common gap.
 *
 * Cost: one sort, O(n log n); then linear passes over the distinct values.
 */
import type { Sample } from '../core/contracts.js';
import { sortAscending } from './sort.js';

export interface StepReport {
  /** The lattice step; null when the values are not on a lattice (or all equal). */
  step: number | null;
  method: 'decimal places' | 'common gap' | 'none';
  /** One line a user reads: "recorded to 6 decimal places, on a lattice of step 1e-6". */
  detail: string;
  distinct: number;
}

/** Most decimal places tried; scaled values must also stay below MAX_SCALED so doubles hold them to far better than TOLERANCE. */
const MAX_PLACES = 15;
const MAX_SCALED = 1e9;
/** How close to an integer a scaled value must be, in steps. */
const TOLERANCE = 1e-6;
/** A common divisor below this share of the smallest gap is no lattice: continuous data. */
const SMALLEST_SHARE = 0.01;
const ULPS = 8 * Number.EPSILON;
/** Distinct values the common-gap search needs (see commonGapStep). */
const MIN_COMMON_GAP_VALUES = 3;

function distinctSorted(column: Float64Array): Float64Array {
  const sorted = sortAscending(Float64Array.from(column));
  let m = 0;
  for (let i = 0; i < sorted.length; i++) if (i === 0 || sorted[i] !== sorted[i - 1]) sorted[m++] = sorted[i];
  return sorted.subarray(0, m);
}

function gcd(a: number, b: number): number {
  while (b) [a, b] = [b, a % b];
  return a;
}

/** Shortest readable form of a step: 1e-6, 0.25, 0.1702. */
export function formatStep(step: number): string {
  const short = Number(step.toPrecision(10));
  return short < 1e-3 ? short.toExponential().replace(/\.?0+e/, 'e') : String(short);
}

function decimalStep(values: Float64Array): { step: number; places: number } | null {
  let largest = 0;
  for (const v of values) largest = Math.max(largest, Math.abs(v));
  for (let places = 0; places <= MAX_PLACES; places++) {
    const scale = 10 ** places;
    if (largest * scale > MAX_SCALED) return null;
    // Two distinct values on one integer must differ by floating noise only (0.1 + 0.2 beside 0.3): values far
    // below 10^-p all round to 0 without being recorded to p places (1e-12 times six-decimal data would give a
    // step of 0 at p = 0).
    let on = true;
    for (let i = 0; i < values.length && on; i++) {
      const x = values[i] * scale;
      const whole = Math.round(x);
      on =
        Math.abs(x - whole) <= TOLERANCE &&
        (i === 0 ||
          whole !== Math.round(values[i - 1] * scale) ||
          values[i] - values[i - 1] <= 2 * ULPS * Math.max(Math.abs(values[i]), Math.abs(values[i - 1])));
    }
    if (!on) continue;
    let g = 0;
    for (let i = 1; i < values.length; i++) g = gcd(Math.round(values[i] * scale) - Math.round(values[i - 1] * scale), g);
    return { step: g / scale, places };
  }
  return null;
}

function commonGapStep(values: Float64Array): number | null {
  const m = values.length;
  // Any two values are on the lattice of their gap: without a third the gap is no evidence of a step.
  if (m < MIN_COMMON_GAP_VALUES) return null;
  let largest = 0;
  let smallest = Infinity;
  for (let i = 0; i < m; i++) largest = Math.max(largest, Math.abs(values[i]));
  for (let i = 1; i < m; i++) smallest = Math.min(smallest, values[i] - values[i - 1]);
  const ulps = ULPS * largest;
  // Rounding of each value is a few units in its last place, so a gap's error is about twice that.
  if (!(smallest > 100 * ulps)) return null;
  let step = smallest;
  // While searching, the step is a gap itself, off by a few units in the last place of the values, which k
  // multiples of it grow k-fold; the refined step is checked tightly at the end, which continuous data fail.
  const multipleOf = (gap: number, s: number, searching: boolean) => {
    const k = Math.round(gap / s);
    return k >= 1 && Math.abs(gap - k * s) <= (searching ? 2 * (k + 1) * ulps : 4 * ulps) + k * ULPS * s;
  };
  for (let i = 1; i < m; i++) {
    const gap = values[i] - values[i - 1];
    if (multipleOf(gap, step, true)) continue;
    // Euclid's algorithm, a remainder within the rounding (grown by the repeated remainders) counting as zero.
    const tolerance = Math.max(16 * ulps, 1e-9 * smallest);
    let a = gap;
    let b = step;
    while (b > tolerance && b >= SMALLEST_SHARE * smallest) {
      let r = a % b;
      if (b - r <= tolerance) r = 0;
      a = b;
      b = r <= tolerance ? 0 : r;
    }
    step = a;
    if (step < SMALLEST_SHARE * smallest || b !== 0) return null;
  }
  // Refine Δ by least squares over the gaps (each gap ≈ k·Δ), then check every gap against it.
  let num = 0;
  let den = 0;
  for (let i = 1; i < m; i++) {
    const gap = values[i] - values[i - 1];
    const k = Math.round(gap / step);
    num += k * gap;
    den += k * k;
  }
  const refined = num / den;
  for (let i = 1; i < m; i++) if (!multipleOf(values[i] - values[i - 1], refined, false)) return null;
  return refined;
}

/** The lattice step of one column of finite values. */
export function detectStep(column: Float64Array): StepReport {
  const values = distinctSorted(column);
  const distinct = values.length;
  if (distinct < 2) return { step: null, method: 'none', detail: distinct ? 'all values are equal: no step to find' : 'no values', distinct };
  const decimal = decimalStep(values);
  if (decimal) {
    const places = decimal.places === 0 ? 'whole numbers' : decimal.places === 1 ? '1 decimal place' : `${decimal.places} decimal places`;
    return { step: decimal.step, method: 'decimal places', detail: `recorded to ${places}, on a lattice of step ${formatStep(decimal.step)}`, distinct };
  }
  const common = commonGapStep(values);
  if (common !== null) {
    return { step: common, method: 'common gap', detail: `values are on a lattice of step ${formatStep(common)} (every gap a whole multiple of it)`, distinct };
  }
  const detail =
    distinct < MIN_COMMON_GAP_VALUES
      ? 'no common step: two distinct values off any decimal grid show none (any two lie on the lattice of their gap)'
      : 'no common step: the values are not on a lattice';
  return { step: null, method: 'none', detail, distinct };
}

/** detectStep for every column of a sample (a divergence's Q sample separately). */
export function detectSteps(sample: Sample): StepReport[] {
  const { n, dim, data } = sample;
  const column = new Float64Array(n);
  const reports: StepReport[] = [];
  for (let j = 0; j < dim; j++) {
    for (let i = 0; i < n; i++) column[i] = data[i * dim + j];
    reports.push(detectStep(column));
  }
  return reports;
}
