/**
 * Exact changes of unit, so estimators can work on data whose spread is subnormal (5e-320) or near the top
 * of the double range (1e300), or whose values sit so near the top of the range that their sums overflow,
 * without squares, reciprocals, sums or bin counts leaving the double range.
 *
 *   const { data: scaled, logJacobian } = inSpreadUnit(data, n, dim, 'common');   // data as given when fine
 *   return entropyOf(scaled) + logJacobian;
 *
 * A coordinate x becomes (x − offset)·2^−e. Multiplying by a power of two only changes a double's exponent,
 * so it is exact as long as the result stays in the double range, which choosing 2^e near the spread
 * ensures. The offset is used only where the subtraction is exact too: when every value of the column has
 * the same sign and lies within a factor 2 of the offset (Sterbenz's lemma), which is always so when the
 * values are huge and their spread is not. Differential entropy is translation invariant and shifts exactly
 * under a change of scale, h((x − a)·2^−e) = h(x) − Σ_j e_j·log 2, so an estimator that is equivariant in
 * exact arithmetic gives on the new coordinates what it would give on the data with unlimited exponent
 * range, once `logJacobian` is added back; MI and divergence estimators need nothing added.
 *
 * Columns whose spread lies within 2^±SAFE_SPREAD_EXPONENT and whose values are below 2^OFFSET_MAGNITUDE
 * are used as given, so ordinary data (and every benchmark scenario, rescaled by the robustness
 * perturbations or not) give the same bits as before this existed.
 */

/** Spreads within 2^±100 (about 7.9e-31 .. 1.3e30) need no new unit: their squares and reciprocals are far from the double limits. */
export const SAFE_SPREAD_EXPONENT = 100;

/** Values beyond 2^1000 (about 1.1e301) are moved near 0 when that is exact: a sum of 2^23 of them would overflow. */
export const OFFSET_MAGNITUDE = 2 ** 1000;

/** Coordinate j in the new unit is (x − offsets[j])·2^−exponents[j]. */
export interface SpreadUnit {
  exponents: Int32Array;
  offsets: Float64Array;
  /** Σ_j exponents[j]·log 2: add to an entropy computed on the new coordinates. */
  logJacobian: number;
}

/** ⌊log2 |x|⌋ up to one (enough to pick a power of two near x), for finite x ≠ 0, subnormals included. */
export function binaryExponent(x: number): number {
  return Math.floor(Math.log2(Math.abs(x)));
}

/**
 * x · 2^e, exact whenever the result is a normal double or an exactly representable subnormal. 2^e itself
 * is not a double for e > 1023 or e < −1074, so the factor is applied in two halves.
 */
export function timesPowerOfTwo(x: number, e: number): number {
  if (e === 0) return x;
  const first = Math.trunc(e / 2);
  return x * 2 ** first * 2 ** (e - first);
}

/** Binary exponent of max − min, computed without overflow; NaN when max === min. */
export function rangeExponent(minimum: number, maximum: number): number {
  if (!(maximum > minimum)) return Number.NaN;
  const range = maximum - minimum;
  // Halving first keeps a range wider than the largest double finite; one bit is all it costs.
  return Number.isFinite(range) ? binaryExponent(range) : binaryExponent(maximum / 2 - minimum / 2) + 1;
}

/**
 * The offset that moves a column with these extremes near 0 exactly, or 0: nonzero only when its values
 * are beyond OFFSET_MAGNITUDE and x − minimum is exact for every x in [minimum, maximum] (same sign,
 * within a factor 2 of each other).
 */
export function exactOffset(minimum: number, maximum: number): number {
  const exact = (minimum > 0 && maximum <= 2 * minimum) || (maximum < 0 && minimum >= 2 * maximum);
  return exact && Math.max(Math.abs(minimum), Math.abs(maximum)) > OFFSET_MAGNITUDE ? minimum : 0;
}

/** Per-column minimum and maximum of row-major data. */
export function columnExtremes(data: Float64Array, n: number, dim: number): { minimum: Float64Array; maximum: Float64Array } {
  const minimum = new Float64Array(dim).fill(Infinity);
  const maximum = new Float64Array(dim).fill(-Infinity);
  for (let i = 0, p = 0; i < n; i++) {
    for (let j = 0; j < dim; j++, p++) {
      const x = data[p];
      if (x < minimum[j]) minimum[j] = x;
      if (x > maximum[j]) maximum[j] = x;
    }
  }
  return { minimum, maximum };
}

/**
 * The unit that brings the data's spread near 1 (and huge values near 0), or null when no column needs
 * one. 'column': each column gets its own power of two (for estimators that treat coordinates separately
 * or are affine-equivariant: histograms, whitened kernels, covariances). 'common': one power of two for
 * all columns, that of the widest, for estimators that compare coordinates with each other (Euclidean and
 * max-norm distances); offsets stay per column, since a translation of one coordinate moves no distance.
 */
export function spreadUnit(data: Float64Array, n: number, dim: number, mode: 'column' | 'common'): SpreadUnit | null {
  const { minimum, maximum } = columnExtremes(data, n, dim);
  return spreadUnitOfExtremes(minimum, maximum, mode);
}

/** spreadUnit of one column from its extremes (sorted values' ends, say). */
export function spreadUnitOfRange(minimum: number, maximum: number): SpreadUnit | null {
  return spreadUnitOfExtremes(Float64Array.of(minimum), Float64Array.of(maximum), 'column');
}

/** spreadUnit from per-column extremes already at hand (for data held in several arrays). */
export function spreadUnitOfExtremes(minimum: Float64Array, maximum: Float64Array, mode: 'column' | 'common'): SpreadUnit | null {
  const dim = minimum.length;
  const exponents = new Int32Array(dim);
  const offsets = new Float64Array(dim);
  let needed = false;
  let widest = Number.NaN;
  for (let j = 0; j < dim; j++) {
    offsets[j] = exactOffset(minimum[j], maximum[j]);
    if (offsets[j] !== 0) needed = true;
    const e = rangeExponent(minimum[j], maximum[j]);
    if (Number.isNaN(e)) continue;
    if (Math.abs(e) > SAFE_SPREAD_EXPONENT) exponents[j] = e;
    if (!(e <= widest)) widest = e;
  }
  if (mode === 'common') exponents.fill(Math.abs(widest) > SAFE_SPREAD_EXPONENT ? widest : 0);
  let logJacobian = 0;
  for (let j = 0; j < dim; j++) {
    if (exponents[j] !== 0) needed = true;
    logJacobian += exponents[j] * Math.LN2;
  }
  return needed ? { exponents, offsets, logJacobian } : null;
}

/** A new array with each coordinate in the unit: (x − offsets[j])·2^−exponents[j] (exact, see the file comment). */
export function toUnit(data: Float64Array, n: number, dim: number, unit: SpreadUnit): Float64Array {
  const out = new Float64Array(n * dim);
  for (let j = 0; j < dim; j++) {
    const e = -unit.exponents[j];
    const first = Math.trunc(e / 2);
    const factorA = 2 ** first;
    const factorB = 2 ** (e - first);
    const offset = unit.offsets[j];
    for (let p = j; p < n * dim; p += dim) out[p] = (data[p] - offset) * factorA * factorB;
  }
  return out;
}

/**
 * The data in their spread unit (a new array), or as given when none is needed, with the log-Jacobian to add
 * to an entropy computed on them (0 as given).
 */
export function inSpreadUnit(data: Float64Array, n: number, dim: number, mode: 'column' | 'common'): { data: Float64Array; logJacobian: number } {
  const unit = spreadUnit(data, n, dim, mode);
  return unit ? { data: toUnit(data, n, dim, unit), logJacobian: unit.logJacobian } : { data, logJacobian: 0 };
}

/**
 * How many of the pairs (rows[t], partners[t]), t < count, are rows that differ (coordinate by coordinate,
 * as doubles): such pairs at computed distance 0 are an artefact of rounding (a squared difference that
 * underflowed), not repeated data.
 */
export function rowsDifferingFromPartners(data: Float64Array, dim: number, rows: Int32Array, partners: Int32Array, count: number): number {
  let differing = 0;
  for (let t = 0; t < count; t++) {
    const a = rows[t] * dim;
    const b = partners[t] * dim;
    for (let j = 0; j < dim; j++) {
      if (data[a + j] !== data[b + j]) {
        differing++;
        break;
      }
    }
  }
  return differing;
}
